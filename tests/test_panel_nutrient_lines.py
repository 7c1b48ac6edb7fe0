"""Spacing of the nutrient lines and which percentages are bold, from the pack's ``panel.layout.nutrient_lines``.

Source of the US checks: 21 CFR 101.9, eCFR text as of 2026-08-27 (title 21 issue of that date), read in full:
(d)(1)(ii)(C) "At least one point leading (i.e., space between two lines of text) except that at least four points
leading shall be utilized for the information required by paragraphs (d)(7) and (d)(8)"; (d)(1)(v) the hairline
rule "centered between the lines of text"; (d)(1)(iv) highlighted are the headings, the names of the nutrients that
are not indented "and the percentage amounts required by paragraph (d)(7)(ii)" (percent of the DRV), "No other
information shall be highlighted".  Space between two lines is measured between their bodies: the font's ascent
above and descent below the baseline, which together make the type size (8 point lines 8 + 4 = 12 pt apart, the
usual measure of leading in typesetting: common practice).  The PDFs are read back with pypdfium2, the geometry is
checked on the drawing plan; the workbench's HTML panel is checked against the same pack data and the PDF's drawing.
Products are the fictional demo products (invented data).
"""

from __future__ import annotations

import re

import pytest
from reportlab.lib.units import mm
from reportlab.pdfbase import pdfmetrics

from labelcalc.labelling.rulepack import get_packs, load_packs
from labelcalc.outputs.panelpdf import line_body
from labelcalc.outputs.panelrun import panels_for
from labelcalc.workbench.panelhtml import panel_view
from labelcalc.workbench.server import render
from tests.conftest import DEMO
from tests.test_panel_serving_type import _declaration, _plan, _printed, dual_column_edit

US_PRODUCTS = ["hl_kettle_sea_salt", "hl_kettle_sea_salt_lite", "hl_oat_bar", "hl_baked_cracker", "hl_gummy_sugar_free"]
# 101.9(c)(9) DRV table and (c)(7)(iii): the nutrients whose percent is the (d)(7)(ii) percent of the DRV
DRV_ROWS = {
    "total_fat",
    "saturated_fat",
    "cholesterol",
    "sodium",
    "total_carbohydrate",
    "dietary_fiber",
    "added_sugars",
}


def _text_lines(texts):
    """Lines of text of a drawing plan, top to bottom: (baseline, reach below it, reach above it, texts)."""
    by_y: dict[float, list] = {}
    for t in texts:
        by_y.setdefault(round(t[1], 6), []).append(t)
    out = []
    for y in sorted(by_y):
        ts = by_y[y]
        below = max(-pdfmetrics.getAscentDescent(t[3], t[4])[1] for t in ts)
        above = max(pdfmetrics.getAscentDescent(t[3], t[4])[0] for t in ts)
        out.append((y, below, above, ts))
    return out


def _nutrient_baselines(drawing, texts):
    """Baselines of the (d)(7) and (d)(8) lines: every row's label line except the large Calories line ((d)(5))."""
    size = drawing.lay.body_size_pt
    labels = {label for r, label, _, _ in drawing.lines}
    return {round(t[1], 6) for t in texts if t[2] in labels and t[4] == size}


def _pairs(d):
    drawing, texts, rules, height, width, pad = _plan(d)
    lines = _text_lines(texts)
    nutrient = _nutrient_baselines(drawing, texts)
    assert len(nutrient) >= 14, nutrient  # the 14 mandatory lines of (d)(7) and (d)(8) at least
    return drawing, lines, nutrient, rules


@pytest.mark.parametrize("product", US_PRODUCTS)
def test_us_nutrient_lines_have_four_points_leading(tmp_path, product):
    # 101.9(d)(1)(ii)(C) (eCFR 2026-08-27): at least four points leading for the (d)(7) and (d)(8) information,
    # at least one point between any other two lines of the label
    d = _declaration("us", tmp_path, product)
    lines_type = d.pack.panel.layout.nutrient_lines
    assert lines_type is not None and lines_type.leading_pt == 4
    _, lines, nutrient, _ = _pairs(d)
    checked = 0
    for (y1, below1, _, t1), (y2, _, above2, t2) in zip(lines, lines[1:]):
        space = y2 - y1 - below1 - above2
        if y1 in nutrient or y2 in nutrient:
            assert space >= 4 - 1e-9, (t1[0][2], t2[0][2], space)
            checked += 1
        else:
            assert space >= 1 - 1e-9, (t1[0][2], t2[0][2], space)
    assert checked >= len(nutrient) + 1  # above and below every nutrient line


