"""EU and UK packs (rules/markets/eu_1169_2011.yaml, uk_retained_1169_2011.yaml): rounding,
reference values, worked example.  Every test runs on both packs: Great Britain applies
Regulation (EU) No 1169/2011 as retained in UK law; tests/test_rounding_uk.py holds what is
UK-only and the check that the two packs have not diverged.

Rounding cases come from the European Commission's "Guidance document for competent
authorities ... with regard to the setting of tolerances for nutrient values declared on
a label" (DG SANCO, December 2012), section 6, Table 4 (rounding guidelines).  Each
threshold of the table is tested exactly at, just below and just above.  Of the two
forms the guidance allows for small amounts ("0 g" or "<0.5 g" / "<0.1 g" / "<0.01 g"),
the pack prints the "<" form.

Reference values come from Regulation (EU) No 1169/2011, Annex XIII (Part A point 1:
NRVs; Part B: reference intakes).
"""

from decimal import Decimal

import pytest

from labelcalc.formulation.energy import load_factor_set
from labelcalc.labelling.rounding import apply_rounding
from labelcalc.labelling.rulepack import load_packs

FACTOR_SETS = {"eu": "eu_1169_2011_annex_xiv", "uk": "uk_retained_1169_2011_annex_xiv"}


@pytest.fixture(scope="module", params=sorted(FACTOR_SETS))
def pack(request):
    return load_packs()[request.param]


def rounded(pack, rule, value):
    return apply_rounding(value, pack.rounding[rule]).text


# --- Commission guidance (Dec 2012), section 6, Table 4 --------------------------------

# Energy: nearest 1 kJ and nearest 1 kcal (each unit rounded on its own).
ENERGY = [
    (1549.49, "1549"),
    (1549.5, "1550"),
    (1550.49, "1550"),
    (367.5, "368"),
    (367.49, "367"),
    (0.49, "0"),
    (0.5, "1"),
]

# Fat, carbohydrate, sugars, protein, fibre, polyols, starch:
#   >= 10 g -> nearest 1 g; < 10 g and > 0.5 g -> nearest 0.1 g; <= 0.5 g -> "<0.5" (or "0").
MACRONUTRIENT = [
    (0, "<0.5"),
    (0.49, "<0.5"),
    (0.5, "<0.5"),
    (0.51, "0.5"),  # threshold 0.5 g (at = "<0.5")
    (0.46, "<0.5"),  # worked vector: fat 0.46 g
    (0.55, "0.6"),
    (9.44, "9.4"),  # worked vector: 9.44 g -> 9.4
    (9.94, "9.9"),
    (9.95, "10"),  # 9.95 rounds to 10.0 in the 0.1 g band
    (9.99, "10"),
    (10, "10"),
    (10.01, "10"),  # threshold 10 g
    (10.49, "10"),
    (10.5, "11"),
    (12.6, "13"),  # worked vector: 12.6 g -> 13
    (60, "60"),
]

# Saturates, mono-unsaturates, polyunsaturates:
#   >= 10 g -> 1 g; < 10 g and > 0.1 g -> 0.1 g; <= 0.1 g -> "<0.1" (or "0").
FATTY_ACIDS = [
    (0, "<0.1"),
    (0.08, "<0.1"),  # worked vector: saturates 0.08 g
    (0.09, "<0.1"),
    (0.1, "<0.1"),
    (0.11, "0.1"),  # threshold 0.1 g
    (0.14, "0.1"),
    (0.15, "0.2"),
    (9.94, "9.9"),
    (9.99, "10"),
    (10, "10"),
    (10.01, "10"),  # threshold 10 g
    (12.6, "13"),
]

# Salt: >= 1 g -> 0.1 g; < 1 g and > 0.0125 g -> 0.01 g; <= 0.0125 g -> "<0.01" (or "0").
SALT = [
    (0, "<0.01"),
    (0.012, "<0.01"),  # worked vector: 0.012 g
    (0.0124, "<0.01"),
    (0.0125, "<0.01"),
    (0.0126, "0.01"),  # threshold 0.0125 g
    (0.456, "0.46"),  # worked vector: 0.456 g
    (0.99, "0.99"),
    (0.994, "0.99"),
    (0.995, "1"),
    (1, "1"),
    (1.01, "1"),
    (1.05, "1.1"),  # threshold 1 g
    (1.234, "1.2"),  # worked vector: 1.234 g
    (1.25, "1.3"),
]

