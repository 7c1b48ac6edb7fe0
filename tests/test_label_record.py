"""The one labelling engine and the label record every output reads.

Demo data (fictional snack maker): these tests check the engine's own consistency — a product
labelled alone or in a range gets the same record, the trace adds up to the declared figure, and
the calculation sheet names every leaf ingredient — not reference values of any regulation.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from labelcalc.cli import app
from labelcalc.formulation.composition import compose, compose_many
from labelcalc.intake.formula import load_formula
from labelcalc.intake.library import load_library
from labelcalc.labelling.engine import LabelEngine
from labelcalc.labelling.record import label_one, label_record
from labelcalc.labelling.rulepack import get_packs
from labelcalc.labelling.trace import band_text
from labelcalc.outputs.calcsheet import calculation_rows

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_products"
MARKETS = ["us", "eu", "uk", "ca", "anz", "codex"]


@pytest.fixture(scope="module")
def lib():
    return load_library(DEMO / "ingredients")


@pytest.fixture(scope="module")
def demo(lib):
    formulas = [load_formula(p, lib) for p in sorted(DEMO.glob("hl_*.yaml"))]
    comps, failed = compose_many(formulas, lib)
    assert not failed
    return [c for f in formulas for c in comps[f.id]]


def _figures(rec):
    d = rec.declaration
    return [(r.nutrient, r.shown, {b: r.text(b) for b in d.columns}, r.percent) for r in d.rows]


@pytest.mark.parametrize("market", MARKETS)
def test_a_range_and_a_range_of_one_give_the_same_record(demo, market):
    (pack,) = get_packs([market])
    eng = LabelEngine(pack, demo)
    alone = {id(c): label_one(c, pack) for c in eng.comps}
    for i, c in enumerate(eng.comps):
        together = label_record(eng, i)
        one = alone[id(c)]
        assert _figures(together) == _figures(one)
        a, b = together.assessment, one.assessment
        assert [(x.claim, x.verdict, x.failed, x.missing) for x in a.claims] == [
            (x.claim, x.verdict, x.failed, x.missing) for x in b.claims
        ]
        assert [(s.statement, s.status, s.trigger) for s in a.statements] == [
            (s.statement, s.status, s.trigger) for s in b.statements
        ]
        assert a.front_of_pack == b.front_of_pack and a.reviews == b.reviews


@pytest.mark.parametrize("market", MARKETS)
def test_trace_lines_add_up_to_every_unrounded_figure(demo, market):
    (pack,) = get_packs([market])
    eng = LabelEngine(pack, demo)
    for i in range(eng.n):
        for row in label_record(eng, i).trace["rows"]:
            amounts = [ln["amount"] for ln in row["lines"]]
            if row["unrounded_per_100g"] is None:
                assert None in amounts or row["unknown_inputs"]
                continue
            assert sum(amounts) == pytest.approx(row["unrounded_per_100g"], rel=1e-9, abs=1e-9)


def test_calculation_sheet_of_the_lite_crisps_reaches_the_leaves(lib):
    f = load_formula(DEMO / "hl_kettle_sea_salt_lite.yaml", lib)
    (pack,) = get_packs(["eu"])
    for c in compose(f, lib):
        rows = calculation_rows(label_one(c, pack).assessment)
        for nutrient in ("fat", "energy_kj", "energy_kcal"):
            lines = [r for r in rows if r["kind"] == "line" and r["nutrient"] == nutrient]
            names = {r["ingredient"] for r in lines}
            assert {"potato_raw", "sunflower_oil", "spe_frying_fat"} <= names, nutrient
            oils = [r for r in lines if r["line_kind"] == "oil taken up"]
            assert {r["ingredient"] for r in oils} == {"sunflower_oil", "spe_frying_fat"}
            assert all("frying" in r["route"] and float(r["grams_per_100g"]) > 0 for r in oils)
            assert all(r["source"] for r in lines if r["line_kind"] != "water lost")
        water = [r for r in rows if r["kind"] == "line" and r["nutrient"] == "energy_kj"]
        # water lost carries no energy, so the sheet shows it where water counts: the trace itself
        rec = label_one(c, pack)
        kinds = {ln["kind"] for row in rec.trace["rows"] for ln in row["lines"]}
        assert {"ingredient", "oil taken up", "water lost"} <= kinds
        assert water
        fat = next(r for r in rec.trace["rows"] if r["nutrient"] == "fat")
        # the non-absorbed lipid is fat on an EU label (Annex I point 2: all lipids) and traced as such
        spe = [ln for ln in fat["lines"] if ln["ingredient"] == "spe_frying_fat"]
        assert spe and spe[0]["amount"] > 0 and "nonabsorbed_lipid" in spe[0]["sources"]


def test_json_trace_has_the_documented_fields():
    res = CliRunner().invoke(
        app, ["declare", str(DEMO / "hl_kettle_sea_salt_lite.yaml"), "-m", "us", "--json", "--trace"]
    )
    assert res.exit_code == 0, res.output
    d = json.loads(res.stdout)["declarations"][0]
    t = d["trace"]
    assert {"product", "market", "scenario", "batch_grams", "finished_grams_per_batch", "rows"} <= set(t)
    row = t["rows"][0]
    assert {"nutrient", "label", "unit", "unrounded_per_100g", "definition", "columns", "lines"} <= set(row)
    assert {"kind", "route", "ingredient", "grams_per_100g", "amount", "unit", "sources"} <= set(row["lines"][0])
    col = next(iter(row["columns"].values()))
    assert {"unrounded", "declared", "rounding", "rounding_citation"} <= set(col)


def test_band_text_states_the_threshold():
    (pack,) = get_packs(["eu"])
    rule = pack.rounding[next(r.rounding for r in pack.rows if r.nutrient == "fat")]
    texts = [band_text(rule, i) for i in range(len(rule.bands))]
    assert all(any(ch.isdigit() for ch in t.split(":")[0]) for t in texts), texts


def test_range_summary_and_single_product_output_agree(tmp_path):
    """The range summary and `declare` read the same engine: every printed figure is equal."""
    out = tmp_path / "out"
    res = CliRunner().invoke(app, ["range", str(DEMO), "-m", "us,ca", "-o", str(out), "--no-register"])
    assert res.exit_code == 0, res.output
    with (out / "summary.csv").open(encoding="utf-8") as fh:
        summary = {(r["product_id"], r["market"], r["scenario"]): r for r in csv.DictReader(fh)}
    from labelcalc.labelling.rounding import fill_amount
    from labelcalc.labelling.rulepack import get_packs

    labels = {p.market: {r.nutrient: r.label for r in p.rows} for p in get_packs(["us", "ca"])}
    for path in sorted(DEMO.glob("hl_*.yaml")):
        res = CliRunner().invoke(app, ["declare", str(path), "-m", "us,ca", "--json"])
        for d in json.loads(res.stdout)["declarations"]:
            row = summary[(json.loads(res.stdout)["product"]["id"], d["market"], d["scenario"])]
            col = d["columns"][0]
            for r in d["rows"]:
                text = r[f"declared_{col}"]
                if r["shown"] and text is not None:  # a row that prints its amount inside its label: filled in
                    label = labels[d["market"]][r["nutrient"]]
                    assert row[r["nutrient"]] == (fill_amount(label, text) if "{amount}" in label else text)


@pytest.mark.parametrize("market", ["anz", "eu"])
def test_panel_prints_the_records_ingredient_list(tmp_path, market):
    """The PDF draws the ingredient list the record holds, functional-class groups included."""
    from pypdf import PdfReader

    res = CliRunner().invoke(app, ["panel", str(DEMO / "hl_gummy_sugar_free.yaml"), "-m", market, "-o", str(tmp_path)])
    assert res.exit_code in (0, 1), res.output
    doc = CliRunner().invoke(app, ["assess", str(DEMO / "hl_gummy_sugar_free.yaml"), "-m", market, "--json"])
    text = json.loads(doc.stdout)["assessments"][0]["ingredient_list"]["text"]
    pdf = " ".join(PdfReader(tmp_path / f"hl_gummy_sugar_free.{market}.pdf").pages[0].extract_text().split())
    assert " ".join(text.split()) in pdf
    assert "Sweeteners" in text
