"""A market's nutrition panel as HTML data, from the same declaration rows and ``panel.layout`` as the PDF.

This reads :class:`~labelcalc.labelling.model.Declaration` through the PDF renderer's own
:class:`~labelcalc.outputs.panelpdf.PanelDrawing` (one implementation of the printed texts): the shown rows in the
pack's order with their printed labels, amounts and percentages, the columns (each value column followed by its
percentage column), the column headings, the serving lines with their type, and the layout's style, width, title
and energy-row sizes, where the percentage heading goes, rule weights, the nutrient lines' leading and which
percentages are bold, header note and footnotes.
It draws nothing itself: the ``panel.html`` template turns the data into markup, sized in mm and pt so the
panel on screen has the proportions of the printed draft.  Each figure carries what the trace view needs to
find it again (market, scenario, nutrient, basis).
"""

from __future__ import annotations

from dataclasses import dataclass, field

from reportlab.lib.units import mm

from labelcalc.labelling.model import Declaration
from labelcalc.outputs.panelpdf import PanelDrawing, _fonts


@dataclass
class PanelCell:
    text: str
    basis: str
    kind: str = "amount"  # or "percent"
    bold: bool = False


@dataclass
class PanelRow:
    nutrient: str
    label: str
    indent: int
    bold: bool
    large: bool
    heavy_rule: bool
    cells: list[PanelCell]
    after_label: PanelCell | None = None  # the amount printed right after the label (one-column facts panels)
    rule_pt: float | None = None  # weight of the rule under the row (None: the hairline; 0: no rule)
    lead_pt: float | None = None  # space above and below a nutrient line where the pack sets it (nutrient_lines)
    percent_heading_after: bool = False  # the percentage heading follows on its own line (below_energy)
    energy_line_heading: list[str] = field(default_factory=list)  # headings right-aligned on the energy row
    full_width: bool = False  # the large energy row of a one-column panel: one cell, its figure or headings at right


@dataclass
class PanelView:
    market: str
    scenario: str
    title: str
    style: str
    width_mm: float
    title_pt: float
    body_pt: float
    servings_line: str | None
    serving_line: tuple[str, str] | None
    header_note: str | None
    headers: list[str]
    rows: list[PanelRow]
    footnotes: list[str]
    citation: str | None
    draft_notice: str
    notes: list[str] = field(default_factory=list)
    # type of the serving lines as the PDF sets them (layout.serving_type, else the drawing's proportions); None
    # where the panel has no such line
    servings_pt: float | None = None
    serving_pt: float | None = None
    serving_bold: bool | None = None
    title_second: str | None = None
    serving_per_line: list[str] = field(default_factory=list)  # per_line style: "Per ..." and its second language
    energy_pt: float | None = None  # the large energy row's type size (body x energy_size_factor)
    percent_heading: str | None = None  # the heading of the percentage column on its own line (below_energy)
    serving_rule_pt: float = 1.0
    columns: int = 0  # cells right of the label in a row
    # the rule under the title centred in this much space between the title and the next line (layout.title_rule)
    title_rule_lead_pt: float | None = None
    title_rule_pt: float | None = None
    # vertical lines between dual columns (layout.column_rules): their weight and the cells (0 = first right of the
    # label) with a line on their left
    column_rule_pt: float | None = None
    column_rule_before: list[int] = field(default_factory=list)


