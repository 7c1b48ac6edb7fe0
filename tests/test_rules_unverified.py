"""`labelcalc rules unverified`: every pack value not yet checked against its legal text, listed with its
citation, so a regulatory professional knows what to verify before relying on a draft (issue #15)."""

from __future__ import annotations

from typer.testing import CliRunner

from labelcalc.cli import app
from labelcalc.labelling.rulepack import NOT_CONFIRMED, UNCHECKED, get_packs, unverified_entries

runner = CliRunner()


def test_us_glycerol_factor_is_listed_until_read_in_the_text():
    # 21 CFR 101.9(c)(1)(i)(F) lists no glycerol factor (eCFR issue of 2026-08-27, read): the 4.32 kcal/g the
    # pack uses stays marked for checking, and the list names it with its citation
    (us,) = get_packs(["us"])
    found = unverified_entries(us)
    glycerol = [w for w, conf, cite in found if w.endswith("factors[glycerol]")]
    assert glycerol and all(conf == "from memory — verify" for _, conf, _ in found)
    assert any("101.9(c)(1)(i)" in cite for w, _, cite in found if w.endswith("factors[glycerol]"))


def test_all_levels_include_secondary_sources():
    (eu,) = get_packs(["eu"])
    plain, every = unverified_entries(eu, UNCHECKED), unverified_entries(eu, NOT_CONFIRMED)
    assert set(plain) <= set(every) and len(every) > len(plain)
    assert {conf for _, conf, _ in every} <= set(NOT_CONFIRMED)


def test_cli_lists_and_counts():
    res = runner.invoke(app, ["rules", "unverified", "us"])
    assert res.exit_code == 0, res.output
    lines = res.output.strip().splitlines()
    assert lines[-1] == f"{len(lines) - 1} value(s) of the 'us' pack marked 'from memory — verify'."
    assert any("glycerol" in x for x in lines)
    unknown = runner.invoke(app, ["rules", "unverified", "xx"])
    assert unknown.exit_code == 2 and "xx" in unknown.output
