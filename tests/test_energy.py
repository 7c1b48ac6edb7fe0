"""Energy factor sets against their published sources."""

from __future__ import annotations

import pytest

from labelcalc.formulation.composition import compose
from labelcalc.formulation.energy import energy_by_line, energy_of, load_factor_set
from labelcalc.intake.formula import load_formula


def _lib_with(write, tmp_path, per_100g: str, extra: str = ""):
    from labelcalc.intake.library import load_library

    d = tmp_path / "ingredients"
    d.mkdir(exist_ok=True)
    (d / "x.yaml").write_text(
        f"""
ingredients:
  food:
    label_name: Food
    source: test vector
    assumed_zero: [{{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: "test fixture: every component not given is none"}}]
    per_100g: {per_100g}
{extra}
""",
        encoding="utf-8",
    )
    lib = load_library(d)
    p = write(
        "food.yaml",
        """
        product: {id: food, name: Food, serving: {size: 50 g}}
        batch: [{ingredient: food, amount: 100 g}]
    """,
    )
    (c,) = compose(load_formula(p, lib), lib)
    return c


def test_eu_annex_xiv_vector_a(write, tmp_path):
    # Reg. (EU) No 1169/2011 Annex XIV factors applied to fat 10, carbohydrate 60, protein 8, fibre 3 (g/100 g):
    # 10x37 + 60x17 + 8x17 + 3x8 = 1550 kJ; 10x9 + 60x4 + 8x4 + 3x2 = 368 kcal (Annex XIV arithmetic);
    # protein 8 g is nitrogen 1.28 g x 6.25 (Annex I point 10)
    c = _lib_with(
        write,
        tmp_path,
        "{fat: 10, sugars: 20, starch: 40, protein: 8, nitrogen: 1.28, fibre_soluble: 1, fibre_insoluble: 2}",
    )
    e = energy_of(c, load_factor_set("eu_1169_2011_annex_xiv"))
    assert e.kj == pytest.approx(1550)
    assert e.kcal == pytest.approx(368)
    # kJ come from kJ factors, not from kcal x 4.184 (which would give 1539.7)
    assert abs(e.kj - e.kcal * 4.184) > 10


def test_eu_annex_xiv_vector_b_salatrim_and_polyols(write, tmp_path):
    # Annex XIV: fat 5 g at 37/9, salatrim 15 g at 25/6, carbohydrate 18 g at 17/4, polyols 7 g at 10/2.4,
    # erythritol 5 g at 0, protein 5 g at 17/4 -> 1021 kJ and 243.8 kcal
    c = _lib_with(
        write,
        tmp_path,
        "{fat: 5, partial_lipid: 15, sugars: 18, maltitol: 7, erythritol: 5, protein: 5, nitrogen: 0.8}",
        "    lipid_energy: {kj_per_g: 25, kcal_per_g: 6, kind: salatrim, source: test}",
    )
    e = energy_of(c, load_factor_set("eu_1169_2011_annex_xiv"))
    assert e.kj == pytest.approx(1021)
    assert e.kcal == pytest.approx(243.8)
    assert e.reviews == []  # salatrim has its own factor in Annex XIV: nothing to review


def test_eu_other_partial_lipid_counts_as_fat_and_is_flagged(write, tmp_path):
    c = _lib_with(
        write,
        tmp_path,
        "{partial_lipid: 10, sugars: 10}",
        "    lipid_energy: {kj_per_g: 21, kcal_per_g: 5, kind: structured_lipid, source: test}",
    )
    eu = energy_of(c, load_factor_set("eu_1169_2011_annex_xiv"))
    av = energy_of(c, load_factor_set("available"))
    assert eu.kcal == pytest.approx(10 * 9 + 10 * 4)
    assert av.kcal == pytest.approx(10 * 5 + 10 * 4)
    assert eu.reviews and "salatrim" in eu.reviews[0]


