"""Australia and New Zealand: rounding and reference values of the nutrition information panel.

The Food Standards Code sets no rounding rule. The FSANZ user guide to Standard 1.2.8
(Part A, March 2012, s. 3.6) recommends declaring values to no more than three significant
figures; the pack adds a finest step (0.1 g, 1 mg, 1 kJ) as common practice.  The cases
test every decade boundary of the 3-significant-figure rule (at, just below, just above)
and the finest step.  Reference values: Std 1.2.8—8(3)(a), table "Reference values for per
cent daily intake information".
"""

from __future__ import annotations

import pytest

from labelcalc.labelling.rounding import apply_rounding
from labelcalc.labelling.rulepack import load_packs


@pytest.fixture(scope="module")
def pack():
    return load_packs()["anz"]


def rnd(pack, rule, value):
    return apply_rounding(value, pack.rounding[rule]).text


CASES = [
    # grams: 3 significant figures, never finer than 0.1 g.
    ("grams", 0.04, "0"),
    ("grams", 0.05, "0.1"),
    ("grams", 0.06, "0.1"),
    ("grams", 0.94, "0.9"),
    ("grams", 0.95, "1"),
    ("grams", 0.96, "1"),
    ("grams", 1.234, "1.2"),
    ("grams", 9.94, "9.9"),
    ("grams", 9.95, "10"),
    ("grams", 9.96, "10"),
    ("grams", 12.34, "12.3"),
    ("grams", 12.35, "12.4"),
    ("grams", 99.94, "99.9"),
    ("grams", 99.95, "100"),
    ("grams", 99.96, "100"),
    ("grams", 100.4, "100"),
    ("grams", 100.5, "101"),
    ("grams", 123.4, "123"),
    # milligrams (sodium, cholesterol, potassium, calcium): 3 s.f., never finer than 1 mg.
    ("milligrams", 0.49, "0"),
    ("milligrams", 0.5, "1"),
    ("milligrams", 0.51, "1"),
    ("milligrams", 9.49, "9"),
    ("milligrams", 9.5, "10"),
    ("milligrams", 99.4, "99"),
    ("milligrams", 99.5, "100"),
    ("milligrams", 99.6, "100"),
    ("milligrams", 999.4, "999"),
    ("milligrams", 999.5, "1000"),
    ("milligrams", 1004.9, "1000"),
    ("milligrams", 1005, "1010"),
    ("milligrams", 1234, "1230"),
    # energy (kJ, and Cal = kJ / 4.18): 3 s.f., never finer than 1.
    ("energy", 99.4, "99"),
    ("energy", 99.5, "100"),
    ("energy", 99.6, "100"),
    ("energy", 999.4, "999"),
    ("energy", 999.5, "1000"),
    ("energy", 999.6, "1000"),
    ("energy", 1714.9, "1710"),
    ("energy", 1715, "1720"),
    # micronutrients (mg or ug): 3 s.f., never finer than 0.1.
    ("micronutrients", 0.04, "0"),
    ("micronutrients", 0.05, "0.1"),
    ("micronutrients", 12.35, "12.4"),
    # %DI (common practice, whole per cent).
    ("percent", 0.49, "0"),
    ("percent", 0.5, "1"),
    ("percent", 0.51, "1"),
    # servings per package (common practice, whole servings).
    ("servings", 4.49, "4"),
    ("servings", 4.5, "5"),
    ("servings", 4.51, "5"),
]


@pytest.mark.parametrize("rule,value,expected", CASES)
def test_three_significant_figures(pack, rule, value, expected):
    assert rnd(pack, rule, value) == expected


# Std 1.2.8—8(3)(a), "Reference values for per cent daily intake information"
# (NZ Gazette No. 49, 8 May 2015, p. 61).
DAILY_INTAKE = {
    "energy": (8700, "kJ"),
    "protein": (50, "g"),
    "fat": (70, "g"),
    "saturated_fat": (24, "g"),
    "carbohydrate": (310, "g"),
    "sodium": (2300, "mg"),
    "sugars": (90, "g"),
    "fibre": (30, "g"),
}


@pytest.mark.parametrize("key,amount_unit", sorted(DAILY_INTAKE.items()))
def test_daily_intake_reference_values(pack, key, amount_unit):
    rv = pack.reference_values[key]
    assert (rv.amount, rv.unit) == amount_unit


