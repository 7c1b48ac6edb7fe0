"""Range runs: nothing lost on bad input, the label register, sheet sources equal YAML folders."""

from __future__ import annotations

import csv
import shutil
import textwrap
from pathlib import Path

from conftest import TEST_LIBRARY
from typer.testing import CliRunner

from labelcalc.cli import app
from labelcalc.ranges.rangerun import run_range

runner = CliRunner()
ROOT = Path(__file__).resolve().parent.parent

GOOD = {
    "good_a": """
        product: {id: good_a, name: Good A, category: snacks, serving: {size: 30 g}, net_quantity: 150 g}
        batch: [{ingredient: tuber, amount: 900 g}, {ingredient: salt, amount: 10 g}]
        processing: [{step: frying, moisture_loss: {final_water: 2}, oil_uptake: {oil: oil, per_100g: 30}}]
    """,
    "good_b": """
        product: {id: good_b, name: Good B, category: snacks, serving: {size: 25 g}}
        batch: [{ingredient: flour, amount: 80 %}, {ingredient: sugar, amount: 20 %}]
    """,
}
BROKEN = {
    "bad_yaml": "product: {id: bad_yaml, name: X\nbatch: [\n",
    "bad_ingredient": """
        product: {id: bad_ingredient, name: X, category: snacks, serving: {size: 30 g}}
        batch: [{ingredient: tubr, amount: 100 g}]
    """,
    "bad_amount": """
        product: {id: bad_amount, name: X, category: snacks, serving: {size: 30 g}}
        batch: [{ingredient: tuber, amount: -5 g}]
    """,
    "bad_moisture": """
        product: {id: bad_moisture, name: X, category: snacks, serving: {size: 30 g}}
        batch: [{ingredient: flour, amount: 100 g}]
        processing: [{step: baking, moisture_loss: {percent_of_batch: 50}}]
    """,
    "bad_percent": """
        product: {id: bad_percent, name: X, category: snacks, serving: {size: 30 g}}
        batch: [{ingredient: flour, amount: 80 %}, {ingredient: sugar, amount: 30 %}]
    """,
    "no_serving": """
        product: {id: no_serving, name: X, category: snacks}
        batch: [{ingredient: flour, amount: 100 g}]
    """,
}


def make_range(root: Path, files: dict[str, str]) -> Path:
    (root / "ingredients").mkdir(parents=True, exist_ok=True)
    (root / "ingredients" / "lib.yaml").write_text(TEST_LIBRARY, encoding="utf-8")
    for name, text in files.items():
        (root / f"{name}.yaml").write_text(textwrap.dedent(text), encoding="utf-8")
    return root


def test_bad_products_never_lose_good_ones(tmp_path):
    src = make_range(tmp_path / "src", {**GOOD, **BROKEN})
    res = run_range(src, src / "ingredients", ["us", "eu"])
    ids = {r["product_id"] for r in res.rows}
    assert {"good_a", "good_b"} <= ids
    failed = {e["product_id"] for e in res.errors}
    assert {"bad_yaml", "bad_ingredient", "bad_amount", "bad_moisture", "bad_percent"} <= failed
    # a product that only one market cannot label: 'no_serving' fails for the US (serving required), not for the EU
    assert any(e["product_id"] == "no_serving" and e["market"] == "us" for e in res.errors)
    assert any(r["product_id"] == "no_serving" and r["market"] == "eu" for r in res.rows)
    by = {e["product_id"]: e for e in res.errors}
    assert "did you mean tuber" in by["bad_ingredient"]["message"] and by["bad_ingredient"]["line"]
    assert "YAML syntax error" in by["bad_yaml"]["message"]
    assert "exceeds" in by["bad_moisture"]["message"] and by["bad_moisture"]["field"] == "processing[0]"


def test_cli_exit_codes_and_tables(tmp_path):
    src = make_range(tmp_path / "src", {**GOOD, **BROKEN})
    out = tmp_path / "out"
    res = runner.invoke(app, ["range", str(src), "--market", "us,eu", "--out", str(out), "-q"])
    assert res.exit_code == 1, res.output  # some products failed
    rows = list(csv.DictReader((out / "errors.csv").open()))
    assert {r["product_id"] for r in rows} >= {"bad_yaml", "bad_ingredient"}
    assert not list(out.glob(".*tmp*"))  # atomic writes leave no temporary files
    good = make_range(tmp_path / "good", GOOD)
    assert (
        runner.invoke(app, ["range", str(good), "--market", "eu", "--out", str(tmp_path / "o2"), "-q"]).exit_code == 0
    )
    bad = runner.invoke(app, ["range", str(good), "--market", "mars", "--out", str(tmp_path / "o3"), "-q"])
    assert bad.exit_code == 2 and "unknown market 'mars'" in bad.output


