"""US nutrient content claims, required statements, allergens and ingredient list (rules/markets/us_21_cfr_101.yaml).

Every claim is tested at, just inside and just outside its limits on tiny one-ingredient formulas, with the
product category chosen so that the basis under test is the one that decides:

* ``bars_grain`` (RACC 40 g, not small): per RACC decides, the per-50 g condition does not apply;
* ``snacks`` (RACC 30 g, small): the per-50 g condition of 101.13(h)(1) / 101.60-101.62 applies;
* a labelled serving larger than the RACC tests the "per labelled serving" half of the "free" claims.

Sources named beside each case: 21 CFR 101.13, 101.54, 101.56, 101.60, 101.61, 101.62 (as read in FDA's Food
Labeling Guide, Appendix A and chapter 6, Oct 2009, and secondary reproductions of FDA's table — see the pack's
comments for the confidence of each value), 21 CFR 172.804, 172.867, 180.25, 184.1835, 101.100(a)(4), FD&C Act
201(qq) and 403(w). Values marked "from memory — verify" in the pack are marked so beside the case.
"""

from __future__ import annotations

import claimkit
import pytest
from claimkit import Lab, statement  # noqa: F401

from labelcalc.labelling.model import CANNOT_TELL, ELIGIBLE, NOT_ELIGIBLE
from labelcalc.labelling.rulepack import load_packs

US = load_packs()["us"]


@pytest.fixture
def lab(tmp_path):
    return Lab(tmp_path, US)


def one(lab, per100, *, category="bars_grain", serving="40 g", **kw):
    """A one-ingredient product; US defaults: grain-based bar (RACC 40 g, not small), 40 g serving."""
    return claimkit.one(lab, per100, category=category, serving=serving, **kw)


verdict = claimkit.claim  # here the whole verdict object is compared (its .verdict, .failed, .texts ...)


def sugars_for_kcal(kcal_per_100g: float) -> dict:
    """A sugar-and-water food with the given calories per 100 g (4 kcal/g, 21 CFR 101.9(c)(1)(i)(C))."""
    return {"sugars": kcal_per_100g / 4}


# ------------------------------------------------------------------ calories, 21 CFR 101.60(b)


@pytest.mark.parametrize(
    "kcal_per_racc, expected",
    [
        (4.99, ELIGIBLE),  # just inside: less than 5 kcal per RACC, 101.60(b)(1)(i)
        (5.0, NOT_ELIGIBLE),  # at the limit: "less than 5" excludes 5
        (5.01, NOT_ELIGIBLE),  # just outside
    ],
)
def test_calorie_free_per_racc(lab, kcal_per_racc, expected):
    p = one(lab, sugars_for_kcal(kcal_per_racc / 0.4))  # RACC 40 g, serving 40 g
    assert verdict(lab.assess(p), "calorie_free").verdict == expected


def test_calorie_free_fails_on_labelled_serving(lab):
    # 101.60(b)(1)(i): per RACC AND per labelled serving. 3 kcal per RACC (40 g), 6 kcal per 80 g serving.
    p = one(lab, sugars_for_kcal(7.5), serving="80 g")
    v = verdict(lab.assess(p), "calorie_free")
    assert v.verdict == NOT_ELIGIBLE
    assert any("per serving" in f for f in v.failed) and not any("per reference amount" in f for f in v.failed)


@pytest.mark.parametrize(
    "kcal_per_racc, expected",
    [
        (39.99, ELIGIBLE),
        (40.0, ELIGIBLE),
        (40.01, NOT_ELIGIBLE),  # 40 kcal or less per RACC, 101.60(b)(2)(i)(A)
    ],
)
def test_low_calorie_per_racc(lab, kcal_per_racc, expected):
    p = one(lab, sugars_for_kcal(kcal_per_racc / 0.4))
    assert verdict(lab.assess(p), "low_calorie").verdict == expected


@pytest.mark.parametrize(
    "kcal_per_50g, expected",
    [
        (39.99, ELIGIBLE),
        (40.0, ELIGIBLE),
        (40.01, NOT_ELIGIBLE),  # small RACC: also per 50 g, 101.60(b)(2)(i)(B)
    ],
)
def test_low_calorie_per_50g_small_racc(lab, kcal_per_50g, expected):
    # snacks: RACC 30 g (small); per RACC = 0.6 x the per-50 g figure, always within 40
    p = one(lab, sugars_for_kcal(kcal_per_50g * 2), category="snacks", serving="30 g")
    assert verdict(lab.assess(p), "low_calorie").verdict == expected


