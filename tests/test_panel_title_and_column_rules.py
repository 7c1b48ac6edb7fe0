"""The rule under the title and the vertical lines between dual columns, from the pack's ``panel.layout.title_rule``
and ``panel.layout.column_rules``.

Source of the US checks: 21 CFR 101.9, eCFR text as of 2026-08-27 (title 21 issue of that date), read in full:
(d)(1)(v) "A hairline rule that is centered between the lines of text shall separate 'Nutrition Facts' from the
servings per container statement required in paragraph (d)(3)(i)"; (d)(1)(ii)(C) "At least one point leading";
(e)(3) dual labeling "shall be presented in two columns and the columns shall be separated by vertical lines";
(e)(6) per serving and per container ((b)(12)(i)) or per serving and per unit ((b)(2)(i)(D)) "shall be presented in
two columns, and the columns shall be separated by vertical lines".  The lines' extent (bar under the serving lines
to the bar above the footnote) and the line left of the first column follow the sample labels of (e)(5) and
(e)(6)(i), images not in the text: from memory — verify.  Space between two lines is measured between their bodies
(ascent and descent of the font, together the type size), as in test_panel_nutrient_lines.  The geometry is checked
on the drawing plan; the PDFs are read back with pypdfium2.  Products are the fictional demo products (invented
data); the 2.5 servings of 28 g in a 70 g pack are invented for the dual-column case.
"""

from __future__ import annotations

import pypdfium2 as pdfium
import pypdfium2.raw as pdfium_c
import pytest
from reportlab.pdfbase import pdfmetrics

from labelcalc.labelling.rulepack import get_packs
from labelcalc.outputs.panelpdf import BOLD, FONT
from labelcalc.outputs.panelrun import panels_for
from tests.test_panel_serving_type import _box, _declaration, _plan, dual_column_edit

US_PRODUCTS = ["hl_kettle_sea_salt", "hl_kettle_sea_salt_lite", "hl_oat_bar", "hl_baked_cracker", "hl_gummy_sugar_free"]
OTHER_MARKETS = ["ca", "eu", "uk", "anz", "codex"]


def _vlines(ops):
    return [op[1:] for op in ops if op[0] == "vline"]


@pytest.mark.parametrize("product", US_PRODUCTS)
def test_us_title_rule_is_centred_between_the_title_and_the_servings_line(tmp_path, product):
    # 101.9(d)(1)(v) (eCFR 2026-08-27): the hairline between "Nutrition Facts" and the (d)(3)(i) servings line is
    # "centered between the lines of text"; (d)(1)(ii)(C): at least one point between the two lines
    d = _declaration("us", tmp_path, product)
    tr = d.pack.panel.layout.title_rule
    assert tr is not None and "(d)(1)(v)" in tr.citation and tr.confidence == "confirmed"
    _, texts, rules, _, _, _ = _plan(d)
    title = next(t for t in texts if t[2] == "Nutrition Facts")
    below = [t for t in texts if t[1] > title[1]]
    nxt = min(below, key=lambda t: t[1])
    assert "per container" in nxt[2]  # the servings line comes first (also "1 serving per container")
    rule = min((r for r in rules if r[0] > title[1]), key=lambda r: r[0])
    assert rule[0] < nxt[1] and rule[1] == pytest.approx(float(tr.weight_pt))
    title_bottom = title[1] - pdfmetrics.getAscentDescent(BOLD, title[4])[1]
    line_top = nxt[1] - pdfmetrics.getAscentDescent(FONT, nxt[4])[0]
    assert line_top - title_bottom >= max(1.0, float(tr.leading_pt)) - 1e-9
    assert rule[0] == pytest.approx((title_bottom + line_top) / 2)
    assert title_bottom < rule[0] - rule[1] / 2 and rule[0] + rule[1] / 2 < line_top  # touches neither line


def test_other_markets_keep_their_title_rule_and_draw_no_column_lines(tmp_path):
    # only the US pack sets these; the other markets' drawings stay as they were (pack-driven, no market branch)
    for pack in get_packs(OTHER_MARKETS):
        assert pack.panel.layout.title_rule is None and pack.panel.layout.column_rules is None
    for market in OTHER_MARKETS:
        d = _declaration(market, tmp_path, "hl_kettle_sea_salt")
        drawing, *_ = _plan(d)
        assert not _vlines(drawing._layout()[0])


def test_us_single_column_panel_has_no_column_lines(tmp_path):
    # 101.9(e)(3)/(e)(6) (eCFR 2026-08-27): the vertical lines separate dual columns; one column has none
    d = _declaration("us", tmp_path)
    assert not d.dual_column
    drawing, *_ = _plan(d)
    assert not _vlines(drawing._layout()[0])


