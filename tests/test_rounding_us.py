"""US rule pack (rules/markets/us_21_cfr_101.yaml): rounding bands, reference values,
reference amounts and FDA's 2016 sample label.

Rounding cases come from the increments of 21 CFR 101.9(c) as FDA restates them in
its Food Labeling Guide, Appendix H (October 2009), and from 101.9(c)(8)(iii) for
vitamin and mineral percentages. Every threshold is tested exactly at, just below and
just above. Ties round half up.
"""

from __future__ import annotations

from decimal import Decimal

import pytest

from labelcalc.labelling.rounding import apply_rounding
from labelcalc.labelling.rulepack import load_packs


@pytest.fixture(scope="module")
def pack():
    return load_packs()["us"]


def _text(pack, rule: str, value: float) -> str:
    return apply_rounding(value, pack.rounding[rule]).text


# (rule, unrounded value, printed text)
CASES = [
    # 101.9(c)(1) Calories: < 5 -> 0; <= 50 -> nearest 5; > 50 -> nearest 10 (Appendix H)
    ("calories", 0, "0"),
    ("calories", 4.99, "0"),
    ("calories", 5, "5"),
    ("calories", 5.01, "5"),
    ("calories", 7.49, "5"),
    ("calories", 7.5, "10"),
    ("calories", 47.5, "50"),
    ("calories", 49.99, "50"),
    ("calories", 50, "50"),
    ("calories", 50.01, "50"),
    ("calories", 54.99, "50"),
    ("calories", 55, "60"),
    ("calories", 232, "230"),
    # 101.9(c)(2), (2)(i)-(iv) Total, saturated, trans, poly-, monounsaturated fat:
    # < 0.5 g -> 0; < 5 g -> nearest 0.5 g; >= 5 g -> nearest 1 g (Appendix H)
    ("fat", 0.49, "0"),
    ("fat", 0.5, "0.5"),
    ("fat", 0.51, "0.5"),
    ("fat", 0.74, "0.5"),
    ("fat", 0.75, "1"),
    ("fat", 4.74, "4.5"),
    ("fat", 4.75, "5"),
    ("fat", 4.99, "5"),
    ("fat", 5, "5"),
    ("fat", 5.01, "5"),
    ("fat", 5.49, "5"),
    ("fat", 5.5, "6"),
    # 101.9(c)(3) Cholesterol: < 2 mg -> 0; 2-5 mg -> "less than 5 mg"; > 5 mg -> nearest 5 mg
    ("cholesterol", 1.99, "0"),
    ("cholesterol", 2, "less than 5"),
    ("cholesterol", 2.01, "less than 5"),
    ("cholesterol", 4.99, "less than 5"),
    ("cholesterol", 5, "less than 5"),
    ("cholesterol", 5.01, "5"),
    ("cholesterol", 7.49, "5"),
    ("cholesterol", 7.5, "10"),
    # 101.9(c)(4) Sodium: < 5 mg -> 0; 5-140 mg -> nearest 5 mg; > 140 mg -> nearest 10 mg
    ("sodium", 4.99, "0"),
    ("sodium", 5, "5"),
    ("sodium", 5.01, "5"),
    ("sodium", 7.49, "5"),
    ("sodium", 7.5, "10"),
    ("sodium", 139.99, "140"),
    ("sodium", 140, "140"),
    ("sodium", 140.01, "140"),
    ("sodium", 144.99, "140"),
    ("sodium", 145, "150"),
    # 101.9(c)(6), (6)(i)-(iv) Total carbohydrate, fibers, sugars, added sugars, sugar alcohol:
    # < 0.5 g -> 0; < 1 g -> "less than 1 gram"; >= 1 g -> nearest 1 g (Appendix H)
    ("carbohydrate", 0.49, "0"),
    ("carbohydrate", 0.5, "less than 1"),
    ("carbohydrate", 0.51, "less than 1"),
    ("carbohydrate", 0.99, "less than 1"),
    ("carbohydrate", 1, "1"),
    ("carbohydrate", 1.01, "1"),
    ("carbohydrate", 1.49, "1"),
    ("carbohydrate", 1.5, "2"),
    # 101.9(c)(7) Protein: same steps ("1 g" is also permitted for 0.5 g to < 1 g)
    ("protein", 0.49, "0"),
    ("protein", 0.5, "less than 1"),
    ("protein", 0.51, "less than 1"),
    ("protein", 0.99, "less than 1"),
    ("protein", 1, "1"),
    ("protein", 1.01, "1"),
    ("protein", 2.5, "3"),
    # 101.9(c)(8)(iii) vitamins and minerals: zero below 2 % of the RDI, then FDA's
    # recommended step (0.1 unit for RDI < 25; 1 unit for 25-250; 10 units for >= 250,
    # the last from memory — verify).
    ("vitamin_d", 0.39, "0"),  # 2 % of 20 mcg = 0.4 mcg
    ("vitamin_d", 0.4, "0.4"),
    ("vitamin_d", 0.41, "0.4"),
    ("vitamin_d", 2.04, "2"),
    ("vitamin_d", 2.05, "2.1"),
    ("iron", 0.35, "0"),  # 2 % of 18 mg = 0.36 mg
    ("iron", 0.36, "0.4"),
    ("iron", 0.37, "0.4"),
    ("iron", 8.04, "8"),
    ("iron", 8.05, "8.1"),
    ("vitamin_e", 0.29, "0"),  # 2 % of 15 mg = 0.3 mg
    ("vitamin_e", 0.3, "0.3"),
    ("vitamin_e", 0.31, "0.3"),
    ("vitamin_k", 2.39, "0"),  # 2 % of 120 mcg = 2.4 mcg
    ("vitamin_k", 2.4, "2"),
    ("vitamin_k", 2.41, "2"),
    ("vitamin_k", 2.5, "3"),
    ("calcium", 25.99, "0"),  # 2 % of 1,300 mg = 26 mg; step 10 mg: from memory — verify
    ("calcium", 26, "30"),
    ("calcium", 26.01, "30"),
    ("calcium", 254.99, "250"),
    ("calcium", 255, "260"),
    ("potassium", 93.99, "0"),  # 2 % of 4,700 mg = 94 mg; step 10 mg: from memory — verify
    ("potassium", 94, "90"),
    ("potassium", 94.01, "90"),
    ("potassium", 235, "240"),
    ("vitamin_a", 17.99, "0"),  # 2 % of 900 mcg = 18 mcg; step 10 mcg: from memory — verify
    ("vitamin_a", 18, "20"),
    ("vitamin_a", 18.01, "20"),
    # 101.9(d)(7)(ii) %DV of nutrients other than vitamins and minerals: nearest 1 %
    ("percent_macro", 0.49, "0"),
    ("percent_macro", 0.5, "1"),
    ("percent_macro", 0.51, "1"),
    ("percent_macro", 10.26, "10"),
    ("percent_macro", 13.45, "13"),
    ("percent_macro", 13.5, "14"),
    # 101.9(c)(8)(iii) %DV of vitamins and minerals: < 2 % -> 0; <= 10 % -> nearest 2 %;
    # <= 50 % -> nearest 5 %; > 50 % -> nearest 10 %
    ("percent_vitamin", 1.99, "0"),
    ("percent_vitamin", 2, "2"),
    ("percent_vitamin", 2.01, "2"),
    ("percent_vitamin", 4.99, "4"),
    ("percent_vitamin", 5, "6"),  # FDA sample label: potassium 235/4700 = 5.0 % -> 6 %
    ("percent_vitamin", 9.99, "10"),
    ("percent_vitamin", 10, "10"),
    ("percent_vitamin", 10.01, "10"),
    ("percent_vitamin", 12.49, "10"),
    ("percent_vitamin", 12.5, "15"),
    ("percent_vitamin", 44.44, "45"),  # FDA sample label: iron 8/18
    ("percent_vitamin", 49.99, "50"),
    ("percent_vitamin", 50, "50"),
    ("percent_vitamin", 50.01, "50"),
    ("percent_vitamin", 54.99, "50"),
    ("percent_vitamin", 55, "60"),
    # 101.9(b)(8)(i) servings per container: whole number, except 2-5 servings: nearest 0.5
    ("servings", 1.49, "1"),
    ("servings", 1.5, "2"),
    ("servings", 1.99, "2"),
    ("servings", 2, "2"),
    ("servings", 2.01, "2"),
    ("servings", 2.24, "2"),
    ("servings", 2.25, "2.5"),
    ("servings", 4.99, "5"),
    ("servings", 5, "5"),
    ("servings", 5.01, "5"),
    ("servings", 5.49, "5"),
    ("servings", 5.5, "6"),
]