# Vitamins and minerals (from memory — verify: the significant-figure rule of Table 4 was
# not seen in the text): vitamin A, folic acid, chloride, calcium, phosphorus, magnesium,
# iodine, potassium to 3 significant figures; all others to 2.
VITAMIN_3SF = [(123.45, "123"), (801.6, "802"), (1234.5, "1230"), (2345, "2350"), (0.12345, "0.123")]
VITAMIN_2SF = [(4.56, "4.6"), (14.5, "15"), (14.49, "14"), (0.456, "0.46"), (75.4, "75"), (2.25, "2.3")]

# Percentages: no rule in the regulation or the guidance; nearest 1 %, "<1" below 0.5 %
# (common practice).
PERCENT_RI = [(0, "<1"), (0.49, "<1"), (0.5, "1"), (0.51, "1"), (18.45, "18"), (14.2857, "14"), (23.5, "24")]


@pytest.mark.parametrize("value,text", ENERGY)
def test_energy_table4(pack, value, text):
    assert rounded(pack, "energy", value) == text


@pytest.mark.parametrize("value,text", MACRONUTRIENT)
def test_macronutrients_table4(pack, value, text):
    assert rounded(pack, "macronutrient", value) == text


@pytest.mark.parametrize("value,text", FATTY_ACIDS)
def test_saturates_mono_poly_table4(pack, value, text):
    assert rounded(pack, "fatty_acids", value) == text


@pytest.mark.parametrize("value,text", SALT)
def test_salt_table4(pack, value, text):
    assert rounded(pack, "salt", value) == text


@pytest.mark.parametrize("value,text", VITAMIN_3SF)
def test_vitamins_minerals_3_significant_figures(pack, value, text):
    assert rounded(pack, "vitamin_mineral_3sf", value) == text


@pytest.mark.parametrize("value,text", VITAMIN_2SF)
def test_vitamins_minerals_2_significant_figures(pack, value, text):
    assert rounded(pack, "vitamin_mineral_2sf", value) == text


@pytest.mark.parametrize("value,text", PERCENT_RI)
def test_percent_rounding(pack, value, text):
    assert rounded(pack, "percent_ri", value) == text


def test_small_amount_forms_are_less_than_not_zero(pack):
    """Table 4 allows "0 g" or "<0.5 g" (etc.); the pack prints the "<" form and says so."""
    for rule, text in (("macronutrient", "<0.5"), ("fatty_acids", "<0.1"), ("salt", "<0.01")):
        band = pack.rounding[rule].bands[0]
        assert band.declare == text
        assert band.value is None  # not a zero
        assert "0" in (band.note or "")
        assert apply_rounding(0, pack.rounding[rule]).less_than


def test_rows_use_table4_rules(pack):
    expected = {
        "energy_kj": "energy",
        "energy_kcal": "energy",
        "fat": "macronutrient",
        "carbohydrate": "macronutrient",
        "sugars": "macronutrient",
        "polyols": "macronutrient",
        "starch": "macronutrient",
        "fibre": "macronutrient",
        "protein": "macronutrient",
        "saturates": "fatty_acids",
        "monounsaturates": "fatty_acids",
        "polyunsaturates": "fatty_acids",
        "salt": "salt",
        # Commission guidance (Dec 2012) Table 4: 3 significant figures for vitamin A, folic acid, chloride,
        # calcium, phosphorus, magnesium, iodine and potassium; 2 for the other vitamins and minerals.
        **{k: "vitamin_mineral_3sf" if k in THREE_SF else "vitamin_mineral_2sf" for k in ANNEX_XIII_ORDER},
    }
    assert {r.nutrient: r.rounding for r in pack.rows} == expected


# --- Reg. (EU) No 1169/2011, Annex XIII ---------------------------------------------------

