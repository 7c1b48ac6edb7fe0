"""Codex: allergens and the ingredient list of the General Standard for the Labelling of Prepackaged Foods,
CXS 1-1985 (rules/markets/codex_cxg_2_1985.yaml).

Section 4.2.1.4 (pre-2024 text) was read as quoted in secondary reproductions; sesame (the 2024 revision) is
"from memory — verify" and is included to err toward declaring. Section 4.2.1 (ingredient list) is from
memory — verify, except the compound-ingredient rule (FAO copy, secondary). CXS 1-1985 requires no advisory
statements of the aspartame or polyol kind, so the pack has none.
"""

from __future__ import annotations

import pytest
from claimkit import Lab, claim, one, statement, verdict  # noqa: F401

from labelcalc.labelling.model import ELIGIBLE, NOT_ELIGIBLE
from labelcalc.labelling.rulepack import load_packs

PACK = load_packs()["codex"]


@pytest.fixture
def lab(tmp_path):
    return Lab(tmp_path, PACK)


@pytest.mark.parametrize(
    "key, name",
    [
        ("wheat", "[cereal containing gluten: name it]"),
        ("oats", "[cereal containing gluten: name it]"),
        ("crustaceans", "crustacea"),
        ("egg", "eggs"),
        ("fish", "fish"),
        ("peanuts", "peanuts"),
        ("soy", "soybeans"),
        ("milk", "milk"),
        ("tree_nuts", "tree nuts"),
        ("sesame", "sesame"),  # 2024 revision (from memory — verify)
    ],
)
def test_listed_hypersensitivity_foods_are_declared(lab, key, name):
    ing = lab.add("a", {"protein": 20, "starch": 50}, name=f"Ingredient {key}", allergens=[key])
    base = lab.add("base", {"starch": 80})
    a = lab.assess(lab.formula("p", [{"ingredient": ing, "amount": "10 g"}, {"ingredient": base, "amount": "90 g"}]))
    assert a.allergens["declared"] == [name]


@pytest.mark.parametrize("key", ["mustard", "celery", "lupin", "molluscs"])
def test_foods_not_on_the_codex_list_are_not_declared(lab, key):
    # not in 4.2.1.4 (pre-2024 text); national lists add them
    ing = lab.add("a", {"protein": 20, "starch": 50}, name=f"Ingredient {key}", allergens=[key])
    a = lab.assess(lab.formula("p", [{"ingredient": ing, "amount": "100 g"}]))
    assert a.allergens["declared"] == []


@pytest.mark.parametrize("mg_per_100g, declared", [(1.0, True), (0.99, False), (1.01, True)])
def test_sulphite_10_mg_per_kg(lab, mg_per_100g, declared):
    # "sulphite in concentrations of 10 mg/kg or more" (4.2.1.4)
    fruit = lab.add(
        "fruit", {"sugars": 60, "sulphites": mg_per_100g * 2}, name="Dried apricots", allergens=["sulphites"]
    )
    base = lab.add("base", {"starch": 80})
    p = lab.formula("mix", [{"ingredient": fruit, "amount": "50 g"}, {"ingredient": base, "amount": "50 g"}])
    assert ("sulphite" in lab.assess(p).allergens["declared"]) is declared


def test_allergen_through_a_subformula_and_compound_ingredient(lab):
    whey = lab.add("whey", {"protein": 12, "sugars": 70}, name="Whey powder", allergens=["milk"])
    base = lab.add("base", {"starch": 80}, name="Maize starch")
    lab.formula(
        "coat",
        [{"ingredient": whey, "amount": "40 g"}, {"ingredient": base, "amount": "60 g"}],
        sub=True,
        name="Coating",
    )
    p = lab.formula("bar", [{"ingredient": base, "amount": "70 g"}, {"subformula": "coat", "amount": "30 g"}])
    a = lab.assess(p)
    assert a.allergens["declared"] == ["milk"]
    # 4.2.1.3: compound ingredient with its ingredients in brackets, in descending order
    assert a.ingredient_list["text"] == "Ingredients: Maize starch, Coating (Maize starch, WHEY POWDER)."


