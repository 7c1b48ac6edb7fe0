"""Australia and New Zealand: nutrition content claims, advisory statements, allergens (PEAL) and the
ingredient list (rules/markets/anz_fsc_1_2_8.yaml).

ANZ claim conditions are per 100 g (solid) or per 100 mL (liquid) — Schedule 4, S4—3 — except the dietary
fibre claims, per serving. S4—3 was not read: the values marked "secondary" were read in the Tasmanian
Department of Health restatement of S4—3; others are "from memory — verify" (named beside each case).
Std 1.2.3—2(2)(c) and (d) (polyol/D-allulose laxative advisory) were read in the A1247 variation
(F2024L01377): confirmed; the lists (a), (b) and their 10 / 25 g/100 g levels are from memory — verify.
Allergen required names: Std 1.2.3—4 and S9—3 as reproduced by NSW Food Authority guidance (secondary).
Ingredient list: Std 1.2.4 as restated by FSANZ (secondary).
"""

from __future__ import annotations

import pytest
from claimkit import Lab, claim, one, statement, verdict  # noqa: F401

from labelcalc.labelling.model import CANNOT_TELL, ELIGIBLE, NOT_ELIGIBLE
from labelcalc.labelling.rulepack import load_packs

PACK = load_packs()["anz"]
LIQUID = {"form": "liquid", "density_g_per_ml": 1.25}


@pytest.fixture
def lab(tmp_path):
    return Lab(tmp_path, PACK)


# --- absolute claims: at, just inside and just outside each limit (S4—3) --------------------------------
# Schedule 11 factors in this pack: sugars 17 kJ/g, so 10 g sugars = 170 kJ.
ABSOLUTE = [
    # low energy, solid: <= 170 kJ/100 g (secondary)
    ("low_energy", {"sugars": 10}, None, ELIGIBLE),
    ("low_energy", {"sugars": 9.99}, None, ELIGIBLE),
    ("low_energy", {"sugars": 10.01}, None, NOT_ELIGIBLE),
    # low energy, liquid: <= 80 kJ/100 mL (secondary); density 1.25: 80 kJ/100 mL = 64 kJ/100 g = 3.7647 g sugars
    ("low_energy_liquid", {"sugars": 3.76}, LIQUID, ELIGIBLE),  # 79.9 kJ/100 mL
    ("low_energy_liquid", {"sugars": 3.77}, LIQUID, NOT_ELIGIBLE),  # 80.1 kJ/100 mL
    ("low_energy_liquid", {"sugars": 3.76}, None, NOT_ELIGIBLE),  # a solid food: applies to liquids only
    # fat free: <= 0.15 g/100 g (secondary)
    ("fat_free", {"fat": 0.15}, None, ELIGIBLE),
    ("fat_free", {"fat": 0.14}, None, ELIGIBLE),
    ("fat_free", {"fat": 0.16}, None, NOT_ELIGIBLE),
    # low fat: <= 3 g/100 g solid, <= 1.5 g/100 mL liquid (secondary)
    ("low_fat", {"fat": 3}, None, ELIGIBLE),
    ("low_fat", {"fat": 2.99}, None, ELIGIBLE),
    ("low_fat", {"fat": 3.01}, None, NOT_ELIGIBLE),
    ("low_fat_liquid", {"fat": 1.2}, LIQUID, ELIGIBLE),  # 1.5 g/100 mL
    ("low_fat_liquid", {"fat": 1.19}, LIQUID, ELIGIBLE),
    ("low_fat_liquid", {"fat": 1.21}, LIQUID, NOT_ELIGIBLE),  # 1.5125 g/100 mL
    ("low_fat", {"fat": 1.2}, LIQUID, NOT_ELIGIBLE),  # the solid claim does not apply to a liquid
    # low saturated fat: saturated + trans <= 1.5 g/100 g solid, 0.75 g/100 mL liquid (from memory — verify)
    ("low_saturated_fat", {"fat": 2, "saturated_fa": 1.0, "trans_fa": 0.5}, None, ELIGIBLE),
    ("low_saturated_fat", {"fat": 2, "saturated_fa": 1.0, "trans_fa": 0.51}, None, NOT_ELIGIBLE),
    ("low_saturated_fat", {"fat": 2, "saturated_fa": 1.49}, None, ELIGIBLE),
    ("low_saturated_fat_liquid", {"fat": 1, "saturated_fa": 0.6}, LIQUID, ELIGIBLE),  # 0.75 g/100 mL
    ("low_saturated_fat_liquid", {"fat": 1, "saturated_fa": 0.61}, LIQUID, NOT_ELIGIBLE),
    # sugar free: <= 0.2 g/100 g (secondary)
    ("sugar_free", {"sugars": 0.2, "starch": 50}, None, ELIGIBLE),
    ("sugar_free", {"sugars": 0.19, "starch": 50}, None, ELIGIBLE),
    ("sugar_free", {"sugars": 0.21, "starch": 50}, None, NOT_ELIGIBLE),
    # low sugar: <= 5 g/100 g solid, 2.5 g/100 mL liquid (secondary)
    ("low_sugar", {"sugars": 5, "starch": 50}, None, ELIGIBLE),
    ("low_sugar", {"sugars": 4.99, "starch": 50}, None, ELIGIBLE),
    ("low_sugar", {"sugars": 5.01, "starch": 50}, None, NOT_ELIGIBLE),
    ("low_sugar_liquid", {"sugars": 2}, LIQUID, ELIGIBLE),  # 2.5 g/100 mL
    ("low_sugar_liquid", {"sugars": 2.01}, LIQUID, NOT_ELIGIBLE),
    # low sodium: <= 120 mg/100 g (secondary)
    ("low_sodium", {"sodium": 120, "starch": 50}, None, ELIGIBLE),
    ("low_sodium", {"sodium": 119.9, "starch": 50}, None, ELIGIBLE),
    ("low_sodium", {"sodium": 120.1, "starch": 50}, None, NOT_ELIGIBLE),
]