def test_us_eight_point_nutrient_lines_are_twelve_points_apart(tmp_path):
    # 101.9(d)(1)(iii) 8 point and (d)(1)(ii)(C) 4 points leading (eCFR 2026-08-27): two 8 point lines under a
    # hairline are 8 + 4 = 12 pt baseline to baseline (the drawing adds nothing more between them)
    d = _declaration("us", tmp_path, "hl_kettle_sea_salt")
    _, lines, nutrient, _ = _pairs(d)
    base = sorted(nutrient)
    steps = {round(b - a, 6) for a, b in zip(base, base[1:])}
    assert min(steps) == pytest.approx(12) and sum(line_body(8)) == pytest.approx(8)


@pytest.mark.parametrize("product", US_PRODUCTS)
def test_us_rules_between_nutrient_lines_are_centred_and_clear(tmp_path, product):
    # 101.9(d)(1)(v) (eCFR 2026-08-27): the hairline between the nutrient lines is "centered between the lines of
    # text"; no rule touches a line
    d = _declaration("us", tmp_path, product)
    _, lines, nutrient, rules = _pairs(d)
    centred = 0
    for (y1, below1, _, _), (y2, _, above2, _) in zip(lines, lines[1:]):
        between = [(y, w) for y, w, _ in rules if y1 < y < y2]
        if y1 in nutrient or y2 in nutrient:
            assert len(between) <= 1
            for y, w in between:
                assert y1 + below1 < y - w / 2 and y + w / 2 < y2 - above2
            if between:
                assert between[0][0] == pytest.approx((y1 + below1 + y2 - above2) / 2)
                centred += 1
    assert centred >= len(nutrient)


def test_us_dual_column_panel_keeps_the_leading(tmp_path):
    # 101.9(b)(12)(i) dual columns and the same (d)(1)(ii)(C) leading (eCFR 2026-08-27); 2.5 servings of 28 g and
    # 70 g net are invented demo data
    d = _declaration("us", tmp_path, edit=dual_column_edit)
    assert d.dual_column
    _, lines, nutrient, _ = _pairs(d)
    for (y1, below1, _, _), (y2, _, above2, _) in zip(lines, lines[1:]):
        limit = 4 if (y1 in nutrient or y2 in nutrient) else 1
        assert y2 - y1 - below1 - above2 >= limit - 1e-9


@pytest.mark.parametrize("product", US_PRODUCTS)
def test_us_only_drv_percentages_are_bold_in_the_pdf(tmp_path, demo_lib, product):
    # 101.9(d)(1)(iv) (eCFR 2026-08-27): the (d)(7)(ii) percentages (of the DRV) bold; "No other information shall
    # be highlighted": the (d)(8) vitamin and mineral percentages (of the RDI) in regular type
    d = _declaration("us", tmp_path, product)
    assert set(d.pack.panel.layout.nutrient_lines.percent_bold_for) - {"protein"} == DRV_ROWS
    _, failures = panels_for(DEMO / f"{product}.yaml", demo_lib, get_packs(["us"]), tmp_path, "2026-12-02")
    assert not failures
    pdf = tmp_path / f"{product}.us.pdf"
    seen = {"bold": 0, "regular": 0}
    for r in d.shown_rows:
        if not r.percent.get("per_serving"):
            continue
        name = "Added Sugars" if "{amount}" in r.label else r.label
        # the printed panel (the higher-energy end of a range) may differ from this scenario's figures
        chars = _printed(pdf, rf"{re.escape(name)} [^\n%]*?\d+%")
        digits = len(re.search(r"\d+%$", "".join(c for c, _, _ in chars)).group())
        bold = ["Bold" in font for _, _, font in chars[-digits:]]
        if r.nutrient in DRV_ROWS:
            assert all(bold), (r.nutrient, chars)
            seen["bold"] += 1
        else:
            assert not any(bold), (r.nutrient, chars)
            seen["regular"] += 1
    assert seen["bold"] >= 6 and seen["regular"] >= 4, seen


@pytest.mark.parametrize("market", sorted(m for m in load_packs() if m != "us"))
def test_other_markets_keep_their_spacing_and_bold_percentages(tmp_path, market):
    """Packs without ``nutrient_lines`` draw as before: every percentage bold (labelcalc's own drawing, not a rule
    of these markets) and the rows at the drawing's own spacing (their PDFs were compared byte for byte)."""
    d = _declaration(market, tmp_path)
    assert d.pack.panel.layout.nutrient_lines is None
    drawing, texts, *_ = _plan(d)
    pcts = {p for _, _, _, pct in drawing.lines for p in pct.values() if p}
    printed = [t for t in texts if t[2] in pcts]
    assert all(t[3].endswith("Bold") for t in printed)


def test_percent_bold_for_an_unknown_row_is_refused(tmp_path):
    from labelcalc.errors import InputError, RuleError
    from labelcalc.labelling.rulepack import load_pack_file

    src = (DEMO.parent / "labelcalc/rules/markets/us_21_cfr_101.yaml").read_text("utf-8")
    bad = tmp_path / "us_21_cfr_101.yaml"
    bad.write_text(src.replace("percent_bold_for: [total_fat,", "percent_bold_for: [total_fats,"), encoding="utf-8")
    with pytest.raises((RuleError, InputError)) as e:
        load_pack_file(bad)
    assert "percent_bold_for" in str(e.value) and "total_fats" in str(e.value)


