"""Pack values and rules corrected against the regulation texts, each tested at its threshold.

Every check names its source beside it.  The formulas are invented test data (round numbers), not foods.
"""

from __future__ import annotations

import pytest
from claimkit import Lab, one, statement, verdict

from labelcalc.formulation.composition import compose
from labelcalc.intake.formula import load_formula
from labelcalc.labelling.declare import declare
from labelcalc.labelling.engine import LabelEngine
from labelcalc.labelling.front_table import fop_threshold
from labelcalc.labelling.model import ELIGIBLE, NOT_ELIGIBLE
from labelcalc.labelling.record import label_one, label_record
from labelcalc.labelling.rulepack import load_packs

PACKS = load_packs()


@pytest.fixture
def lab(tmp_path):
    return Lab(tmp_path, PACKS["eu"])


def _sweet(lab, fid, *, sugar: bool, sweetener: bool):
    batch = [{"ingredient": lab.add("base", {"starch": 70, "water": 30}), "amount": "90 g"}]
    if sugar:
        batch.append(
            {"ingredient": lab.add("sucrose", {"sugars": 100, "added_sugars": 100}, kinds=["sugar"]), "amount": "9 g"}
        )
    if sweetener:
        batch.append(
            {
                "ingredient": lab.add("sucralose", {}, kinds=["sweetener", "additive"], functional_class="sweetener"),
                "amount": "0.05 g",
            }
        )
    return lab.formula(fid, batch)


# ------------------------------------------------------------------ Reg. (EU) No 1169/2011 Annex III 2.1, 2.2


@pytest.mark.parametrize("market", ["eu", "uk"])
@pytest.mark.parametrize(
    "sugar, sweetener, both_statement, sweetener_statement",
    [(True, True, True, True), (False, True, False, True), (True, False, False, False), (False, False, False, False)],
)
def test_with_sugars_and_sweeteners_needs_both(lab, market, sugar, sweetener, both_statement, sweetener_statement):
    # Reg. (EU) No 1169/2011 Annex III point 2.2: "foods containing both an added sugar or sugars and a
    # sweetener or sweeteners" (retained text for GB) - both conditions together; point 2.1 for a sweetener.
    a = lab.assess(_sweet(lab, "s", sugar=sugar, sweetener=sweetener), pack=PACKS[market])
    assert (statement(a, "with_sugars_and_sweeteners") is not None) is both_statement
    assert (statement(a, "with_sweeteners") is not None) is sweetener_statement


@pytest.mark.parametrize("market", ["eu", "uk"])
def test_no_added_sugars_allows_sweeteners(lab, market):
    # Reg. (EC) No 1924/2006 Annex, 'with no added sugars': no added mono- or disaccharides or any other
    # food used for its sweetening properties - a sweetener (an additive) does not fail the claim.
    a = lab.assess(_sweet(lab, "ns", sugar=False, sweetener=True), pack=PACKS[market])
    assert verdict(a, "with_no_added_sugars") == ELIGIBLE
    b = lab.assess(_sweet(lab, "ws", sugar=True, sweetener=False), pack=PACKS[market])
    assert verdict(b, "with_no_added_sugars") == NOT_ELIGIBLE
    honey = lab.add("honey", {"sugars": 80, "water": 20}, kinds=["sweetening_food"])
    base = lab.add("base", {"starch": 70, "water": 30})
    p = lab.formula(
        "hn", [{"ingredient": base, "amount": "95 g"}, {"ingredient": honey, "amount": "5 g"}]
    )  # a food used for its sweetening properties fails it
    assert verdict(lab.assess(p, pack=PACKS[market]), "with_no_added_sugars") == NOT_ELIGIBLE


def _range_vs_one(comps, markets):
    """A range and ranges of one give the same statements (one engine for both)."""
    for market in markets:
        pack = PACKS[market]
        eng = LabelEngine(pack, comps)
        for i, c in enumerate(eng.comps):
            together = [(x.statement, x.status) for x in label_record(eng, i).assessment.statements]
            assert together == [(x.statement, x.status) for x in label_one(c, pack).assessment.statements]