@pytest.mark.parametrize("claim_id, per100, extra, expected", ABSOLUTE)
def test_absolute_claim_limits(lab, claim_id, per100, extra, expected):
    serving = "200 ml" if extra else "30 g"
    a = lab.assess(one(lab, per100, serving=serving, extra=extra))
    assert verdict(a, claim_id) == expected, claim(a, claim_id)


@pytest.mark.parametrize(
    "claim_id, fibre_per_100g, expected",
    [
        # dietary fibre claims per serving (40 g here): source >= 2 g (from memory — verify),
        # good source >= 4 g and excellent source >= 7 g (secondary)
        ("source_of_fibre", 5, ELIGIBLE),  # 2 g per serving
        ("source_of_fibre", 4.99, NOT_ELIGIBLE),
        ("source_of_fibre", 5.01, ELIGIBLE),
        ("good_source_of_fibre", 10, ELIGIBLE),  # 4 g
        ("good_source_of_fibre", 9.99, NOT_ELIGIBLE),
        ("excellent_source_of_fibre", 17.5, ELIGIBLE),  # 7 g
        ("excellent_source_of_fibre", 17.49, NOT_ELIGIBLE),
    ],
)
def test_fibre_claims_per_serving(lab, claim_id, fibre_per_100g, expected):
    a = lab.assess(one(lab, {"fibre_insoluble": fibre_per_100g, "starch": 50}, serving="40 g"))
    assert verdict(a, claim_id) == expected, claim(a, claim_id)


# --- comparative claims (at least 25 % less than the same quantity of the reference food) ----------------
@pytest.mark.parametrize(
    "claim_id, mine, ref, expected",
    [
        ("reduced_fat", {"fat": 7.5}, {"fat": 10}, ELIGIBLE),  # secondary
        ("reduced_fat", {"fat": 7.51}, {"fat": 10}, NOT_ELIGIBLE),
        ("reduced_fat", {"fat": 7.49}, {"fat": 10}, ELIGIBLE),
        ("reduced_sugar", {"sugars": 30}, {"sugars": 40}, ELIGIBLE),  # secondary
        ("reduced_sugar", {"sugars": 30.1}, {"sugars": 40}, NOT_ELIGIBLE),
        ("reduced_sodium", {"sodium": 300}, {"sodium": 400}, ELIGIBLE),  # secondary
        ("reduced_sodium", {"sodium": 301}, {"sodium": 400}, NOT_ELIGIBLE),
        ("reduced_energy", {"sugars": 30}, {"sugars": 40}, ELIGIBLE),  # from memory — verify
        ("reduced_energy", {"sugars": 30.1}, {"sugars": 40}, NOT_ELIGIBLE),
    ],
)
def test_comparative_claims(lab, claim_id, mine, ref, expected):
    p = one(lab, mine, fid="p")
    r = one(lab, ref, fid="r")
    c = claim(lab.assess(p, r), claim_id)
    assert c.verdict == expected, c
    if expected == ELIGIBLE:
        assert "reference food" in c.texts[0]


