"""The bad-input corpus (tests/data/bad): every class of bad input gives its exit code and one clear message,
never a traceback; a range over the whole corpus mixed with good products accounts for every file."""

from __future__ import annotations

import csv
import shutil
from pathlib import Path

import pytest
import yaml
from typer.testing import CliRunner

from labelcalc.cli import app
from labelcalc.intake.formula import MAX_BATCH_LINES
from labelcalc.yamlsafe import MAX_FILE_BYTES

ROOT = Path(__file__).resolve().parent
BAD = ROOT / "data" / "bad"
GOOD = ROOT / "data" / "range_good"
LIB = BAD / "ingredients"
CASES = yaml.safe_load((BAD / "expected.yaml").read_text(encoding="utf-8"))
runner = CliRunner()


def _run(args: list[str]):
    res = runner.invoke(app, args)
    assert res.exception is None or isinstance(res.exception, SystemExit), res.exception
    assert "Traceback" not in res.output
    return res


@pytest.mark.parametrize("case", CASES, ids=[c["case"] for c in CASES])
def test_bad_input_class(case, tmp_path):
    out = tmp_path / "out"
    subst = {"{bad}": str(BAD), "{lib}": str(LIB), "{good}": str(GOOD / "plain.yaml"), "{out}": str(out)}
    args = []
    for a in case["args"]:
        for k, v in subst.items():
            a = a.replace(k, v)
        args.append(a)
    res = _run(args)
    text = res.output + ((out / "errors.csv").read_text(encoding="utf-8") if (out / "errors.csv").exists() else "")
    assert res.exit_code == case["exit"], res.output
    assert case["message"] in text, text


def test_every_class_has_its_file():
    named = {a for c in CASES for a in c["args"] if a.startswith("{bad}/")}
    files = {f"{{bad}}/{p.relative_to(BAD).as_posix()}" for p in BAD.rglob("*") if p.is_file()}
    files -= {"{bad}/expected.yaml", "{bad}/ingredients/lib.yaml"}
    files -= {f for f in files if "/dup/twin_" in f}  # the duplicates, used through uses_duplicate_subformula
    assert files <= named, files - named


def test_file_too_large_and_too_many_batch_lines(tmp_path):
    big = tmp_path / "big.yaml"
    big.write_text("product: {id: big, name: B}\n# " + "x" * MAX_FILE_BYTES + "\nbatch: []\n", encoding="utf-8")
    res = _run(["declare", str(big), "-l", str(LIB), "-m", "eu"])
    assert res.exit_code == 2 and "file is larger than 5 MB" in res.output
    many = tmp_path / "many.yaml"
    lines = "".join("  - {ingredient: flour, amount: 1 g}\n" for _ in range(MAX_BATCH_LINES + 1))
    many.write_text(f"product: {{id: many, name: M}}\nbatch:\n{lines}", encoding="utf-8")
    res = _run(["declare", str(many), "-l", str(LIB), "-m", "eu"])
    assert res.exit_code == 2 and f"{MAX_BATCH_LINES + 1:,} batch lines" in res.output


def test_range_over_every_bad_class_and_good_products(tmp_path):
    src = tmp_path / "range"
    shutil.copytree(BAD, src / "bad")
    shutil.copytree(GOOD, src / "good")
    out = tmp_path / "out"
    res = _run(["range", str(src), "-l", str(src / "bad" / "ingredients"), "-m", "us,eu", "-o", str(out), "-q"])
    assert res.exit_code == 1, res.output
    files = list(csv.DictReader((out / "files.csv").open(encoding="utf-8")))
    errors = list(csv.DictReader((out / "errors.csv").open(encoding="utf-8")))
    # every YAML file under the source is accounted for, whatever its extension's case
    on_disk = sorted(str(p.relative_to(tmp_path)) for p in src.rglob("*") if p.suffix.lower() in (".yaml", ".yml"))
    listed = sorted(str(Path(f["file"]).resolve().relative_to(tmp_path.resolve())) for f in files)
    everything = sorted(str(p.relative_to(tmp_path)) for p in src.rglob("*") if p.is_file())
    assert listed == everything  # the sheets (CSV) are listed too, as not read
    assert (
        sorted(str(Path(f["file"]).resolve().relative_to(tmp_path.resolve())) for f in files if f["kind"] != "not read")
        == on_disk
    )
    assert {f["outcome"] for f in files if f["kind"] == "not read"} == {"not read: not a YAML file"}
    outcome = {Path(f["file"]).name: f["outcome"] for f in files}
    # every good product labelled, the quirky-but-valid ones included
    for name in ("plain.yaml", "quoted_key.yaml", "anchored.yaml", "late_id.yaml", "upper.YAML", "fried.yaml"):
        assert outcome[name] == "labelled", name
    summary = {r["product_id"] for r in csv.DictReader((out / "summary.csv").open(encoding="utf-8"))}
    assert summary >= {"good_plain", "good_quoted", "good_anchored", "good_late_id", "good_upper", "good_fried"}
    # recognised non-products
    assert outcome["prices.yaml"] == "not a product: price list"
    assert outcome["certificate.yaml"] == "not a product: lab certificate"
    assert outcome["sodium_too_high.yaml"] == "not a product: ingredient library"
    assert outcome["band_gap_pack.yaml"] == "not a product: rule pack"
    # every bad formula file is an error row (or a failed product), never silently dropped
    for p in (src / "bad" / "formulas").iterdir():
        assert outcome[p.name].startswith(("error", "failed")), p.name
        assert any(Path(e["file"]).name == p.name for e in errors), p.name
    # the misspelled key gets a suggestion; a file with no id carries its stem
    by_file = {Path(e["file"]).name: e for e in errors}
    assert "did you mean 'product:'" in by_file["misspelled_first_key.yaml"]["message"]
    assert by_file["no_id.yaml"]["product_id"] == "no_id"
    # duplicate ids: an error row for every file with the id and for the product that uses it; none is picked
    twins = [e for e in errors if "'twin_product' is defined by 2 files" in e["message"]]
    assert {Path(e["file"]).name for e in twins} == {"twin_product_1.yaml", "twin_product_2.yaml"}
    assert {e["product_id"] for e in twins} == {"twin_product"}
    assert "twin_product" not in summary and "uses_duplicate_subformula" not in summary
    assert any(
        e["product_id"] == "uses_duplicate_subformula" and "'twin_seasoning' is defined by 2 files" in e["message"]
        for e in errors
    )
    # errors.csv names products by id, each problem once
    assert by_file["amount_1e400.yaml"]["product_id"] == "amount_1e400"
    keys = [tuple(e.values()) for e in errors]
    assert len(keys) == len(set(keys))
    assert "failed" in res.output and "files.csv" in res.output
