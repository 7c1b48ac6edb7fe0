"""Streamed range runs (rows in part files written by the workers) give exactly the files of a run that holds
every row in memory: same bytes for the summary CSV, JSON and workbook, errors and files tables."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from test_range import BROKEN, GOOD, make_range

from labelcalc.labelling.rulepack import get_packs
from labelcalc.outputs.xlsxout import plan_of
from labelcalc.ranges import parts, rangerun
from labelcalc.ranges.publish import write_outputs

ROOT = Path(__file__).resolve().parent.parent
MARKETS = ["us", "eu", "ca"]


def _source(tmp_path: Path) -> Path:
    src = tmp_path / "src"
    shutil.copytree(ROOT / "demo_products", src, ignore=shutil.ignore_patterns("*.csv", "*.xlsx"))
    make_range(src / "more", {**GOOD, **BROKEN})
    shutil.rmtree(src / "more" / "ingredients")
    return src


def _files(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir()) if p.is_file()}


@pytest.mark.parametrize("jobs", [1, 2])
def test_streamed_run_writes_the_same_bytes(tmp_path, monkeypatch, jobs):
    src = _source(tmp_path)
    lib = src / "ingredients"
    packs = {p.market: p for p in get_packs(MARKETS)}
    whole = rangerun.run_range(src, lib, MARKETS, with_labels=False)
    assert whole.rows and whole.errors and not whole.parts
    monkeypatch.setattr(rangerun, "STREAM_SHARE", 3)  # several parts, so their order is exercised
    (tmp_path / "parts").mkdir()
    streamed = rangerun.run_range(
        src, lib, MARKETS, jobs=jobs, chunk_size=1, with_labels=False, part_dir=tmp_path / "parts"
    )
    assert not streamed.rows and len(streamed.parts) > 2
    assert parts.in_order(streamed.parts)
    rows = list(parts.read_rows(streamed.parts))
    assert rows == whole.rows
    assert parts.columns(streamed.parts) == list(dict.fromkeys(k for r in whole.rows for k in r))
    plans = parts.sheet_plans(streamed.parts)
    for market in MARKETS:
        alone = plan_of([r for r in whole.rows if r["market"] == market])
        assert (plans[market].keys, plans[market].printed, plans[market].basis, plans[market].rows) == (
            alone.keys,
            alone.printed,
            alone.basis,
            alone.rows,
        )
    assert (streamed.errors, streamed.files, streamed.products_ok, streamed.products_failed) == (
        whole.errors,
        whole.files,
        whole.products_ok,
        whole.products_failed,
    )
    write_outputs(tmp_path / "whole", whole, None, packs)
    write_outputs(tmp_path / "streamed", streamed, None, packs)
    assert _files(tmp_path / "streamed") == _files(tmp_path / "whole")


def test_parts_out_of_order_are_detected(tmp_path):
    a = parts.write_part(tmp_path / "a", [{"product_id": "b", "market": "us", "scenario": "nominal"}])
    b = parts.write_part(tmp_path / "b", [{"product_id": "a", "market": "us", "scenario": "nominal", "x": 1}])
    assert not parts.in_order([a, b])
    assert [r["product_id"] for r in parts.read_rows([a, b])] == ["a", "b"]
    assert parts.columns([a, b]) == ["product_id", "market", "scenario", "x"]


def test_spooled_data_reads_back_as_parsed(tmp_path):
    from labelcalc.intake.catalogue import SpoolReader, classify_to_spool, yaml_files
    from labelcalc.yamlsafe import load_yaml

    src = _source(tmp_path)
    files = yaml_files(src)
    entries = classify_to_spool(files, tmp_path / "spool.pickle")
    products = [e for e in entries if e.kind == "product"]
    assert products and all(e.spooled is not None for e in products)
    assert all(e.spooled is None for e in entries if e.kind != "product")
    with SpoolReader() as rd:
        for e in reversed(products):  # any order: each entry says where its data is
            assert e.spooled is not None
            assert rd.read(e.spooled) == load_yaml(e.path, with_lines=False).data


def test_a_streamed_run_parses_each_product_file_once(tmp_path, monkeypatch):
    """Classifying parses every file; loading a product reads the data spooled then (a product with a
    problem is parsed again, with lines, to name them)."""
    import collections

    from labelcalc import yamlsafe

    src = tmp_path / "src"
    shutil.copytree(ROOT / "demo_products", src, ignore=shutil.ignore_patterns("*.csv", "*.xlsx"))
    seen: collections.Counter = collections.Counter()
    real = yamlsafe.parse_yaml_text

    def counting(text, file, **kw):
        seen[str(file)] += 1
        return real(text, file, **kw)

    monkeypatch.setattr(yamlsafe, "parse_yaml_text", counting)
    (tmp_path / "parts").mkdir()
    res = rangerun.run_range(src, src / "ingredients", ["eu"], with_labels=False, part_dir=tmp_path / "parts")
    assert res.products_ok >= 5 and not res.errors
    products = [f["file"] for f in res.files if f["kind"] == "product"]
    assert products and all(seen[next(k for k in seen if k.endswith(p.rsplit("/", 1)[-1]))] == 1 for p in products)