# Schedule 1, S1—2 (vitamins) and S1—3 (minerals): recommended dietary intakes (RDIs) used for %RDI.
# Marked "read" where the value was read in S1—2; the minerals and vitamins D and E were not (from memory — verify).
RDI = {
    "rdi_vitamin_a": (750, "ug"),  # Schedule 1, S1—2 (F2015L00491, compilation 2018-11-29), read
    "rdi_vitamin_c": (40, "mg"),  # Schedule 1, S1—2 (F2015L00491, compilation 2018-11-29), read
    "rdi_calcium": (800, "mg"),  # S1—3 (from memory — verify)
    "rdi_iron": (12, "mg"),  # S1—3 (from memory — verify)
    "rdi_vitamin_d": (10, "ug"),  # S1—2 (from memory — verify)
    "rdi_vitamin_e": (10, "mg"),  # S1—2 (from memory — verify)
    "rdi_thiamin": (1.1, "mg"),  # Schedule 1, S1—2 (F2015L00491, compilation 2018-11-29), read
    "rdi_riboflavin": (1.7, "mg"),  # Schedule 1, S1—2 (F2015L00491, compilation 2018-11-29), read
    "rdi_niacin": (10, "mg"),  # Schedule 1, S1—2 (F2015L00491, compilation 2018-11-29), read
    "rdi_vitamin_b6": (1.6, "mg"),  # Schedule 1, S1—2 (F2015L00491, compilation 2018-11-29), read
    "rdi_folate": (200, "ug"),  # Schedule 1, S1—2 (F2015L00491, compilation 2018-11-29), read
    "rdi_vitamin_b12": (2, "ug"),  # Schedule 1, S1—2 (F2015L00491, compilation 2018-11-29), read
    "rdi_phosphorus": (1000, "mg"),  # S1—3 (from memory — verify)
    "rdi_iodine": (150, "ug"),  # S1—3 (from memory — verify)
    "rdi_magnesium": (320, "mg"),  # S1—3 (from memory — verify)
    "rdi_zinc": (12, "mg"),  # S1—3 (from memory — verify)
    "rdi_selenium": (70, "ug"),  # S1—3 (from memory — verify)
}


@pytest.mark.parametrize("key,amount_unit", sorted(RDI.items()))
def test_rdi_reference_values(pack, key, amount_unit):
    rv = pack.reference_values[key]
    assert (rv.amount, rv.unit) == amount_unit


def test_every_reference_value_is_tested(pack):
    assert set(pack.reference_values) == set(DAILY_INTAKE) | set(RDI)


def test_panel_order_and_basis(pack):
    # Std 1.2.8—6(2) and S12—2: per serving, then per 100 g; Energy, Protein, Fat total,
    # saturated, Carbohydrate, sugars, Sodium.
    assert pack.panel.title == "NUTRITION INFORMATION"
    assert pack.panel.bases == ["per_serving", "per_100g"]
    mandatory = [r.nutrient for r in pack.rows if r.requirement == "mandatory"]
    assert mandatory == ["energy_kj", "protein", "fat", "saturated_fat", "carbohydrate", "sugars", "sodium"]
    assert pack.servings.required and not pack.servings.reference_amounts


def test_polyols_declared_at_5_g_per_100_g(pack):
    # Std 1.2.8—6(9): S11—2(3) substances other than organic acids at >= 5 g/100 g.
    rows = {r.nutrient: r for r in pack.rows}
    for p in ("sorbitol", "mannitol", "xylitol", "maltitol", "isomalt", "lactitol", "erythritol", "glycerol"):
        assert [t.at_least_per_100g for t in rows[p].when] == [5]


def test_no_row_shows_di_by_default(pack):
    # %DI is optional (1.2.8—8(1)); a vitamin or mineral row carries its %RDI, shown only with a claim about it
    # (1.2.8—9).
    assert not any(r.percent and not r.percent.startswith("rdi_") for r in pack.rows)
    assert all(r.when and all(t.claim_about for t in r.when) for r in pack.rows if (r.percent or "").startswith("rdi_"))


# Schedule 11, S11—2(2) and (3), kJ/g (the tables were not read: from memory — verify);
# S11—2(4): calories = kJ / 4.18 (confirmed).
S11_FACTORS = {
    "protein": 17,
    "fat": 37,
    "sugars": 17,
    "starch": 17,
    "fibre_soluble": 8,
    "fibre_insoluble": 8,
    "ethanol": 29,
    "erythritol": 1,
    "glycerol": 18,
    "isomalt": 11,
    "lactitol": 11,
    "maltitol": 13,
    "mannitol": 9,
    "organic_acids": 13,
    "sorbitol": 14,
    "xylitol": 14,
}


@pytest.mark.parametrize("component,kj", sorted(S11_FACTORS.items()))
def test_schedule_11_factors(component, kj):
    from labelcalc.formulation.energy import load_factor_set

    fs = load_factor_set("anz_fsc_schedule_11")
    assert fs.factor_for(component).kj == kj
    assert fs.factor_set.kcal_from_kj == 4.18
