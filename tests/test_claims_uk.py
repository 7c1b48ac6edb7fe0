"""UK (GB) pack (rules/markets/uk_retained_1169_2011.yaml): claims, statements, allergens, ingredient list and
the voluntary front-of-pack colour coding.

The claims, statements, allergen and ingredient-list rules are those of retained Reg. (EC) No 1924/2006 (Annex),
retained Reg. (EU) No 1169/2011 (Annex II, Annex III, Art. 18, 21, 22, Annexes VII and VIII) and retained
Reg. (EU) 2015/2283; no GB divergence from the EU text was found, so every EU check of tests/test_claims_eu.py
is run again here against the UK pack (same cases, same sources named beside them).

Front of pack: Department of Health / FSA "Guide to creating a front of pack (FoP) nutrition label for
pre-packed products sold through retail outlets" (June 2013, updated November 2016), colour criteria per 100 g
of food (fat 3.0/17.5 g, saturates 1.5/5.0 g, total sugars 5.0/22.5 g, salt 0.3/1.5 g; red per portion above
21/6.0/27/1.8 g for portions over 100 g) and per 100 ml of drinks (fat 1.5/8.75 g, saturates 0.75/2.5 g, sugars
2.5/11.25 g, salt 0.3/0.75 g). Per-100 g food bands, the food portion sugars value and the drinks sugars row were
read in secondary sources; the rest are from memory — verify (they agree with 30 % / 15 % of the reference
intakes and with the 'low' claim limits for liquids: derived).
"""

from __future__ import annotations

from pathlib import Path

import pytest
import test_claims_eu as eu
from test_claims_eu import *  # noqa: F401,F403  (every EU check, run with the UK pack below)
from test_claims_eu import Lab

from labelcalc.labelling.rulepack import load_pack_file

ROOT = Path(__file__).resolve().parent.parent
UK_FILE = ROOT / "labelcalc" / "rules" / "markets" / "uk_retained_1169_2011.yaml"


@pytest.fixture(scope="module")
def pack():
    return load_pack_file(UK_FILE)


@pytest.fixture
def lab(tmp_path, pack):
    return Lab(tmp_path, pack)


def test_pack_is_the_uk_pack(pack):
    assert pack.market == "uk"
    assert all("retained" in c.citation for c in pack.claims)
    assert all("retained" in s.citation for s in pack.statements)


def test_same_claim_conditions_as_eu(pack):
    """No GB divergence found: the same claims with the same conditions as the EU pack."""
    eu_pack = load_pack_file(eu.PACK_FILE)
    dump = lambda p: [
        (
            c.id,
            c.kind,
            c.applies_to,
            [x.model_dump() for x in c.conditions],  # noqa: E731
            [[x.model_dump() for x in g] for g in c.alternatives],
            c.no_ingredient_kinds,
        )
        for c in p.claims
    ]
    assert dump(pack) == dump(eu_pack)
    trig = lambda p: [(s.id, s.text, [t.model_dump() for t in s.triggers]) for s in p.statements]  # noqa: E731
    assert [x[0] for x in trig(pack)] == [x[0] for x in trig(eu_pack)]
    assert [x[2] for x in trig(pack)] == [x[2] for x in trig(eu_pack)]
    assert {k: e.model_dump() for k, e in pack.allergens.entries.items()} == {
        k: e.model_dump() for k, e in eu_pack.allergens.entries.items()
    }
    assert pack.ingredient_list.model_dump(
        exclude={"citation", "confidence", "quid", "functional_classes_citation"}
    ) == eu_pack.ingredient_list.model_dump(exclude={"citation", "confidence", "quid", "functional_classes_citation"})
    assert not eu_pack.front_of_pack  # the colour coding is a UK scheme only


# ------------------------------------------------------------------------------ front of pack


def colours(a):
    (fop,) = a.front_of_pack
    return {n: v["colour"].split()[0] for n, v in fop["verdicts"].items()}


# DH/FSA FoP guide, criteria per 100 g of food: green <= low, amber above low up to high, red above high.
# (component values per 100 g -> nutrient, expected colour). Salt = sodium (mg) x 2.5 / 1000.
FOOD = [
    ({"fat": 3.0}, "fat", "green"),
    ({"fat": 3.01}, "fat", "amber"),
    ({"fat": 17.5}, "fat", "amber"),
    ({"fat": 17.51}, "fat", "red"),
    ({"fat": 1.5, "saturated_fa": 1.5}, "saturates", "green"),
    ({"fat": 1.51, "saturated_fa": 1.51}, "saturates", "amber"),
    ({"fat": 5.0, "saturated_fa": 5.0}, "saturates", "amber"),
    ({"fat": 5.01, "saturated_fa": 5.01}, "saturates", "red"),
    ({"sugars": 5.0}, "sugars", "green"),
    ({"sugars": 5.01}, "sugars", "amber"),
    ({"sugars": 22.5}, "sugars", "amber"),
    ({"sugars": 22.51}, "sugars", "red"),
    ({"sodium": 120, "ash": 1}, "salt", "green"),
    ({"sodium": 120.4, "ash": 1}, "salt", "amber"),  # 0.3 g / 0.301 g salt
    ({"sodium": 600, "ash": 2}, "salt", "amber"),
    ({"sodium": 600.4, "ash": 2}, "salt", "red"),  # 1.5 g / 1.501 g salt
]