# Annex XIII Part B: reference intakes of energy and selected nutrients (adults).
ANNEX_XIII_PART_B = {
    "energy_kj": (8400, "kJ"),
    "energy_kcal": (2000, "kcal"),
    "fat": (70, "g"),
    "saturates": (20, "g"),
    "carbohydrate": (260, "g"),
    "sugars": (90, "g"),
    "protein": (50, "g"),
    "salt": (6, "g"),
}
# Annex XIII Part A point 1, in its order (vitamins, then minerals).
ANNEX_XIII_ORDER = [
    "vitamin_a",
    "vitamin_d",
    "vitamin_e",
    "vitamin_k",
    "vitamin_c",
    "thiamin",
    "riboflavin",
    "niacin",
    "vitamin_b6",
    "folate",
    "vitamin_b12",
    "biotin",
    "pantothenic_acid",
    "potassium",
    "chloride",
    "calcium",
    "phosphorus",
    "magnesium",
    "iron",
    "zinc",
    "copper",
    "manganese",
    "fluoride",
    "selenium",
    "chromium",
    "molybdenum",
    "iodine",
]
THREE_SF = {"vitamin_a", "folate", "chloride", "calcium", "phosphorus", "magnesium", "iodine", "potassium"}
# Annex XIII Part A point 1: nutrient reference values (NRVs), adults.
ANNEX_XIII_PART_A = {
    "nrv_vitamin_a": (800, "ug"),
    "nrv_vitamin_d": (5, "ug"),
    "nrv_vitamin_e": (12, "mg"),
    "nrv_vitamin_k": (75, "ug"),
    "nrv_potassium": (2000, "mg"),
    "nrv_calcium": (800, "mg"),
    "nrv_iron": (14, "mg"),
    "nrv_vitamin_c": (80, "mg"),  # Annex XIII Part A point 1 (secondary)
    "nrv_thiamin": (1.1, "mg"),  # Annex XIII Part A point 1 (secondary)
    "nrv_riboflavin": (1.4, "mg"),  # Annex XIII Part A point 1 (secondary)
    "nrv_niacin": (16, "mg"),  # Annex XIII Part A point 1 (secondary)
    "nrv_vitamin_b6": (1.4, "mg"),  # Annex XIII Part A point 1 (secondary)
    "nrv_folate": (200, "ug"),  # Annex XIII Part A point 1 (secondary)
    "nrv_vitamin_b12": (2.5, "ug"),  # Annex XIII Part A point 1 (secondary)
    "nrv_biotin": (50, "ug"),  # Annex XIII Part A point 1 (secondary)
    "nrv_pantothenic_acid": (6, "mg"),  # Annex XIII Part A point 1 (secondary)
    "nrv_phosphorus": (700, "mg"),  # Annex XIII Part A point 1 (secondary)
    "nrv_iodine": (150, "ug"),  # Annex XIII Part A point 1 (secondary)
    "nrv_magnesium": (375, "mg"),  # Annex XIII Part A point 1 (secondary)
    "nrv_zinc": (10, "mg"),  # Annex XIII Part A point 1 (secondary)
    "nrv_selenium": (55, "ug"),  # Annex XIII Part A point 1 (secondary)
    "nrv_copper": (1, "mg"),  # Annex XIII Part A point 1 (secondary)
    "nrv_manganese": (2, "mg"),  # Annex XIII Part A point 1 (secondary)
    "nrv_chromium": (40, "ug"),  # Annex XIII Part A point 1 (secondary)
    "nrv_molybdenum": (50, "ug"),  # Annex XIII Part A point 1 (secondary)
    "nrv_chloride": (800, "mg"),  # Annex XIII Part A point 1 (secondary)
    "nrv_fluoride": (3.5, "mg"),  # Annex XIII Part A point 1 (secondary)
}


def test_reference_values_equal_annex_xiii(pack):
    table = {**ANNEX_XIII_PART_B, **ANNEX_XIII_PART_A}
    got = {k: (v.amount, v.unit) for k, v in pack.reference_values.items()}
    assert got == table
    for key, v in pack.reference_values.items():
        assert "Annex XIII" in v.citation, key


def test_nrv_units_match_nutrient_units(pack):
    for row in pack.rows:
        if row.percent:
            assert pack.nutrients[row.nutrient].unit == pack.reference_values[row.percent].unit, row.nutrient


def test_vitamins_minerals_only_in_significant_amount(pack):
    """Annex XIII Part A point 2: 15 % of the NRV per 100 g (products other than beverages), 7.5 % per 100 ml
    (beverages), 15 % per portion (single-portion packages); Reg. (EC) No 1924/2006 Art. 7 (a claim)."""
    for row in pack.rows:
        if row.nutrient in ANNEX_XIII_ORDER:
            assert row.requirement == "conditional"
            got = [(t.at_least_percent_reference, t.form, t.reference_basis, t.claim_about) for t in row.when]
            assert got == [
                (15, "solid", "per_100g", None),
                (7.5, "liquid", "per_100ml", None),
                (15, "any", "per_container_if_single", None),
                (None, "any", "per_100g", row.nutrient),
            ]
            assert row.percent == f"nrv_{row.nutrient}"