def test_register_names_labels_moved_by_an_ingredient_change(tmp_path):
    src = make_range(tmp_path / "src", GOOD)
    out = tmp_path / "out"
    assert runner.invoke(app, ["range", str(src), "--market", "us,eu", "--out", str(out), "-q"]).exit_code == 0
    lib = src / "ingredients" / "lib.yaml"
    lib.write_text(
        lib.read_text().replace("sodium: 39300", "sodium: 30000"), encoding="utf-8"
    )  # supplier's new salt spec
    res = runner.invoke(app, ["range", str(src), "--market", "us,eu", "--out", str(out), "-q"])
    assert res.exit_code == 0, res.output
    changes = list(csv.DictReader((out / "changes.csv").open()))
    changed = {(c["product_id"], c["market"]) for c in changes if c["status"] == "changed"}
    assert ("good_a", "us") in changed and ("good_a", "eu") in changed
    a_us = next(c for c in changes if c["product_id"] == "good_a" and c["market"] == "us")
    assert "sodium" in a_us["what_moved"] and "ingredient specification changed: salt" in a_us["why"]
    b = [c for c in changes if c["product_id"] == "good_b"]
    assert all(c["status"] == "unchanged" for c in b)  # good_b has no salt
    wu = runner.invoke(app, ["where-used", "salt", "--db", str(out / "label-register.sqlite")])
    assert "good_a" in wu.output and "good_b" not in wu.output


def test_new_allergen_in_a_sub_ingredient_is_reported(tmp_path):
    files = dict(GOOD)
    files["seasoning"] = """
        subformula: {id: seasoning, name: Seasoning}
        batch: [{ingredient: salt, amount: 50 %}, {ingredient: flour, amount: 50 %}]
    """
    files["good_c"] = """
        product: {id: good_c, name: Good C, category: snacks, serving: {size: 30 g}}
        batch: [{ingredient: tuber, amount: 95 %}, {subformula: seasoning, amount: 5 %}]
    """
    src = make_range(tmp_path / "src", files)
    out = tmp_path / "out"
    runner.invoke(app, ["range", str(src), "--market", "eu", "--out", str(out), "-q"])
    lib = src / "ingredients" / "lib.yaml"
    lib.write_text(
        lib.read_text().replace("    allergens: [wheat]", "    allergens: [wheat, sesame]"), encoding="utf-8"
    )
    runner.invoke(app, ["range", str(src), "--market", "eu", "--out", str(out), "-q"])
    changes = list(csv.DictReader((out / "changes.csv").open()))
    c = next(x for x in changes if x["product_id"] == "good_c")
    assert c["status"] == "changed" and "allergens: +" in c["what_moved"] and "flour" in c["why"]


