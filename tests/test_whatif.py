"""Formulation what-if: sweeps, targets, costing and charts."""

from __future__ import annotations

import json

import pytest
from typer.testing import CliRunner

from labelcalc.cli import app
from labelcalc.formulation.composition import compose
from labelcalc.intake.formula import load_formula
from labelcalc.labelling.declare import declare
from labelcalc.labelling.rulepack import get_packs
from labelcalc.whatif.costing import cost_of
from labelcalc.whatif.explore import figures, find_target, substitute, sweep

runner = CliRunner()

CRISP = """
    product: {{id: crisp, name: Crisp, category: snacks, serving: {{size: 30 g}}, net_quantity: 150 g}}
    batch: [{{ingredient: tuber, amount: 1000 g}}, {{ingredient: salt, amount: 12 g}}]
    processing: [{{step: frying, moisture_loss: {{final_water: 2}}, oil_uptake: {{oil: {oil}, per_100g: 32}}}}]
"""


@pytest.fixture
def crisp(write, lib):
    return load_formula(write("crisp.yaml", CRISP.format(oil="oil")), lib)


def _texts(f, lib, market):
    (c,) = compose(f, lib)
    d = declare(c, get_packs([market])[0])
    return {r.nutrient: r.text(b) for r in d.shown_rows for b in d.columns}


@pytest.mark.parametrize("market", ["us", "eu"])
def test_sweep_end_points_equal_the_pure_formulas(write, lib, crisp, market):
    pure_spe = load_formula(write("crisp_spe.yaml", CRISP.format(oil="spe")), lib)
    assert _texts(substitute(crisp, "oil", "spe", 0, lib), lib, market) == _texts(crisp, lib, market)
    assert _texts(substitute(crisp, "oil", "spe", 100, lib), lib, market) == _texts(pure_spe, lib, market)


def test_sweep_lowers_available_energy_linearly(lib, crisp):
    rows = sweep(crisp, lib, get_packs(["us"]), "oil", "spe", [0, 50, 100])
    e = [pts[0].available_kcal_per_100g for _, pts in rows]
    assert e[0] - e[1] == pytest.approx(e[1] - e[2])
    assert e[0] - e[2] == pytest.approx(32 * 9)  # all 32 g of oil per 100 g at 9 kcal/g become 0 kcal


def test_target_level_is_eligible_and_just_below_is_not(lib, crisp):
    us = get_packs(["us"])[0]
    ref = compose(crisp, lib)
    t = find_target(crisp, lib, us, "oil", "spe", "reduced_fat", tolerance=0.01, reference=ref)
    assert t.reachable and 0 < t.level < 100
    below = figures(substitute(crisp, "oil", "spe", t.level - 0.01, lib), lib, [us], "below", reference=ref)
    at = figures(substitute(crisp, "oil", "spe", t.level, lib), lib, [us], "at", reference=ref)
    assert "reduced_fat" in at[0].claims and "reduced_fat" not in below[0].claims
    # 21 CFR 101.62(b)(4): at least 25 % less fat per RACC than the reference food. By hand: the finished crisp
    # has 212 g dry matter / (1 - 0.34) = 321.2 g, fat = 32 g oil + 1 g / 321.2 g x 100 = 32.311 g/100 g;
    # 32 x >= 0.25 x 32.311 gives x >= 25.24 %
    F = 212 / (1 - 0.34)
    fat = 32 + 1 / F * 100
    assert t.level == pytest.approx(0.25 * fat / 32 * 100, abs=0.02)


def test_target_unreachable_says_what_blocks(lib, crisp):
    eu = get_packs(["eu"])[0]
    t = find_target(crisp, lib, eu, "oil", "spe", "energy_reduced", reference=compose(crisp, lib))
    # Reg. (EU) No 1169/2011 counts the non-absorbed lipid as fat at 37 kJ / 9 kcal: no energy is saved
    assert not t.reachable and t.blocking and "energy" in t.blocking[0]


