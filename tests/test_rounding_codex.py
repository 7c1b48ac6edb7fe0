"""Codex: Guidelines on Nutrition Labelling CXG 2-1985 - rounding and nutrient reference values.

The Guidelines give no rounding table (s. 3.5 leaves tolerances to national authorities,
from memory — verify).  The pack's rounding is marked "common practice" and follows the
pattern of the EC tolerance guidance of December 2012, Table 4 (per 100 g):
  energy: nearest 1 kJ / 1 kcal;
  protein, carbohydrate, sugars, fat, fibre: >= 10 g -> 1 g; < 10 g -> 0.1 g; <= 0.5 g -> "<0.5";
  fatty acids: >= 10 g -> 1 g; < 10 g -> 0.1 g; <= 0.1 g -> "<0.1";
  sodium (mg): >= 1000 mg -> 100 mg; < 1000 mg -> 1 mg; <= 5 mg -> "<5".
Every threshold is tested at, just below and just above.  Reference values: Annex to
CXG 2-1985, NRVs-R (general population older than 36 months) and NRVs-NCD.
"""

from __future__ import annotations

import pytest

from labelcalc.formulation.energy import load_factor_set
from labelcalc.labelling.rounding import apply_rounding
from labelcalc.labelling.rulepack import load_packs


@pytest.fixture(scope="module")
def pack():
    return load_packs()["codex"]


def rnd(pack, rule, value):
    return apply_rounding(value, pack.rounding[rule]).text


CASES = [
    ("energy", 0.49, "0"),
    ("energy", 0.5, "1"),
    ("energy", 0.51, "1"),
    ("energy", 1604.5, "1605"),
    ("grams", 0, "0"),
    ("grams", 0.01, "<0.5"),
    ("grams", 0.49, "<0.5"),
    ("grams", 0.5, "<0.5"),
    ("grams", 0.51, "0.5"),
    ("grams", 0.55, "0.6"),
    ("grams", 9.94, "9.9"),
    ("grams", 9.95, "10"),
    ("grams", 9.99, "10"),
    ("grams", 10, "10"),
    ("grams", 10.01, "10"),
    ("grams", 10.5, "11"),
    ("fatty_acids", 0, "0"),
    ("fatty_acids", 0.09, "<0.1"),
    ("fatty_acids", 0.1, "<0.1"),
    ("fatty_acids", 0.11, "0.1"),
    ("fatty_acids", 0.15, "0.2"),
    ("fatty_acids", 9.99, "10"),
    ("fatty_acids", 10, "10"),
    ("fatty_acids", 10.01, "10"),
    ("sodium", 0, "0"),
    ("sodium", 4.99, "<5"),
    ("sodium", 5, "<5"),
    ("sodium", 5.01, "5"),
    ("sodium", 5.5, "6"),
    ("sodium", 999.4, "999"),
    ("sodium", 999.5, "1000"),
    ("sodium", 1000, "1000"),
    ("sodium", 1049.9, "1000"),
    ("sodium", 1050, "1100"),
    ("milligrams", 0.04, "0"),
    ("milligrams", 0.05, "0.1"),
    ("milligrams", 99.94, "99.9"),
    ("milligrams", 99.95, "100"),
    ("milligrams", 1234, "1230"),
    ("micrograms", 0.04, "0"),
    ("micrograms", 0.05, "0.1"),
    ("micrograms", 12.35, "12.4"),
    ("percent", 0.49, "0"),
    ("percent", 0.5, "1"),
    ("percent", 0.51, "1"),
]


@pytest.mark.parametrize("rule,value,expected", CASES)
def test_common_practice_rounding(pack, rule, value, expected):
    assert rnd(pack, rule, value) == expected


def test_less_than_forms_are_not_zero(pack):
    r = apply_rounding(0.3, pack.rounding["grams"])
    assert r.text == "<0.5" and r.number is None and r.less_than


def test_rounding_is_marked_common_practice(pack):
    assert all(rule.confidence == "common practice" for rule in pack.rounding.values())