def test_low_calorie_per_50g_only_for_small_racc(lab):
    # 100 kcal/100 g: 40 kcal per 40 g RACC (not small) -> eligible; 30 kcal per 30 g snack RACC but 50 kcal per 50 g
    bar = one(lab, sugars_for_kcal(100), fid="bar")
    snack = one(lab, sugars_for_kcal(100), category="snacks", serving="30 g", fid="snack")
    assert verdict(lab.assess(bar), "low_calorie").verdict == ELIGIBLE
    v = verdict(lab.assess(snack), "low_calorie")
    assert v.verdict == NOT_ELIGIBLE and any("per 50g" in f for f in v.failed)


@pytest.mark.parametrize(
    "reduction, expected",
    [
        (25.0, ELIGIBLE),
        (25.1, ELIGIBLE),
        (24.9, NOT_ELIGIBLE),  # at least 25 % fewer per RACC, 101.60(b)(4)(i)
    ],
)
def test_reduced_calorie(lab, reduction, expected):
    ref = one(lab, sugars_for_kcal(400), fid="ref")  # 160 kcal per RACC
    p = one(lab, sugars_for_kcal(400 * (1 - reduction / 100)), fid="p")
    assert verdict(lab.assess(p, ref), "reduced_calorie").verdict == expected


def test_reduced_calorie_without_reference_cannot_tell(lab):
    p = one(lab, sugars_for_kcal(200))
    v = verdict(lab.assess(p), "reduced_calorie")
    assert v.verdict == CANNOT_TELL
    assert any("reference formula" in m for m in v.missing)


def test_reduced_calorie_reference_may_not_be_low_calorie(lab):
    # 101.60(b)(4)(ii): the reference food may not itself be "low calorie" (here 40 kcal per RACC)
    ref = one(lab, sugars_for_kcal(100), fid="ref")
    p = one(lab, sugars_for_kcal(50), fid="p")
    v = verdict(lab.assess(p, ref), "reduced_calorie")
    assert v.verdict == NOT_ELIGIBLE and any("low_calorie" in f for f in v.failed)


# ------------------------------------------------------------------ fat, 21 CFR 101.62(b)


@pytest.mark.parametrize(
    "fat_per_racc, expected",
    [
        (0.49, ELIGIBLE),
        (0.5, NOT_ELIGIBLE),
        (0.51, NOT_ELIGIBLE),  # less than 0.5 g per RACC and serving, 101.62(b)(1)(i)
    ],
)
def test_fat_free(lab, fat_per_racc, expected):
    p = one(lab, {"fat": fat_per_racc / 0.4, "sugars": 50})
    assert verdict(lab.assess(p), "fat_free").verdict == expected


def test_fat_free_notes_an_added_fat(lab):
    # 101.62(b)(1)(ii) (from memory — verify): an added fat/oil ingredient needs the "trivial amount" asterisk
    p = one(lab, {"fat": 0.5, "sugars": 50}, kinds=["oil"])
    v = verdict(lab.assess(p), "fat_free")
    assert v.verdict == ELIGIBLE and any("footnote" in n and "review" in n for n in v.notes)


@pytest.mark.parametrize(
    "fat_per_racc, expected",
    [
        (2.99, ELIGIBLE),
        (3.0, ELIGIBLE),
        (3.01, NOT_ELIGIBLE),  # 3 g or less per RACC, 101.62(b)(2)(i)(A)
    ],
)
def test_low_fat_per_racc(lab, fat_per_racc, expected):
    p = one(lab, {"fat": fat_per_racc / 0.4, "sugars": 50})
    assert verdict(lab.assess(p), "low_fat").verdict == expected


