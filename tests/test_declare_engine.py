"""The generic declaration engine, driven by a test pack (tests/data/engine_test_pack.yaml)."""

from __future__ import annotations

from pathlib import Path

import pytest

from labelcalc.errors import InputError
from labelcalc.formulation.composition import compose
from labelcalc.intake.formula import load_formula
from labelcalc.labelling.declare import declare
from labelcalc.labelling.rulepack import load_pack_file
from labelcalc.outputs.jsondoc import declaration_dict

ROOT = Path(__file__).resolve().parent.parent
PACK = load_pack_file(ROOT / "tests" / "data" / "engine_test_pack.yaml", ROOT / "labelcalc" / "rules")


def product(
    write, lib, header: str, batch: str = "[{ingredient: flour, amount: 90 g}, {ingredient: oil, amount: 10 g}]"
):
    p = write(
        "p.yaml",
        f"""
        product: {header}
        batch: {batch}
    """,
    )
    return compose(load_formula(p, lib), lib)[0]


def test_columns_rounding_and_percent(write, lib):
    c = product(write, lib, "{id: p, name: P, category: snacks, serving: {size: 30 g}, net_quantity: 150 g}")
    d = declare(c, PACK)
    assert d.columns == ["per_serving", "per_100g"]
    fat = d.row("fat")
    # fat = 0.9 x 1 + 10 = 10.9 g/100 g; per serving 3.27 g -> 3.5 g (0.5 g steps below 5 g)
    assert fat.unrounded["per_100g"] == pytest.approx(10.9)
    assert fat.text("per_serving") == "3.5 g"
    assert fat.text("per_100g") == "11 g"
    assert fat.percent["per_serving"] == "4%"  # from the declared 3.5 g: 3.5 / 78 = 4.49 % -> 4 %
    assert d.servings_text == "5"


def test_serving_change_moves_per_serving_only(write, lib):
    a = declare(product(write, lib, "{id: p, name: P, category: snacks, serving: {size: 30 g}}"), PACK)
    b = declare(product(write, lib, "{id: p, name: P, category: snacks, serving: {size: 45 g}}"), PACK)
    for n in ("fat", "sodium", "energy"):
        assert a.row(n).unrounded["per_100g"] == b.row(n).unrounded["per_100g"]
        assert a.row(n).unrounded["per_serving"] != b.row(n).unrounded["per_serving"]


@pytest.mark.parametrize(
    "net, dual, single",
    [
        ("59 g", False, True),  # 197 % of a 30 g reference amount: one serving
        ("60 g", True, False),  # exactly 200 %: dual column
        ("75 g", True, False),
        ("90 g", True, False),  # exactly 300 %
        ("91 g", False, False),  # above 300 %
    ],
)
def test_dual_column_window(write, lib, net, dual, single):
    d = declare(
        product(write, lib, f"{{id: p, name: P, category: snacks, serving: {{size: 30 g}}, net_quantity: {net}}}"), PACK
    )
    assert d.dual_column is dual
    assert d.single_serving is single
    assert ("per_container" in d.columns) is dual
    if single:
        assert d.serving_g == pytest.approx(59) and d.servings_text == "1"


def test_missing_serving_and_category_are_clear_errors(write, lib):
    c = product(write, lib, "{id: p, name: P, category: snacks}")
    with pytest.raises(InputError, match="needs a serving size"):
        declare(c, PACK)
    c = product(write, lib, "{id: p, name: P, category: soups, serving: {size: 30 g}}")
    with pytest.raises(InputError, match="category 'soups' has no reference amount"):
        declare(c, PACK)


def test_conditional_and_voluntary_rows(write, lib):
    c = product(
        write,
        lib,
        "{id: p, name: P, category: snacks, serving: {size: 30 g}}",
        "[{ingredient: flour, amount: 94 g}, {ingredient: maltitol, amount: 6 g}]",
    )
    d = declare(c, PACK)
    assert d.row("polyols").shown and "5 per 100 g" in d.row("polyols").why
    c2 = product(
        write,
        lib,
        "{id: p, name: P, category: snacks, serving: {size: 30 g}}",
        "[{ingredient: flour, amount: 96 g}, {ingredient: maltitol, amount: 4 g}]",
    )
    assert not declare(c2, PACK).row("polyols").shown
    c3 = product(
        write,
        lib,
        "{id: p, name: P, category: snacks, serving: {size: 30 g}, claims: [sugar_free]}",
        "[{ingredient: flour, amount: 96 g}, {ingredient: maltitol, amount: 4 g}]",
    )
    assert declare(c3, PACK).row("polyols").shown
    assert declare(c3, PACK).row("salt").shown  # voluntary, show: always


def test_unknown_value_is_reported_not_zero(write, lib):
    c = product(
        write,
        lib,
        "{id: p, name: P, category: snacks, serving: {size: 30 g}}",
        "[{ingredient: flour, amount: 50 g}, {ingredient: herb, amount: 50 g}]",
    )
    d = declare(c, PACK)
    vk = d.row("vitamin_k")
    assert vk.text("per_serving") == "unknown" and vk.unknown_inputs == ["herb"]
    assert any("Vitamin K: unknown" in n for n in d.notes) or not vk.shown


def test_json_schema_fields(write, lib):
    d = declare(product(write, lib, "{id: p, name: P, category: snacks, serving: {size: 30 g}}"), PACK)
    doc = declaration_dict(d)
    row = doc["rows"][1]
    for key in (
        "nutrient",
        "unit",
        "per_100g",
        "per_serving",
        "declared_per_100g",
        "declared_per_serving",
        "percent_reference",
        "source",
    ):
        assert key in row
    assert row["declared_per_serving"] == "3.5 g" and row["percent_reference"] == "4%"


def test_only_if_bands_see_the_other_figures(write, lib_dir):
    """Regression: a rounding band with 'only_if' conditions must see the other unrounded figures of its column.
    Canada's pack declares saturated fat "0 g" below 0.5 g only when the 'free of saturated fatty acids'
    conditions hold (FDR table to B.01.401, item 4, column 4: < 0.2 g saturated and < 0.2 g trans)."""
    from labelcalc.intake.library import load_library
    from labelcalc.labelling.rulepack import load_packs

    (lib_dir / "sat.yaml").write_text(
        "ingredients:\n  lowsat:\n    label_name: L\n    source: test\n    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: 'test fixture: every component not given is none'}]\n"
        "    per_100g: {water: 10, starch: 80, fat: 5, saturated_fa: 0.5}\n"
        "  midsat:\n    label_name: M\n    source: test\n    assumed_zero: [{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: 'test fixture: every component not given is none'}]\n"
        "    per_100g: {water: 10, starch: 80, fat: 5, saturated_fa: 1.5}\n",
        encoding="utf-8",
    )
    lib = load_library(lib_dir)
    ca = load_packs()["ca"]
    texts = {}
    for ing in ("lowsat", "midsat"):
        p = write(
            f"{ing}.yaml",
            f"product: {{id: {ing}_p, name: P, category: crackers_snack, serving: {{size: 20 g}}}}\n"
            f"batch: [{{ingredient: {ing}, amount: 100 g}}]\n",
        )
        (c,) = compose(load_formula(p, lib), lib)
        texts[ing] = declare(c, ca).row("saturated_fat").text("per_serving")
    assert texts["lowsat"] == "0 g"  # 0.1 g per serving: free-of conditions hold
    assert texts["midsat"] == "0.3 g"  # 0.3 g per serving: below 0.5 g but not 'free of' -> nearest 0.1 g