def test_comparative_claim_without_reference_cannot_tell(lab):
    c = claim(lab.assess(one(lab, {"fat": 5})), "reduced_fat")
    assert c.verdict == CANNOT_TELL and "reference formula" in c.missing[0]


def test_no_added_sugar(lab):
    assert verdict(lab.assess(one(lab, {"starch": 60}, fid="plain")), "no_added_sugar") == ELIGIBLE
    sug = lab.add("sugar", {"sugars": 100, "added_sugars": 100}, name="Sugar", kinds=["sugar"])
    base = lab.add("base", {"starch": 60})
    a = lab.assess(lab.formula("s", [{"ingredient": base, "amount": "99 g"}, {"ingredient": sug, "amount": "1 g"}]))
    c = claim(a, "no_added_sugar")
    assert c.verdict == NOT_ELIGIBLE and any("sugar" in f for f in c.failed)


# --- advisory statements ---------------------------------------------------------------------------------
def _polyols(lab, fid, **grams):
    base = lab.add("base", {"starch": 80})
    batch = []
    for k, g in grams.items():
        lab.add(k, {k: 100}, name=k.capitalize(), kinds=["polyol", "sweetener", "additive"], substance=k)
        batch.append({"ingredient": k, "amount": f"{g} g"})
    batch.append({"ingredient": base, "amount": f"{100 - sum(grams.values())} g"})
    return lab.formula(fid, batch)


@pytest.mark.parametrize(
    "grams, fires",
    [
        # 1.2.3—2(2)(a): lactitol, maltitol, maltitol syrup, mannitol, xylitol >= 10 g/100 g (from memory — verify)
        ({"maltitol": 10}, True),
        ({"maltitol": 9.99}, False),
        ({"xylitol": 5, "mannitol": 5}, True),
        # (b): erythritol, isomalt, polydextrose, sorbitol >= 25 g/100 g (from memory — verify)
        ({"sorbitol": 25}, True),
        ({"erythritol": 9.99}, False),
        # (c): a list (a) substance with a list (b) substance >= 10 g/100 g (confirmed, A1247)
        ({"maltitol": 5, "erythritol": 5}, True),
        ({"maltitol": 4.99, "erythritol": 5}, False),
        # SCHEMA GAP (errs toward flagging): list (b) alone between 10 and 25 g/100 g is caught by the summed
        # third trigger although (c) needs one substance of each list — the caution says to review.
        ({"sorbitol": 24.9}, True),
        # glycerol is not in either list
        ({"glycerol": 30}, False),
    ],
)
def test_polyol_laxative_statement(lab, grams, fires):
    s = statement(lab.assess(_polyols(lab, "g", **grams)), "polyol_laxative")
    assert (s is not None) is fires
    if s:
        assert "laxative" in s.text


def test_polydextrose_flags_polyol_statement(lab):
    pdx = lab.add("pdx", {"fibre_soluble": 90}, name="Polydextrose", kinds=["additive"], substance="polydextrose")
    base = lab.add("base", {"starch": 80})
    p = lab.formula("pd", [{"ingredient": pdx, "amount": "2 g"}, {"ingredient": base, "amount": "98 g"}])
    s = statement(lab.assess(p), "polyol_laxative")
    assert s is not None and "polydextrose" in s.trigger


def test_aspartame_statement_through_a_subformula(lab):
    # Std 1.2.3—2(1), S9—2: aspartame or aspartame-acesulphame salt -> contains phenylalanine (secondary)
    asp = lab.add(
        "aspartame", {"protein": 0.001}, name="Aspartame", kinds=["sweetener", "additive"], substance="aspartame"
    )
    base = lab.add("base", {"starch": 60})
    lab.formula(
        "premix",
        [{"ingredient": base, "amount": "99 g"}, {"ingredient": asp, "amount": "1 g"}],
        sub=True,
        name="Sweetener premix",
    )
    p = lab.formula("d", [{"ingredient": base, "amount": "90 g"}, {"subformula": "premix", "amount": "10 g"}])
    s = statement(lab.assess(p), "aspartame_phenylalanine")
    assert s is not None and s.text == "Contains phenylalanine."
    acs = lab.add(
        "acs",
        {"protein": 0.001},
        name="Aspartame-acesulphame salt",
        kinds=["sweetener"],
        substance="aspartame_acesulfame_salt",
    )
    q = lab.formula("e", [{"ingredient": base, "amount": "99.9 g"}, {"ingredient": acs, "amount": "0.1 g"}])
    assert statement(lab.assess(q), "aspartame_phenylalanine") is not None
    assert statement(lab.assess(one(lab, {"starch": 60}, fid="none")), "aspartame_phenylalanine") is None