def test_all_of_trigger_same_in_a_range(lab):
    """Annex III point 2.2 in a range of products as for each product alone."""
    paths = [
        _sweet(lab, f"p{i}", sugar=s, sweetener=w)
        for i, (s, w) in enumerate([(True, True), (False, True), (True, False)])
    ]
    lib = lab.library()
    comps = [compose(load_formula(p, lib), lib)[0] for p in paths]
    _range_vs_one(comps, ("eu", "uk"))
    eng = LabelEngine(PACKS["eu"], comps)
    ids = [[x.statement for x in label_record(eng, i).assessment.statements] for i in range(3)]
    assert "with_sugars_and_sweeteners" in ids[0]
    assert "with_sugars_and_sweeteners" not in ids[1] + ids[2]


# ------------------------------------------------------------------ UK front-of-pack portion rule


def _drink(lab, fid, sugars_per_100g: float, serving_ml: float, density: float = 1.0):
    d = lab.add(f"{fid}_drink", {"sugars": sugars_per_100g, "water": 100 - sugars_per_100g})
    return lab.formula(
        fid,
        [{"ingredient": d, "amount": "100 g"}],
        serving=f"{serving_ml * density:g} g",
        extra={"form": "liquid", "density_g_per_ml": density},
    )


def _uk_colour(a, nutrient):
    (fop,) = [f for f in a.front_of_pack if f["scheme"] == "uk_fop_colour_coding"]
    return fop["verdicts"][nutrient]["colour"]


@pytest.mark.parametrize(
    "serving_ml, colour",
    [
        (150, "amber (medium)"),  # at 150 ml the portion rule does not apply (only over 150 ml)
        (149, "amber (medium)"),
        (151, "red (high)"),  # 151 ml x 10 g/100 ml = 15.1 g > 13.5 g per portion
    ],
)
def test_uk_drinks_portion_rule_over_150_ml(lab, serving_ml, colour):
    # Guide to creating a front of pack nutrition label (DH/FSA/BRC, updated November 2016): drinks with a
    # portion over 150 ml are red for sugars above 13.5 g per portion; 10 g/100 ml is amber per 100 ml.
    a = lab.assess(_drink(lab, "d", 10, serving_ml), pack=PACKS["uk"])
    assert _uk_colour(a, "sugars") == colour


def test_uk_drinks_portion_rule_uses_volume_not_grams(lab):
    # 140 ml of a drink of density 1.1 weighs 154 g: over 100 g (the food rule) but under 150 ml.
    a = lab.assess(_drink(lab, "dd", 10, 140, density=1.1), pack=PACKS["uk"])
    assert _uk_colour(a, "sugars") == "amber (medium)"


@pytest.mark.parametrize("serving_g, colour", [(122, "amber (medium)"), (123, "red (high)")])
def test_uk_foods_portion_rule_over_100_g(lab, serving_g, colour):
    # Same guide, foods: red above 27 g sugars per portion for portions over 100 g; 22 g/100 g is amber per
    # 100 g; 122 g -> 26.84 g per portion, 123 g -> 27.06 g.
    p = one(lab, {"sugars": 22, "starch": 50}, fid=f"f{serving_g}", serving=f"{serving_g} g")
    a = lab.assess(p, pack=PACKS["uk"])
    assert _uk_colour(a, "sugars") == colour


# ------------------------------------------------------------------ Canada front-of-package thresholds


@pytest.mark.parametrize(
    "ref_g, category, percent",
    [
        (200, "main_dishes", 30),  # main dish with a reference amount of 200 g or more: 30 %
        (199, "main_dishes", 15),  # below 200 g the main-dish threshold does not apply
        (30, "cookies", 10),  # reference amount of 30 g or less: 10 %
        (31, "cookies", 15),
    ],
)
def test_canada_fop_thresholds(ref_g, category, percent):
    # FDR B.01.350 and its table (SOR/2022-168): 30 % DV for prepackaged main dishes with a reference amount of
    # 200 g or more (restated in the Canada Gazette summary of SOR/2022-168), 10 % at 30 g or less, 15 % otherwise.
    (fop,) = PACKS["ca"].front_of_pack
    assert fop_threshold(fop, ref_g, category) == percent


