"""Contract tests every market pack must pass (run over all packs in rules/markets)."""

from __future__ import annotations

from decimal import Decimal

import pytest

from labelcalc.formulation.energy import load_factor_set
from labelcalc.labelling.rounding import apply_rounding
from labelcalc.labelling.rulepack import load_packs

PACKS = load_packs()
CONF = {"confirmed", "secondary", "from memory — verify", "derived", "common practice"}


def test_six_markets_present():
    assert {"us", "eu", "uk", "ca", "anz", "codex"} <= set(PACKS)


@pytest.fixture(params=sorted(PACKS))
def pack(request):
    return PACKS[request.param]


def test_header_and_citations(pack):
    assert pack.pack.instruments and pack.pack.reviewed
    assert "DRAFT" in pack.pack.draft_notice.upper()
    for r in pack.rows:
        assert r.citation.strip() and r.confidence in CONF
    for _k, v in pack.reference_values.items():
        assert v.amount > 0 and v.citation.strip() and v.confidence in CONF


def test_energy_factor_set_exists_and_energy_row(pack):
    load_factor_set(pack.panel.energy_factor_set)
    for alt in pack.panel.energy_factor_sets_allowed:
        load_factor_set(alt)
    energy_rows = [r for r in pack.rows if pack.nutrients[r.nutrient].energy]
    assert energy_rows and energy_rows[0].requirement == "mandatory"


def test_rounding_is_monotonic(pack):
    """A larger value never declares a smaller number (checked on a grid over 0-1000)."""
    grid = sorted({Decimal(i) / 1000 for i in range(0, 2000)} | {Decimal(i) / 10 for i in range(0, 10000, 7)})
    for name, rule in pack.rounding.items():
        last = None
        for v in grid:
            r = apply_rounding(v, rule)
            if r.number is None:
                continue
            if last is not None:
                assert r.number >= last - Decimal("1e-9"), (name, v)
            last = r.number


def test_mandatory_rows_are_rounded_to_text(pack):
    for r in pack.rows:
        if r.requirement == "mandatory":
            assert apply_rounding(12.345, pack.rounding[r.rounding]).text
