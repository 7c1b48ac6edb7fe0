"""Range runs: outputs together or not at all, byte-identical for identical input, one product's crash never
loses the range, exit codes as the README states, the label register locked, versioned and updated only once
the outputs are in place; --rules energy factor sets are used, and a broken pack of another market does not
block the requested one."""

from __future__ import annotations

import csv
import json
import shutil
import sqlite3
import threading
from pathlib import Path

import pytest
from typer.testing import CliRunner

import labelcalc.ranges.rangerun as rangerun
import labelcalc.ranges.register as register_mod
from labelcalc.cli import app
from labelcalc.ranges.publish import STAGE_PREFIX
from labelcalc.ranges.register import SCHEMA_VERSION, Register

ROOT = Path(__file__).resolve().parent.parent
GOOD = ROOT / "tests" / "data" / "range_good"
LIB = ROOT / "tests" / "data" / "bad" / "ingredients"
runner = CliRunner()


def _range(src: Path, out: Path, *extra: str):
    res = runner.invoke(app, ["range", str(src), "-l", str(LIB), "-m", "us,eu", "-o", str(out), "-q", *extra])
    assert "Traceback" not in res.output
    return res


def _src(tmp_path: Path) -> Path:
    src = tmp_path / "src"
    shutil.copytree(GOOD, src)
    return src


def _outputs(out: Path) -> dict[str, bytes]:
    return {
        str(p.relative_to(out)): p.read_bytes()
        for p in sorted(out.rglob("*"))
        if p.is_file() and p.name != "label-register.sqlite"
    }


def test_identical_input_gives_byte_identical_outputs(tmp_path):
    src = _src(tmp_path)
    a, b, c = tmp_path / "a", tmp_path / "b", tmp_path / "c"
    assert _range(src, a).exit_code == 0
    assert _range(src, b).exit_code == 0
    assert _range(src, c, "--jobs", "2").exit_code == 0
    first = _outputs(a)
    assert {"summary.csv", "summary.xlsx", "summary.json", "errors.csv", "files.csv", "changes.csv"} <= set(first)
    assert first == _outputs(b) == _outputs(c)  # the workbook included, whatever writes it


def test_no_temporary_files_left_and_stale_stages_cleared(tmp_path):
    src, out = _src(tmp_path), tmp_path / "out"
    stale = out / f"{STAGE_PREFIX}999999999-x"  # a stopped run's staging folder (no such process)
    stale.mkdir(parents=True)
    (stale / "summary.csv").write_text("stale", encoding="utf-8")
    assert _range(src, out).exit_code == 0
    assert not [p for p in out.rglob("*") if ".tmp" in p.name or p.name.startswith(STAGE_PREFIX)]


def test_a_crash_inside_one_product_is_that_products_error_row(tmp_path, monkeypatch):
    src, out = _src(tmp_path), tmp_path / "out"
    real = rangerun.LabelEngine

    def flaky(pack, comps):
        if any(c.formula.id == "good_upper" for c in comps):
            raise RuntimeError("simulated engine fault")
        return real(pack, comps)

    monkeypatch.setattr(rangerun, "LabelEngine", flaky)
    res = _range(src, out)
    assert res.exit_code == 3, res.output  # internal error: distinct from "some products failed"
    errors = list(csv.DictReader((out / "errors.csv").open(encoding="utf-8")))
    crash = [e for e in errors if e["product_id"] == "good_upper"]
    assert len(crash) == 1 and "internal error (RuntimeError: simulated engine fault)" in crash[0]["message"]
    assert crash[0]["file"].endswith("upper.YAML")
    report = (out / "crash-report.txt").read_text(encoding="utf-8")
    assert "product: good_upper" in report and "simulated engine fault" in report
    summary = {r["product_id"] for r in csv.DictReader((out / "summary.csv").open(encoding="utf-8"))}
    assert {"good_plain", "good_quoted", "good_fried"} <= summary and "good_upper" not in summary
    assert "crash report" in res.output


