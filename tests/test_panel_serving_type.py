"""Type of the servings and serving size lines, from the pack's ``panel.layout.serving_type``.

Source of the US checks: 21 CFR 101.9, eCFR text as of 2026-08-27 (title 21 issue of that date), read in full:
(d)(3)(i) servings per container no smaller than 10 point; (d)(3)(ii) serving size bold or extra bold, no smaller
than 10 point, no smaller than 8 point where it does not fit, the amount right justified where there is room;
(d)(1)(iv) "Serving size" highlighted, "No other information shall be highlighted".  The PDFs are read back with
pypdfium2 (size and font of each printed character); the geometry is checked on the drawing plan the renderer
builds.  Products are the fictional demo products (invented data).
"""

from __future__ import annotations

import ctypes
import re
import shutil
from pathlib import Path

import pypdfium2 as pdfium
import pypdfium2.raw as pdfium_c
import pytest
from reportlab.lib.units import mm
from reportlab.pdfbase import pdfmetrics

from labelcalc.formulation.composition import compose
from labelcalc.intake.formula import load_formula
from labelcalc.labelling.declare import declare
from labelcalc.labelling.rulepack import get_packs, load_packs
from labelcalc.outputs.panelpdf import PanelDrawing, _fonts
from labelcalc.outputs.panelrun import panels_for
from labelcalc.workbench.panelhtml import panel_view
from labelcalc.workbench.server import render
from tests.conftest import DEMO

US_PRODUCTS = ["hl_kettle_sea_salt", "hl_oat_bar", "hl_baked_cracker", "hl_gummy_sugar_free"]


@pytest.fixture(scope="module")
def us_pdfs(tmp_path_factory, demo_lib):
    out = tmp_path_factory.mktemp("us_serving")
    for product in US_PRODUCTS:
        _, failures = panels_for(DEMO / f"{product}.yaml", demo_lib, get_packs(["us"]), out, "2026-12-02")
        assert not failures
    return out


def _printed(pdf: Path, pattern: str) -> list[tuple[str, float, str]]:
    """(character, font size in points, font name) of each character of the first match of ``pattern`` on the
    PDF's first page, as pdfium reads them back."""
    page = pdfium.PdfDocument(str(pdf))[0]
    tp = page.get_textpage()
    text = tp.get_text_range()
    m = re.search(pattern, text)
    assert m, (pattern, text[:800])
    out = []
    for i in range(m.start(), m.end()):
        if text[i].isspace():
            continue
        name = ctypes.create_string_buffer(128)
        flags = ctypes.c_int()
        pdfium_c.FPDFText_GetFontInfo(tp.raw, i, name, 128, ctypes.byref(flags))
        out.append((text[i], pdfium_c.FPDFText_GetFontSize(tp.raw, i), name.value.decode()))
    return out


def dual_column_edit(text: str) -> str:
    """2.5 servings of 28 g in a 70 g pack (invented demo data): 101.9(b)(12)(i) dual columns, per serving and per
    container."""
    return text.replace("servings_per_container: 5", "servings_per_container: 2.5").replace(
        "net_quantity: 140 g", "net_quantity: 70 g"
    )


def _declaration(market: str, folder: Path, product: str = "hl_kettle_sea_salt", edit=None):
    """The declaration of a demo product (copied into ``folder`` and optionally edited first)."""
    from labelcalc.intake.library import load_library

    if edit:
        shutil.copytree(DEMO, folder / "demo")
        path = folder / "demo" / f"{product}.yaml"
        path.write_text(edit(path.read_text(encoding="utf-8")), encoding="utf-8")
    else:
        path = DEMO / f"{product}.yaml"
    lib = load_library(path.parent / "ingredients")
    c = compose(load_formula(path, lib), lib)[0]
    return declare(c, get_packs([market])[0])


def _plan(d):
    """The drawing plan: text ops (x, y, text, font, size, align), rule ops, height, width and padding."""
    _fonts()
    drawing = PanelDrawing(d)
    ops, height, width = drawing._layout()
    texts = [op[1:] for op in ops if op[0] == "text"]
    rules = [op[1:] for op in ops if op[0] == "rule"]
    return drawing, texts, rules, height, width, drawing._pad()


def _box(t):
    """Horizontal extent and vertical extent (y measured downwards, ascent to descent) of a text op."""
    x, y, s, font, size, align = t
    w = pdfmetrics.stringWidth(s, font, size)
    x0 = x - w if align == "right" else x
    ascent, descent = pdfmetrics.getAscentDescent(font, size)
    return x0, x0 + w, y - ascent, y - descent