@pytest.mark.parametrize(
    "fat_per_50g, expected",
    [
        (2.99, ELIGIBLE),
        (3.0, ELIGIBLE),
        (3.01, NOT_ELIGIBLE),  # small RACC: also per 50 g, 101.62(b)(2)(i)(B)
    ],
)
def test_low_fat_per_50g_small_racc(lab, fat_per_50g, expected):
    p = one(lab, {"fat": fat_per_50g * 2, "sugars": 50}, category="snacks", serving="30 g")
    assert verdict(lab.assess(p), "low_fat").verdict == expected


@pytest.mark.parametrize(
    "ref_fat, fat, expected",
    [
        (10, 7.5, ELIGIBLE),  # exactly 25 % less fat per RACC, 101.62(b)(4)(i)
        (10, 7.51, NOT_ELIGIBLE),  # 24.9 % less
        (7, 5, NOT_ELIGIBLE),  # reference 2.8 g per RACC is itself "low fat" (101.62(b)(4), secondary)
    ],
)
def test_reduced_fat(lab, ref_fat, fat, expected):
    ref = one(lab, {"fat": ref_fat, "sugars": 50}, fid="ref")
    p = one(lab, {"fat": fat, "sugars": 50}, fid="p")
    assert verdict(lab.assess(p, ref), "reduced_fat").verdict == expected


# ------------------------------------------------------------------ saturated fat, 21 CFR 101.62(c)


@pytest.mark.parametrize(
    "sat, trans, expected",
    [
        (0.49, 0.49, ELIGIBLE),  # less than 0.5 g saturated and 0.5 g trans per RACC and serving, 101.62(c)(1)
        (0.5, 0.0, NOT_ELIGIBLE),  # saturated fat at the limit
        (0.0, 0.5, NOT_ELIGIBLE),  # trans fat at the limit (trans condition added 2003, 68 FR 41434)
        (0.51, 0.0, NOT_ELIGIBLE),
    ],
)
def test_saturated_fat_free(lab, sat, trans, expected):
    p = one(lab, {"fat": 3, "saturated_fa": sat / 0.4, "trans_fa": trans / 0.4, "sugars": 50})
    assert verdict(lab.assess(p), "saturated_fat_free").verdict == expected


@pytest.mark.parametrize(
    "sat_per_racc, kcal, expected",
    [
        (1.0, 150, ELIGIBLE),  # 1 g per RACC and exactly 15 % of calories from saturated fat, 101.62(c)(2)
        (0.99, 150, ELIGIBLE),
        (1.01, 200, NOT_ELIGIBLE),  # over 1 g per RACC
        (1.0, 149.9, NOT_ELIGIBLE),  # 15.01 % of calories from saturated fat
    ],
)
def test_low_saturated_fat(lab, sat_per_racc, kcal, expected):
    sat100 = sat_per_racc / 0.4
    sugars = (kcal - 9 * sat100) / 4  # all fat saturated: 9 kcal/g
    p = one(lab, {"fat": sat100, "saturated_fa": sat100, "sugars": sugars})
    assert verdict(lab.assess(p), "low_saturated_fat").verdict == expected


# ------------------------------------------------------------------ cholesterol, 21 CFR 101.62(d)


@pytest.mark.parametrize(
    "chol_per_racc, sat_per_racc, expected",
    [
        (1.99, 2.0, ELIGIBLE),  # less than 2 mg per RACC and serving; 2 g or less saturated fat, 101.62(d)(1)
        (2.0, 0.0, NOT_ELIGIBLE),
        (0.0, 2.01, NOT_ELIGIBLE),  # saturated fat cap of every cholesterol claim
    ],
)
def test_cholesterol_free(lab, chol_per_racc, sat_per_racc, expected):
    p = one(lab, {"fat": 6, "saturated_fa": sat_per_racc / 0.4, "cholesterol": chol_per_racc / 0.4, "sugars": 40})
    assert verdict(lab.assess(p), "cholesterol_free").verdict == expected


@pytest.mark.parametrize(
    "chol_per_50g, expected",
    [
        (19.99, ELIGIBLE),
        (20.0, ELIGIBLE),
        (20.01, NOT_ELIGIBLE),  # small RACC: 20 mg or less per RACC and per 50 g
    ],
)
def test_low_cholesterol_per_50g_small_racc(lab, chol_per_50g, expected):
    p = one(
        lab,
        {"fat": 2, "saturated_fa": 1, "cholesterol": chol_per_50g * 2, "sugars": 40},
        category="snacks",
        serving="30 g",
    )
    assert verdict(lab.assess(p), "low_cholesterol").verdict == expected


