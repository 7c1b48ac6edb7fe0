"""Panel drafts: text extracted from the PDFs (pypdf), determinism, wrapping, safe names."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from pypdf import PdfReader
from reportlab.pdfbase import pdfmetrics

from labelcalc.labelling.rulepack import get_packs
from labelcalc.outputs.panelpdf import BOLD, CAUTION, FONT, _fonts, wrap_lines
from labelcalc.outputs.panelrun import panels_for

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "demo_products"


def _pages(pdf: Path) -> list[str]:
    return [re.sub(r"\s+", " ", p.extract_text() or "") for p in PdfReader(str(pdf)).pages]


@pytest.fixture(scope="module")
def written(tmp_path_factory, demo_lib):
    out = tmp_path_factory.mktemp("panels")
    files, failures = panels_for(
        DEMO / "hl_gummy_sugar_free.yaml", demo_lib, get_packs(["us", "eu"]), out, "2026-12-02"
    )
    return out, files, failures


def test_every_declared_value_and_caution_on_the_panel_page(written, demo_lib):
    from labelcalc.formulation.composition import compose
    from labelcalc.intake.formula import load_formula
    from labelcalc.labelling.declare import declare

    out, files, failures = written
    assert not failures
    f = load_formula(DEMO / "hl_gummy_sugar_free.yaml", demo_lib)
    (c,) = compose(f, demo_lib)
    for market in ("us", "eu"):
        pages = _pages(out / f"hl_gummy_sugar_free.{market}.pdf")
        assert all(CAUTION[:40] in p.replace("\n", " ") for p in pages), "caution on every page"
        d = declare(c, get_packs([market])[0])
        first = pages[0]
        for r in d.shown_rows:
            for b in d.columns:
                want = r.label_for(b) if r.amount_in_label else r.text(b)
                assert want.replace(" ", "") in first.replace(" ", ""), (market, r.nutrient, want)
        assert f.content_hash in first


def test_statements_on_the_panel_page(written):
    out, _, _ = written
    first = _pages(out / "hl_gummy_sugar_free.eu.pdf")[0]
    assert "laxative" in first.lower()  # Reg. (EU) No 1169/2011 Annex III point 2.4 (polyols above 10 %)
    assert "phenylalanine" in first.lower()  # Annex III point 2.3 (aspartame)


def test_pdf_is_byte_identical(tmp_path, demo_lib):
    a, b = tmp_path / "a", tmp_path / "b"
    packs = get_packs(["us"])
    panels_for(DEMO / "hl_baked_cracker.yaml", demo_lib, packs, a, "2026-12-02")
    panels_for(DEMO / "hl_baked_cracker.yaml", demo_lib, packs, b, "2026-12-02")
    assert (a / "hl_baked_cracker.us.pdf").read_bytes() == (b / "hl_baked_cracker.us.pdf").read_bytes()


def test_long_ingredient_list_wraps(tmp_path, write, lib):
    _fonts()
    names = [f"ingredient number {i} with a rather long descriptive name" for i in range(60)]
    text = "Ingredients: " + ", ".join(names)
    width = 80 * 2.8346
    lines = wrap_lines(text, FONT, 8.5, width)
    assert len(lines) > 10
    assert all(pdfmetrics.stringWidth(x, FONT, 8.5) <= width + 1e-6 for x in lines)
    assert " ".join(lines).replace("  ", " ") == text
    word = "x" * 400  # one unbreakable word is still cut to fit
    assert all(pdfmetrics.stringWidth(x, BOLD, 8) <= 100 for x in wrap_lines(word, BOLD, 8, 100))


def test_long_ingredient_list_in_pdf(tmp_path, lib_dir, write):
    from labelcalc.intake.library import load_library

    extra = "\n".join(
        f"  ing{i}:\n    label_name: Ingredient {i} with a long supplier name\n    source: test\n"
        f"    assumed_zero: [{{components: [proximates, lipids, carbohydrates, polyols, fibre, minerals, vitamins, others], reason: 'test fixture: every component not given is none'}}]\n    per_100g: {{starch: 90, water: 10}}\n    allergens: []"
        for i in range(40)
    )
    (lib_dir / "many.yaml").write_text("ingredients:\n" + extra + "\n", encoding="utf-8")
    lib = load_library(lib_dir)
    batch = "\n".join(f"  - {{ingredient: ing{i}, amount: {100 - i} g}}" for i in range(40))
    p = write(
        "many.yaml", "product: {id: many, name: Many, category: snacks, serving: {size: 30 g}}\nbatch:\n" + batch + "\n"
    )
    files, _ = panels_for(p, lib, get_packs(["eu"]), tmp_path / "out", "2026-12-02")
    text = _pages(tmp_path / "out" / "many.eu.pdf")[0]
    for i in range(40):
        assert f"Ingredient {i} with a long supplier name" in text


def test_unsafe_product_id_stays_inside(tmp_path, lib, write):
    p = write(
        "evil.yaml",
        """
        product: {id: "..%2F..%2Fevil", name: Evil, category: snacks, serving: {size: 30 g}}
        batch: [{ingredient: flour, amount: 100 g}]
    """,
    )
    out = tmp_path / "out"
    files, _ = panels_for(p, lib, get_packs(["eu"]), out, "2026-12-02")
    for f in files:
        assert f.resolve().parent == out.resolve()


@pytest.mark.parametrize("ident", ["../../etc/passwd", "a/b", "..", ".hidden", "x\\y", "ok_id"])
def test_safe_names_never_escape(tmp_path, ident):
    from labelcalc.files import inside, safe_name

    name = safe_name(ident)
    assert "/" not in name and "\\" not in name and not name.startswith(".")
    assert inside(tmp_path, name + ".pdf").parent == tmp_path.resolve()


def test_safe_names_do_not_collide():
    from labelcalc.files import safe_name

    assert safe_name("a/b") != safe_name("a_b") != safe_name("a?b")