def test_canada_saturated_plus_trans_percent_from_declared_amounts(lab):
    # FDR table to B.01.401 item 6 (%DV of the sum of saturated and trans fat) and the pack's percent_from:
    # declared (B.01.401(1.2): %DV from the rounded amount). 0.86 g saturated per serving declares 1 g
    # (item 4, column 4: multiples of 0.5 g from 0.5 g to 5 g), trans 0 g: 1 g / 20 g = 5 %; the unrounded
    # sum would give 0.86 / 20 = 4.3 % -> 4 %.
    p = one(lab, {"fat": 5, "saturated_fa": 0.86 * 100 / 30, "starch": 50}, fid="sat", category="cookies")
    a = lab.assess(p, pack=PACKS["ca"])
    row = a.declaration.row("saturated_plus_trans")
    assert a.declaration.row("saturated_fat").declared["per_serving"].text == "1"
    assert row.percent["per_serving"] == "5%"


# ------------------------------------------------------------------ EU/UK protein = nitrogen x 6.25


@pytest.mark.parametrize("market", ["eu", "uk"])
def test_protein_is_nitrogen_times_6_25(lab, market):
    # Reg. (EU) No 1169/2011 Annex I point 10: protein = total Kjeldahl nitrogen x 6.25. An entry whose 80 g
    # protein used the factor 5.55 holds 80 / 5.55 = 14.414 g nitrogen -> 90.09 g protein per 100 g
    # (Annex XV / Commission guidance 2012: 10 g or more to the nearest 1 g -> "90 g").
    p = one(lab, {"protein": 80, "water": 20}, fid="gel", nitrogen_factor=5.55)
    d = declare(compose(load_formula(p, lab.library()), lab.library())[0], PACKS[market])
    assert d.row("protein").value_per_100g == pytest.approx(80 * 6.25 / 5.55)
    assert d.row("protein").declared["per_100g"].text == "90"
    # the US keeps the entry's own factor (21 CFR 101.9(c)(7): protein may use specific factors)
    us = declare(compose(load_formula(p, lab.library()), lab.library())[0], PACKS["us"])
    assert us.row("protein").value_per_100g == pytest.approx(80)


def test_protein_without_factor_is_unknown_not_guessed(lab):
    # Unknown is not zero: without the entry's nitrogen factor the EU protein cannot be restated.
    p = one(lab, {"protein": 10, "starch": 80}, fid="nf", nitrogen_factor=None)
    d = declare(compose(load_formula(p, lab.library()), lab.library())[0], PACKS["eu"])
    assert d.row("protein").declared["per_100g"] is None
    assert d.row("protein").unknown_inputs


# ------------------------------------------------------------------ US lab checks and claims


def _certificate(pid, sugars_g):
    from labelcalc.lab.certificates import LabFile

    return LabFile.model_validate(
        {"certificate": {"product_id": pid}, "results": [{"analyte": "sugars", "value": sugars_g, "unit": "g"}]}
    )


@pytest.mark.parametrize(
    "natural, analysed, expected",
    [
        (False, 12.0, "within"),  # all sugars added: added sugars held to 120 % of the declared 10 g
        (False, 12.5, "outside"),
        (True, 12.5, "not judged"),  # some sugars naturally present: records, not the 120 % limit
    ],
)
def test_us_added_sugars_120_percent_only_when_all_sugars_added(tmp_path, natural, analysed, expected):
    # 21 CFR 101.9(g)(5): the 120 % limit covers added sugars "when the only source of sugars in the food is
    # added sugars"; otherwise compliance rests on records (101.9(g)(10)).
    from labelcalc.lab.verify import verify

    lab = Lab(tmp_path, PACKS["us"])
    base = lab.add("base", {"starch": 60, "sugars": 5 if natural else 0, "water": 35})
    sugar = lab.add("sucrose", {"sugars": 100, "added_sugars": 100}, kinds=["sugar"])
    p = lab.formula(
        "as", [{"ingredient": base, "amount": "90 g"}, {"ingredient": sugar, "amount": "10 g"}], serving="100 g"
    )
    (c,) = compose(load_formula(p, lab.library()), lab.library())
    d = declare(c, PACKS["us"])
    assert d.row("added_sugars").declared["per_serving"].text == "10"
    rep = verify(c, d, _certificate("as", analysed), margin_percent=0)
    (row,) = [r for r in rep.rows if r.nutrient == "added_sugars"]
    assert row.verdict == expected