def test_us_method_c_formula(write, tmp_path):
    # 21 CFR 101.9(c)(1)(i)(C): 4 x protein + 4 x (total carbohydrate - NDC - sugar alcohols) + 9 x fat
    # + 2 x soluble NDC + sugar alcohols at their (F) factors (maltitol 2.1 kcal/g, from memory - verify)
    c = _lib_with(
        write,
        tmp_path,
        "{protein: 5, nitrogen: 0.8, fat: 10, sugars: 20, starch: 30, fibre_soluble: 4, fibre_insoluble: 6, maltitol: 10}",
    )
    e = energy_of(c, load_factor_set("us_101_9_method_c"))
    assert e.kcal == pytest.approx(4 * 5 + 4 * 50 + 9 * 10 + 2 * 4 + 0 * 6 + 2.1 * 10)
    b = energy_of(c, load_factor_set("us_101_9_method_b"))
    # 21 CFR 101.9(c)(1)(i)(B): 4-4-9 on total carbohydrate (fibre and sugar alcohols included)
    assert b.kcal == pytest.approx(4 * 5 + 4 * 70 + 9 * 10)


def test_us_method_a_specific_atwater_factors(write, tmp_path):
    # USDA Agriculture Handbook No. 74 (1955/1973), Table 13: potatoes 2.78 / 8.37 / 4.03 kcal/g
    # (protein / fat / carbohydrate) — from memory — verify (the FAO East-Asia table prints 2.74 for protein)
    c = _lib_with(
        write,
        tmp_path,
        "{water: 79, protein: 2, fat: 0.1, sugars: 1, starch: 15, fibre_soluble: 0.5, fibre_insoluble: 1.4}",
        "    atwater: {protein: 2.78, fat: 8.37, carbohydrate: 4.03, source: USDA AH 74 Table 13}",
    )
    e = energy_of(c, load_factor_set("us_101_9_method_a"))
    assert e.kcal == pytest.approx(2 * 2.78 + 0.1 * 8.37 + 17.9 * 4.03)


def test_non_absorbed_lipid_is_zero_in_available_and_us_energy(write, tmp_path):
    c = _lib_with(write, tmp_path, "{nonabsorbed_lipid: 30, starch: 50}")
    assert energy_of(c, load_factor_set("available")).kcal == pytest.approx(200)
    us = energy_of(c, load_factor_set("us_101_9_method_c"))
    assert us.kcal == pytest.approx(200)
    assert us.reviews  # flagged: confirm the additive and its permitted use
    eu = energy_of(c, load_factor_set("eu_1169_2011_annex_xiv"))
    assert eu.kcal == pytest.approx(200 + 270) and eu.reviews


def test_kj_from_kcal_uses_thermochemical_calorie():
    # pint (registry library): 1 kcal (thermochemical) = 4.184 kJ, the factor the US set states
    import pint

    ureg = pint.UnitRegistry()
    assert (1 * ureg.kilocalorie).to(ureg.kilojoule).magnitude == pytest.approx(4.184)
    assert load_factor_set("us_101_9_method_c").factor_set.kj_from_kcal == pytest.approx(4.184)


def test_energy_by_line_adds_up(write, lib):
    p = write(
        "crisp.yaml",
        """
        product: {id: crisp, name: Crisp}
        batch: [{ingredient: tuber, amount: 1000 g}, {ingredient: salt, amount: 15 g}]
        processing:
          - {step: frying, moisture_loss: {final_water: 2}, oil_uptake: {oil: oil, per_100g: 33}}
    """,
    )
    (c,) = compose(load_formula(p, lib), lib)
    for fs_id in ("available", "eu_1169_2011_annex_xiv", "us_101_9_method_c"):
        fs = load_factor_set(fs_id)
        e = energy_of(c, fs)
        lines = energy_by_line(c, fs)
        assert sum(kc for _, _, kc in lines) == pytest.approx(e.kcal)
        assert sum(kj for _, kj, _ in lines) == pytest.approx(e.kj)
