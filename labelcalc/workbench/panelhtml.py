"""A market's nutrition panel as HTML data, from the same declaration rows and ``panel.layout`` as the PDF.

This reads :class:`~labelcalc.labelling.model.Declaration` exactly as the PDF renderer does: the shown rows in
the pack's order, the columns the serving rules chose, the percent column(s) the pack names, the layout's style
(boxed facts panel or ruled table), width, type sizes (the serving lines' where the pack sets them), heavy rules,
header note, serving lines and footnotes.
It draws nothing itself: the ``panel.html`` template turns the data into markup, sized in mm and pt so the
panel on screen has the proportions of the printed draft.  Each figure carries what the trace view needs to
find it again (market, scenario, nutrient, basis).
"""

from __future__ import annotations

from dataclasses import dataclass, field

from labelcalc.labelling.model import BASIS_LABEL, Declaration


@dataclass
class PanelCell:
    text: str
    basis: str
    kind: str = "amount"  # or "percent"


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
    # type of the serving lines where the pack sets it (layout.serving_type); None: the stylesheet's proportions
    servings_pt: float | None = None
    serving_pt: float | None = None
    serving_bold: bool | None = None


def panel_view(d: Declaration) -> PanelView:
    """The panel of one declaration (one market, one scenario)."""
    pack, lay = d.pack, d.pack.panel.layout
    cols = d.columns
    pct_basis = pack.panel.percent_basis
    show_pct = any(r.percent for r in d.shown_rows)
    pct_cols = [b for b in cols if show_pct and (pct_basis is None or b == pct_basis or d.dual_column)]
    after = lay.amount_after_label and len(cols) == 1
    rows: list[PanelRow] = []
    first_energy = True
    for r in d.shown_rows:
        large = lay.energy_large and first_energy and pack.nutrients[r.nutrient].energy is not None
        if large:
            first_energy = False
        if r.amount_in_label or r.percent_only:
            label, amounts = r.label_for(cols[0]), [PanelCell("", b) for b in cols]
        else:
            label, amounts = r.label, [PanelCell(r.text(b), b) for b in cols]
        pcts = [PanelCell(r.percent.get(b) or "", b, "percent") for b in pct_cols]
        lead = None
        if after and not large and amounts and amounts[0].text:
            txt = amounts[0].text
            if lay.compact_units and " " in txt:
                txt = "".join(txt.rsplit(" ", 1))
            lead = PanelCell(txt, amounts[0].basis)
            amounts = []
        elif after and not large:
            amounts = []
        rows.append(
            PanelRow(
                r.nutrient,
                label,
                r.indent,
                r.bold or large,
                large,
                r.nutrient in lay.heavy_rule_after,
                amounts + pcts,
                lead,
            )
        )
    headers = []
    if len(cols) > 1 or pct_cols or lay.style == "table":
        headers = [lay.column_headers.get(b, pack.panel.column_labels.get(b, BASIS_LABEL[b])) for b in cols]
        if after:
            headers = []
        headers += [pack.panel.percent_label or "%"] * len(pct_cols)
    servings_line = serving_line = None
    st = lay.serving_type
    if lay.serving_lines_on_top or lay.style == "boxed":
        wording = lay.servings_text_one if (d.servings_text == "1" and lay.servings_text_one) else lay.servings_text
        if d.servings_text and wording:  # no servings line where the pack has none (Canada)
            servings_line = wording.format(n=d.servings_text)
        if d.serving_g:
            s = d.composition.formula.header.serving
            hh = s.household if s else None
            serving_line = (lay.serving_text, f"{hh} ({d.serving_g:g}g)" if hh else f"{d.serving_g:g} g")
    return PanelView(
        market=d.market,
        scenario=d.composition.scenario,
        title=pack.panel.title,
        style=lay.style,
        width_mm=lay.width_mm,
        title_pt=lay.title_size_pt,
        body_pt=lay.body_size_pt,
        servings_line=servings_line,
        serving_line=serving_line,
        header_note=lay.header_note,
        headers=headers,
        rows=rows,
        footnotes=[fn.text for fn in pack.panel.footnotes if fn.when == "always" or pct_cols],
        citation=lay.citation,
        draft_notice=pack.pack.draft_notice,
        servings_pt=st.servings_pt if st else None,
        serving_pt=st.serving_pt if st else None,
        serving_bold=st.serving_bold if st else None,
    )