def test_us_saturated_fat_free_disclosure_text(lab):
    # 21 CFR 101.62(c)(1): cholesterol disclosed from 2 mg per RACC; total fat from 0.5 g per RACC (from
    # memory — verify); 'low saturated fat' keeps "more than 3 g" (101.62(c)(2), IOM 2012 p. 136).
    p = one(lab, {"fat": 1, "saturated_fa": 0.1, "starch": 80}, fid="sff")
    c = [c for c in lab.assess(p, pack=PACKS["us"]).claims if c.claim == "saturated_fat_free"][0]
    assert c.verdict == ELIGIBLE
    assert any("0.5 g or more total fat" in t for t in c.texts)


# ------------------------------------------------------------------ EU/UK Annex III points 1.1, 3.1, 4.1


def _liquorice(lab, fid, mg_per_100g, *, liquid=False):
    base = lab.add("base", {"sugars": 50, "starch": 30, "water": 20} if not liquid else {"sugars": 8, "water": 92})
    extract = lab.add("liq_extract", {"glycyrrhizinic_acid": 10000, "sugars": 60, "water": 39}, kinds=["liquorice"])
    grams = mg_per_100g / 100  # g of extract (10 g glycyrrhizinic acid per 100 g) in 100 g of food
    extra = {"form": "liquid", "density_g_per_ml": 1.0} if liquid else None
    return lab.formula(
        fid,
        [{"ingredient": base, "amount": f"{100 - grams:g} g"}, {"ingredient": extract, "amount": f"{grams:g} g"}],
        extra=extra,
    )


@pytest.mark.parametrize("market", ["eu", "uk"])
@pytest.mark.parametrize(
    "mg, liquid, plain, warning",
    [
        (9.9, False, False, False),  # confectionery: 100 mg/kg = 10 mg per 100 g
        (10, False, True, False),
        (399, False, True, False),
        # 4 g/kg: hypertension warning (NI SR 2005/198 reg. 34C(3)(a), the rule Annex III took over)
        (400, False, True, True),
        (0.99, True, False, False),  # beverages: 10 mg/l = 1 mg per 100 ml
        (1, True, True, False),
        (5, True, True, True),  # 50 mg/l (NI SR 2005/198 reg. 34C(3)(c), drinks up to 1.2 % vol)
    ],
)
def test_liquorice_statements(lab, market, mg, liquid, plain, warning):
    # Reg. (EU) No 1169/2011 Annex III point 3.1 (glycyrrhizinic acid from added liquorice)
    a = lab.assess(_liquorice(lab, "lq", mg, liquid=liquid), pack=PACKS[market])
    assert (statement(a, "liquorice") is not None) is plain
    assert (statement(a, "liquorice_hypertension") is not None) is warning


@pytest.mark.parametrize("market", ["eu", "uk"])
@pytest.mark.parametrize("flag", [True, False])
def test_protective_atmosphere(lab, market, flag):
    # Reg. (EU) No 1169/2011 Annex III point 1.1: "packaged in a protective atmosphere" when packaging gases
    # extend the durability (the formula says so).
    p = one(lab, {"starch": 60, "fat": 30}, fid="pa", extra={"packed_in_protective_atmosphere": flag})
    a = lab.assess(p, pack=PACKS[market])
    assert (statement(a, "protective_atmosphere") is not None) is flag


@pytest.mark.parametrize("liquid, caffeine, expected", [(True, 15, False), (True, 15.01, True), (False, 20, False)])
def test_high_caffeine_only_for_beverages_per_100_ml(lab, liquid, caffeine, expected):
    # Annex III point 4.1: beverages with more than 150 mg/l caffeine (15 mg per 100 ml); not solids.
    extra = {"form": "liquid", "density_g_per_ml": 1.0} if liquid else None
    p = one(lab, {"sugars": 10, "caffeine": caffeine}, fid="cf", extra=extra)
    assert (statement(lab.assess(p), "high_caffeine_beverage") is not None) is expected