def test_ri_footnote_art_32_5(pack):
    notes = [f for f in pack.panel.footnotes if f.when == "percent_shown"]
    assert [f.text for f in notes] == ["*Reference intake of an average adult (8 400 kJ/2 000 kcal)"]


# --- Art. 30, Annex XV, Annex I -----------------------------------------------------------


def test_rows_in_annex_xv_order(pack):
    assert [r.nutrient for r in pack.rows] == [
        "energy_kj",
        "energy_kcal",
        "fat",
        "saturates",
        "monounsaturates",
        "polyunsaturates",
        "carbohydrate",
        "sugars",
        "polyols",
        "starch",
        "fibre",
        "protein",
        "salt",
        *ANNEX_XIII_ORDER,
    ]
    mandatory = [r.nutrient for r in pack.rows if r.requirement == "mandatory"]
    assert mandatory == ["energy_kj", "energy_kcal", "fat", "saturates", "carbohydrate", "sugars", "protein", "salt"]


def test_annex_i_definitions(pack):
    n = pack.nutrients
    assert n["fat"].sum == {"total_lipid": 1}  # total lipids
    assert n["carbohydrate"].sum == {"sugars": 1, "starch": 1, "polyols": 1}  # polyols in, fibre apart
    assert n["sugars"].sum == {"sugars": 1}  # polyols excluded
    assert n["salt"].sum == {"sodium": 0.0025}  # sodium (mg) x 2.5 / 1000
    assert n["fibre"].sum == {"fibre": 1}
    assert "review" in n["fat"].citation


def test_bases_and_servings(pack):
    assert pack.panel.bases == ["per_100g", "per_serving"]  # Art. 32(2), Art. 33(1)
    assert pack.panel.title == "Nutrition declaration"
    assert pack.servings.required is False
    assert pack.servings.reference_amounts == {}
    assert pack.panel.energy_factor_set == FACTOR_SETS[pack.market]


# --- Worked example (computed by hand) ------------------------------------------------------
# Per 100 g: fat 10 g, carbohydrate 60 g (sugars + starch, no polyols), protein 8 g, fibre 3 g.
#   kJ:   10 x 37 + 60 x 17 + 8 x 17 + 3 x 8 = 370 + 1020 + 136 + 24 = 1550 kJ
#   kcal: 10 x 9  + 60 x 4  + 8 x 4  + 3 x 2 =  90 +  240 +  32 +  6 =  368 kcal
#   %RI:  1550/8400 = 18.45 % -> 18 %; fat 10/70 = 14.3 % -> 14 %; carbohydrate 60/260 =
#         23.1 % -> 23 %; protein 8/50 = 16 %.
WORKED = {"fat": 10, "sugars": 20, "starch": 40, "protein": 8, "fibre_soluble": 1, "fibre_insoluble": 2}


@pytest.mark.parametrize("factor_set", sorted(FACTOR_SETS.values()))
def test_worked_example_energy(factor_set):
    fs = load_factor_set(factor_set)
    kj = sum(Decimal(str(g)) * Decimal(str(fs.factor_for(c).kj)) for c, g in WORKED.items())
    kcal = sum(Decimal(str(g)) * Decimal(str(fs.factor_for(c).kcal)) for c, g in WORKED.items())
    assert kj == 1550
    assert kcal == 368


def test_worked_example_declared(pack):
    r = pack.rounding
    assert apply_rounding(1550, r["energy"]).text == "1550"
    assert apply_rounding(368, r["energy"]).text == "368"
    assert apply_rounding(10, r["macronutrient"]).text == "10"
    assert apply_rounding(60, r["macronutrient"]).text == "60"
    assert apply_rounding(8, r["macronutrient"]).text == "8"
    assert apply_rounding(3, r["macronutrient"]).text == "3"
    ref = pack.reference_values
    pct = {
        k: v / ref[k].amount * 100
        for k, v in {"energy_kj": 1550, "energy_kcal": 368, "fat": 10, "carbohydrate": 60, "protein": 8}.items()
    }
    got = {k: apply_rounding(v, r["percent_ri"]).text for k, v in pct.items()}
    assert got == {"energy_kj": "18", "energy_kcal": "18", "fat": "14", "carbohydrate": "23", "protein": "16"}