# Annex to CXG 2-1985: NRVs-R and NRVs-NCD. Secondary source for most (a published table of
# Codex-based standards); saturated fatty acids 20 g is from memory — verify.
NRVS = {
    "protein": (50, "g"),  # NRV-R
    "calcium": (1000, "mg"),  # NRV-R
    "iron": (14, "mg"),  # NRV-R, 15 % absorption (22 mg at 10 %)
    "vitamin_a": (800, "ug"),  # NRV-R, ug RAE/RE
    "vitamin_d": (5, "ug"),  # NRV-R, 5-15 ug
    "vitamin_e": (9, "mg"),  # NRV-R
    "vitamin_k": (60, "ug"),  # NRV-R
    "saturated_fat": (20, "g"),  # NRV-NCD (from memory — verify)
    "sodium": (2000, "mg"),  # NRV-NCD
    "potassium": (3500, "mg"),  # NRV-NCD (adopted 2015)
    "vitamin_c": (100, "mg"),  # NRV-R (from memory — verify)
    "thiamin": (1.2, "mg"),  # NRV-R, CAC July 2013 (trade report, secondary)
    "riboflavin": (1.2, "mg"),  # NRV-R, CAC July 2013 (trade report, secondary)
    "niacin": (15, "mg"),  # NRV-R, CAC July 2013 (trade report, secondary)
    "vitamin_b6": (1.3, "mg"),  # NRV-R, CAC July 2013 (trade report, secondary)
    "folate": (400, "ug"),  # NRV-R, CAC July 2013 (trade report, secondary)
    "vitamin_b12": (2.4, "ug"),  # NRV-R, CAC July 2013 (trade report, secondary)
    "biotin": (30, "ug"),  # NRV-R, CAC July 2013 (trade report, secondary)
    "pantothenic_acid": (5, "mg"),  # NRV-R, CAC July 2013 (trade report, secondary)
    "phosphorus": (700, "mg"),  # NRV-R (from memory — verify)
    "iodine": (150, "ug"),  # NRV-R, CAC July 2013 (trade report, secondary)
    "magnesium": (310, "mg"),  # NRV-R (from memory — verify)
    "zinc": (11, "mg"),  # NRV-R (from memory — verify)
    "selenium": (60, "ug"),  # NRV-R (from memory — verify)
    "copper": (0.9, "mg"),  # NRV-R (from memory — verify)
    "manganese": (3, "mg"),  # NRV-R (from memory — verify)
    "molybdenum": (45, "ug"),  # NRV-R (from memory — verify)
}


@pytest.mark.parametrize("key,amount_unit", sorted(NRVS.items()))
def test_nrvs(pack, key, amount_unit):
    rv = pack.reference_values[key]
    assert (rv.amount, rv.unit) == amount_unit


def test_every_reference_value_is_tested(pack):
    assert set(pack.reference_values) == set(NRVS)


def test_mandatory_nutrients(pack):
    # CXG 2-1985 s. 3.2.1: energy; protein, available carbohydrate, fat, saturated fat,
    # sodium, total sugars.
    mandatory = {r.nutrient for r in pack.rows if r.requirement == "mandatory"}
    assert mandatory == {
        "energy_kj",
        "energy_kcal",
        "protein",
        "carbohydrate",
        "sugars",
        "fat",
        "saturated_fat",
        "sodium",
    }


# CXG 2-1985 s. 3.3.1 (from memory — verify): carbohydrates 4/17, protein 4/17, fat 9/37,
# alcohol 7/29, organic acids 3/13 (kcal/kJ per g). No factor for fibre or polyols: the pack
# gives fibre 0 and polyols the carbohydrate factor, both with a review note.
FACTORS = {
    "protein": (4, 17),
    "sugars": (4, 17),
    "starch": (4, 17),
    "fat": (9, 37),
    "ethanol": (7, 29),
    "organic_acids": (3, 13),
    "fibre_soluble": (0, 0),
    "maltitol": (4, 17),
}


@pytest.mark.parametrize("component,kcal_kj", sorted(FACTORS.items()))
def test_energy_factors(component, kcal_kj):
    f = load_factor_set("codex_cxg_2_1985").factor_for(component)
    assert (f.kcal, f.kj) == kcal_kj
    if component in ("fibre_soluble", "maltitol"):
        assert f.review