def test_statement_triggers_same_in_a_range(lab):
    """form, per_100ml, from_kinds and header_flag triggers: a range gives what each product alone gives."""
    paths = [
        _liquorice(lab, "b1", 450),
        _liquorice(lab, "b2", 6, liquid=True),
        one(lab, {"starch": 60}, fid="b3", extra={"packed_in_protective_atmosphere": True}),
        one(lab, {"sugars": 10, "caffeine": 20}, fid="b4", extra={"form": "liquid", "density_g_per_ml": 1.02}),
    ]
    lib = lab.library()
    comps = [compose(load_formula(p, lib), lib)[0] for p in paths]
    _range_vs_one(comps, ("eu", "uk"))


# ------------------------------------------------------------------ additives named by functional class


@pytest.mark.parametrize(
    "market, expected",
    [
        # Reg. (EU) No 1169/2011 Annex VII Part C: category name followed by the specific name
        ("eu", "Ingredients: Base, Sweeteners: Sorbitol, Aspartame, Acid: Citric acid, Preservative: Sorbic acid."),
        # FSANZ Std 1.2.4—7(1)(a): Schedule 7 class name followed by the specific name in brackets; "acid" is a
        # prescribed class of S7—2 of its own (Code compilation of March 2025)
        ("anz", "Ingredients: Base, Sweeteners (Sorbitol, Aspartame), Acid (Citric acid), Preservative (Sorbic acid)."),
        # 21 CFR 101.22(j): a chemical preservative by its name followed by its function; no other class names
        ("us", "Ingredients: Base, Sorbitol, Citric acid, Sorbic acid (preservative), Aspartame."),
        # FDR B.01.010: common names only (no class designation set)
        ("ca", "Ingredients: Base, Sorbitol, Citric acid, Sorbic acid, Aspartame."),
    ],
)
def test_additives_named_by_functional_class(lab, market, expected):
    batch = [
        (lab.add("base", {"starch": 80, "water": 20}, name="Base"), "90 g"),
        (lab.add("sorb", {"sorbitol": 99, "water": 1}, name="Sorbitol", functional_class="sweetener"), "6 g"),
        (lab.add("cit", {"organic_acids": 99.9, "water": 0.1}, name="Citric acid", functional_class="acid"), "2 g"),
        (
            lab.add(
                "sorbic", {"organic_acids": 99.9, "water": 0.1}, name="Sorbic acid", functional_class="preservative"
            ),
            "1.5 g",
        ),
        (lab.add("asp", {"protein": 0.1}, name="Aspartame", functional_class="sweetener"), "0.5 g"),
    ]
    p = lab.formula("fc", [{"ingredient": i, "amount": g} for i, g in batch])
    assert lab.assess(p, pack=PACKS[market]).ingredient_list["text"] == expected


def test_canada_sugars_based_ingredients_grouped(lab):
    # FDR B.01.008.3(1)-(3): sugars-based ingredients in parentheses after "Sugars", which stands by their total
    # weight (here 12 g + 10 g = 22 g, ahead of the 20 g oats), each in lower case, heaviest first.
    batch = [
        (lab.add("flour", {"starch": 70, "water": 30}, name="Wheat flour"), "58 g"),
        (lab.add("oats", {"starch": 60, "water": 40}, name="Oats"), "20 g"),
        (lab.add("syrup", {"sugars": 80, "water": 20}, name="Glucose syrup", kinds=["sugar"]), "12 g"),
        (lab.add("sug", {"sugars": 100, "added_sugars": 100}, name="Sugar", kinds=["sugar"]), "10 g"),
    ]
    p = lab.formula("sg", [{"ingredient": i, "amount": g} for i, g in batch])
    text = lab.assess(p, pack=PACKS["ca"]).ingredient_list["text"]
    assert text == "Ingredients: Wheat flour, Sugars (glucose syrup, sugar), Oats."


# ------------------------------------------------------------------ 21 CFR 101.9, eCFR text as of 2026-08-27
# (read in full in the copy at GitHub mccallar/cfr-mcp, tests/fixtures/section_21_101_9.xml)