@pytest.mark.parametrize("per_100g, nutrient, colour", FOOD)
def test_fop_food_bands(lab, per_100g, nutrient, colour):
    assert colours(lab.one({"starch": 50, **per_100g}))[nutrient] == colour


# Per portion (portions above 100 g): red above 21 g fat, 6.0 g saturates, 27 g sugars, 1.8 g salt.
@pytest.mark.parametrize(
    "per_100g, serving, nutrient, colour",
    [
        ({"fat": 14}, 150, "fat", "amber"),  # 21.0 g per portion: not above 21 g
        ({"fat": 14.01}, 150, "fat", "red"),  # 21.015 g > 21
        ({"fat": 13}, 150, "fat", "amber"),  # 19.5 g
        ({"fat": 17}, 100, "fat", "amber"),  # portion not above 100 g: per-100 g colour only
        ({"fat": 4.1, "saturated_fa": 4.1}, 150, "saturates", "red"),  # 6.15 g > 6.0
        ({"fat": 4.0, "saturated_fa": 4.0}, 150, "saturates", "amber"),  # 6.0 g: not above
        ({"sugars": 18.1}, 150, "sugars", "red"),  # 27.15 g > 27
        ({"sugars": 18.0}, 150, "sugars", "amber"),  # 27.0 g
        ({"sodium": 481, "ash": 2}, 150, "salt", "red"),  # 1.804 g > 1.8
        ({"sodium": 480, "ash": 2}, 150, "salt", "amber"),  # 1.8 g
    ],
)
def test_fop_food_portion_rule(lab, per_100g, serving, nutrient, colour):
    assert colours(lab.one({"starch": 50, **per_100g}, serving=serving))[nutrient] == colour


# Drinks, per 100 ml (density 1 g/ml so per 100 g = per 100 ml): half the food values, except green salt 0.3 g.
DRINKS = [
    ({"fat": 1.5}, "fat", "green"),
    ({"fat": 1.51}, "fat", "amber"),
    ({"fat": 8.75}, "fat", "amber"),
    ({"fat": 8.76}, "fat", "red"),
    ({"fat": 0.75, "saturated_fa": 0.75}, "saturates", "green"),
    ({"fat": 0.76, "saturated_fa": 0.76}, "saturates", "amber"),
    ({"fat": 2.5, "saturated_fa": 2.5}, "saturates", "amber"),
    ({"fat": 2.51, "saturated_fa": 2.51}, "saturates", "red"),
    ({"sugars": 2.5}, "sugars", "green"),
    ({"sugars": 2.51}, "sugars", "amber"),
    ({"sugars": 11.25}, "sugars", "amber"),
    ({"sugars": 11.26}, "sugars", "red"),
    ({"sodium": 120, "ash": 1}, "salt", "green"),
    ({"sodium": 120.4, "ash": 1}, "salt", "amber"),
    ({"sodium": 300, "ash": 1}, "salt", "amber"),
    ({"sodium": 300.4, "ash": 1}, "salt", "red"),  # 0.75 g / 0.751 g
]


@pytest.mark.parametrize("per_100g, nutrient, colour", DRINKS)
def test_fop_drinks_bands(lab, per_100g, nutrient, colour):
    assert colours(lab.one({"water": 80, **per_100g}, form="liquid", density=1.0))[nutrient] == colour


def test_fop_energy_not_coloured(lab):
    assert set(colours(lab.one({"sugars": 10}))) == {"fat", "saturates", "sugars", "salt"}


def test_fop_demo_kettle_crisps(pack):
    # demo crisps: about 30 g fat per 100 g (red), salt about 1.4 g (amber), sugars low (green)
    from labelcalc.formulation.composition import compose
    from labelcalc.intake.formula import load_formula
    from labelcalc.intake.library import load_library
    from labelcalc.labelling.assess import assess
    from labelcalc.labelling.declare import declare

    lib = load_library(eu.DEMO / "ingredients")
    for c in compose(load_formula(eu.DEMO / "hl_kettle_sea_salt.yaml", lib), lib):
        got = colours(assess(c, pack, declare(c, pack)))
        assert got["fat"] == "red" and got["sugars"] == "green"


def test_imported_eu_checks_run_with_the_uk_pack(lab):
    assert lab.pack.market == "uk"
    a = lab.one({"nonabsorbed_lipid": 20, "starch": 50})
    (s,) = [s for s in a.statements if s.statement == "nonabsorbed_lipid_not_authorised"]
    assert "GB market" in s.text and "retained Reg. (EU) 2015/2283" in s.text