def panel_view(d: Declaration) -> PanelView:
    """The panel of one declaration (one market, one scenario), with the PDF's texts and layout."""
    pack, lay = d.pack, d.pack.panel.layout
    _fonts()
    drawing = PanelDrawing(d)
    width_mm = round(drawing._widths()[2] / mm, 2)  # the PDF's width: grown from width_mm to fit the rows
    cols = drawing.cols
    has_values = any(k == "value" for k, _ in cols)
    has_pct = any(k == "pct" for k, _ in cols)
    lines = lay.nutrient_lines
    lead = float(lines.leading_pt) if lines and lines.leading_pt is not None else None
    bold_pct = set(lines.percent_bold_for) if lines and lines.percent_bold_for is not None else None
    body = lay.body_size_pt
    heading_below = lay.percent_header == "below_energy" and not d.dual_column and has_pct
    rows: list[PanelRow] = []
    first_energy = True
    for i, (r, label, cells, pct) in enumerate(drawing.lines):
        large = lay.energy_large and first_energy and pack.nutrients[r.nutrient].energy is not None
        if large:
            first_energy = False
        after: PanelCell | None = None
        row_cells: list[PanelCell] = []
        # the amount follows the label (the large row's may sit at the right edge instead)
        if not has_values and cells and not (large and lay.energy_amount == "right"):
            after = PanelCell(cells[0], d.columns[0])
        ci = 0
        for kind, b in cols:
            if kind == "value":
                row_cells.append(PanelCell(cells[ci] if ci < len(cells) else "", b))
                ci += 1
            else:
                bold = bold_pct is None or r.nutrient in bold_pct
                row_cells.append(PanelCell(pct.get(b) or "", b, "percent", bold))
        full_width = large and not has_values
        if full_width:  # as in the PDF: the figure (or the headings) at the panel's right edge, not in a column
            row_cells = [PanelCell(cells[0], d.columns[0])] if cells and after is None else []
        last = i == len(drawing.lines) - 1 or all(x[0].percent_only for x in drawing.lines[i + 1 :])
        heavy = r.nutrient in lay.heavy_rule_after or large
        if last and lay.rule_before_footnotes_pt:
            rule: float | None = float(lay.rule_before_footnotes_pt)
        elif heavy:
            rule = float(lay.heavy_rule_pt)
        elif r.nutrient in lay.no_rule_after:
            rule = 0.0
        else:
            rule = None
        heading = []
        if large and lay.percent_header == "energy_line" and has_pct:
            heading = [x for x in [pack.panel.percent_label, lay.percent_label_second] if x]
        rows.append(
            PanelRow(
                r.nutrient,
                label,
                r.indent,
                r.bold or large,
                large,
                heavy,
                row_cells,
                after,
                rule_pt=rule,
                lead_pt=None if large else lead,
                percent_heading_after=large and heading_below,
                energy_line_heading=heading,
                full_width=full_width,
            )
        )
    headers: list[str] = []
    if len(d.columns) > 1 or lay.style == "table" or lay.percent_header == "columns":
        headers = [drawing._header(k, b) for k, b in cols]
        if not any(headers):
            headers = []
    servings_line = drawing.servings_line()
    serving_line = None
    per_line: list[str] = []
    servings_pt, serving_pt, _, serving_bold = drawing.serving_type()
    on_top = lay.serving_lines_on_top or lay.style == "boxed"
    if on_top and d.serving_g:
        first, second, _ = drawing.serving_lines()
        if lay.serving_style == "per_line":
            per_line = [f"{lay.serving_text} {first}"]
            if lay.serving_text_second:
                per_line.append(f"{lay.serving_text_second} {second}")
        else:
            serving_line = (lay.serving_text, first)
    has_serving = bool(serving_line or per_line)
    tr, cr = lay.title_rule, lay.column_rules
    starts = [k for k, (kind, _) in enumerate(cols) if kind == "value"]
    before = (starts if cr.left_of_first else starts[1:]) if cr is not None and len(d.columns) > 1 else []
    return PanelView(
        market=d.market,
        scenario=d.composition.scenario,
        title=pack.panel.title,
        style=lay.style,
        width_mm=width_mm,
        title_pt=lay.title_size_pt,
        body_pt=body,
        servings_line=servings_line if on_top else None,
        serving_line=serving_line,
        header_note=lay.header_note if not d.dual_column else None,
        headers=headers,
        rows=rows,
        footnotes=[fn.text for fn in pack.panel.footnotes if fn.when == "always" or has_pct],
        citation=lay.citation,
        draft_notice=pack.pack.draft_notice,
        servings_pt=servings_pt if (on_top and servings_line) else None,
        serving_pt=serving_pt if has_serving else None,
        serving_bold=serving_bold if has_serving else None,
        title_second=lay.title_second,
        serving_per_line=per_line,
        energy_pt=body * lay.energy_size_factor if lay.energy_large else None,
        percent_heading=(pack.panel.percent_label or "%") if heading_below else None,
        serving_rule_pt=float(lay.serving_rule_pt or (4 if lay.style == "boxed" else 1)),
        columns=len(cols),
        title_rule_lead_pt=float(tr.leading_pt) if tr is not None and lay.style == "boxed" else None,
        title_rule_pt=float(tr.weight_pt) if tr is not None and lay.style == "boxed" else None,
        column_rule_pt=float(cr.weight_pt) if before and cr is not None else None,
        column_rule_before=before,
    )