def test_outputs_appear_together_or_not_at_all(tmp_path, monkeypatch):
    src, out = _src(tmp_path), tmp_path / "out"
    assert _range(src, out).exit_code == 0
    before = _outputs(out)
    (src / "plain.yaml").write_text(
        (src / "plain.yaml").read_text(encoding="utf-8").replace("80 %", "70 %").replace("20 %", "30 %"),
        encoding="utf-8",
    )
    import labelcalc.ranges.publish as publish

    real = publish.write_csv

    def dies_on_errors_csv(path, rows, columns=None):
        if path.name == "errors.csv":
            raise RuntimeError("writer fault (simulated)")
        return real(path, rows, columns)

    monkeypatch.setattr(publish, "write_csv", dies_on_errors_csv)
    res = _range(src, out)
    assert res.exit_code == 3 and "internal error" in res.output
    after = {k: v for k, v in _outputs(out).items() if k != "crash-report.txt"}
    assert after == before  # the earlier run's outputs, untouched: nothing of the failed run mixed in
    assert not [p for p in out.iterdir() if p.name.startswith(STAGE_PREFIX)]
    # the register did not record the failed run: the rerun reports the change
    monkeypatch.setattr(publish, "write_csv", real)
    res = _range(src, out)
    assert res.exit_code == 0 and "changed" in res.output and "good_plain" in res.output
    assert not (out / "crash-report.txt").exists()  # an earlier run's file never mixes with this run's


def test_register_busy_is_a_clear_message(tmp_path, monkeypatch):
    src, out = _src(tmp_path), tmp_path / "out"
    assert _range(src, out).exit_code == 0
    monkeypatch.setattr(register_mod, "BUSY_SECONDS", 0.2)
    other = sqlite3.connect(out / "label-register.sqlite", isolation_level=None)
    other.execute("BEGIN IMMEDIATE")  # another run holds the register
    try:
        res = _range(src, out)
    finally:
        other.execute("ROLLBACK")
        other.close()
    assert res.exit_code == 2 and "label register is in use by another run" in res.output


def test_register_that_is_not_a_database_or_too_new(tmp_path):
    src, out = _src(tmp_path), tmp_path / "out"
    out.mkdir()
    (out / "label-register.sqlite").write_text("this is not a database\n" * 200, encoding="utf-8")
    res = _range(src, out)
    assert res.exit_code == 2 and "not a label register" in res.output
    newer = tmp_path / "newer.sqlite"
    db = sqlite3.connect(newer)
    db.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    db.close()
    res = _range(src, out, "--register", str(newer))
    assert res.exit_code == 2 and "schema version" in res.output
    res = runner.invoke(app, ["register", "--db", str(out / "label-register.sqlite")])
    assert res.exit_code == 2 and "not a label register" in res.output


def test_register_carries_its_schema_version(tmp_path):
    src, out = _src(tmp_path), tmp_path / "out"
    assert _range(src, out).exit_code == 0
    db = sqlite3.connect(out / "label-register.sqlite")
    assert db.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    db.close()


def test_two_concurrent_runs_never_lose_an_update(tmp_path):
    src = _src(tmp_path)
    res = rangerun.run_range(src, LIB, ["eu"])
    labels = res.labels
    first = [lab for lab in labels if lab.product_id == "good_plain"]
    second = [lab for lab in labels if lab.product_id == "good_fried"]
    path = tmp_path / "reg.sqlite"
    r1 = Register(path)
    r1.lock()
    seen: dict = {}

    def other_run():
        r2 = Register(path)
        r2.lock()  # waits for the first run
        seen["before"] = set(r2.previous())
        r2.record(second)
        r2.close()

    t = threading.Thread(target=other_run)
    t.start()
    r1.compare(first)
    r1.record(first)
    t.join(timeout=30)
    r1.close()
    keys = set(Register(path).previous())
    assert {k[0] for k in keys} == {"good_plain", "good_fried"}
    assert {k[0] for k in seen["before"]} == {"good_plain"}  # the second run saw the first one's labels


def _rules_copy(tmp_path: Path) -> Path:
    rules = tmp_path / "rules"
    shutil.copytree(ROOT / "labelcalc" / "rules" / "markets", rules / "markets")
    (rules / "energy").mkdir()
    return rules