def test_us_dual_columns_are_separated_by_vertical_lines(tmp_path):
    # 101.9(e)(6) and (b)(12)(i) (eCFR 2026-08-27): per serving and per container "presented in two columns, and
    # the columns shall be separated by vertical lines"; extent and the line left of the first column from the
    # sample labels of (e)(6)(i): from memory — verify
    d = _declaration("us", tmp_path, edit=dual_column_edit)
    assert d.dual_column and d.columns == ["per_serving", "per_container"]
    cr = d.pack.panel.layout.column_rules
    assert cr is not None and "(e)(3)" in cr.citation and "(e)(6)" in cr.citation and cr.left_of_first
    drawing, texts, rules, height, width, pad = _plan(d)
    ops = drawing._layout()[0]
    lines = sorted(_vlines(ops))
    assert len(lines) == 2  # names | per serving | per container
    # where the figures of each column sit: value and percentage texts are right-aligned at the columns' edges
    edges = {}
    x = pad + (width - 2 * pad - sum(drawing._widths()[0]))
    for (_kind, basis), w in zip(drawing.cols, drawing._widths()[0]):
        edges.setdefault(basis, []).append((x, x + w))
        x += w
    (between_x, *_), (first_x, *_) = lines[1], lines[0]
    assert first_x < min(a for a, _ in edges["per_serving"]) + 2.2 * 72 / 25.4
    assert max(b for _, b in edges["per_serving"]) < between_x < min(b for _, b in edges["per_container"])
    serving_bar = min(r[0] for r in rules if r[1] == d.pack.panel.layout.serving_rule_pt)
    last_rule = max(r[0] for r in rules)
    footnote = [t for t in texts if t[2].startswith("*")]
    for xx, top, bottom, weight in lines:
        assert weight == pytest.approx(float(cr.weight_pt))
        assert top == pytest.approx(serving_bar) and bottom == pytest.approx(last_rule)
        assert pad < xx < width - pad and 0 < top < bottom < height
        assert all(bottom < _box(t)[2] for t in footnote)  # the lines stop above the footnote
        for t in texts:  # no text touches a line it passes
            x0, x1, t_top, t_bottom = _box(t)
            if t_bottom > top and t_top < bottom:
                assert x1 < xx - weight / 2 or x0 > xx + weight / 2, (t[2], xx)
    sides = 0
    for t in texts:  # each column's figures (right-aligned 1 pt inside its edge) on its own side of the line
        for basis, side in (("per_serving", -1), ("per_container", 1)):
            if t[5] == "right" and any(t[0] == pytest.approx(b - 1) for _, b in edges[basis]):
                x0, x1, _, _ = _box(t)
                assert (x1 < between_x) if side < 0 else (x0 > between_x), (t[2], basis)
                sides += 1
    assert sides >= 2 * 2 * 14  # amounts and percentages of both columns
    for t in texts:  # every text inside the box
        x0, x1, t_top, t_bottom = _box(t)
        assert x0 > 0 and x1 < width and t_top > 0 and t_bottom < height, t[2]


def test_us_dual_column_pdf_draws_two_vertical_lines(tmp_path, demo_lib):
    # 101.9(e)(6) (eCFR 2026-08-27): read back from the PDF, two vertical lines inside the panel of the dual-column
    # draft, none in the one-column draft of the same product
    from tests.conftest import DEMO

    def vertical_paths(pdf):
        page = pdfium.PdfDocument(str(pdf))[0]
        found = []
        for obj in page.get_objects():
            if obj.type != pdfium_c.FPDF_PAGEOBJ_PATH:
                continue
            left, bottom, right, top = obj.get_bounds()
            if right - left < 1.5 and top - bottom > 50:
                found.append((left, bottom, right, top))
        return found

    single = tmp_path / "single"
    single.mkdir()
    _, failures = panels_for(DEMO / "hl_kettle_sea_salt.yaml", demo_lib, get_packs(["us"]), single, "2026-12-02")
    assert not failures and vertical_paths(single / "hl_kettle_sea_salt.us.pdf") == []
    _declaration("us", tmp_path, edit=dual_column_edit)  # writes the edited demo copy under tmp_path/demo
    from labelcalc.intake.library import load_library

    lib = load_library(tmp_path / "demo" / "ingredients")
    _, failures = panels_for(
        tmp_path / "demo" / "hl_kettle_sea_salt.yaml", lib, get_packs(["us"]), tmp_path, "2026-12-02"
    )
    assert not failures
    assert len(vertical_paths(tmp_path / "hl_kettle_sea_salt.us.pdf")) == 2


def test_workbench_panel_draws_the_same_title_rule_and_column_lines(tmp_path):
    # the workbench's HTML panel reads the same pack data as the PDF: 101.9(d)(1)(v) title rule centred in the
    # space the pack gives, (e)(3)/(e)(6) vertical lines left of each column of figures (eCFR 2026-08-27)
    from labelcalc.workbench.panelhtml import panel_view
    from labelcalc.workbench.server import render

    d = _declaration("us", tmp_path / "dual", edit=dual_column_edit)
    view = panel_view(d)
    lay = d.pack.panel.layout
    drawing, *_ = _plan(d)
    assert view.column_rule_pt == pytest.approx(float(lay.column_rules.weight_pt))
    assert view.column_rule_before == [k for k, (kind, _) in enumerate(drawing.cols) if kind == "value"] == [0, 2]
    html = render("panel.html", p=view)
    line = f"border-left: {view.column_rule_pt:g}pt solid #000"
    assert html.count(line) == 2 * (len(view.rows) + 1)  # every row and the headings, two lines each
    lead = float(lay.title_rule.leading_pt)
    assert f"padding-bottom: {lead / 2:g}pt; margin-bottom: {lead / 2:g}pt" in html
    single = panel_view(_declaration("us", tmp_path / "single"))
    assert single.column_rule_pt is None and "border-left" not in render("panel.html", p=single)
    for market in OTHER_MARKETS:
        other = panel_view(_declaration(market, tmp_path / market))
        assert other.title_rule_lead_pt is None and other.column_rule_pt is None