def test_us_other_vitamins_follow_the_rdi_table_order():
    # 21 CFR 101.9(c)(8)(ii)(B): additional vitamins and minerals "shall be listed in the order established in
    # paragraph (c)(8)(iv)": vitamin A, vitamin C, vitamin E, vitamin K, thiamin, riboflavin, niacin, ...
    order = [r.nutrient for r in PACKS["us"].rows]
    after_potassium = order[order.index("potassium") + 1 :]
    assert after_potassium[:7] == [
        "vitamin_a",
        "vitamin_c",
        "vitamin_e",
        "vitamin_k",
        "thiamin",
        "riboflavin",
        "niacin",
    ]


def test_us_footnote_is_the_wording_of_the_rule():
    # 21 CFR 101.9(d)(9): "The footnote shall state: '*The % Daily Value tells you how much a nutrient in a
    # serving of food contributes to a daily diet. 2,000 calories a day is used for general nutrition advice.'"
    (note,) = [f for f in PACKS["us"].panel.footnotes if f.when == "percent_shown"]
    assert note.text == (
        "*The % Daily Value tells you how much a nutrient in a serving of food contributes to a daily diet. "
        "2,000 calories a day is used for general nutrition advice."
    )


def test_us_sugar_alcohol_not_held_to_the_class_ii_minimum(lab):
    # 21 CFR 101.9(g)(4)(ii): the 80 % minimum covers a vitamin, mineral, protein, total carbohydrate,
    # polyunsaturated or monounsaturated fat, or dietary fiber; sugar alcohols appear only in (g)(6) (a
    # reasonable excess is acceptable) - an analysed sugar alcohol far below the label is not judged.
    from labelcalc.lab.certificates import LabFile
    from labelcalc.lab.verify import NOT_JUDGED, verify

    us = PACKS["us"]
    base = lab.add("base", {"starch": 60, "water": 30})
    sorb = lab.add("sorb", {"sorbitol": 99, "water": 1}, kinds=["polyol"])
    p = lab.formula(
        "sa", [{"ingredient": base, "amount": "90 g"}, {"ingredient": sorb, "amount": "10 g"}], serving="100 g"
    )
    lib = lab.library()
    (c,) = compose(load_formula(p, lib), lib)
    cert = LabFile.model_validate(
        {
            "certificate": {"product_id": "sa"},
            "results": [
                {"analyte": "polyols", "value": 2.0, "unit": "g"},
                {"analyte": "starch", "value": 40.0, "unit": "g"},
            ],
        }
    )
    rows = {r.nutrient: r for r in verify(c, declare(c, us), cert, margin_percent=0).rows}
    assert rows["sugar_alcohol"].verdict == NOT_JUDGED
    assert rows["sugar_alcohol"].notes == ["no compliance rule in the pack covers this row"]
    # starch-based total carbohydrate stays a Class II nutrient in the pack's rule, (g)(4)(ii)
    class_ii = next(r for r in us.compliance.rules if r.id == "class_ii_naturally_occurring")
    assert "total_carbohydrate" in class_ii.nutrients and "sugar_alcohol" not in class_ii.nutrients


def test_us_panel_type_meets_the_minimum_sizes():
    # 21 CFR 101.9(d)(1)(iii): the nutrient lines of (d)(7) and (d)(8) no smaller than 8 point; "Calories" no
    # smaller than 16 point and its figure no smaller than 22 point (the large calories line draws both).
    lay = PACKS["us"].panel.layout
    assert lay.body_size_pt >= 8
    assert lay.energy_large and lay.body_size_pt * lay.energy_size_factor >= 22


# ------------------------------------------------------------------ ANZ Food Standards Code, as in force 29 Oct 2024
# (read in FSANZ's Food Standards Code compilation of March 2025, text-extracted in GitHub
# jaisurya14/FSANZ-Regulatory-Assistant, data/processed/chunks.json)

ANZ_LIQUID = {"form": "liquid", "density_g_per_ml": 1.0}


@pytest.fixture
def anz(tmp_path):
    return Lab(tmp_path, PACKS["anz"])