@pytest.mark.parametrize("chol_per_racc, expected", [(20.0, ELIGIBLE), (20.01, NOT_ELIGIBLE)])
def test_low_cholesterol_per_racc(lab, chol_per_racc, expected):
    p = one(lab, {"fat": 2, "saturated_fa": 1, "cholesterol": chol_per_racc / 0.4, "sugars": 40})
    assert verdict(lab.assess(p), "low_cholesterol").verdict == expected


# ------------------------------------------------------------------ sodium, 21 CFR 101.61(b)


@pytest.mark.parametrize(
    "claim_id, limit, inclusive",
    [
        ("sodium_free", 5, False),  # less than 5 mg per RACC and serving, 101.61(b)(1)(i) (text read, 2006 edition)
        ("very_low_sodium", 35, True),  # 35 mg or less, 101.61(b)(2)
        ("low_sodium", 140, True),  # 140 mg or less, 101.61(b)(4)
    ],
)
@pytest.mark.parametrize("offset", [-0.01, 0.0, 0.01])
def test_sodium_claims_per_racc(lab, claim_id, limit, inclusive, offset):
    mg = limit + offset
    p = one(lab, {"sodium": mg / 0.4, "sugars": 40})
    ok = mg < limit or (inclusive and mg == limit)
    assert verdict(lab.assess(p), claim_id).verdict == (ELIGIBLE if ok else NOT_ELIGIBLE)


@pytest.mark.parametrize("mg_per_50g, expected", [(139.9, ELIGIBLE), (140.0, ELIGIBLE), (140.1, NOT_ELIGIBLE)])
def test_low_sodium_per_50g_small_racc(lab, mg_per_50g, expected):
    p = one(lab, {"sodium": mg_per_50g * 2, "sugars": 40}, category="snacks", serving="30 g")
    assert verdict(lab.assess(p), "low_sodium").verdict == expected


def test_sodium_free_notes_added_salt(lab):
    # 101.61(b)(1)(ii): sodium chloride as an ingredient needs the "adds a trivial amount of sodium" asterisk
    p = one(lab, {"sodium": 1, "sugars": 40}, kinds=["salt"])
    v = verdict(lab.assess(p), "sodium_free")
    assert v.verdict == ELIGIBLE and v.notes


@pytest.mark.parametrize(
    "ref_na, na, expected",
    [
        (1000, 750, ELIGIBLE),  # at least 25 % less sodium per RACC, 101.61(b)(6)(i)
        (1000, 751, NOT_ELIGIBLE),
        (300, 200, NOT_ELIGIBLE),  # reference 120 mg per RACC is itself "low sodium"
    ],
)
def test_reduced_sodium(lab, ref_na, na, expected):
    ref = one(lab, {"sodium": ref_na, "sugars": 40}, fid="ref")
    p = one(lab, {"sodium": na, "sugars": 40}, fid="p")
    assert verdict(lab.assess(p, ref), "reduced_sodium").verdict == expected


# ------------------------------------------------------------------ sugars, 21 CFR 101.60(c)


@pytest.mark.parametrize("sugars_per_racc, expected", [(0.49, ELIGIBLE), (0.5, NOT_ELIGIBLE), (0.51, NOT_ELIGIBLE)])
def test_sugar_free(lab, sugars_per_racc, expected):
    # less than 0.5 g sugars per RACC and per labelled serving, 101.60(c)(1)(i)
    p = one(lab, {"sugars": sugars_per_racc / 0.4, "starch": 60})
    assert verdict(lab.assess(p), "sugar_free").verdict == expected


def test_sugar_free_carries_not_low_calorie_statement(lab):
    # 101.60(c)(1)(iii): a sugar-free food that is not low/reduced calorie carries "not a low calorie food"
    p = one(lab, {"sugars": 0, "starch": 60})  # 96 kcal per RACC: not low calorie
    v = verdict(lab.assess(p), "sugar_free")
    assert v.verdict == ELIGIBLE
    assert any(t.startswith("Not a low calorie food") for t in v.texts)


