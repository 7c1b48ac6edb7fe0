"""Bad input: one clear message naming file, line or field and the fix; nothing computed."""

from __future__ import annotations

import pytest
from typer.testing import CliRunner

from labelcalc.cli import app
from labelcalc.errors import InputError
from labelcalc.intake.formula import load_formula
from labelcalc.intake.library import load_library

runner = CliRunner()


def err(path, lib) -> str:
    with pytest.raises(InputError) as e:
        load_formula(path, lib)
    return str(e.value)


def test_unknown_ingredient_with_suggestion(write, lib):
    p = write(
        "f.yaml",
        """
        product: {id: f, name: F}
        batch:
          - {ingredient: flour, amount: 100 g}
          - {ingredient: suger, amount: 10 g}
    """,
    )
    msg = err(p, lib)
    assert "f.yaml, line 5" in msg and "unknown ingredient 'suger'" in msg and "did you mean sugar" in msg


@pytest.mark.parametrize(
    "amount, text",
    [
        ("-5 g", "cannot read amount"),
        ("0 g", "must be greater than zero"),
        ("10", "has no unit"),
        ("10 gr", "unknown unit 'gr'"),
        ("10 kgs", "unknown unit 'kgs'"),
    ],
)
def test_bad_amounts(write, lib, amount, text):
    p = write(
        "f.yaml",
        f"""
        product: {{id: f, name: F}}
        batch:
          - {{ingredient: flour, amount: {amount}}}
    """,
    )
    msg = err(p, lib)
    assert text in msg and "line 4" in msg and "batch[0]" in msg


def test_percentages_over_100(write, lib):
    p = write(
        "f.yaml",
        """
        product: {id: f, name: F}
        batch:
          - {ingredient: flour, amount: 70 %}
          - {ingredient: sugar, amount: 40 %}
    """,
    )
    assert "add up to 110 %, more than 100 %" in err(p, lib)


def test_oil_uptake_with_no_oil(write, lib):
    p = write(
        "f.yaml",
        """
        product: {id: f, name: F}
        batch: [{ingredient: tuber, amount: 100 g}]
        processing:
          - {step: frying, oil_uptake: {per_100g: 30}}
    """,
    )
    msg = err(p, lib)
    assert "oil_uptake needs 'oil'" in msg and "processing[0].oil_uptake" in msg


def test_cycle_is_named(write, lib):
    write(
        "a.yaml",
        """
        subformula: {id: sub_a, name: A}
        batch: [{subformula: sub_b, amount: 100 g}]
    """,
    )
    write(
        "b.yaml",
        """
        subformula: {id: sub_b, name: B}
        batch: [{subformula: sub_a, amount: 100 g}]
    """,
    )
    p = write(
        "p.yaml",
        """
        product: {id: p, name: P}
        batch: [{subformula: sub_a, amount: 100 g}]
    """,
    )
    assert "cycle: sub_a -> sub_b -> sub_a" in err(p, lib)


def test_yaml_syntax_error_names_line(write, lib):
    p = write("f.yaml", "product: {id: f, name: F}\nbatch:\n  - ingredient: flour\n    amount: [100 g\n")
    msg = err(p, lib)
    assert "YAML syntax error" in msg and "line" in msg


def test_unknown_key_in_formula(write, lib):
    p = write(
        "f.yaml",
        """
        product: {id: f, name: F, sevring: {size: 30 g}}
        batch: [{ingredient: flour, amount: 100 g}]
    """,
    )
    msg = err(p, lib)
    assert "product.sevring" in msg and "unknown key" in msg


def _bad_lib(tmp_path, body):
    d = tmp_path / "badlib"
    d.mkdir()
    (d / "l.yaml").write_text(body, encoding="utf-8")
    with pytest.raises(InputError) as e:
        load_library(d)
    return str(e.value)


def test_library_sum_over_100(tmp_path):
    msg = _bad_lib(
        tmp_path,
        "ingredients:\n  x:\n    label_name: X\n    source: test\n    per_100g: {water: 60, protein: 30, fat: 20}\n",
    )
    assert "sum to 110.00 g per 100 g" in msg and "line" in msg


def test_library_unknown_component(tmp_path):
    msg = _bad_lib(tmp_path, "ingredients:\n  x:\n    label_name: X\n    source: test\n    per_100g: {watr: 60}\n")
    assert "unknown component 'watr'" in msg and "did you mean water" in msg and "line 5" in msg


def test_library_negative_value(tmp_path):
    msg = _bad_lib(tmp_path, "ingredients:\n  x:\n    label_name: X\n    source: test\n    per_100g: {water: -1}\n")
    assert "must be a number >= 0" in msg


def test_library_csv_empty_cell_is_unknown(tmp_path):
    d = tmp_path / "csvlib"
    d.mkdir()
    (d / "l.csv").write_text("id,label_name,source,water,protein,vitamin_k\nleaf,Leaf,test,90,2,\n", encoding="utf-8")
    lib = load_library(d)
    assert lib.get("leaf").values == {"water": 90.0, "protein": 2.0}


def test_cli_error_is_one_message_exit_2(write, lib_dir):
    p = write(
        "f.yaml",
        """
        product: {id: f, name: F}
        batch: [{ingredient: flour, amount: 100 gram}]
    """,
    )
    res = runner.invoke(app, ["compose", str(p), "--library", str(lib_dir)])
    assert res.exit_code == 2
    assert "Traceback" not in res.output
    assert "unknown unit 'gram'" in res.output


def test_cli_moisture_loss_over_water(write, lib_dir):
    p = write(
        "f.yaml",
        """
        product: {id: f, name: F}
        batch: [{ingredient: flour, amount: 100 g}]
        processing: [{step: baking, moisture_loss: {percent_of_batch: 50}}]
    """,
    )
    res = runner.invoke(app, ["compose", str(p), "--library", str(lib_dir)])
    assert res.exit_code == 2 and "exceeds the 14.00 g of water present" in res.output
    assert "line 4" in res.output


@pytest.mark.parametrize(
    "method, words", [("us_101_9_method_e", "bomb calorimetry"), ("us_101_9_method_d", "approved")]
)
def test_cli_us_energy_methods_d_and_e_are_refused_plainly(write, lib_dir, method, words):
    # 21 CFR 101.9(c)(1)(i)(D) and (E): allowed by the law, but not computable from a formula (E needs the
    # laboratory's bomb-calorimetry figure less 1.25 kcal per g protein) - the CLI says so instead of faking it.
    p = write(
        "f.yaml",
        f"""
        product: {{id: f, name: F, category: snacks, serving: {{size: 30 g}}, energy_methods: {{us: {method}}}}}
        batch: [{{ingredient: flour, amount: 100 g}}]
    """,
    )
    res = runner.invoke(app, ["declare", str(p), "--library", str(lib_dir), "--market", "us"])
    assert res.exit_code == 2 and "Traceback" not in res.output
    assert "cannot be computed from a formula" in res.output and words in res.output