def test_allergens_unknown_are_flagged(lab):
    mystery = lab.add("mystery", {"starch": 50}, name="Flavouring", omit_allergens=True)
    base = lab.add("base", {"starch": 80})
    a = lab.assess(lab.formula("m", [{"ingredient": base, "amount": "99 g"}, {"ingredient": mystery, "amount": "1 g"}]))
    assert any("allergens unknown for mystery" in r for r in a.reviews)


def test_ingredient_list_by_ingoing_weight(lab):
    # 4.2.1.2: descending order of ingoing weight (m/m) at the time of manufacture (from memory — verify);
    # added water is declared at its ingoing weight (4.2.1.5)
    flour = lab.add("flour", {"starch": 88, "protein": 12}, name="Wheat flour", allergens=["wheat"])
    water = lab.add("water", {"water": 100}, name="Water", kinds=["water"])
    p = lab.formula(
        "bake",
        [{"ingredient": flour, "amount": "45 g"}, {"ingredient": water, "amount": "55 g"}],
        processing=[{"step": "baking", "finished_weight": "70 g"}],
    )
    assert lab.assess(p).ingredient_list["text"].startswith("Ingredients: Water, WHEAT FLOUR")


def test_no_statements_in_the_codex_pack(lab):
    asp = lab.add("aspartame", {"protein": 0.001}, name="Aspartame", kinds=["sweetener"], substance="aspartame")
    base = lab.add("base", {"starch": 80})
    a = lab.assess(lab.formula("s", [{"ingredient": asp, "amount": "0.1 g"}, {"ingredient": base, "amount": "99.9 g"}]))
    assert a.statements == []


# CXG 23-1997, table of conditions for nutrient content claims (from memory — verify): solids per 100 g.
@pytest.mark.parametrize(
    "claim_id, per100, expected",
    [
        ("low_fat", {"fat": 3, "starch": 80}, ELIGIBLE),  # 'low': 3 g per 100 g
        ("low_fat", {"fat": 3.01, "starch": 80}, NOT_ELIGIBLE),
        ("fat_free", {"fat": 0.5, "starch": 80}, ELIGIBLE),  # 'free': 0.5 g per 100 g
        ("fat_free", {"fat": 0.51, "starch": 80}, NOT_ELIGIBLE),
        ("low_sodium", {"sodium": 120, "starch": 80}, ELIGIBLE),  # 'low': 0.12 g per 100 g
        ("low_sodium", {"sodium": 121, "starch": 80}, NOT_ELIGIBLE),
        ("very_low_sodium", {"sodium": 40, "starch": 80}, ELIGIBLE),  # 'very low': 0.04 g per 100 g
        ("very_low_sodium", {"sodium": 40.1, "starch": 80}, NOT_ELIGIBLE),
        ("sodium_free", {"sodium": 5, "starch": 80}, ELIGIBLE),  # 'free': 0.005 g per 100 g
        ("sodium_free", {"sodium": 5.1, "starch": 80}, NOT_ELIGIBLE),
        ("sugars_free", {"sugars": 0.5, "starch": 80}, ELIGIBLE),  # 'free': 0.5 g per 100 g
        ("sugars_free", {"sugars": 0.51, "starch": 80}, NOT_ELIGIBLE),
        # 'source' of a vitamin: 15 % of the NRV per 100 g (vitamin C NRV-R 100 mg: 15 mg), serving 30 g
        ("source_of_vitamin_c", {"vitamin_c": 15, "starch": 80}, ELIGIBLE),
        ("source_of_vitamin_c", {"vitamin_c": 14.9, "starch": 80, "fat": 10}, NOT_ELIGIBLE),
        ("high_vitamin_c", {"vitamin_c": 30, "starch": 80}, ELIGIBLE),  # 'high': twice 'source'
        # 'source' of protein: 10 % of the 50 g NRV per 100 g = 5 g (or 5 % per 100 kcal = 2.5 g)
        ("source_of_protein", {"protein": 5, "starch": 80, "fat": 10}, ELIGIBLE),
        ("source_of_protein", {"protein": 4.9, "starch": 80, "fat": 10}, NOT_ELIGIBLE),
    ],
)
def test_codex_nutrient_content_claims(lab, claim_id, per100, expected):
    a = lab.assess(one(lab, per100, fid=f"c{abs(hash((claim_id, str(per100)))) % 10**8}"))
    assert verdict(a, claim_id) == expected