def test_caffeine_statement_for_guarana(lab):
    gua = lab.add("gua", {"protein": 10, "starch": 50, "caffeine": 4000}, name="Guarana extract", substance="guarana")
    base = lab.add("base", {"sugars": 10})
    p = lab.formula("c", [{"ingredient": gua, "amount": "1 g"}, {"ingredient": base, "amount": "99 g"}])
    assert statement(lab.assess(p), "caffeine") is not None


def test_npsc_caution_only_with_a_claim(lab):
    # Std 1.2.7 / Schedule 5 (from memory — verify): shown as a caution when any claim is made or eligible
    low = lab.assess(one(lab, {"starch": 60, "fat": 1}, fid="low"))
    assert statement(low, "npsc_health_claims") is not None
    sug = lab.add("sugar", {"sugars": 100, "added_sugars": 100}, name="Sugar", kinds=["sugar"])
    rich = lab.add("rich", {"fat": 30, "saturated_fa": 12, "starch": 20}, name="Rich base")
    salt = lab.add("salt", {"sodium": 39000, "ash": 99}, name="Salt", kinds=["salt"])  # added salt: no 'no added salt'
    p = lab.formula(
        "rich",
        [
            {"ingredient": rich, "amount": "68 g"},
            {"ingredient": sug, "amount": "30 g"},
            {"ingredient": salt, "amount": "2 g"},
        ],
    )
    a = lab.assess(p)
    assert not [c for c in a.claims if c.verdict == ELIGIBLE]
    assert statement(a, "npsc_health_claims") is None


# --- allergens (PEAL: 1.2.3—4, S9—3; secondary) ----------------------------------------------------------
def test_allergens_through_subformula_bold_and_summary(lab):
    whey = lab.add("whey", {"protein": 12, "sugars": 70}, name="Whey powder", allergens=["milk"])
    oats = lab.add("oats", {"starch": 60, "protein": 12}, name="Rolled oats", allergens=["oats"])
    wheat = lab.add("wheat", {"starch": 70, "protein": 12}, name="Wheat flour", allergens=["wheat"])
    base = lab.add("base", {"starch": 80})
    lab.formula(
        "coat",
        [{"ingredient": whey, "amount": "50 g"}, {"ingredient": base, "amount": "50 g"}],
        sub=True,
        name="Coating",
    )
    p = lab.formula(
        "bar",
        [
            {"ingredient": oats, "amount": "50 g"},
            {"ingredient": wheat, "amount": "20 g"},
            {"subformula": "coat", "amount": "30 g"},
        ],
    )
    a = lab.assess(p)
    # summary: "wheat" and "gluten" for wheat, "gluten" only for oats (S9—3 as reproduced by NSW guidance)
    assert a.allergens["statement"] == "Contains: milk, wheat, gluten."
    assert a.allergens["summary"] == "required" and a.allergens["emphasis"] == "bold_and_summary"
    text = a.ingredient_list["text"]
    assert "ROLLED OATS" in text and "WHEY POWDER" in text and "WHEAT FLOUR" in text  # bold (upper case in text)


def test_barley_gives_gluten_only_in_summary(lab):
    barley = lab.add("barley", {"starch": 70, "protein": 10}, name="Barley flakes", allergens=["barley"])
    base = lab.add("base", {"starch": 80})
    p = lab.formula("b", [{"ingredient": barley, "amount": "50 g"}, {"ingredient": base, "amount": "50 g"}])
    assert lab.assess(p).allergens["declared"] == ["gluten"]


def test_required_names_lupin_mollusc_tree_nut(lab):
    ids = [
        lab.add(f"i_{k}", {"protein": 20, "starch": 50}, name=f"Ingredient {k}", allergens=[k])
        for k in ("lupin", "molluscs", "tree_nuts", "sesame", "soy")
    ]
    names = lab.assess(lab.formula("mix", [{"ingredient": i, "amount": "20 g"} for i in ids])).allergens["declared"]
    assert {"lupin", "mollusc", "sesame", "soy", "[tree nut: name it]"} == set(names)


@pytest.mark.parametrize("mg_per_100g, declared", [(1.0, True), (0.99, False)])
def test_sulphites_at_10_mg_per_kg(lab, mg_per_100g, declared):
    # added sulphites at 10 mg/kg or more (NSW guidance reproducing S9—3, secondary)
    fruit = lab.add(
        "fruit", {"sugars": 60, "sulphites": mg_per_100g * 2}, name="Dried apricots", allergens=["sulphites"]
    )
    base = lab.add("base", {"starch": 80})
    p = lab.formula("mix", [{"ingredient": fruit, "amount": "50 g"}, {"ingredient": base, "amount": "50 g"}])
    assert ("sulphites" in lab.assess(p).allergens["declared"]) is declared