def test_sugar_free_on_low_calorie_food_needs_no_disclaimer(lab):
    p = one(lab, {"sugars": 0, "starch": 5})  # 8 kcal per RACC: low calorie
    a = lab.assess(p)
    assert verdict(a, "low_calorie").verdict == ELIGIBLE
    assert not any(t.startswith("Not a low calorie food") for t in verdict(a, "sugar_free").texts)


@pytest.mark.parametrize("ref_s, s, expected", [(20, 15, ELIGIBLE), (20, 15.01, NOT_ELIGIBLE)])
def test_reduced_sugar(lab, ref_s, s, expected):
    # at least 25 % less sugars per RACC, 101.60(c)(5)(i)
    ref = one(lab, {"sugars": ref_s, "starch": 40}, fid="ref")
    p = one(lab, {"sugars": s, "starch": 40}, fid="p")
    assert verdict(lab.assess(p, ref), "reduced_sugar").verdict == expected


# ------------------------------------------------------------------ light, 21 CFR 101.56(b)


def test_light_by_fat_halved(lab):
    # fat reduced by 50 % per RACC (allowed whatever the share of calories from fat), 101.56(b)(1)
    ref = one(lab, {"fat": 30, "sugars": 30}, fid="ref")
    p = one(lab, {"fat": 15, "sugars": 30}, fid="p")
    assert verdict(lab.assess(p, ref), "light").verdict == ELIGIBLE
    p2 = one(lab, {"fat": 15.01, "sugars": 30}, fid="p2")
    assert verdict(lab.assess(p2, ref), "light").verdict == NOT_ELIGIBLE


def test_light_by_calories_cut_one_third_low_fat_share(lab):
    # under 50 % of calories from fat: one third fewer calories suffices, 101.56(b)(2)
    ref = one(lab, {"fat": 2, "sugars": 60}, fid="ref")  # 258 kcal/100 g
    p = one(lab, {"fat": 2, "sugars": 38.5}, fid="p")  # 172 kcal: exactly -1/3; fat 10.5 % of calories
    assert verdict(lab.assess(p, ref), "light").verdict == ELIGIBLE
    p2 = one(lab, {"fat": 2, "sugars": 38.51}, fid="p2")  # just short of one third
    assert verdict(lab.assess(p2, ref), "light").verdict == NOT_ELIGIBLE


def test_light_calorie_route_closed_when_half_the_calories_are_from_fat(lab):
    # 50 % or more of calories from fat: only the fat route (-50 %) is open, 101.56(b)(1)
    ref = one(lab, {"fat": 30, "sugars": 60}, fid="ref")  # 510 kcal/100 g
    p = one(lab, {"fat": 20, "sugars": 0}, fid="p")  # 180 kcal (-65 %) but 100 % from fat, fat only -33 %
    v = verdict(lab.assess(p, ref), "light")
    assert v.verdict == NOT_ELIGIBLE and any("no alternative holds" in f for f in v.failed)


def test_light_without_reference_cannot_tell(lab):
    p = one(lab, {"fat": 10, "sugars": 40})
    assert verdict(lab.assess(p), "light").verdict == CANNOT_TELL


# ------------------------------------------------------------------ good source / high, 21 CFR 101.54


