"""Loading only the requested rule packs (a command for one market does not build every pack) gives the same
packs and the same errors as loading the whole folder."""

from __future__ import annotations

import shutil

import pytest

from labelcalc.errors import LabelError
from labelcalc.labelling.packmarket import market_of
from labelcalc.labelling.rulepack import get_packs, load_packs, packs_dir


def _folder(tmp_path):
    rules = tmp_path / "rules"
    shutil.copytree(packs_dir().parent, rules)
    return rules / "markets"


def test_requested_pack_equals_the_one_from_the_whole_folder():
    alone = get_packs(["us", "eu"])
    every = load_packs()
    assert [p.model_dump() for p in alone] == [every["us"].model_dump(), every["eu"].model_dump()]


def test_each_pack_file_names_its_market_from_the_yaml():
    every = load_packs()
    for f in sorted(packs_dir().glob("*.yaml")):
        assert market_of(f) in every


def test_a_market_given_twice_is_read_as_the_whole_folder_reads_it(tmp_path):
    markets = _folder(tmp_path)
    shutil.copy(markets / "us_21_cfr_101.yaml", markets / "us_copy.yaml")
    assert get_packs(["us"], markets)[0].market == "us"
    with pytest.raises(LabelError, match="defined twice"):
        load_packs(markets)


def test_a_broken_pack_of_another_market_does_not_stop_the_requested_one(tmp_path):
    markets = _folder(tmp_path)
    (markets / "eu_1169_2011.yaml").write_text("pack: {market: eu}\nrows: [\n", encoding="utf-8")
    assert get_packs(["us"], markets)[0].market == "us"
    with pytest.raises(LabelError):
        get_packs(["eu"], markets)


def test_an_unknown_market_is_named(tmp_path):
    with pytest.raises(LabelError, match="unknown market 'xx'"):
        get_packs(["xx"])
