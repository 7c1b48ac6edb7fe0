"""Property tests (hypothesis) over what users type: amounts, compositions and processing parameters.

Whatever the numbers, the CLI gives either figures or one clear message (exit 0, 1 or 2): never a traceback,
and never NaN or infinity in any output."""

from __future__ import annotations

import csv
import json
import math
import re
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from labelcalc.cli import app

ROOT = Path(__file__).resolve().parent
LIB = ROOT / "data" / "bad" / "ingredients"
runner = CliRunner()

numbers = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(min_value=0, max_value=120),
    st.integers(min_value=-10, max_value=10**12),
    st.sampled_from([0, 1e-300, 1e308, 1e400, True, False, "1e400", "inf", "-0", ".nan", "NaN"]),
)
units = st.sampled_from(["g", "kg", "mg", "%", "", " g", "ml", "G"])
ingredients = st.sampled_from(["flour", "sugar", "tuber", "oil", "salt", "spe"])
NON_FINITE = re.compile(r"\b(nan|NaN|inf|Infinity)\b")


def _yaml_number(x) -> str:
    if isinstance(x, bool):
        return "true" if x else "false"
    if isinstance(x, float):
        if math.isnan(x):
            return ".nan"
        if math.isinf(x):
            return ".inf" if x > 0 else "-.inf"
        return repr(x)
    return str(x)


def _amount(x, unit) -> str:
    return f"'{_yaml_number(x)}{' ' if unit and not unit.startswith(' ') else ''}{unit}'"


@st.composite
def formulas(draw):
    lines = draw(st.lists(st.tuples(ingredients, numbers, units), min_size=1, max_size=4))
    batch = "".join(f"  - {{ingredient: {i}, amount: {_amount(x, u)}}}\n" for i, x, u in lines)
    step = draw(st.sampled_from(["", "moisture", "final_water", "oil", "yield", "finished", "range"]))
    p1, p2 = draw(numbers), draw(numbers)
    steps = {
        "": "",
        "moisture": f"processing: [{{step: s, moisture_loss: {{percent_of_batch: {_yaml_number(p1)}}}}}]\n",
        "final_water": f"processing: [{{step: s, moisture_loss: {{final_water: {_yaml_number(p1)}}}}}]\n",
        "oil": f"processing: [{{step: s, oil_uptake: {{oil: oil, per_100g: {_yaml_number(p1)}}}}}]\n",
        "yield": f"processing: [{{step: s, yield: {_yaml_number(p1)}}}]\n",
        "finished": f"processing: [{{step: s, finished_weight: {_amount(p1, 'g')}}}]\n",
        "range": f"processing: [{{step: s, moisture_loss: {{final_water: [{_yaml_number(p1)}, {_yaml_number(p2)}]}}}}]\n",
    }[step]
    serving, spc = draw(numbers), draw(numbers)
    head = (
        f"product: {{id: prop, name: Prop, category: snacks, serving: {{size: {_amount(serving, 'g')}}}, "
        f"servings_per_container: {_yaml_number(spc)}}}\n"
    )
    return head + "batch:\n" + batch + steps


def _no_non_finite(text: str) -> None:
    assert not NON_FINITE.search(text), text[:2000]


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(text=formulas())
def test_any_formula_gives_figures_or_one_clear_message(tmp_path, text):
    p = tmp_path / "prop.yaml"
    p.write_text(text, encoding="utf-8")
    res = runner.invoke(app, ["declare", str(p), "-l", str(LIB), "-m", "us,eu", "--json"])
    assert res.exception is None or isinstance(res.exception, SystemExit), (text, res.exception)
    assert "Traceback" not in res.output
    assert res.exit_code in (0, 1, 2), (text, res.output)
    if res.exit_code == 0:
        _no_non_finite(res.output)
        # physically possible: no food holds more energy than pure fat, 37 kJ/g (Reg. (EU) No 1169/2011, Annex XIV),
        # or 9 kcal/g where kJ follow the calorie figure at 1 kcal = 4.184 kJ (21 CFR 101.9(c)(1), as the US pack does)
        for d in json.loads(res.output)["declarations"]:
            for key in ("declared_kj_per_100g", "available_kj_per_100g"):
                assert (d["energy"].get(key) or 0) <= 900 * 4.184 + 1e-6, (text, d["energy"])
    else:
        assert res.output.startswith("error: ") and "internal error" not in res.output, (text, res.output)


composition_values = st.one_of(
    st.floats(min_value=0, max_value=100),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([True, "yes", 1e400, -1, 0, 100000, 1e9]),
)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    values=st.dictionaries(
        st.sampled_from(["water", "protein", "fat", "sugars", "starch", "sodium", "vitamin_d", "cholesterol"]),
        composition_values,
        min_size=1,
    )
)
def test_any_composition_gives_figures_or_one_clear_message(tmp_path, values):
    lib = tmp_path / "lib.yaml"
    body = ", ".join(f"{k}: {_yaml_number(v) if not isinstance(v, str) else v}" for k, v in values.items())
    lib.write_text(
        f"ingredients:\n  thing:\n    label_name: Thing\n    source: invented test data\n"
        f"    assumed_zero: [{{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], "
        f'reason: "test fixture: every component not given is none"}}]\n'
        f"    per_100g: {{{body}}}\n    allergens: []\n",
        encoding="utf-8",
    )
    f = tmp_path / "f.yaml"
    f.write_text(
        "product: {id: f, name: F, category: snacks, serving: {size: 30 g}}\nbatch: [{ingredient: thing, amount: 100 g}]\n",
        encoding="utf-8",
    )
    res = runner.invoke(app, ["declare", str(f), "-l", str(lib), "-m", "us,eu,uk,ca,anz,codex", "--json"])
    assert res.exception is None or isinstance(res.exception, SystemExit), (values, res.exception)
    assert res.exit_code in (0, 1, 2), (values, res.output)
    if res.exit_code == 0:
        _no_non_finite(res.output)
    else:
        assert res.output.startswith("error: ") and "internal error" not in res.output, (values, res.output)


@settings(max_examples=10, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(texts=st.lists(formulas(), min_size=1, max_size=4))
def test_any_range_labels_or_reports_every_product(tmp_path_factory, texts):
    src = tmp_path_factory.mktemp("range")
    for i, t in enumerate(texts):
        (src / f"p{i}.yaml").write_text(t.replace("id: prop", f"id: p{i}"), encoding="utf-8")
    out = src / "out"
    res = runner.invoke(app, ["range", str(src), "-l", str(LIB), "-m", "us,eu", "-o", str(out), "-q", "--no-register"])
    assert res.exception is None or isinstance(res.exception, SystemExit), res.exception
    assert res.exit_code in (0, 1), res.output
    files = list(csv.DictReader((out / "files.csv").open(encoding="utf-8")))
    assert len(files) == len(texts)
    labelled = {f["id"] for f in files if f["outcome"] == "labelled"}
    failed = {e["product_id"] for e in csv.DictReader((out / "errors.csv").open(encoding="utf-8"))}
    assert labelled | failed == {f"p{i}" for i in range(len(texts))} and not labelled & failed
    _no_non_finite((out / "summary.csv").read_text(encoding="utf-8"))
    _no_non_finite(json.dumps(json.loads((out / "summary.json").read_text(encoding="utf-8"))["summary"]))