def test_csv_and_xlsx_sources_equal_yaml_folder(tmp_path):
    import openpyxl

    src = make_range(tmp_path / "src", GOOD)
    header = [
        "product_id",
        "product_name",
        "category",
        "serving_g",
        "net_quantity_g",
        "ingredient",
        "amount",
        "step",
        "final_water",
        "oil",
        "oil_uptake_per_100g",
    ]
    rows = [
        ["good_a", "Good A", "snacks", "30", "150", "tuber", "900 g", "frying", "2", "oil", "30"],
        ["good_a", "", "", "", "", "salt", "10 g", "", "", "", ""],
        ["good_b", "Good B", "snacks", "25", "", "flour", "80 %", "", "", "", ""],
        ["good_b", "", "", "", "", "sugar", "20 %", "", "", "", ""],
    ]
    sheet_dir = tmp_path / "sheet"
    shutil.copytree(src / "ingredients", sheet_dir / "ingredients")
    with (sheet_dir / "range.csv").open("w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "lines"
    ws.append(header)
    for r in rows:
        ws.append(r)
    wb.save(sheet_dir / "range.xlsx")
    keys = lambda res: {
        (r["product_id"], r["market"], r["scenario"]): {
            k: v
            for k, v in r.items()  # noqa: E731
            if k not in ("file", "formula_hash")
        }
        for r in res.rows
    }
    y = keys(run_range(src, src / "ingredients", ["us", "eu"]))
    c = keys(run_range(sheet_dir / "range.csv", sheet_dir / "ingredients", ["us", "eu"]))
    x = keys(run_range(sheet_dir / "range.xlsx", sheet_dir / "ingredients", ["us", "eu"]))
    assert y == c == x


def test_parallel_run_equals_serial(tmp_path):
    src = make_range(tmp_path / "src", {**GOOD, **BROKEN})
    a = run_range(src, src / "ingredients", ["eu"], jobs=1, chunk_size=2)
    b = run_range(src, src / "ingredients", ["eu"], jobs=2, chunk_size=2)
    strip = lambda rs: sorted((r["product_id"], r["scenario"], r.get("fat")) for r in rs)  # noqa: E731
    assert strip(a.rows) == strip(b.rows)
    assert sorted(e["product_id"] for e in a.errors) == sorted(e["product_id"] for e in b.errors)


def test_xlsx_summary_matches_csv(tmp_path):
    """The workbook's market sheet carries the CSV's figures as numbers, under headers with basis and unit."""
    import openpyxl

    src = make_range(tmp_path / "src", GOOD)
    out = tmp_path / "out"
    runner.invoke(app, ["range", str(src), "--market", "eu", "--out", str(out), "-q", "--no-register"])
    with (out / "summary.csv").open() as fh:
        rows = list(csv.DictReader(fh))
    wb = openpyxl.load_workbook(out / "summary.xlsx")
    assert wb.sheetnames == ["EU", "errors"]
    ws = wb["EU"]
    assert ws.freeze_panes == "C2"
    head = [c.value for c in ws[1]]
    body = [dict(zip(head, [c.value for c in r])) for r in ws.iter_rows(min_row=2)]
    assert [b["Product id"] for b in body] == [r["product_id"] for r in rows]
    for b, r in zip(body, rows):
        assert b["Fat per 100 g [g]"] == float(r["fat"].split()[0])
        if r["salt"].startswith("<"):  # a "less than" form has no number: the printed text stands beside
            assert b["Salt per 100 g [g]"] is None and b["Salt as printed"] == r["salt"]
        else:
            assert b["Salt per 100 g [g]"] == float(r["salt"].split()[0])
        assert isinstance(b["Declared energy per 100 g [kJ]"], float)


def test_duplicate_product_ids_are_reported(tmp_path):
    files = dict(GOOD)
    files["good_a_copy"] = GOOD["good_a"]
    src = make_range(tmp_path / "src", files)
    res = run_range(src, src / "ingredients", ["eu"])
    # neither copy is picked: each file is an error row carrying the id, and each counts as failed
    dup = [e for e in res.errors if "'good_a' is defined by 2 files" in e["message"]]
    assert {e["file"].rsplit("/", 1)[-1] for e in dup} == {"good_a.yaml", "good_a_copy.yaml"}
    assert {e["product_id"] for e in dup} == {"good_a"}
    assert not any(r["product_id"] == "good_a" for r in res.rows)
    assert res.products_failed == 2 and res.products_ok == 1


def test_errors_csv_names_ids_and_lines(tmp_path):
    src = make_range(tmp_path / "src", {**GOOD, **BROKEN})
    (src / "renamed_file.yaml").write_text(
        textwrap.dedent(BROKEN["bad_ingredient"]).replace("bad_ingredient", "id_not_stem"), encoding="utf-8"
    )
    out = tmp_path / "out"
    res = runner.invoke(app, ["range", str(src), "--market", "eu", "--out", str(out), "-q", "--no-register"])
    assert res.exit_code == 1, res.output
    rows = list(csv.DictReader((out / "errors.csv").open(encoding="utf-8")))
    by = {r["product_id"]: r for r in rows}
    assert "id_not_stem" in by and "renamed_file" not in by  # the product's id, not its file stem
    assert by["bad_moisture"]["line"] == "4"  # a composition-stage error keeps its line
    assert by["bad_yaml"]["file"].endswith("bad_yaml.yaml")  # no id to read: the stem stands in


def test_sheet_errors_appear_once(tmp_path):
    sheet = tmp_path / "s.csv"
    sheet.write_text("product_id,ingredient,amount,serving_g\nx,flour,100 g,abc\ny,flour,100 g,30\n", encoding="utf-8")
    shutil.copytree(ROOT / "tests" / "data" / "bad" / "ingredients", tmp_path / "ingredients")
    res = runner.invoke(app, ["range", str(sheet), "-m", "eu", "-o", str(tmp_path / "out"), "-q", "--no-register"])
    assert res.exit_code == 1, res.output
    rows = list(csv.DictReader((tmp_path / "out" / "errors.csv").open(encoding="utf-8")))
    assert len(rows) == 1 and rows[0]["product_id"] == "x" and "'abc' is not a number" in rows[0]["message"]


def test_identical_input_gives_a_byte_identical_workbook(tmp_path):
    src = make_range(tmp_path / "src", GOOD)
    for out in ("a", "b"):
        runner.invoke(
            app, ["range", str(src), "--market", "eu,us", "--out", str(tmp_path / out), "-q", "--no-register"]
        )
    assert (tmp_path / "a" / "summary.xlsx").read_bytes() == (tmp_path / "b" / "summary.xlsx").read_bytes()


def test_summary_fills_an_amount_row_as_the_panel_does(tmp_path):
    """A US row that carries its amount keeps the words of a "less than" form in the summary, as on the panel
    ('Includes less than 1g Added Sugars', 21 CFR 101.9(c)(6)(iii) and (d)(7)(iii) as the pack reads them)."""
    src = tmp_path / "src"
    shutil.copytree(ROOT / "demo_products", src, ignore=shutil.ignore_patterns("*.csv", "*.xlsx"))
    res = run_range(src, src / "ingredients", ["us"])
    texts = [r["added_sugars"] for r in res.rows if r.get("added_sugars")]
    assert texts and all(t.startswith("Includes ") and t.endswith(" Added Sugars") for t in texts)
    assert all("lessthan" not in t for t in texts)
    assert any("less than 1g" in t for t in texts)
