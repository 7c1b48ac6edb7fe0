"""Mass balance through batch lines and processing steps, checked by hand arithmetic."""

from __future__ import annotations

import math

import numpy as np
import pytest

from labelcalc.errors import InputError
from labelcalc.formulation.composition import COL, compose
from labelcalc.intake.formula import load_formula


def one(path, lib):
    (c,) = compose(load_formula(path, lib), lib)
    return c


def test_plain_mix_per_100g(write, lib):
    p = write(
        "mix.yaml",
        """
        product: {id: mix, name: Mix}
        batch:
          - {ingredient: flour, amount: 600 g}
          - {ingredient: sugar, amount: 0.3 kg}
          - {ingredient: water, amount: 10 %}
    """,
    )
    c = one(p, lib)
    # batch = 900 g / 0.9 = 1000 g; water 100 g + 14 % of 600 g = 184 g
    assert c.batch_grams == pytest.approx(1000)
    assert c.value("water") == pytest.approx(18.4)
    assert c.value("sugars") == pytest.approx(0.6 * 1 + 30)
    assert c.value("added_sugars") == pytest.approx(30)
    assert c.value("protein") == pytest.approx(6.0)


def test_moisture_loss_takes_water_only(write, lib):
    p = write(
        "baked.yaml",
        """
        product: {id: baked, name: Baked}
        batch:
          - {ingredient: flour, amount: 500 g}
          - {ingredient: water, amount: 500 g}
        processing:
          - step: baking
            moisture_loss: {percent_of_batch: 20}
    """,
    )
    c = one(p, lib)
    # 1000 g in, 200 g water out -> 800 g; protein 50 g stays 50 g
    assert c.finished_grams == pytest.approx(800)
    assert c.value("protein") == pytest.approx(50 / 800 * 100)
    assert c.value("water") == pytest.approx((570 - 200) / 800 * 100)
    assert c.value("starch") == pytest.approx(350 / 800 * 100)


def test_final_water_target(write, lib):
    p = write(
        "dry.yaml",
        """
        product: {id: dry, name: Dry}
        batch:
          - {ingredient: tuber, amount: 1000 g}
        processing:
          - step: drying
            moisture_loss: {final_water: 5}
    """,
    )
    c = one(p, lib)
    # dry matter 200 g; after: 200 / 0.95 g with 5 % water
    assert c.finished_grams == pytest.approx(200 / 0.95)
    assert c.value("water") == pytest.approx(5)


def test_yield_and_finished_weight_are_water_losses(write, lib):
    a = write(
        "a.yaml",
        """
        product: {id: a, name: A}
        batch: [{ingredient: tuber, amount: 1000 g}]
        processing: [{step: cooking, yield: 0.9}]
    """,
    )
    b = write(
        "b.yaml",
        """
        product: {id: b, name: B}
        batch: [{ingredient: tuber, amount: 1000 g}]
        processing: [{step: cooking, finished_weight: 900 g}]
    """,
    )
    ca, cb = one(a, lib), one(b, lib)
    assert ca.finished_grams == pytest.approx(900) == cb.finished_grams
    assert ca.value("water") == pytest.approx((800 - 100) / 900 * 100)
    np.testing.assert_allclose(ca.per_100g[: len(COL) - 0], cb.per_100g, equal_nan=True)


def test_frying_solves_water_and_oil_together(write, lib):
    p = write(
        "fry.yaml",
        """
        product: {id: fry, name: Fry}
        batch: [{ingredient: tuber, amount: 1000 g}]
        processing:
          - step: frying
            moisture_loss: {final_water: 2}
            oil_uptake: {oil: oil, per_100g: 35}
    """,
    )
    c = one(p, lib)
    # closed form: F = (M - W) / (1 - (w + u)/100) with dry matter 200 g
    F = 200 / (1 - 0.37)
    assert c.finished_grams == pytest.approx(F)
    assert c.value("water") == pytest.approx(2)
    assert c.value("fat") == pytest.approx(35 + 1.0 / F * 100)
    assert c.steps[0].oil_taken_up_g == pytest.approx(0.35 * F)


def test_final_fat_target(write, lib):
    p = write(
        "ff.yaml",
        """
        product: {id: ff, name: FF}
        batch: [{ingredient: tuber, amount: 1000 g}]
        processing:
          - step: frying
            moisture_loss: {percent_of_batch: 70}
            oil_uptake: {oil: oil, final_fat: 30}
    """,
    )
    c = one(p, lib)
    assert c.value("total_lipid") == pytest.approx(30)
    assert c.value("water") == pytest.approx((800 - 700) / c.finished_grams * 100)


def test_range_gives_both_ends(write, lib):
    p = write(
        "r.yaml",
        """
        product: {id: r, name: R, serving: {size: 28 g}}
        batch: [{ingredient: tuber, amount: 1000 g}]
        processing:
          - step: frying
            moisture_loss: {final_water: 2}
            oil_uptake: {oil: oil, per_100g: [28, 36]}
    """,
    )
    f = load_formula(p, lib)
    lo, hi = compose(f, lib)
    assert (lo.scenario, hi.scenario) == ("low", "high")
    assert lo.value("fat") < hi.value("fat")
    assert f.is_fried


