"""Property tests (hypothesis): conservation and linearity of the formula engine."""

from __future__ import annotations

import textwrap

import pytest
from conftest import TEST_LIBRARY
from hypothesis import given, settings
from hypothesis import strategies as st

from labelcalc.formulation.composition import compose
from labelcalc.formulation.energy import energy_of, load_factor_set
from labelcalc.intake.formula import load_formula
from labelcalc.intake.library import load_library

amount = st.floats(min_value=1, max_value=2000, allow_nan=False)


@pytest.fixture(scope="module")
def env(tmp_path_factory):
    d = tmp_path_factory.mktemp("prop")
    (d / "ingredients").mkdir()
    (d / "ingredients" / "lib.yaml").write_text(TEST_LIBRARY, encoding="utf-8")
    return d, load_library(d / "ingredients")


def _formula(env, name, body):
    d, lib = env
    p = d / f"{name}.yaml"
    p.write_text(textwrap.dedent(body), encoding="utf-8")
    return load_formula(p, lib), lib


@settings(max_examples=40, deadline=None)
@given(
    tuber=amount, flour=amount, loss=st.floats(min_value=0, max_value=60), uptake=st.floats(min_value=0, max_value=40)
)
def test_mass_is_conserved(env, tuber, flour, loss, uptake):
    f, lib = _formula(
        env,
        "mass",
        f"""
        product: {{id: mass, name: Mass}}
        batch:
          - {{ingredient: tuber, amount: {tuber} g}}
          - {{ingredient: flour, amount: {flour} g}}
        processing:
          - step: frying
            moisture_loss: {{percent_of_batch: {loss}}}
            oil_uptake: {{oil: oil, per_100g: {uptake}}}
    """,
    )
    water = 0.80 * tuber + 0.14 * flour
    if loss / 100 * (tuber + flour) > water:
        return  # refused by design (tested elsewhere)
    (c,) = compose(f, lib)
    st0 = c.steps[0]
    assert c.finished_grams == pytest.approx(tuber + flour - st0.water_lost_g + st0.oil_taken_up_g)
    # dry matter other than the oil is unchanged by processing
    protein_g = c.value("protein") * c.finished_grams / 100
    assert protein_g == pytest.approx(0.02 * tuber + 0.10 * flour)
    assert st0.oil_taken_up_g / c.finished_grams * 100 == pytest.approx(uptake, abs=1e-9)


@settings(max_examples=40, deadline=None)
@given(fat_g=st.floats(min_value=0.1, max_value=30), replaced=st.floats(min_value=0, max_value=1))
def test_replacing_fat_by_non_absorbed_lipid(env, fat_g, replaced):
    g = fat_g * replaced
    base = f"""
        product: {{id: rep, name: Rep}}
        batch:
          - {{ingredient: flour, amount: 100 g}}
          - {{ingredient: oil, amount: {fat_g} g}}
    """
    f0, lib = _formula(env, "rep0", base)
    f1, _ = _formula(
        env,
        "rep1",
        f"""
        product: {{id: rep, name: Rep}}
        batch:
          - {{ingredient: flour, amount: 100 g}}
          - {{ingredient: oil, amount: {fat_g - g + 1e-12} g}}
          - {{ingredient: spe, amount: {g + 1e-12} g}}
    """,
    )
    (c0,), (c1,) = compose(f0, lib), compose(f1, lib)
    av = load_factor_set("available")
    scale = (100 + fat_g) / 100  # per-100 g figures of a batch of 100 + fat_g grams
    d_kcal = (energy_of(c0, av).kcal - energy_of(c1, av).kcal) * scale
    d_kj = (energy_of(c0, av).kj - energy_of(c1, av).kj) * scale
    assert d_kcal == pytest.approx(9 * g, abs=1e-6)
    assert d_kj == pytest.approx(37 * g, abs=1e-6)
    assert (c0.value("fat") - c1.value("fat")) * scale == pytest.approx(g, abs=1e-6)


@settings(max_examples=30, deadline=None)
@given(k=st.floats(min_value=0.01, max_value=100))
def test_scaling_a_batch_changes_no_per_100g_value(env, k):
    body = """
        product: {{id: s, name: S}}
        batch:
          - {{ingredient: tuber, amount: {a} g}}
          - {{ingredient: salt, amount: {b} g}}
        processing:
          - {{step: frying, moisture_loss: {{final_water: 3}}, oil_uptake: {{oil: oil, per_100g: 30}}}}
    """
    f1, lib = _formula(env, "s1", body.format(a=1000, b=12))
    f2, _ = _formula(env, "s2", body.format(a=1000 * k, b=12 * k))
    (c1,), (c2,) = compose(f1, lib), compose(f2, lib)
    for key in ("water", "fat", "protein", "sodium", "starch"):
        assert c1.value(key) == pytest.approx(c2.value(key), rel=1e-9)