def _energy(args: list[str]) -> float:
    res = runner.invoke(app, ["declare", str(GOOD / "plain.yaml"), "-l", str(LIB), "-m", "eu", "--json", *args])
    assert res.exit_code == 0, res.output
    d = json.loads(res.output)["declarations"][0]
    return d["energy"]["declared_kcal_per_100g"]


def test_edited_energy_factor_set_under_rules_is_used(tmp_path):
    rules = _rules_copy(tmp_path)
    text = (ROOT / "labelcalc" / "rules" / "energy" / "eu_1169_2011_annex_xiv.yaml").read_text(encoding="utf-8")
    # an edited set (invented for this test): fat at 10 kcal/g instead of the regulation's 9
    assert "  - components: [fat]\n    kj: 37\n    kcal: 9\n" in text
    edited = text.replace(
        "  - components: [fat]\n    kj: 37\n    kcal: 9\n", "  - components: [fat]\n    kj: 37\n    kcal: 10\n"
    )
    (rules / "energy" / "eu_1169_2011_annex_xiv.yaml").write_text(edited, encoding="utf-8")
    built_in = _energy([])
    edited_kcal = _energy(["--rules", str(rules / "markets")])
    # plain.yaml: 80 % flour (1 g fat per 100 g) -> 0.8 g fat per 100 g, so +0.8 kcal
    assert edited_kcal == pytest.approx(built_in + 0.8)


def test_broken_pack_of_another_market_does_not_block(tmp_path):
    rules = _rules_copy(tmp_path)
    us = next((rules / "markets").glob("us_*.yaml"))
    us.write_text(us.read_text(encoding="utf-8").replace("rows:", "rowz:", 1), encoding="utf-8")
    res = runner.invoke(
        app, ["declare", str(GOOD / "plain.yaml"), "-l", str(LIB), "-m", "eu", "--rules", str(rules / "markets")]
    )
    assert res.exit_code == 0, res.output
    res = runner.invoke(
        app, ["declare", str(GOOD / "plain.yaml"), "-l", str(LIB), "-m", "us", "--rules", str(rules / "markets")]
    )
    assert res.exit_code == 2 and "Traceback" not in res.output


def test_a_product_that_stops_labelling_is_reported_by_the_register(tmp_path):
    src, out = _src(tmp_path), tmp_path / "out"
    assert _range(src, out).exit_code == 0
    p = src / "plain.yaml"
    p.write_text(p.read_text(encoding="utf-8").replace("product:", "prodcut:"), encoding="utf-8")
    res = _range(src, out)
    assert res.exit_code == 1 and "not labelled in this run" in res.output
    changes = list(csv.DictReader((out / "changes.csv").open(encoding="utf-8")))
    assert {c["product_id"] for c in changes if c["status"] == "not labelled"} == {"good_plain"}


def test_an_internal_error_of_a_single_command_is_one_line_and_a_crash_report(monkeypatch):
    import labelcalc.cli as cli

    def broken(*a, **k):
        raise ZeroDivisionError("simulated")

    monkeypatch.setattr(cli, "declare", broken)
    res = runner.invoke(app, ["declare", str(GOOD / "plain.yaml"), "-l", str(LIB), "-m", "eu"])
    assert res.exit_code == 3
    assert "Traceback" not in res.output and len(res.output.strip().splitlines()) == 1
    assert "internal error (ZeroDivisionError: simulated)" in res.output and "plain.yaml" in res.output
    report = Path(res.output.rsplit("crash report: ", 1)[1].strip())
    assert "ZeroDivisionError" in report.read_text(encoding="utf-8")
    report.unlink()


def test_range_sheet_panels_are_written(tmp_path):
    sheet = tmp_path / "range.csv"
    sheet.write_text(
        "product_id,product_name,category,serving_g,ingredient,amount\n"
        "sheet_p,Sheet P,snacks,30,flour,80 %\nsheet_p,,,,sugar,20 %\n",
        encoding="utf-8",
    )
    out = tmp_path / "out"
    res = runner.invoke(
        app, ["range", str(sheet), "-l", str(LIB), "-m", "eu", "-o", str(out), "-q", "--no-register", "--panels"]
    )
    assert res.exit_code == 0, res.output
    assert (out / "panels" / "sheet_p.eu.pdf").exists()


