"""What the command line prints reads as words: help without type placeholders, compare without 'None',
calibrate under a new sub-formula id, where-used naming the route."""

from __future__ import annotations

from pathlib import Path

import pytest
import yaml
from typer.testing import CliRunner

from labelcalc.cli import app

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "demo_products"
runner = CliRunner()
COMMANDS = [
    [],
    ["compose"],
    ["declare"],
    ["assess"],
    ["panel"],
    ["range"],
    ["compare"],
    ["sweep"],
    ["target"],
    ["verify"],
    ["calibrate"],
    ["where-used"],
    ["register"],
    ["schema"],
    ["serve"],
    ["rules", "show"],
    ["rules", "check"],
]


@pytest.mark.parametrize("cmd", COMMANDS, ids=lambda c: " ".join(c) or "main")
def test_help_has_no_type_placeholders(cmd):
    res = runner.invoke(app, [*cmd, "--help"], env={"COLUMNS": "120"})
    assert res.exit_code == 0, res.output
    text = " ".join(res.output.split()).replace("prices: {ingredient: {per_kg, currency}}", "")
    for artefact in ("<bool>", "<str>", "<path>", "<float>", "<int", "<list", "{formula}", "{"):
        assert artefact not in text, (cmd, artefact)


def test_sweep_help_mentions_sub_formulas():
    res = runner.invoke(app, ["sweep", "--help"], env={"COLUMNS": "120"})
    assert "sub-formula" in res.output and "[%]" in res.output


def test_compare_prints_cost_per_kcal_saved_and_no_none():
    res = runner.invoke(
        app,
        [
            "compare",
            str(DEMO / "hl_kettle_sea_salt.yaml"),
            str(DEMO / "hl_kettle_sea_salt_lite.yaml"),
            "--market",
            "us",
        ],
        env={"COLUMNS": "250"},
    )
    assert res.exit_code == 0, res.output
    assert "cost per kcal saved" in res.output
    assert "None" not in res.output
    assert "not on the panel -> " in res.output  # Vitamin A appears only on the lite label (demo data)


def test_calibrate_writes_the_sub_formula_under_a_new_id(tmp_path):
    res = runner.invoke(
        app,
        [
            "calibrate",
            str(DEMO / "hl_kettle_sea_salt.yaml"),
            "--lab",
            str(DEMO / "lab" / "hl_kettle_sea_salt_certificate.yaml"),
            "--out",
            str(tmp_path),
        ],
    )
    assert res.exit_code == 0, res.output
    product = yaml.safe_load((tmp_path / "hl_kettle_sea_salt_calibrated.yaml").read_text())
    sub = yaml.safe_load((tmp_path / "hl_kettle_base_fried_calibrated.yaml").read_text())
    assert sub["subformula"]["id"] == "hl_kettle_base_fried_calibrated"
    assert {"subformula": "hl_kettle_base_fried_calibrated"}.items() <= next(
        line for line in product["batch"] if "subformula" in line and "kettle" in line["subformula"]
    ).items()


def test_where_used_names_the_route(tmp_path, monkeypatch):
    monkeypatch.chdir(ROOT)
    out = tmp_path / "out"
    res = runner.invoke(app, ["range", "demo_products", "--market", "eu", "--out", str(out), "-q"])
    assert res.exit_code == 0, res.output
    res = runner.invoke(app, ["where-used", "sunflower_oil", "--db", str(out / "label-register.sqlite")])
    assert res.exit_code == 0, res.output
    assert "through sub-formula hl_kettle_base_fried > step 'frying' (oil taken up)" in res.output
    assert "oil blend hl_frying_blend_75" in res.output