# ---- the workbench's HTML panel: the same layout data as the PDF ------------------------------------------------


def _html_rows(html: str) -> dict[str, str]:
    """The markup of each nutrient row of a rendered panel, by nutrient key."""
    return {
        m.group(1): m.group(0) for m in re.finditer(r'<tr class="[^"]*" data-nutrient="([^"]+)">.*?</tr>', html, re.S)
    }


def test_html_us_calories_line_at_the_pdf_size(tmp_path):
    # 101.9(d)(1)(iii) (eCFR 2026-08-27): "Calories" no smaller than 16 point, its amount no smaller than 22 point;
    # the HTML sets the energy row at the PDF's size (body x energy_size_factor), not the stylesheet's 1.9 em
    d = _declaration("us", tmp_path)
    lay = d.pack.panel.layout
    view = panel_view(d)
    assert view.energy_pt == pytest.approx(lay.body_size_pt * lay.energy_size_factor) and view.energy_pt >= 22
    _, texts, *_ = _plan(d)
    assert {t[4] for t in texts if t[2] == "Calories"} == {view.energy_pt}
    row = _html_rows(render("panel.html", p=view))["energy_kcal"]
    assert re.search(rf"font-size: {view.energy_pt:g}pt", row) and "Calories" in row


def test_html_us_percent_heading_below_calories_as_in_the_pdf(tmp_path):
    # 101.9(d)(6) (eCFR 2026-08-27): "% Daily Value*" separated from the calories information by a bar, the
    # nutrient list (d)(7) to the left of and below it: the heading follows the Calories row in both outputs
    d = _declaration("us", tmp_path)
    html = render("panel.html", p=panel_view(d))
    assert "<thead>" not in html
    at = html.index('class="p-pct-heading"')
    assert html.index('data-nutrient="energy_kcal"') < at < html.index('data-nutrient="total_fat"')
    assert "% Daily Value*" in html[at : html.index('data-nutrient="total_fat"')]
    _, texts, *_ = _plan(d)
    y = {t[2]: t[1] for t in texts}
    assert y["Calories"] < y[d.pack.panel.percent_label] < y["Total Fat"]


def test_html_us_bold_percentages_and_leading_from_the_pack(tmp_path):
    # 101.9(d)(1)(iv) only the (d)(7)(ii) percentages bold; (d)(1)(ii)(C) four points leading for the (d)(7) and
    # (d)(8) lines (eCFR 2026-08-27): half the leading above and half below each nutrient line's cells
    d = _declaration("us", tmp_path, "hl_kettle_sea_salt_lite")
    lead = d.pack.panel.layout.nutrient_lines.leading_pt
    rows = _html_rows(render("panel.html", p=panel_view(d)))
    pct_rows = 0
    for r in d.shown_rows:
        html = rows[r.nutrient]
        if r.nutrient == "energy_kcal":
            assert "padding-top" not in html
            continue
        assert html.count(f"padding-top: {lead / 2:g}pt; padding-bottom: {lead / 2:g}pt") >= 1, html
        pct = re.search(r'<td class="p-cell p-pct"[^>]*><button type="button" class="fig( p-bold)?"', html)
        if r.percent.get("per_serving"):
            assert pct and bool(pct.group(1)) == (r.nutrient in DRV_ROWS), (r.nutrient, html)
            pct_rows += 1
    assert pct_rows >= 10


@pytest.mark.parametrize("market", sorted(load_packs()))
def test_html_panel_prints_the_pdf_texts_and_width(tmp_path, market):
    """Labels, serving lines (size and weight) and width of the HTML panel are those of the PDF drawing (Canada:
    "Per ..." and "pour ..." on lines of their own, regular, 1.1 x the body, as the PDF draws them)."""
    d = _declaration(market, tmp_path)
    view = panel_view(d)
    drawing, texts, _, _, width, _ = _plan(d)
    assert [r.label for r in view.rows] == [label for _, label, _, _ in drawing.lines]
    assert view.width_mm == pytest.approx(width / mm, abs=0.01)
    html = render("panel.html", p=view)
    for line in view.serving_per_line:
        [op] = [t for t in texts if t[2] == line]
        assert op[4] == view.serving_pt and op[3].endswith("Bold") == view.serving_bold
        weight = 700 if view.serving_bold else 400
        assert f'style="font-size: {view.serving_pt}pt; font-weight: {weight};">{line}</div>' in html
    if market == "ca":
        assert view.serving_per_line and view.serving_line is None and not view.serving_bold
        assert 'class="p-line p-serving"' not in html