@pytest.mark.parametrize("rule,value,expected", CASES)
def test_rounding_table(pack, rule, value, expected):
    assert _text(pack, rule, value) == expected


def test_zero_bands_stand_for_zero(pack):
    # Texts that mean zero carry the number 0, so a percentage from the declared value is 0 %.
    for rule in (
        "calories",
        "fat",
        "cholesterol",
        "sodium",
        "carbohydrate",
        "protein",
        "vitamin_d",
        "iron",
        "calcium",
        "potassium",
    ):
        r = apply_rounding(0.0, pack.rounding[rule])
        assert r.text == "0" and r.number == Decimal(0), rule


def test_less_than_texts_have_no_number(pack):
    # "less than 1" and "less than 5" carry no number: the engine then takes the percentage
    # from the unrounded amount (101.9(d)(7)(ii) allows either).
    assert apply_rounding(0.7, pack.rounding["carbohydrate"]).number is None
    assert apply_rounding(3, pack.rounding["cholesterol"]).number is None


# 21 CFR 101.9(c)(9) DRV table and 101.9(c)(8)(iv) RDI table, adults and children
# 4 years and older, as revised 27 May 2016 (81 FR 33742).
REFERENCE_VALUES = {
    "energy": (2000, "kcal"),  # (c)(9): DRVs rest on a 2,000-calorie reference intake
    "total_fat": (78, "g"),  # (c)(9)
    "saturated_fat": (20, "g"),  # (c)(9)
    "cholesterol": (300, "mg"),  # (c)(9)
    "sodium": (2300, "mg"),  # (c)(9)
    "total_carbohydrate": (275, "g"),  # (c)(9)
    "dietary_fiber": (28, "g"),  # (c)(9)
    "added_sugars": (50, "g"),  # (c)(9)
    "protein": (50, "g"),  # (c)(9)
    "vitamin_d": (20, "ug"),  # (c)(8)(iv)
    "calcium": (1300, "mg"),  # (c)(8)(iv)
    "iron": (18, "mg"),  # (c)(8)(iv)
    "potassium": (4700, "mg"),  # (c)(8)(iv)
    "vitamin_a": (900, "ug"),  # (c)(8)(iv), mcg RAE
    "vitamin_e": (15, "mg"),  # (c)(8)(iv), mg alpha-tocopherol
    "vitamin_k": (120, "ug"),  # (c)(8)(iv)
    "vitamin_c": (90, "mg"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "thiamin": (1.2, "mg"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "riboflavin": (1.3, "mg"),  # (c)(8)(iv) (FDA chart 2021, CSPI list; secondary)
    "niacin": (16, "mg"),  # (c)(8)(iv) (FDA chart 2021, CSPI list; secondary), mg NE
    "vitamin_b6": (1.7, "mg"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "folate": (400, "ug"),  # (c)(8)(iv) (FDA chart 2021, CSPI list; secondary), mcg DFE
    "vitamin_b12": (2.4, "ug"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "biotin": (30, "ug"),  # (c)(8)(iv) (FDA chart 2021, CSPI list; secondary)
    "pantothenic_acid": (5, "mg"),  # (c)(8)(iv) (FDA chart 2021, CSPI list; secondary)
    "phosphorus": (1250, "mg"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "iodine": (150, "ug"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "magnesium": (420, "mg"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "zinc": (11, "mg"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "selenium": (55, "ug"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "copper": (0.9, "mg"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "manganese": (2.3, "mg"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "chromium": (35, "ug"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "molybdenum": (45, "ug"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "chloride": (2300, "mg"),  # (c)(8)(iv) (CSPI list of 2016 DVs; secondary)
    "choline": (550, "mg"),  # (c)(8)(iv) (FDA chart 2021, CSPI list; secondary)
}


def test_reference_values_match_the_2016_tables(pack):
    got = {k: (v.amount, v.unit) for k, v in pack.reference_values.items()}
    assert got == REFERENCE_VALUES


# 21 CFR 101.12(b) Table 2 (general food supply), as revised 27 May 2016 (81 FR 34000);
# beverages in mL, entered as grams. Chewing gum 3 g is from memory — verify.
RACC = {
    "snacks": 30,
    "nuts_seeds": 30,
    "cookies": 30,
    "crackers_snack": 30,
    "crackers_non_snack": 15,
    "bars_grain": 40,
    "brownies": 40,
    "bread": 50,
    "bread_biscuits_croissants": 55,
    "muffins_bagels": 110,
    "cakes_heavy": 125,
    "cakes_medium": 80,
    "cakes_light": 55,
    "coffee_cakes_doughnuts": 55,
    "pies_pastries": 125,
    "cereal_rte_light": 15,
    "cereal_rte_medium": 40,
    "cereal_rte_heavy": 60,
    "cereal_hot_plain_dry": 40,
    "cereal_hot_flavored_dry": 55,
    "confectionery_soft": 30,
    "confectionery_hard": 15,
    "hard_candy_breath_mints": 2,
    "hard_candy_roll_mini": 5,
    "chewing_gum": 3,
    "baking_candies": 15,
    "marshmallows": 30,
    "beverages": 360,
    "beverages_coffee_tea_flavored": 360,
    "juices": 240,
    "dried_fruit": 40,
}


def test_reference_amounts_match_table_2(pack):
    got = {k: v.amount_g for k, v in pack.servings.reference_amounts.items()}
    assert got == RACC
    for k, v in pack.servings.reference_amounts.items():
        assert v.small == (v.amount_g <= 30), k


def test_serving_rules(pack):
    s = pack.servings
    assert s.single_serving_below_percent == 200  # 101.9(b)(6)
    assert (s.dual_column.from_percent, s.dual_column.to_percent) == (200, 300)  # 101.9(b)(12)(i)
    assert s.about_prefix == "about"  # 101.9(b)(8)(i)


def test_row_order_follows_101_9_c(pack):
    mandatory = [r.nutrient for r in pack.rows if r.requirement == "mandatory"]
    assert mandatory == [
        "energy_kcal",
        "total_fat",
        "saturated_fat",
        "trans_fat",
        "cholesterol",
        "sodium",
        "total_carbohydrate",
        "dietary_fiber",
        "total_sugars",
        "added_sugars",
        "protein",
        "vitamin_d",
        "calcium",
        "iron",
        "potassium",
    ]


# FDA's 2016 sample label, 101.9(d)(12): per serving (2/3 cup, 55 g) as printed, and the
# printed %DV. Printed amounts must be fixed points of the pack's rounding, and the %DV
# computed from them must match the label. Potassium 235 mg is whole mg on the sample label;
# this pack's 10 mg step would print 240 mg (the %DV stays 6 %).
SAMPLE = [
    # row, rounding, printed amount, reference key, printed %DV
    ("energy_kcal", "calories", 230, None, None),
    ("total_fat", "fat", 8, "total_fat", "10"),
    ("saturated_fat", "fat", 1, "saturated_fat", "5"),
    ("trans_fat", "fat", 0, None, None),
    ("cholesterol", "cholesterol", 0, "cholesterol", "0"),
    ("sodium", "sodium", 160, "sodium", "7"),
    ("total_carbohydrate", "carbohydrate", 37, "total_carbohydrate", "13"),
    ("dietary_fiber", "carbohydrate", 4, "dietary_fiber", "14"),
    ("total_sugars", "carbohydrate", 12, None, None),
    ("added_sugars", "carbohydrate", 10, "added_sugars", "20"),
    ("protein", "protein", 3, None, None),
    ("vitamin_d", "vitamin_d", 2, "vitamin_d", "10"),
    ("calcium", "calcium", 260, "calcium", "20"),
    ("iron", "iron", 8, "iron", "45"),
    ("potassium", None, 235, "potassium", "6"),
]


@pytest.mark.parametrize("nutrient,rule,amount,ref,pct", SAMPLE)
def test_fda_2016_sample_label(pack, nutrient, rule, amount, ref, pct):
    if rule:
        assert _text(pack, rule, amount) == str(amount)
    row = next(r for r in pack.rows if r.nutrient == nutrient)
    assert row.percent == ref
    if ref:
        p = amount / pack.reference_values[ref].amount * 100
        assert _text(pack, row.percent_rounding, p) == pct