@pytest.mark.parametrize(
    "component, per_racc, good, high",
    [
        # fiber: DV 28 g -> 10 % = 2.8 g, 20 % = 5.6 g
        ("fibre_insoluble", 2.79, NOT_ELIGIBLE, NOT_ELIGIBLE),
        ("fibre_insoluble", 2.8, ELIGIBLE, NOT_ELIGIBLE),
        ("fibre_insoluble", 5.59, ELIGIBLE, NOT_ELIGIBLE),
        ("fibre_insoluble", 5.6, NOT_ELIGIBLE, ELIGIBLE),
        # vitamin D: DV 20 mcg -> 2 / 4 mcg
        ("vitamin_d", 1.99, NOT_ELIGIBLE, NOT_ELIGIBLE),
        ("vitamin_d", 2.0, ELIGIBLE, NOT_ELIGIBLE),
        ("vitamin_d", 4.0, NOT_ELIGIBLE, ELIGIBLE),
        # calcium: DV 1,300 mg -> 130 / 260 mg
        ("calcium", 129.9, NOT_ELIGIBLE, NOT_ELIGIBLE),
        ("calcium", 130, ELIGIBLE, NOT_ELIGIBLE),
        ("calcium", 259.9, ELIGIBLE, NOT_ELIGIBLE),
        ("calcium", 260, NOT_ELIGIBLE, ELIGIBLE),
        # iron: DV 18 mg -> 1.8 / 3.6 mg
        ("iron", 1.79, NOT_ELIGIBLE, NOT_ELIGIBLE),
        ("iron", 1.8, ELIGIBLE, NOT_ELIGIBLE),
        ("iron", 3.6, NOT_ELIGIBLE, ELIGIBLE),
        # potassium: DV 4,700 mg -> 470 / 940 mg
        ("potassium", 469.9, NOT_ELIGIBLE, NOT_ELIGIBLE),
        ("potassium", 470, ELIGIBLE, NOT_ELIGIBLE),
        ("potassium", 940, NOT_ELIGIBLE, ELIGIBLE),
    ],
)
def test_good_source_and_high(lab, component, per_racc, good, high):
    # "good source" 10 to 19 % of the DV per RACC (101.54(c)); "high" 20 % or more per RACC (101.54(b))
    name = {
        "fibre_insoluble": "fiber",
        "vitamin_d": "vitamin_d",
        "calcium": "calcium",
        "iron": "iron",
        "potassium": "potassium",
    }[component]
    p = one(lab, {component: per_racc / 0.4, "sugars": 30})
    a = lab.assess(p)
    assert verdict(a, f"good_source_{name}").verdict == good
    assert verdict(a, f"high_{name}").verdict == high


# ------------------------------------------------------------------ 101.13(h) disclosure statement


@pytest.mark.parametrize(
    "per100, fires",
    [
        ({"sodium": 960}, False),  # 480 mg per 50 g: not more than 480
        ({"sodium": 962}, True),  # 481 mg per 50 g (288.6 mg per 30 g RACC): small RACC, per 50 g decides
        ({"fat": 26, "saturated_fa": 4}, False),  # 13 g fat per 50 g: not more than 13
        ({"fat": 26.02, "saturated_fa": 4}, True),  # 13.01 g fat per 50 g
        ({"fat": 10, "saturated_fa": 8.02}, True),  # 4.01 g saturated fat per 50 g
        ({"cholesterol": 120.2}, True),  # 60.1 mg cholesterol per 50 g
    ],
)
def test_disclosure_statement_small_racc(lab, per100, fires):
    # 101.13(h)(1): with a claim, more than 13 g fat, 4 g saturated fat, 60 mg cholesterol or 480 mg sodium per RACC,
    # per labelled serving or per 50 g (RACC 30 g or less)
    body = {"sugars": 30, **per100}
    p = one(lab, body, category="snacks", serving="30 g", claims=["low_calorie"])
    st = statement(lab.assess(p), "disclosure_statement")
    assert (st is not None) == fires
    if fires:
        assert st.text == "See nutrition information for ___ content"


def test_disclosure_statement_per_racc_not_small(lab):
    # RACC 40 g: 481 mg sodium per RACC fires (per RACC condition of 101.13(h)(1))
    p = one(lab, {"sodium": 1202.5, "sugars": 30}, claims=["low_calorie"])
    st = statement(lab.assess(p), "disclosure_statement")
    assert st is not None and any("sodium per reference amount" in f for f in st.figures)


def test_disclosure_statement_needs_a_claim(lab):
    # over every level, but no claim is made and none is eligible -> no disclosure statement
    p = one(
        lab,
        {"fat": 30, "saturated_fa": 30, "cholesterol": 500, "sodium": 2000, "sugars": 30},
        category="snacks",
        serving="30 g",
    )
    a = lab.assess(p)
    assert not [c for c in a.claims if c.verdict == ELIGIBLE or c.intended]
    assert statement(a, "disclosure_statement") is None


def test_disclosure_statement_not_for_low_levels_large_racc(lab):
    p = one(lab, {"sodium": 100, "sugars": 30}, claims=["low_sodium"])  # RACC 40 g, 40 mg sodium per RACC
    assert statement(lab.assess(p), "disclosure_statement") is None