def test_cost_per_kg_accounts_for_water_lost(write, lib_dir, tmp_path):
    from labelcalc.intake.library import load_library

    (lib_dir / "priced.yaml").write_text(
        "ingredients:\n  veg:\n    label_name: Veg\n    source: test\n    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: 'test fixture: every component not given is none'}]\n"
        "    per_100g: {water: 80, starch: 20}\n    price: {per_kg: 1.0, currency: EUR}\n",
        encoding="utf-8",
    )
    lib = load_library(lib_dir)
    p = write(
        "dried.yaml",
        """
        product: {id: dried, name: Dried, serving: {size: 50 g}}
        batch: [{ingredient: veg, amount: 1000 g}]
        processing: [{step: drying, finished_weight: 500 g}]
    """,
    )
    (c,) = compose(load_formula(p, lib), lib)
    cost = cost_of(c)
    assert cost.per_kg == pytest.approx(2.0)  # 2 kg of veg at 1 EUR/kg per kg of product
    assert cost.per_serving == pytest.approx(0.1) and cost.per_batch == pytest.approx(1.0)
    assert cost.currency == "EUR"


def test_missing_price_is_unknown_not_zero(lib, crisp):
    (c,) = compose(crisp, lib)
    cost = cost_of(c)
    assert cost.per_kg is None and set(cost.missing_prices) == {"tuber", "salt", "oil"}


def test_sweep_cli_chart_matches_table(tmp_path, lib_dir, write):
    p = write("crisp.yaml", CRISP.format(oil="oil"))
    out = tmp_path / "sw"
    res = runner.invoke(
        app,
        [
            "sweep",
            str(p),
            "--replace",
            "oil",
            "--with",
            "spe",
            "--step",
            "25",
            "--market",
            "us",
            "--out",
            str(out),
            "--library",
            str(lib_dir),
        ],
    )
    assert res.exit_code == 0, res.output
    stem = "crisp.oil-to-spe"
    doc = json.loads((out / f"{stem}.json").read_text())
    assert (out / f"{stem}.png").stat().st_size > 1000 and (out / f"{stem}.pdf").stat().st_size > 1000
    series = doc["chart_series"]
    table = {r["level_percent"]: r["available_kcal_per_serving"] for r in doc["rows"]}
    assert [x for x, _ in series["available"]] == [0, 25, 50, 75, 100]
    for x, y in series["available"]:
        assert y == pytest.approx(table[x])


def test_compare_cli(tmp_path, lib_dir, write):
    a = write("a.yaml", CRISP.format(oil="oil"))
    b = write("b.yaml", CRISP.format(oil="spe").replace("id: crisp", "id: crisp_b"))
    res = runner.invoke(app, ["compare", str(a), str(b), "--market", "us", "--json", "--library", str(lib_dir)])
    assert res.exit_code == 0, res.output
    doc = json.loads(res.output)
    rb = next(r for r in doc["rows"] if r["formula"] == "crisp_b")
    assert rb["change_available_kcal_per_serving"] == pytest.approx(-32 * 9 * 0.3)
    assert "spe_vitamins" in rb["statements_added"]


def test_replace_one_frying_blend_by_another(write, lib):
    write(
        "blend_a.yaml",
        """
        subformula: {id: blend_a, name: Blend A}
        batch: [{ingredient: oil, amount: 100 %}]
    """,
    )
    write(
        "blend_b.yaml",
        """
        subformula: {id: blend_b, name: Blend B}
        batch: [{ingredient: spe, amount: 75 %}, {ingredient: oil, amount: 25 %}]
    """,
    )
    f = load_formula(write("fried.yaml", CRISP.format(oil="blend_a")), lib)
    (c0,) = compose(substitute(f, "blend_a", "blend_b", 0, lib), lib)
    (c1,) = compose(substitute(f, "blend_a", "blend_b", 100, lib), lib)
    (cref,) = compose(f, lib)
    assert c0.value("fat") == pytest.approx(cref.value("fat"))
    assert c1.value("nonabsorbed_lipid") == pytest.approx(0.75 * 32)  # the whole uptake is now blend B