def test_subformula_with_own_yield_is_carried(write, lib):
    write(
        "dough.yaml",
        """
        subformula: {id: dough, name: Dough}
        batch:
          - {ingredient: flour, amount: 50 %}
          - {ingredient: water, amount: 50 %}
        processing: [{step: proofing, moisture_loss: {percent_of_batch: 10}}]
    """,
    )
    p = write(
        "parent.yaml",
        """
        product: {id: parent, name: Parent}
        batch:
          - {subformula: dough, amount: 90 g}
          - {ingredient: sugar, amount: 10 g}
    """,
    )
    c = one(p, lib)
    # dough: 100 g -> 90 g with protein 5 g, so 90 g dough carries 5 g protein
    assert c.value("protein") == pytest.approx(5.0)
    assert c.value("sugars") == pytest.approx(10 + 0.5)


def test_oil_blend_subformula(write, lib):
    write(
        "blend.yaml",
        """
        subformula: {id: blend75, name: Blend}
        batch:
          - {ingredient: spe, amount: 75 %}
          - {ingredient: oil, amount: 25 %}
    """,
    )
    p = write(
        "crisp.yaml",
        """
        product: {id: crisp, name: Crisp}
        batch: [{ingredient: tuber, amount: 1000 g}]
        processing:
          - step: frying
            moisture_loss: {final_water: 2}
            oil_uptake: {oil: blend75, per_100g: 32}
    """,
    )
    c = one(p, lib)
    assert c.value("nonabsorbed_lipid") == pytest.approx(24)
    assert "spe" in [i.id for i in c.formula.ingredients_used()]


def test_contributions_add_up(write, lib):
    p = write(
        "fry2.yaml",
        """
        product: {id: fry2, name: Fry}
        batch:
          - {ingredient: tuber, amount: 1000 g}
          - {ingredient: salt, amount: 10 g}
        processing:
          - step: frying
            moisture_loss: {final_water: 2}
            oil_uptake: {oil: oil, per_100g: 30}
    """,
    )
    c = one(p, lib)
    labels, rows = c.contributions
    assert labels[-2:] == ["frying: water lost", "frying: oil taken up (oil)"]
    known = ~np.isnan(c.per_100g[: COL["vitamin_k"]])  # unknown values stay unknown (NaN) in both
    np.testing.assert_allclose(
        np.nansum(rows, axis=0)[: COL["vitamin_k"]][known], c.per_100g[: COL["vitamin_k"]][known], atol=1e-9
    )


def test_unknown_propagates_and_is_named(write, lib):
    p = write(
        "h.yaml",
        """
        product: {id: h, name: H}
        batch:
          - {ingredient: tuber, amount: 90 g}
          - {ingredient: herb, amount: 10 g}
    """,
    )
    c = one(p, lib)
    assert c.value("vitamin_k") is None  # unknown, not zero
    assert math.isnan(c.per_100g[COL["vitamin_k"]])
    assert c.unknown_inputs("vitamin_k") == ["herb"]
    assert c.value("protein") == pytest.approx(0.9 * 2 + 2)


def test_moisture_loss_beyond_water_is_refused(write, lib):
    p = write(
        "over.yaml",
        """
        product: {id: over, name: Over}
        batch: [{ingredient: flour, amount: 100 g}]
        processing: [{step: baking, moisture_loss: {percent_of_batch: 20}}]
    """,
    )
    with pytest.raises(InputError, match="exceeds the 14.00 g of water present"):
        compose(load_formula(p, lib), lib)


def test_final_water_above_present_is_refused(write, lib):
    p = write(
        "wet.yaml",
        """
        product: {id: wet, name: Wet}
        batch: [{ingredient: flour, amount: 100 g}]
        processing: [{step: baking, moisture_loss: {final_water: 30}}]
    """,
    )
    with pytest.raises(InputError, match="higher than the water present"):
        compose(load_formula(p, lib), lib)


def test_water_step_needs_known_water(write, lib, tmp_path):
    (tmp_path / "ingredients" / "more.yaml").write_text(
        "ingredients:\n  mystery:\n    label_name: Mystery\n    source: test\n    per_100g: {protein: 10}\n",
        encoding="utf-8",
    )
    from labelcalc.intake.library import load_library

    lib2 = load_library(tmp_path / "ingredients")
    p = write(
        "m.yaml",
        """
        product: {id: m, name: M}
        batch: [{ingredient: mystery, amount: 100 g}, {ingredient: water, amount: 100 g}]
        processing: [{step: baking, moisture_loss: {percent_of_batch: 10}}]
    """,
    )
    with pytest.raises(InputError, match="unknown for: mystery"):
        compose(load_formula(p, lib2), lib2)