# ------------------------------------------------------------------ sweetener and polyol statements


def test_aspartame_statement_through_a_sub_formula(lab):
    # 21 CFR 172.804: "PHENYLKETONURICS: CONTAINS PHENYLALANINE" on any food containing aspartame
    lab.add("sweet", {"sugars": 0}, name="Aspartame", kinds=["sweetener", "additive"], substance="aspartame")
    lab.add("base", {"starch": 60}, name="Starch")
    lab.formula(
        "premix",
        [{"ingredient": "base", "amount": "99 g"}, {"ingredient": "sweet", "amount": "1 g"}],
        sub=True,
        label_name="Sweetener premix",
    )
    p = lab.formula("p", [{"ingredient": "base", "amount": "90 g"}, {"subformula": "premix", "amount": "10 g"}])
    st = statement(lab.assess(p), "aspartame_phenylketonurics")
    assert st is not None and st.text == "PHENYLKETONURICS: CONTAINS PHENYLALANINE" and st.caution


def test_other_intense_sweetener_needs_no_statement(lab):
    p = one(lab, {"sugars": 0, "starch": 50}, kinds=["sweetener", "additive"], substance="acesulfame_k")
    a = lab.assess(p)
    assert statement(a, "aspartame_phenylketonurics") is None


@pytest.mark.parametrize("sorbitol, fires", [(0.0, False), (0.01, True), (25.0, True)])
def test_sorbitol_statement(lab, sorbitol, fires):
    # 21 CFR 184.1835(e) (50 g a day; from memory — verify): flagged whenever sorbitol is present, with the
    # number of servings that reach 50 g
    p = one(lab, {"sorbitol": sorbitol, "starch": 50}, kinds=["polyol", "sweetener", "additive"])
    st = statement(lab.assess(p), "sorbitol_laxative")
    assert (st is not None) == fires
    if sorbitol == 25.0:  # 10 g per 40 g serving -> 5 servings reach 50 g
        assert any("about 5.0 servings" in f for f in st.figures)


def test_mannitol_statement_daily_intake(lab):
    # 21 CFR 180.25(e): 20 g a day; 8 g per 40 g serving -> 2.5 servings
    p = one(lab, {"mannitol": 20, "starch": 50}, kinds=["polyol", "sweetener", "additive"])
    st = statement(lab.assess(p), "mannitol_laxative")
    assert st is not None and any("about 2.5 servings" in f for f in st.figures)


def test_no_laxative_statement_for_maltitol(lab):
    # no codified laxative statement for other polyols (from memory — verify)
    p = one(lab, {"maltitol": 30, "starch": 30}, kinds=["polyol", "sweetener", "additive"])
    a = lab.assess(p)
    assert statement(a, "sorbitol_laxative") is None and statement(a, "mannitol_laxative") is None


# ------------------------------------------------------------------ sucrose polyester, 21 CFR 172.867(d)-(e)


def _spe(lab, vit_scale: float):
    # 10 g sucrose polyester per 100 g needs 19 mg vitamin E, 510 ug RAE vitamin A, 3 ug vitamin D, 80 ug vitamin K per 100 g
    lab.add("spe", {"nonabsorbed_lipid": 100}, name="Sucrose polyester", kinds=["fat"], substance="sucrose_polyester")
    lab.add("base", {"starch": 70, "protein": 8}, name="Potatoes")
    lab.add(
        "vits",
        {
            "vitamin_e": 1900 * vit_scale,
            "vitamin_a": 51000 * vit_scale,
            "vitamin_d": 300 * vit_scale,
            "vitamin_k": 8000 * vit_scale,
            "starch": 50,
        },
        name="Vitamin premix",
        kinds=["fortificant"],
    )
    return lab.formula(
        "p",
        [
            {"ingredient": "spe", "amount": "10 g"},
            {"ingredient": "vits", "amount": "1 g"},
            {"ingredient": "base", "amount": "89 g"},
        ],
        category="snacks",
        serving="30 g",
    )


def test_spe_vitamins_met(lab):
    a = lab.assess(_spe(lab, 1.0))
    st = statement(a, "spe_vitamins")
    assert st is not None and st.status == "required"
    assert statement(a, "spe_dietarily_insignificant").text == "*Dietarily insignificant"


