"""Contract tests every market pack must pass (run over all packs in rules/markets)."""

from __future__ import annotations

from decimal import Decimal

import pytest

from labelcalc import components as C
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


VITAMINS_MINERALS = {c.key for c in C.COMPONENTS if c.group in ("vitamin", "mineral")} - {"sodium"}


def test_vitamin_and_mineral_rows_are_complete(pack):
    """Every vitamin or mineral row has a unit matching its component, a rounding rule, a cited trigger, and its
    percentage (where it has one) against a reference value in the same unit."""
    for r in pack.rows:
        nd = pack.nutrients[r.nutrient]
        comps = set(nd.sum or {})
        if not comps or not comps <= VITAMINS_MINERALS:
            continue
        assert all(C.unit_of(k) == nd.unit for k in comps), r.nutrient
        if r.requirement == "conditional":
            assert r.when, r.nutrient
        if r.percent:
            assert pack.reference_values[r.percent].unit == nd.unit, r.nutrient


def test_statement_triggers_are_well_formed(pack):
    for st in pack.statements:
        for top in st.triggers:
            for t in top.flat():
                if t.all_of:
                    continue
                criteria = [t.substance, t.kind, t.components, t.with_claim, t.header_flag]
                assert any(x for x in criteria), (st.id, t)
                if t.components:
                    for k in t.components:
                        assert k in C.BY_KEY or k in C.DERIVED, (st.id, k)


def test_functional_classes_are_cited(pack):
    rule = pack.ingredient_list
    if rule is None or not rule.functional_classes:
        return
    assert rule.functional_classes_citation and len(rule.functional_classes_citation) > 5
    for key, name in rule.functional_classes.items():
        assert key == key.lower() and name.one and name.many, key


def test_energy_methods_not_computed_are_cited_and_not_offered(pack):
    for method, why in pack.panel.energy_methods_not_computed.items():
        assert why.citation and why.confidence in CONF and len(why.why) > 10
        assert method not in pack.panel.energy_factor_sets_allowed and method != pack.panel.energy_factor_set


def test_claims_are_cited_and_testable(pack):
    for cl in pack.claims:
        assert cl.citation.strip() and cl.confidence in CONF, cl.id
        assert cl.conditions or cl.alternatives or cl.fails_with_ingredient_kinds, cl.id


def test_stated_serving_check_is_cited_and_usable(pack):
    """A pack that checks the stated serving gives the words of each case and the limit it judges by."""
    rule = pack.servings.stated_serving_check
    if rule is None:
        return
    assert rule.citation.strip() and rule.confidence in CONF
    assert rule.single_serving.strip() and rule.multi_serving.strip()
    assert pack.servings.single_serving_below_percent and pack.servings.reference_amounts


def test_front_of_pack_audiences_are_complete(pack):
    """Each audience of a 'high in' scheme is cited, names a formula header flag, gives a reference value in the
    scheme's own unit for every nutrient of the scheme, and has a threshold that applies to every product."""
    from labelcalc.intake.formula import Header

    for fop in pack.front_of_pack:
        for aud in fop.audiences:
            assert aud.citation.strip() and aud.confidence in CONF, fop.id
            assert aud.header_flag in Header.model_fields, aud.header_flag
            assert set(aud.high_in) == set(fop.high_in or {}), fop.id
            for k, key in aud.high_in.items():
                assert pack.reference_values[key].unit == pack.reference_values[(fop.high_in or {})[k]].unit, key
            assert any(set(t) == {"percent"} for t in aud.thresholds), fop.id