def _serving_ops(d, texts, rules):
    """The servings line, the "Serving size" heading and the amount's line(s) (right-aligned, above the bar)."""
    servings = [t for t in texts if "per container" in t[2] and "serving" in t[2]]
    label = next(t for t in texts if t[2] == d.pack.panel.layout.serving_text)
    bar = min(y for y, *_ in rules if y > label[1])
    amount = [t for t in texts if t[5] == "right" and label[1] <= t[1] < bar]
    return servings, label, amount


@pytest.mark.parametrize("product", US_PRODUCTS)
def test_us_servings_line_is_10_point_and_not_bold(us_pdfs, product):
    # 21 CFR 101.9(d)(3)(i) (eCFR 2026-08-27): "no smaller than 10 point"; (d)(1)(iv): not highlighted
    chars = _printed(us_pdfs / f"{product}.us.pdf", r"\d+ servings? per container")
    assert chars and all(size >= 10 for _, size, _ in chars), chars
    assert not any("Bold" in font for _, _, font in chars), chars


@pytest.mark.parametrize("product", US_PRODUCTS)
def test_us_serving_size_line_is_10_point_bold(us_pdfs, product):
    # 21 CFR 101.9(d)(3)(ii) (eCFR 2026-08-27): "highlighted in bold or extra bold and be in a type size no
    # smaller than 10 point"; the statement is the heading and the size with its metric quantity ((b)(7))
    chars = _printed(us_pdfs / f"{product}.us.pdf", r"Serving size\s*[^\n]*\(\d+g\)")
    assert chars and all(size >= 10 for _, size, _ in chars), chars
    assert all("Bold" in font for _, _, font in chars), chars


@pytest.mark.parametrize("product", US_PRODUCTS)
def test_us_serving_lines_drawn_from_the_pack_inside_the_box(tmp_path, product):
    d = _declaration("us", tmp_path, product)
    t = d.pack.panel.layout.serving_type
    assert t is not None
    drawing, texts, rules, height, width, pad = _plan(d)
    servings, label, amount = _serving_ops(d, texts, rules)
    # the sizes come from the pack data, and meet 101.9(d)(3)(i)-(ii) (eCFR 2026-08-27)
    assert [s[4] for s in servings] == [t.servings_pt] and t.servings_pt >= 10
    assert label[4] == t.serving_pt >= 10 and [a[4] for a in amount] == [t.serving_pt]
    assert label[3].endswith("Bold") and amount[0][3].endswith("Bold") and not servings[0][3].endswith("Bold")
    # (d)(3)(ii): "The serving size amount must be right justified if adequate space is available"
    assert amount[0][5] == "right" and amount[0][0] == pytest.approx(width - pad)
    # (d)(3)(i)-(ii): the servings line right after the heading, the serving size right after it
    title_y = next(y for _, y, s, *_ in texts if s == d.pack.panel.title)
    assert title_y < servings[0][1] < label[1] == amount[0][1]
    # inside the box, the label clear of the amount, no line touching a rule or another line
    boxes = [_box(x) for x in servings + [label] + amount]
    for x0, x1, top, bottom in boxes:
        assert pad - 0.01 <= x0 and x1 <= width - pad + 0.01
        for y, weight, _ in rules:
            assert not (y - weight / 2 < bottom and top < y + weight / 2), (top, bottom, y)
    assert boxes[1][1] < boxes[2][0]  # "Serving size" ends before its amount begins
    assert boxes[0][3] <= boxes[1][2]  # servings line's descent above the serving line's ascent
    assert height > 0 and width <= d.pack.panel.layout.max_width_mm * mm


def test_us_long_serving_size_grows_the_panel_then_shrinks_no_lower_than_8_point(tmp_path):
    # 101.9(d)(3)(ii) (eCFR 2026-08-27): "If the 'Serving size' declaration does not fit in the allocated
    # space a type size of no smaller than 8 point may be used"; the household measure is invented
    def longer(text):
        return text.replace('"about 14 crisps"', '"about 14 large ridged kettle-cooked crisps"')

    d = _declaration("us", tmp_path, edit=longer)
    lay = d.pack.panel.layout
    _, texts, rules, _, width, pad = _plan(d)
    servings, label, amount = _serving_ops(d, texts, rules)
    assert width == pytest.approx(lay.max_width_mm * mm)  # grew to its widest first
    assert lay.serving_type.serving_min_pt == 8 <= label[4] < lay.serving_type.serving_pt
    assert len(amount) == 1 and amount[0][1] == label[1]  # still one line, the amount right-justified
    x0, x1, _, _ = _box(amount[0])
    assert x1 == pytest.approx(width - pad) and _box(label)[1] < x0