def test_spe_vitamins_short(lab):
    st = statement(lab.assess(_spe(lab, 0.9)), "spe_vitamins")
    assert st.status == "review" and any("SHORT" in f for f in st.figures)


# ------------------------------------------------------------------ sulfites, 21 CFR 101.100(a)(4) (from memory — verify)


@pytest.mark.parametrize("so2_mg_per_100g, fires", [(0.99, False), (1.0, True), (1.01, True)])
def test_sulfite_declaration_at_10_ppm(lab, so2_mg_per_100g, fires):
    p = one(lab, {"sulphites": so2_mg_per_100g, "sugars": 40})
    assert (statement(lab.assess(p), "sulfites_declaration") is not None) == fires


# ------------------------------------------------------------------ allergens, FD&C Act 201(qq), 403(w)


def test_allergen_through_a_sub_formula(lab):
    lab.add("whey", {"protein": 12, "sugars": 70}, name="Whey powder", allergens=["milk"])
    lab.add("base", {"starch": 70}, name="Corn flour")
    lab.formula(
        "seasoning",
        [{"ingredient": "whey", "amount": "50 g"}, {"ingredient": "base", "amount": "50 g"}],
        sub=True,
        label_name="Seasoning",
    )
    p = lab.formula("p", [{"ingredient": "base", "amount": "95 g"}, {"subformula": "seasoning", "amount": "5 g"}])
    alg = lab.assess(p).allergens
    assert alg["declared"] == ["Milk"]
    assert alg["statement"] == "Contains: Milk."
    assert alg["summary"] == "optional" and alg["emphasis"] == "parentheses"  # 403(w)(1)(A) or (B)
    assert "whey" in alg["sources"]["Milk"]


def test_nine_major_allergens_and_no_others(lab):
    keys = [
        "milk",
        "egg",
        "fish",
        "crustaceans",
        "tree_nuts",
        "peanuts",
        "wheat",
        "soy",
        "sesame",
        "molluscs",
        "mustard",
        "celery",
        "lupin",
        "oats",
        "barley",
        "rye",
    ]
    lab.add("mix", {"starch": 70}, name="Mix", allergens=keys)
    p = lab.formula("p", [{"ingredient": "mix", "amount": "100 g"}])
    alg = lab.assess(p).allergens
    assert alg["declared"] == [
        "Milk",
        "Egg",
        "Fish",
        "Crustacean shellfish",
        "Tree nuts",
        "Peanuts",
        "Wheat",
        "Soybeans",
        "Sesame",
    ]
    assert US.allergens.entries["tree_nuts"].name_species  # 403(w)(2): the type of nut
    assert US.allergens.entries["fish"].name_species  # ... species of fish
    assert US.allergens.entries["crustacean_shellfish"].name_species


def test_allergens_unknown_flagged(lab):
    lab.add("flav", {"sugars": 50}, name="Natural flavoring", omit_allergens=True)
    lab.add("base", {"starch": 70}, name="Corn flour")
    p = lab.formula("p", [{"ingredient": "base", "amount": "99 g"}, {"ingredient": "flav", "amount": "1 g"}])
    a = lab.assess(p)
    assert a.allergens["unknown_ingredients"] == ["flav"]
    assert any("allergens unknown" in r for r in a.reviews)


# ------------------------------------------------------------------ ingredient list, 21 CFR 101.4(a)(1)


def test_ingredient_list_descending_weight_with_water_as_used(lab):
    lab.add("flour", {"starch": 70, "protein": 10}, name="Wheat flour", allergens=["wheat"])
    lab.add("water", {}, name="Water", kinds=["water"])
    lab.add("sugar", {"sugars": 100}, name="Sugar", kinds=["sugar"])
    p = lab.formula(
        "p",
        [
            {"ingredient": "sugar", "amount": "10 g"},
            {"ingredient": "water", "amount": "30 g"},
            {"ingredient": "flour", "amount": "60 g"},
        ],
    )
    il = lab.assess(p).ingredient_list
    names = [it["name"] for it in il["items"]]
    assert names == ["Wheat flour", "Water", "Sugar"]
    assert il["heading"] == "Ingredients:" and il["quid"] == []
