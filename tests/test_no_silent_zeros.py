"""No silent zeros: stated zeros only, total fibre without a split, and the oat biscuit from a table.

Ingredient values here are invented round numbers (test data) or come from the FDC fixture under
tests/data/tables/fdc (fixture data, see tests/test_tables.py).
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from typer.testing import CliRunner

from labelcalc.cli import app
from labelcalc.errors import InputError
from labelcalc.formulation.composition import compose
from labelcalc.formulation.energy import energy_of, load_factor_set
from labelcalc.intake.formula import load_formula
from labelcalc.intake.library import load_library
from labelcalc.labelling.declare import declare
from labelcalc.labelling.rulepack import get_packs

DATA = Path(__file__).parent / "data" / "tables"
FDC = DATA / "fdc" / "FoodData_Central_sr_legacy_food_csv_2018-04"
BISCUIT = DATA / "oat_biscuit" / "oat_biscuit.yaml"
runner = CliRunner()


def _lib(tmp_path: Path, body: str):
    d = tmp_path / "ingredients"
    d.mkdir(exist_ok=True)
    (d / "lib.yaml").write_text("ingredients:\n" + body, encoding="utf-8")
    return load_library(d)


def test_unlisted_zero_is_refused_with_the_fix(tmp_path):
    with pytest.raises(InputError) as exc:
        _lib(
            tmp_path,
            "  oil:\n    label_name: Oil\n    source: test data\n    unlisted: zero\n    per_100g: {fat: 100}\n",
        )
    text = str(exc.value)
    assert "'unlisted' is no longer accepted" in text and "assumed_zero" in text and "line 5" in text


def test_assumed_zero_needs_a_known_component_and_no_value(tmp_path):
    with pytest.raises(InputError, match="unknown component 'carbs'"):
        _lib(tmp_path, "  oil:\n    label_name: Oil\n    source: test data\n    assumed_zero: {carbs: 'none'}\n")
    with pytest.raises(InputError, match="'fat' has a value and is also assumed zero"):
        _lib(
            tmp_path,
            "  oil:\n    label_name: Oil\n    source: test data\n    per_100g: {fat: 100}\n"
            "    assumed_zero: {fat: 'refined oil (common practice)'}\n",
        )


def test_stated_zero_is_a_value_with_its_reason_and_the_rest_stays_unknown(tmp_path):
    lib = _lib(
        tmp_path,
        "  oil:\n    label_name: Oil\n    source: test data\n    per_100g: {fat: 100, saturated_fa: 10}\n"
        "    assumed_zero:\n      - components: [available_carbohydrate, fibre, protein]\n"
        "        reason: 'refined oil: no carbohydrate or protein (common practice)'\n",
    )
    oil = lib.get("oil")
    assert oil.values["sugars"] == 0 and oil.values["starch"] == 0 and oil.values["fibre_unsplit"] == 0
    assert oil.source_of("sugars") == "assumed zero: refined oil: no carbohydrate or protein (common practice)"
    assert "trans_fa" not in oil.values and "water" not in oil.values  # not stated: unknown
    assert lib.assumptions() == [
        (
            "oil",
            ["sugars", "starch", "fibre_soluble", "fibre_insoluble", "fibre_unsplit", "protein"],
            oil.zeros["protein"],
        )
    ]


def _fibre_product(tmp_path, write):
    _lib(
        tmp_path,
        "  bran:\n    label_name: Bran\n    source: test data\n"
        "    per_100g: {water: 10, protein: 15, fat: 5, sugars: 5, starch: 20, fibre: 40, ash: 5}\n"
        "    assumed_zero: [{components: [lipids, polyols, others, minerals, vitamins, proximates], reason: test data}]\n"
        "  flour:\n    label_name: Flour\n    source: test data\n"
        "    per_100g: {water: 12, protein: 10, fat: 2, sugars: 1, starch: 71, fibre_soluble: 1, fibre_insoluble: 2, ash: 1}\n"
        "    assumed_zero: [{components: [lipids, polyols, others, minerals, vitamins, proximates], reason: test data}]\n",
    )
    p = write(
        "bran_mix.yaml",
        """
        product: {id: bran_mix, name: Bran mix, version: "1", category: cookies, form: solid, serving: {size: 30 g}}
        batch:
          - {ingredient: bran, amount: 50 g}
          - {ingredient: flour, amount: 50 g}
        """,
    )
    lib = load_library(tmp_path / "ingredients")
    return compose(load_formula(p, lib), lib)[0]


def test_total_fibre_without_a_split_is_accepted_and_each_market_uses_what_it_needs(tmp_path, write):
    comp = _fibre_product(tmp_path, write)
    assert comp.value("fibre") == pytest.approx(21.5)  # (40 + 3) / 2
    assert comp.value("fibre_soluble") is None  # cannot be told: part of the fibre has no split
    assert "bran" in comp.unknown_inputs("fibre_soluble")
    # EU: all fibre at 2 kcal / 8 kJ per g (Regulation (EU) No 1169/2011 Annex XIV), no split needed
    eu = energy_of(comp, load_factor_set("eu_1169_2011_annex_xiv"))
    assert eu.by_component_kcal["fibre_unsplit"] == pytest.approx(20 * 2)
    # US method C: unsplit fibre at the soluble factor 2 kcal/g (21 CFR 101.9(c)(1)(i)(C)), flagged for review
    us = energy_of(comp, load_factor_set("us_101_9_method_c"))
    assert us.by_component_kcal["fibre_unsplit"] == pytest.approx(20 * 2)
    assert any("no soluble / insoluble split" in r for r in us.reviews)
    # Canada's soluble-fibre figure is unknown rather than understated; total fibre is known
    (ca,) = get_packs(["ca"])
    vals = declare(comp, ca).values
    assert vals["soluble_fibre"][0] is None and "bran" in vals["soluble_fibre"][1]
    assert vals["fibre"][0] == pytest.approx(21.5)


def _build_biscuit(tmp_path: Path) -> Path:
    """From a fresh folder: one command builds the library from the FDC fixture; the formula is copied beside it."""
    out = tmp_path / "ingredients" / "from_fdc.yaml"
    res = runner.invoke(
        app,
        ["library", "from-table", "fdc", str(FDC), "-f", "169705=oats", "-f", "173410=butter", "-f", "169655=sugar"]
        + ["-f", "169761=wheat_flour", "-f", "173468=salt", "-o", str(out)],
    )
    assert res.exit_code == 0, res.output
    assert "wrote" in res.output and "SR Legacy 2018-04" in res.output
    shutil.copy(BISCUIT, tmp_path / "oat_biscuit.yaml")
    return tmp_path / "oat_biscuit.yaml"


def test_oat_biscuit_from_the_fdc_fixture_compose_shows_sources_and_assumptions(tmp_path):
    formula = _build_biscuit(tmp_path)
    res = runner.invoke(app, ["compose", str(formula)])
    assert res.exit_code == 0, res.output
    out = res.output
    assert "Ingredient values (per 100 g of the ingredient) and their sources" in out
    assert "oats — USDA FoodData Central, SR Legacy 2018-04, food 169705: Oats" in out
    assert "protein 16.89 g (nutrient 1003 (Protein)) [basis: nitrogen x 5.83" in out
    assert "Assumed zeros (stated in the library with a reason; not measured):" in out
    assert "nonabsorbed_lipid, partial_lipid — USDA FoodData Central: lists no non-absorbed" in out
    assert "trans_fa (from oats, butter" not in out and "trans_fa (from oats, sugar, wheat_flour, salt)" in out
    doc = json.loads(runner.invoke(app, ["compose", str(formula), "--json"]).output)
    oats = doc["ingredient_values"]["oats"]["per_100g"]
    assert oats["protein"]["source"].endswith("nutrient 1003 (Protein)")
    assert oats["protein"]["basis"].startswith("nitrogen x 5.83")
    assert {"ingredient": "oats", "components": ["ethanol"]}.items() <= doc["assumed_zero"][2].items()


def test_oat_biscuit_read_in_place_with_stated_zeros_us_panel_shows_unknown_not_zero():
    lib = load_library(BISCUIT.parent / "ingredients")
    assert lib.get("oats").source_of("water").endswith("nutrient 1051 (Water)")
    assert lib.get("sugar").source_of("trans_fa").startswith("assumed zero: refined sucrose")
    comp = compose(load_formula(BISCUIT, lib), lib)[0]
    reasons = [r for _, _, r in comp.assumptions]
    assert any(r.startswith("refined sucrose") for r in reasons) and any(r.startswith("table salt") for r in reasons)
    (us,) = get_packs(["us"])
    d = declare(comp, us)
    trans = d.row("trans_fat")
    assert trans.value_per_100g is None and set(trans.unknown_inputs) == {"oats", "wheat_flour"}
    assert any("Trans Fat: unknown" in n for n in d.notes)
    assert d.row("dietary_fiber").value_per_100g == pytest.approx(comp.value("fibre"))


def test_library_from_table_in_place_writes_references_that_load(tmp_path):
    out = tmp_path / "ingredients" / "refs.yaml"
    res = runner.invoke(
        app, ["library", "from-table", "fdc", str(FDC), "-f", "173410=butter", "--in-place", "-o", str(out)]
    )
    assert res.exit_code == 0, res.output
    assert "from_table:" in out.read_text()
    lib = load_library(out)
    assert lib.get("butter").values["trans_fa"] == pytest.approx(3.278)


def test_library_search_and_bad_database_messages():
    res = runner.invoke(app, ["library", "search", "fdc", str(FDC), "salt"])
    assert res.exit_code == 0 and "173468  Salt, table" in res.output
    res = runner.invoke(app, ["library", "search", "usda", str(FDC), "salt"])
    assert res.exit_code == 2 and "unknown database 'usda'" in res.output


def test_csv_library_states_zeros_in_its_assumed_zero_column(tmp_path):
    p = tmp_path / "lib.csv"
    p.write_text(
        "id,label_name,source,assumed_zero,fat,saturated_fa,fibre\n"
        "oil,Oil,test data,sugars starch protein: refined oil (common practice) | fibre: none in oil (common practice),"
        "100,12,\n"
        "bran,Bran,test data,,3,,40\n",
        encoding="utf-8",
    )
    lib = load_library(p)
    oil, bran = lib.get("oil"), lib.get("bran")
    assert (
        oil.zeros["protein"] == "refined oil (common practice)"
        and oil.zeros["fibre_unsplit"] == "none in oil (common practice)"
    )
    assert "water" not in oil.values  # empty or absent: unknown
    assert bran.values["fibre_unsplit"] == 40 and not bran.zeros


def test_from_table_reference_errors_name_the_entry(tmp_path):
    d = tmp_path / "ingredients"
    d.mkdir()
    (d / "lib.yaml").write_text(
        "ingredients:\n  oats:\n    label_name: Oats\n"
        f"    from_table: {{database: fdc, path: {FDC}, food: '999'}}\n"
        "  bad:\n    label_name: Bad\n    from_table: {database: fdc, food: '1'}\n",
        encoding="utf-8",
    )
    with pytest.raises(InputError) as exc:
        load_library(d)
    text = str(exc.value)
    assert "field 'oats.from_table'" in text and "food '999' is not in this table" in text
    assert "field 'bad.from_table'" in text and "path" in text


def test_library_from_table_picks_by_name_only_when_one_food_matches(tmp_path):
    out = tmp_path / "lib.yaml"
    res = runner.invoke(app, ["library", "from-table", "fdc", str(FDC), "-n", "salt table=salt", "-o", str(out)])
    assert res.exit_code == 0, res.output
    assert "food 173468" in out.read_text()
    res = runner.invoke(app, ["library", "from-table", "fdc", str(FDC), "-n", "a=x", "-o", str(out)])
    assert res.exit_code == 2 and "foods match 'a'" in res.output and "pick one by id" in res.output