def test_us_serving_size_too_long_even_at_8_point_takes_its_own_lines(tmp_path):
    # 101.9(d)(3)(ii) (eCFR 2026-08-27): never below 8 point; what does not fit then moves below the heading,
    # right-justified, inside the box (the household measure is invented)
    words = "about 14 large ridged kettle-cooked crisps from hand-picked heritage potatoes, lightly salted by hand"

    d = _declaration("us", tmp_path, edit=lambda text: text.replace('"about 14 crisps"', f'"{words}"'))
    _, texts, rules, _, width, pad = _plan(d)
    _, label, parts = _serving_ops(d, texts, rules)
    assert label[4] == 8 and parts and all(t[4] == 8 for t in parts)
    assert " ".join(t[2] for t in parts).replace("  ", " ") == f"{words} (28g)"
    for t in parts:
        x0, x1, top, bottom = _box(t)
        assert pad - 0.01 <= x0 and x1 == pytest.approx(width - pad)
        for y, weight, _ in rules:
            assert not (y - weight / 2 < bottom and top < y + weight / 2)


def test_us_dual_column_panel_keeps_the_serving_lines(tmp_path):
    # 101.9(b)(12)(i) dual columns (200-300 % of the reference amount; snacks 30 g, 101.12(b)) and the same
    # serving lines of (d)(3)(i)-(ii) (eCFR 2026-08-27); 2.5 servings of 28 g is invented demo data
    d = _declaration("us", tmp_path, edit=dual_column_edit)
    assert d.dual_column
    _, texts, rules, _, width, pad = _plan(d)
    servings, label, amount = _serving_ops(d, texts, rules)
    assert servings[0][4] >= 10 and label[4] >= 10 and amount[0][4] >= 10
    for x0, x1, _, _ in map(_box, servings + [label] + amount):
        assert pad - 0.01 <= x0 and x1 <= width - pad + 0.01


@pytest.mark.parametrize("market", sorted(m for m in load_packs() if m != "us"))
def test_other_markets_keep_the_drawings_own_serving_type(tmp_path, market):
    """Packs without ``serving_type`` draw as before: the servings line at the body size, the serving line
    1.15 x the body in bold (label and amount) or 1.1 x in regular type (per line) — labelcalc's own
    proportions, not a rule of any of these markets."""
    d = _declaration(market, tmp_path)
    lay = d.pack.panel.layout
    assert lay.serving_type is None
    drawing, texts, *_ = _plan(d)
    body = lay.body_size_pt
    assert drawing.serving_type() == (
        body,
        body * (1.1 if lay.serving_style == "per_line" else 1.15),
        5.0,
        lay.serving_style != "per_line",
    )
    line = drawing.servings_line()
    if line:
        assert [t[4] for t in texts if t[2] == line] == [body]


def test_html_panel_uses_the_pack_serving_type(tmp_path):
    # the workbench draws the same lines from the same data: 10 pt, serving size bold (101.9(d)(3)(i)-(ii),
    # eCFR 2026-08-27); a pack without serving_type leaves the stylesheet's proportions
    us = panel_view(_declaration("us", tmp_path))
    assert (us.servings_pt, us.serving_pt, us.serving_bold) == (10, 10, True)
    html = render("panel.html", p=us)
    assert re.search(r'<div class="p-line" style="font-size: 10(\.0)?pt">\d+ servings per container</div>', html)
    assert re.search(r'class="p-line p-serving" style="font-size: 10(\.0)?pt; font-weight: 700;"', html)
    eu = panel_view(_declaration("eu", tmp_path))
    assert (eu.servings_pt, eu.serving_pt, eu.serving_bold) == (None, None, None)
    assert "font-weight: 700" not in render("panel.html", p=eu)


def test_serving_min_larger_than_serving_size_is_refused(tmp_path):
    from labelcalc.errors import InputError, RuleError
    from labelcalc.labelling.rulepack import load_pack_file

    src = (Path(__file__).resolve().parent.parent / "labelcalc/rules/markets/us_21_cfr_101.yaml").read_text("utf-8")
    bad = tmp_path / "us_21_cfr_101.yaml"
    bad.write_text(src.replace("serving_min_pt: 8", "serving_min_pt: 12"), encoding="utf-8")
    with pytest.raises((RuleError, InputError)) as e:
        load_pack_file(bad)
    assert "serving_min_pt" in str(e.value) and "serving_pt" in str(e.value)