def test_allergens_unknown_are_flagged(lab):
    mystery = lab.add("mystery", {"starch": 50}, name="Flavouring", omit_allergens=True)
    base = lab.add("base", {"starch": 80})
    a = lab.assess(lab.formula("m", [{"ingredient": base, "amount": "99 g"}, {"ingredient": mystery, "amount": "1 g"}]))
    assert any("allergens unknown for mystery" in r for r in a.reviews)


# --- ingredient list (Std 1.2.4: ingoing weight; added water less the water lost; < 5 % need not be listed) ---
def _baked(lab, fid, flour_g, water_g, finished_g):
    flour = lab.add("flour", {"starch": 88, "protein": 12}, name="Wheat flour", allergens=["wheat"])
    water = lab.add("water", {"water": 100}, name="Water", kinds=["water"])
    return lab.formula(
        fid,
        [{"ingredient": flour, "amount": f"{flour_g} g"}, {"ingredient": water, "amount": f"{water_g} g"}],
        processing=[{"step": "baking", "finished_weight": f"{finished_g} g"}],
    )


def test_added_water_counts_less_the_water_lost(lab):
    # water 55 g used, 30 g lost: 25 g remain, below flour's 45 g -> flour first
    il = lab.assess(_baked(lab, "a", 45, 55, 70)).ingredient_list
    assert il["text"].startswith("Ingredients: WHEAT FLOUR, Water")


@pytest.mark.parametrize(
    "finished_g, listed",
    [
        (100.1, True),  # 5.1 g remaining water per 100.1 g: 5.09 % -> listed
        (99.9, False),  # 4.9 g in 99.9 g: 4.9 % -> need not be listed
    ],
)
def test_added_water_below_5_percent_need_not_be_listed(lab, finished_g, listed):
    # flour 95 g + water 10 g; the water lost is 105 - finished. (At exactly 5 % the Code's "less than 5 %"
    # lists it while the schema omits "at or below": a SCHEMA GAP noted in the pack.)
    il = lab.assess(_baked(lab, "w", 95, 10, finished_g)).ingredient_list
    assert ("Water" in il["text"]) is listed
    if not listed:
        assert "need not be listed" in il["notes"][0]


# --- Schedule 4 claims added with the vitamin and mineral work (S4—3 as in force 29 Oct 2024 read) -------------
@pytest.mark.parametrize("sodium, expected", [(50, ELIGIBLE), (50.1, NOT_ELIGIBLE)])
def test_very_low_sodium(lab, sodium, expected):
    # labelcalc's own 'very low' line, 50 mg per 100 g: S4—3 (read) has no 'very low' descriptor for sodium
    assert verdict(lab.assess(one(lab, {"starch": 60, "sodium": sodium}, fid="vls")), "very_low_sodium") == expected


def test_no_added_salt_fails_with_added_salt(lab):
    # Schedule 4, S4—3, salt or sodium, 'no added': no added sodium compound including no added salt
    assert verdict(lab.assess(one(lab, {"starch": 60, "sodium": 200}, fid="nas")), "no_added_salt") == ELIGIBLE
    base = lab.add("base2", {"starch": 60})
    salt = lab.add("salt2", {"sodium": 39000, "ash": 99}, name="Salt", kinds=["salt"])
    p = lab.formula("sal", [{"ingredient": base, "amount": "99 g"}, {"ingredient": salt, "amount": "1 g"}])
    assert verdict(lab.assess(p), "no_added_salt") == NOT_ELIGIBLE


@pytest.mark.parametrize("vitamin_c, expected", [(13.33, NOT_ELIGIBLE), (13.34, ELIGIBLE)])
def test_source_of_vitamin_c_and_rdi_percent(lab, vitamin_c, expected):
    # S4—3: 'source' = at least 10 % of the RDI per serving (vitamin C RDI 40 mg, Schedule 1: 4 mg per 30 g
    # serving = 13.33 mg per 100 g); 1.2.8—9: with the claim the panel shows the %RDI.
    p = one(lab, {"starch": 60, "vitamin_c": vitamin_c}, fid="vc", claims=["source of vitamin c"])
    a = lab.assess(p)
    assert verdict(a, "source_of_vitamin_c") == expected
    row = a.declaration.row("vitamin_c")
    assert row.shown and row.percent["per_serving"] == "10%"