def test_xlsx_products_listed_twice_and_extra_cells_are_refused(tmp_path):
    import openpyxl

    wb = openpyxl.Workbook()
    lines = wb.active
    lines.title = "lines"
    lines.append(["product_id", "ingredient", "amount"])
    lines.append(["x1", "flour", "100 g"])
    lines.append(["x2", "flour", "100 g", "stray"])
    lines.append(["x3", "flour", "100 g"])
    products = wb.create_sheet("products")
    products.append(["product_id", "product_name", "category", "serving_g"])
    products.append(["x1", "X one", "snacks", 30])
    products.append(["x1", "X one again", "snacks", 30])
    products.append(["x3", "X three", "snacks", 30])
    products.append(["x4", "X four (no lines)", "snacks", 30])
    path = tmp_path / "range.xlsx"
    wb.save(path)
    out = tmp_path / "out"
    res = runner.invoke(app, ["range", str(path), "-l", str(LIB), "-m", "eu", "-o", str(out), "-q", "--no-register"])
    assert res.exit_code == 1, res.output
    errors = {e["product_id"]: e["message"] for e in csv.DictReader((out / "errors.csv").open(encoding="utf-8"))}
    assert "listed twice in the products sheet (rows 2 and 3)" in errors["x1"]
    assert "1 cell(s) beyond the last column or under no heading (stray)" in errors["x2"]
    assert "no batch line" in errors["x4"]
    summary = {r["product_id"] for r in csv.DictReader((out / "summary.csv").open(encoding="utf-8"))}
    assert summary == {"x3"}


def test_broken_pack_of_another_market_does_not_block_a_range(tmp_path):
    rules = _rules_copy(tmp_path)
    us = next((rules / "markets").glob("us_*.yaml"))
    us.write_text(us.read_text(encoding="utf-8").replace("rows:", "rowz:", 1), encoding="utf-8")
    out = tmp_path / "out"
    res = runner.invoke(
        app,
        [
            "range",
            str(GOOD),
            "-l",
            str(LIB),
            "-m",
            "eu",
            "-o",
            str(out),
            "-q",
            "--no-register",
            "--rules",
            str(rules / "markets"),
        ],
    )
    assert res.exit_code == 0, res.output


def test_an_output_folder_that_cannot_be_written_is_a_clear_message(tmp_path):
    src = _src(tmp_path)
    blocker = tmp_path / "a_file"
    blocker.write_text("not a folder", encoding="utf-8")
    res = _range(src, blocker / "out")
    assert res.exit_code == 2 and "cannot read or write" in res.output and "internal error" not in res.output


def test_a_register_from_before_schema_versions_is_upgraded(tmp_path):
    path = tmp_path / "old.sqlite"
    db = sqlite3.connect(path)
    db.executescript(register_mod.SCHEMA)  # the same table, written before the file carried a version
    db.close()
    Register(path).close()
    db = sqlite3.connect(path)
    assert db.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    db.close()


def test_an_output_folder_inside_the_source_is_not_read_as_input(tmp_path):
    src = _src(tmp_path)
    out = src / "out"
    assert _range(src, out, "--no-register").exit_code == 0
    first = _outputs(out)
    assert _range(src, out, "--no-register").exit_code == 0
    assert _outputs(out) == first  # the first run's outputs did not become the second run's input
    assert "out/" not in (out / "files.csv").read_text(encoding="utf-8")


def test_relative_output_folder_with_panels(tmp_path, monkeypatch):
    """The README's first command: a relative --out with --panels (panels are written under the staging folder
    and moved into place like every other output)."""
    src = tmp_path / "src"
    shutil.copytree(GOOD, src)
    shutil.copytree(LIB, src / "ingredients")
    monkeypatch.chdir(tmp_path)
    res = runner.invoke(app, ["range", "src", "-m", "eu", "--out", "rel-out", "--panels", "-q", "--no-register"])
    assert res.exit_code in (0, 1), res.output
    assert "internal error" not in res.output
    assert list((tmp_path / "rel-out" / "panels").glob("*.pdf"))
    assert not list((tmp_path / "rel-out").glob(".labelcalc-stage*"))