@pytest.mark.parametrize(
    "claim_id, sugars, extra, expected",
    [
        # Schedule 4, S4—3, sugar or sugars, 'no added' (c): no more sugars than 10 g/100 g for solid food ...
        ("no_added_sugar", 10, None, ELIGIBLE),
        ("no_added_sugar", 10.1, None, NOT_ELIGIBLE),
        # ... or 7.5 g/100 mL for liquid food
        ("no_added_sugar_liquid", 7.5, ANZ_LIQUID, ELIGIBLE),
        ("no_added_sugar_liquid", 7.6, ANZ_LIQUID, NOT_ELIGIBLE),
    ],
)
def test_anz_no_added_sugar_caps_total_sugars(anz, claim_id, sugars, extra, expected):
    # sugars naturally present (no ingredient added as a sugar): only condition (c) can fail
    p = one(anz, {"sugars": sugars, "starch": 50, "water": 40}, fid="nas", extra=extra)
    assert verdict(anz.assess(p), claim_id) == expected


@pytest.mark.parametrize("trans, expected", [(0, ELIGIBLE), (0.2, NOT_ELIGIBLE)])
def test_anz_saturated_fat_free_needs_no_detectable_trans(anz, trans, expected):
    # Schedule 4, S4—3, saturated fatty acids, 'free': (a) no detectable saturated fatty acids and (b) no
    # detectable trans fatty acids
    p = one(anz, {"fat": 1, "trans_fa": trans, "saturated_fa": 0, "starch": 60}, fid="sff")
    assert verdict(anz.assess(p), "saturated_fat_free") == expected


def test_anz_low_sodium_is_per_100_ml_for_liquids():
    # Schedule 4, S4—3, salt or sodium, 'low': 120 mg/100 mL for liquid food or 120 mg/100 g for solid food
    (cond,) = next(c for c in PACKS["anz"].claims if c.id == "low_sodium").conditions
    assert (cond.basis, cond.value) == ("per_100g_or_100ml", 120)


def _shown(lab, per100, claims):
    lib_path = one(lab, per100, fid="row", claims=claims)
    lib = lab.library()
    (c,) = compose(load_formula(lib_path, lib), lib)
    return {r.nutrient for r in declare(c, PACKS["anz"]).shown_rows}


def test_anz_sodium_claim_declares_potassium(anz):
    # Std 1.2.8—6(12): a claim about salt or sodium - the panel must declare the average quantity of potassium
    assert "potassium" in _shown(anz, {"starch": 60, "sodium": 50, "potassium": 200}, ["low_sodium"])
    assert "potassium" not in _shown(anz, {"starch": 60, "sodium": 50, "potassium": 200}, [])


def test_anz_sugar_claim_declares_dietary_fibre(anz):
    # Std 1.2.8—6(5): a claim about sugars or any other carbohydrate - the panel must declare the presence or
    # absence of dietary fibre
    assert "fibre" in _shown(anz, {"starch": 60, "sugars": 2, "fibre_insoluble": 3}, ["low_sugar"])
    assert "fibre" not in _shown(anz, {"starch": 60, "sugars": 2, "fibre_insoluble": 3}, [])


def test_anz_only_schedule_7_class_names(anz):
    # FSANZ Std 1.2.4—7(1): the class name must be one of Schedule 7 (S7—2), otherwise the substance is listed by
    # its Schedule 8 name alone; "sequestrant" is not a Schedule 7 class, "anticaking agent" is one word
    batch = [
        (anz.add("base", {"starch": 80, "water": 20}, name="Base"), "97 g"),
        (
            anz.add("edta", {"sodium": 10, "water": 1}, name="Calcium disodium EDTA", functional_class="sequestrant"),
            "1 g",
        ),
        (anz.add("sil", {"ash": 99, "water": 1}, name="Silicon dioxide", functional_class="anti_caking_agent"), "2 g"),
    ]
    p = anz.formula("s7", [{"ingredient": i, "amount": g} for i, g in batch])
    assert anz.assess(p).ingredient_list["text"] == (
        "Ingredients: Base, Anticaking agent (Silicon dioxide), Calcium disodium EDTA."
    )
