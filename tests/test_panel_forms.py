"""Panels as each law draws them, read back from the PDFs with pypdf.

Sources named beside the checks: FDR B.01.012(2) (labels in both official languages) and the
Directory of Nutrition Facts Table Formats (Health Canada, 2016-12-14; bilingual standard format,
figure 3.1); 21 CFR 101.9(d)(3)(i), (d)(6) and (d)(8)(iii) (81 FR 33742, 2016-05-27).
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from pypdf import PdfReader
from reportlab.pdfbase.ttfonts import TTFontFile

from labelcalc.labelling.rulepack import get_packs
from labelcalc.outputs.panelpdf import PanelDrawing, _fonts
from labelcalc.outputs.panelrun import panels_for

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "demo_products"
MARKETS = ["us", "eu", "uk", "ca", "anz", "codex"]


@pytest.fixture(scope="module")
def pdfs(tmp_path_factory, demo_lib):
    out = tmp_path_factory.mktemp("forms")
    for product in ("hl_kettle_sea_salt", "hl_oat_bar", "hl_baked_cracker"):
        _, failures = panels_for(DEMO / f"{product}.yaml", demo_lib, get_packs(MARKETS), out, "2026-12-02")
        assert not failures
    return out


def _first(pdf: Path) -> str:
    return PdfReader(str(pdf)).pages[0].extract_text() or ""


def test_canada_panel_is_bilingual_and_has_no_us_elements(pdfs):
    text = _first(pdfs / "hl_kettle_sea_salt.ca.pdf")
    flat = re.sub(r"\s+", " ", text)
    # Directory, bilingual standard format: both titles, both %DV headings, "Per"/"pour" serving lines
    for want in ("Nutrition Facts", "Valeur nutritive", "% Daily Value*", "% valeur quotidienne*"):
        assert want in flat, want
    assert re.search(r"Per 28 g", flat) and re.search(r"pour 28 g", flat)
    # row names in both languages (Directory figure 3.1: "Fat / Lipides", "Carbohydrate / Glucides" ...)
    for want in ("Fat / Lipides", "Carbohydrate / Glucides", "Protein / Protéines", "Sugars / Sucres"):
        assert want in flat, want
    # US elements have no place in a Canadian table
    assert "servings per container" not in flat.lower()
    assert "about 14 crisps" not in flat
    # the %DV interpretative statement in both languages (FDR table to B.01.401, item 16)
    assert "15% or more is a lot" in flat and "beaucoup" in flat


def test_canada_household_measure_only_when_given_in_both_languages(pdfs):
    # Directory: "Per HM (MM)" / "pour HM (MM)"; demo data gives the oat bar's measure in French, not the crisps'
    flat = re.sub(r"\s+", " ", _first(pdfs / "hl_oat_bar.ca.pdf"))
    assert "Per 1 bar (40 g)" in flat and "pour 1 barre (40 g)" in flat and "SERVING REVIEW" not in flat
    flat = re.sub(r"\s+", " ", _first(pdfs / "hl_kettle_sea_salt.ca.pdf"))
    assert "Per 28 g" in flat and "SERVING REVIEW" in flat


def test_canada_allergen_statement_in_both_languages(pdfs):
    flat = re.sub(r"\s+", " ", _first(pdfs / "hl_baked_cracker.ca.pdf"))
    m = re.search(r"Contains: ([^.]+)\. / Contient : ([^.]+)\.", flat)
    assert m, flat[:3000]
    assert "Wheat" in m.group(1) and "blé" in m.group(2)


def test_canada_ingredient_list_in_both_languages(pdfs):
    """FDR B.01.012(2): the list in both official languages, from the library's French names (demo data);
    a name the library does not give in French is bracketed and flagged, never silently left English."""
    flat = re.sub(r"\s+", " ", _first(pdfs / "hl_kettle_sea_salt.ca.pdf"))
    assert "Ingrédients : Tranches de pommes de terre frites (Pommes de terre," in flat
    assert "TRANSLATION NEEDED" not in flat
    flat = re.sub(r"\s+", " ", _first(pdfs / "hl_baked_cracker.ca.pdf"))
    assert "[Structured vegetable fat]" in flat and "TRANSLATION NEEDED" in flat


def test_us_added_sugars_line_keeps_its_words(pdfs):
    flat = re.sub(r"\s+", " ", _first(pdfs / "hl_kettle_sea_salt.us.pdf"))
    # 21 CFR 101.9(d)(8)(iii): "Includes 'X'g Added Sugars"; a "less than" form keeps its spaces
    assert re.search(r"Includes (less than )?\d+g Added Sugars", flat), flat[:2000]
    assert "lessthan" not in flat


def test_us_single_serving_wording_and_dv_heading(pdfs):
    flat = re.sub(r"\s+", " ", _first(pdfs / "hl_oat_bar.us.pdf"))
    assert "1 serving per container" in flat  # our wording: 101.9(d)(3)(i) gives only "____ servings per container"
    assert "1 servings" not in flat
    assert "% Daily Value*" in flat  # (d)(6): on one line


@pytest.mark.parametrize("market", MARKETS)
def test_us_percent_heading_sits_below_calories(pdfs, market):
    """The percent heading's place follows the pack's layout: for the US it is drawn after the
    Calories row (101.9(d)(6)); nowhere is it wrapped over two lines."""
    from labelcalc.formulation.composition import compose
    from labelcalc.intake.formula import load_formula
    from labelcalc.intake.library import load_library
    from labelcalc.labelling.declare import declare

    lib = load_library(DEMO / "ingredients" / "demo_library.yaml")
    (c,) = compose(load_formula(DEMO / "hl_kettle_sea_salt.yaml", lib), lib)[:1]
    d = declare(c, get_packs([market])[0])
    _fonts()
    ops, _, _ = PanelDrawing(d)._layout()
    texts = [(op[2], op[3]) for op in ops if op[0] == "text"]
    label = d.pack.panel.percent_label
    if label and d.pack.panel.layout.percent_header != "columns":
        assert label in [t for _, t in texts]
    if market == "us":
        y_head = next(y for y, t in texts if t == label)
        y_cal = next(y for y, t in texts if t == "Calories")
        assert y_head > y_cal  # measured downwards: the heading is under the Calories row


def test_every_glyph_used_is_in_the_embedded_font(pdfs):
    """No missing-glyph boxes: every character the PDFs print exists in the font that is embedded."""
    import reportlab

    fonts = Path(reportlab.__file__).parent / "fonts"
    cmaps = {n: set(TTFontFile(str(fonts / n)).charToGlyph) for n in ("Vera.ttf", "VeraBd.ttf")}
    for pdf in sorted(pdfs.glob("*.pdf")):
        reader = PdfReader(str(pdf))
        for page in reader.pages:
            for f in page["/Resources"]["/Font"].values():
                base = str(f.get_object()["/BaseFont"])
                assert "LcSans" in base or "Vera" in base or "Helvetica" in base, (pdf.name, base)
            text = page.extract_text() or ""
            missing = {ch for ch in text if not ch.isspace() and ord(ch) not in cmaps["Vera.ttf"]}
            assert not missing, (pdf.name, missing)
            assert "\ufffd" not in text and "\u25a1" not in text


@pytest.mark.parametrize(
    "market, cites, never", [("us", "21 CFR 101.9(g)", None), ("ca", "CFIA", "21 CFR"), ("codex", None, "CFR")]
)
def test_the_end_to_print_cites_the_markets_own_compliance_rules(market, cites, never):
    """A ranged input's 'print this end' reason names the market's own compliance rules (the pack's
    compliance citation), never another market's; a market without compliance rules gets no citation."""
    from labelcalc.formulation.composition import compose
    from labelcalc.intake.formula import load_formula
    from labelcalc.intake.library import load_library
    from labelcalc.labelling.assess import assess_against
    from labelcalc.labelling.rulepack import get_packs
    from labelcalc.outputs.panelpdf import end_to_print

    demo = Path(__file__).resolve().parent.parent / "demo_products"
    lib = load_library(demo / "ingredients")
    comps = compose(load_formula(demo / "hl_kettle_sea_salt.yaml", lib), lib)
    assert len(comps) == 2  # the demo's oil uptake is a range: two ends
    (pack,) = get_packs([market])
    items = [(assess_against(c, pack, None, i), []) for i, c in enumerate(comps)]
    _, why = end_to_print(items)
    assert why and why.startswith("PRINT THIS PANEL")
    if cites:
        assert cites in why
    else:
        assert "(" not in why.split("conservative choice")[1].split(".")[0]
    if never:
        assert never not in why
