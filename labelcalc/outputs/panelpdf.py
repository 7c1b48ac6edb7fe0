"""Printable panel drafts and calculation sheets (PDF, reportlab).

One PDF per product and market: the panel as the market's pack describes it
(rows, order, columns, emphasis, rules), the ingredient list, allergen and
required statements, front-of-pack drafts, claims "for review — not part of
the panel", the pre-flight checks, then the calculation sheet.  Every page
carries the draft caution.  Output is byte-identical for the same inputs
(reportlab invariant mode and a fixed date).
"""

from __future__ import annotations

import os
from pathlib import Path

from reportlab import rl_config
from reportlab.lib import colors
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.lib.utils import simpleSplit
from reportlab.pdfbase import pdfmetrics
from reportlab.pdfbase.ttfonts import TTFont
from reportlab.platypus import Flowable, PageBreak, Paragraph, SimpleDocTemplate, Spacer, Table, TableStyle

from labelcalc import __version__
from labelcalc.labelling.checks import Check
from labelcalc.labelling.ingredients import allergen_name
from labelcalc.labelling.model import BASIS_LABEL, ELIGIBLE, Assessment, Declaration
from labelcalc.outputs.calcsheet import calculation_rows

CAUTION = "DRAFT — verify against current local regulation and a qualified regulatory professional before use."
_FONTS_READY = False
FONT, BOLD, ITALIC = "LcSans", "LcSans-Bold", "LcSans-Italic"
INK = colors.HexColor("#1b1b1b")
ACCENT = colors.HexColor("#0f5f6b")  # our own colour for headings of the sheet (not a panel colour)
WARN = colors.HexColor("#a11d1d")


def _fonts() -> None:
    """Register the Bitstream Vera fonts shipped with reportlab (free licence), embedded in every PDF."""
    global _FONTS_READY
    if _FONTS_READY:
        return
    import reportlab

    d = Path(reportlab.__file__).parent / "fonts"
    pdfmetrics.registerFont(TTFont(FONT, str(d / "Vera.ttf")))
    pdfmetrics.registerFont(TTFont(BOLD, str(d / "VeraBd.ttf")))
    pdfmetrics.registerFont(TTFont(ITALIC, str(d / "VeraIt.ttf")))
    pdfmetrics.registerFont(TTFont("LcSans-BoldItalic", str(d / "VeraBI.ttf")))
    from reportlab.lib.fonts import addMapping

    addMapping(FONT, 0, 0, FONT)
    addMapping(FONT, 1, 0, BOLD)
    addMapping(FONT, 0, 1, ITALIC)
    addMapping(FONT, 1, 1, "LcSans-BoldItalic")
    _FONTS_READY = True


def _esc(s: str) -> str:
    return s.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def wrap_lines(text: str, font: str, size: float, width: float) -> list[str]:
    """Lines of ``text`` that each fit ``width`` points (long words are broken)."""
    out = []
    for line in simpleSplit(text, font, size, width):
        while pdfmetrics.stringWidth(line, font, size) > width and len(line) > 1:
            cut = len(line)
            while cut > 1 and pdfmetrics.stringWidth(line[:cut], font, size) > width:
                cut -= 1
            out.append(line[:cut])
            line = line[cut:]
        out.append(line)
    return out


class PanelDrawing(Flowable):
    """The nutrition panel of one declaration, drawn from the pack's rows and layout."""

    def __init__(self, decl: Declaration):
        super().__init__()
        self.d = decl
        self.lay = decl.pack.panel.layout
        self.width_pt = self.lay.width_mm * mm
        self.size = self.lay.body_size_pt
        self.lines = self._build()

    def _build(self):
        d = self.d
        rows = []
        pct_basis = d.pack.panel.percent_basis
        cols = d.columns
        show_pct = any(r.percent for r in d.shown_rows)
        for r in d.shown_rows:
            if r.amount_in_label or r.percent_only:
                cells = ["" for _ in cols]
                label = r.label_for(cols[0])
            else:
                cells = [r.text(b) for b in cols]
                label = r.label
            pct = [
                r.percent.get(b) or ""
                for b in cols
                if show_pct and (pct_basis is None or b == pct_basis or d.dual_column)
            ]
            rows.append((r, label, cells, pct))
        return rows

    def _col_layout(self):
        d = self.d
        ncols = len(d.columns)
        show_pct = any(p for _, _, _, p in self.lines for p in p)
        npct = max((len(p) for _, _, _, p in self.lines), default=0) if show_pct else 0
        value_w = 15 * mm if ncols > 1 else 18 * mm
        pct_w = 10 * mm
        if self.lay.amount_after_label and ncols == 1:  # amounts follow the labels: no value column
            value_w, pct_w = 0.0, 14 * mm
        pad = 2.2 * mm if self.lay.style == "boxed" else 1.2 * mm
        label_w = self.width_pt - 2 * pad - ncols * value_w - npct * pct_w
        return label_w, value_w, pct_w, npct

    def _label_lines(self, label, bold, width):
        font = BOLD if bold else FONT
        return wrap_lines(label, font, self.size, width)

    def wrap(self, aw, ah):
        if not hasattr(self, "_laid_out"):
            self._laid_out = self._layout()
        self.height = self._laid_out[1]
        return self.width_pt, self.height

    def draw(self):
        ops, H = self._laid_out if hasattr(self, "_laid_out") else self._layout()
        self._paint(self.canv, ops, H)

    def _layout(self):
        """The drawing operations and height of the panel (measured once, drawn once)."""
        d, lay, size = self.d, self.lay, self.size
        W = self.width_pt
        pad = 2.2 * mm if lay.style == "boxed" else 1.2 * mm
        label_w, value_w, pct_w, npct = self._col_layout()
        lh = size * 1.45
        y = 0.0  # measured downwards from the top
        ops = []

        def text(x, yy, s, font=FONT, sz=size, align="left"):
            ops.append(("text", x, yy, s, font, sz, align))

        def rule(yy, weight):
            ops.append(("rule", yy, weight))

        tsize = lay.title_size_pt
        while tsize > 6 and pdfmetrics.stringWidth(d.pack.panel.title, BOLD, tsize) > W - 2 * pad:
            tsize -= 0.5  # the title always fits the panel width
        y += tsize * 1.1 + pad
        text(pad, y, d.pack.panel.title, BOLD, tsize)
        if lay.style == "boxed":
            y += 1.5
            rule(y, 0.6)
        if lay.serving_lines_on_top or lay.style == "boxed":
            if d.servings_text:
                y += lh
                text(pad, y, lay.servings_text.format(n=d.servings_text))
            if d.serving_g:
                y += lh * 1.1
                hh = d.composition.formula.header.serving.household if d.composition.formula.header.serving else None
                s_txt = f"{hh} ({d.serving_g:g}g)" if hh else f"{d.serving_g:g} g"
                ssize = size * 1.15
                while ssize > 5 and (
                    pdfmetrics.stringWidth(lay.serving_text, BOLD, ssize)
                    + pdfmetrics.stringWidth(s_txt, BOLD, ssize)
                    + 2 * mm
                    > W - 2 * pad
                ):
                    ssize -= 0.25  # label and size share the line without touching
                text(pad, y, lay.serving_text, BOLD, ssize)
                text(W - pad, y, s_txt, BOLD, ssize, "right")
            y += 2.5
            rule(y, 4 if lay.style == "boxed" else 1)
        if lay.header_note:
            y += lh
            text(pad, y, lay.header_note, BOLD, size * 0.95)
        # column headers
        x0 = pad + label_w
        headers = [lay.column_headers.get(b, d.pack.panel.column_labels.get(b, BASIS_LABEL[b])) for b in d.columns]
        hdr_lines = [wrap_lines(h, BOLD, size * 0.85, value_w - 2) for h in headers]
        if npct:
            plabel = d.pack.panel.percent_label or "%"
            hdr_lines += [wrap_lines(plabel, BOLD, size * 0.85, pct_w - 1)] * npct
        nh = max(len(h) for h in hdr_lines)
        if len(d.columns) > 1 or npct or lay.style == "table":
            for i, hl in enumerate(hdr_lines):
                xr = (
                    x0 + (i + 1) * value_w
                    if i < len(d.columns)
                    else x0 + len(d.columns) * value_w + (i - len(d.columns) + 1) * pct_w
                )
                for k, part in enumerate(hl):
                    text(xr, y + lh * (k + 1) * 0.9, part, BOLD, size * 0.85, "right")
            y += lh * nh * 0.9 + 1.5
            rule(y, 0.5)
        first_energy = True
        for r, label, cells, pct in self.lines:
            big = lay.energy_large and first_energy and d.pack.nutrients[r.nutrient].energy is not None
            sz = size * (1.9 if big else 1.0)
            indent = pad + r.indent * 3 * mm
            lab_lines = wrap_lines(label, BOLD if (r.bold or big) else FONT, sz, label_w - r.indent * 3 * mm)
            row_h = lh * (1.6 if big else 1.0) * len(lab_lines)
            y += row_h
            for k, part in enumerate(lab_lines):
                yy = y - row_h + (k + 1) * lh * (1.6 if big else 1.0) - (lh * 0.25 if big else 0)
                text(indent, yy, part, BOLD if (r.bold or big) else FONT, sz)
            if lay.amount_after_label and len(cells) == 1 and cells[0] and not big:
                amount = "".join(cells[0].rsplit(" ", 1)) if lay.compact_units and " " in cells[0] else cells[0]
                lw = pdfmetrics.stringWidth(lab_lines[-1], BOLD if r.bold else FONT, sz)
                text(indent + lw + 0.8 * mm, y - row_h + len(lab_lines) * lh, amount, FONT, sz)
                cells = []
            for i, cell in enumerate(cells):
                text(
                    x0 + (i + 1) * value_w - 1, y - (lh * 0.25 if big else 0), cell, BOLD if big else FONT, sz, "right"
                )
            for i, p in enumerate(pct):
                text(x0 + len(cells) * value_w + (i + 1) * pct_w - 1, y, p, BOLD, size, "right")
            y += 1.2
            heavy = r.nutrient in lay.heavy_rule_after
            if big:
                first_energy = False
            rule(y, 2.5 if heavy else 0.35)
        foot = [fn.text for fn in d.pack.panel.footnotes if fn.when == "always" or npct]
        for ftxt in foot:
            for part in wrap_lines(ftxt, FONT, size * 0.8, W - 2 * pad):
                y += size * 0.8 * 1.3
                text(pad, y, part, FONT, size * 0.8)
        y += pad
        return ops, y

    def _paint(self, c, ops, H) -> None:
        lay = self.lay
        W = self.width_pt
        pad = 2.2 * mm if lay.style == "boxed" else 1.2 * mm
        if c is not None:
            c.saveState()
            c.setFillColor(INK)
            c.setStrokeColor(INK)
            if lay.style == "boxed":
                c.setLineWidth(0.8)
                c.rect(0, 0, W, H)
            for op in ops:
                if op[0] == "text":
                    _, x, yy, s, font, sz, align = op
                    c.setFont(font, sz)
                    if align == "right":
                        c.drawRightString(x, H - yy, s)
                    else:
                        c.drawString(x, H - yy, s)
                else:
                    _, yy, weight = op
                    c.setLineWidth(weight)
                    c.line(pad * 0.5, H - yy, W - pad * 0.5, H - yy)
            c.restoreState()


def _styles():
    _fonts()
    base = ParagraphStyle("base", fontName=FONT, fontSize=8.5, leading=11, textColor=INK)
    return {
        "base": base,
        "small": ParagraphStyle("small", parent=base, fontSize=7, leading=9),
        "h1": ParagraphStyle("h1", parent=base, fontName=BOLD, fontSize=13, leading=16, textColor=ACCENT, spaceAfter=3),
        "h2": ParagraphStyle(
            "h2", parent=base, fontName=BOLD, fontSize=10, leading=13, textColor=ACCENT, spaceBefore=6, spaceAfter=2
        ),
        "warn": ParagraphStyle("warn", parent=base, fontName=BOLD, textColor=WARN),
        "cell": ParagraphStyle("cell", parent=base, fontSize=6.8, leading=8.2),
        "cellb": ParagraphStyle("cellb", parent=base, fontName=BOLD, fontSize=6.8, leading=8.2),
    }


def _footer(date: str, label: str):
    def draw(canvas, doc):
        canvas.saveState()
        canvas.setFont(BOLD, 7.5)
        canvas.setFillColor(WARN)
        canvas.drawString(15 * mm, 11 * mm, CAUTION)
        canvas.setFont(FONT, 7)
        canvas.setFillColor(INK)
        canvas.drawRightString(A4[0] - 15 * mm, 7 * mm, f"{label} — page {doc.page} — {date}")
        canvas.restoreState()

    return draw


def ingredient_paragraph(a: Assessment, st) -> Paragraph | None:
    il = a.ingredient_list
    if not il:
        return None
    emph = a.allergens.get("emphasis", "bold")

    def render(items):
        parts = []
        for it in items:
            name = allergen_name({**it, "name": _esc(it["name"])}, emph, bold=lambda s: f"<b>{s}</b>")
            if it.get("quid"):
                name += f" ({_esc(it['quid'])})"
            if it["components"]:
                name += " (" + render(it["components"]) + ")"
            parts.append(name)
        return ", ".join(parts)

    return Paragraph(f"<b>{_esc(il['heading'])}</b> " + render(il["items"]) + ".", st["base"])


def build_story(a: Assessment, checks: list[Check], date: str, st, *, calculation: bool = True) -> list:
    d = a.declaration
    f = d.composition.formula
    story: list = []
    scen = "" if d.composition.scenario == "nominal" else f" — {d.composition.scenario} end of the stated ranges"
    story.append(Paragraph(_esc(f"{f.header.name} — {d.pack.pack.name}{scen}"), st["h1"]))
    story.append(
        Paragraph(
            _esc(
                f"Product {f.id}, formula version {f.header.version or '-'}, formula hash {f.content_hash}; rule pack "
                f"{d.market} {d.pack.pack.version} (reviewed {d.pack.pack.reviewed}); labelcalc {__version__}; {date}"
            ),
            st["small"],
        )
    )
    story.append(Spacer(1, 2 * mm))
    story.append(Paragraph(_esc(CAUTION), st["warn"]))
    failed = [c for c in checks if not c.ok]
    if failed:
        story.append(
            Paragraph(
                "PRE-FLIGHT CHECK FAILED — do not use this draft: "
                + _esc("; ".join(f"{c.name}: {c.detail}" for c in failed)),
                st["warn"],
            )
        )
    story.append(Spacer(1, 4 * mm))
    story.append(PanelDrawing(d))
    story.append(Spacer(1, 4 * mm))
    ip = ingredient_paragraph(a, st)
    if ip:
        story.append(ip)
    al = a.allergens
    if al.get("statement"):
        story.append(Paragraph(f"<b>{_esc(al['statement'])}</b>", st["base"]))
    for x in al.get("review", []):
        story.append(Paragraph(_esc("ALLERGEN REVIEW: " + x), st["warn"]))
    if a.statements:
        story.append(Paragraph("Required statements", st["h2"]))
        for s in a.statements:
            story.append(Paragraph(f"<b>{_esc(s.text)}</b>", st["base"]))
            story.append(Paragraph(_esc(f"{s.status}: {s.trigger} [{s.citation}]"), st["small"]))
            for x in s.figures:
                story.append(Paragraph(_esc("· " + x), st["small"]))
            if s.caution:
                story.append(Paragraph(_esc("Caution: " + s.caution), st["small"]))
    for fop in a.front_of_pack:
        story.append(Paragraph(_esc(f"Front of pack (draft) — {fop['name']}"), st["h2"]))
        story.append(_fop_table(fop, st))
    elig = [c for c in a.claims if c.verdict == ELIGIBLE]
    story.append(Paragraph("Claims eligible — for review, not part of the panel", st["h2"]))
    if elig:
        for c in elig:
            story.append(
                Paragraph(
                    _esc(f"{c.label} [{c.citation}]" + (" — " + "; ".join(c.texts) if c.texts else "")), st["base"]
                )
            )
    else:
        story.append(Paragraph("none", st["base"]))
    story.append(Paragraph("Pre-flight checks", st["h2"]))
    if calculation:
        story.append(
            _table(
                [["check", "result", "detail"]] + [[c.name, "ok" if c.ok else "FAILED", c.detail] for c in checks],
                st,
                [55 * mm, 14 * mm, 105 * mm],
            )
        )
    else:
        bad = [c for c in checks if not c.ok]
        story.append(
            Paragraph(
                _esc(
                    f"{len(checks) - len(bad)} of {len(checks)} checks passed"
                    + ("; FAILED: " + "; ".join(f"{c.name}: {c.detail}" for c in bad) if bad else "")
                    + " (details in the calculation sheet CSV)"
                ),
                st["warn"] if bad else st["small"],
            )
        )
    notes = d.notes + d.reviews + a.reviews
    if notes:
        story.append(Paragraph("Notes for review", st["h2"]))
        for n in notes:
            story.append(Paragraph(_esc("· " + n.strip()), st["small"]))
    if calculation:
        story.append(PageBreak())
        story += calculation_story(a, st)
    return story


def _fop_table(fop: dict, st):
    rows = [["nutrient", "verdict", "figures"]]
    if fop.get("exempt"):
        rows.append(["all", "exempt", ""])
    for n, v in fop.get("verdicts", {}).items():
        if "colour" in v:
            fig = f"{v['per_100g']:.2f} {v.get('unit', '')} per 100 g" if v.get("per_100g") is not None else "unknown"
            rows.append([n, v["colour"], fig + (f"; {v['why']}" if v.get("why") else "")])
        else:
            hi = v.get("high_in")
            rows.append(
                [
                    n,
                    "HIGH IN" if hi is True else "not high" if hi is False else "cannot tell",
                    f"{v.get('percent_dv', 0):.1f} % DV vs threshold {v.get('threshold_percent', '-')} %"
                    if "percent_dv" in v
                    else "",
                ]
            )
    t = _table(rows, st, [40 * mm, 30 * mm, 100 * mm])
    return t


def _table(rows, st, widths):
    data = [[Paragraph(_esc(str(x)), st["cellb"] if i == 0 else st["cell"]) for x in r] for i, r in enumerate(rows)]
    t = Table(data, colWidths=widths, repeatRows=1)
    t.setStyle(
        TableStyle(
            [
                ("LINEBELOW", (0, 0), (-1, 0), 0.8, ACCENT),
                ("LINEBELOW", (0, 1), (-1, -1), 0.2, colors.HexColor("#bcbcbc")),
                ("VALIGN", (0, 0), (-1, -1), "TOP"),
                ("LEFTPADDING", (0, 0), (-1, -1), 2),
                ("RIGHTPADDING", (0, 0), (-1, -1), 2),
                ("TOPPADDING", (0, 0), (-1, -1), 1),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 1),
            ]
        )
    )
    return t


def calculation_story(a: Assessment, st) -> list:
    d = a.declaration
    story = [
        Paragraph(_esc(f"Calculation sheet — {d.composition.formula.header.name} — {d.pack.pack.name}"), st["h1"]),
        Paragraph(
            _esc(
                "Every declared figure: unrounded value, the rounding step and rule applied, the reference value "
                "and percentage, and what each leaf ingredient and processing step (water lost, oil taken up) "
                "contributes, through every sub-formula, with the source of each ingredient value. "
                "Unknown inputs are listed."
            ),
            st["small"],
        ),
        Spacer(1, 3 * mm),
    ]
    rows = calculation_rows(a)
    head = [["row", "column", "unrounded", "rounding (band)", "declared", "reference / %", "source"]]
    body = [
        [r["label"], r["column"], r["unrounded"], r["rounding"], r["declared"], r["percent"], r["source"]]
        for r in rows
        if r["kind"] == "figure"
    ]
    story.append(_table(head + body, st, [26 * mm, 17 * mm, 17 * mm, 30 * mm, 17 * mm, 22 * mm, 51 * mm]))
    lines = [r for r in rows if r["kind"] == "line"]
    for label in dict.fromkeys(r["label"] for r in lines):
        mine = [r for r in lines if r["label"] == label]
        story.append(
            Paragraph(
                _esc(f"{label}: where it comes from, per 100 g of finished product ({mine[0]['unit']})"), st["h2"]
            )
        )
        table = [["ingredient or step", "through", "g used", "amount", "value source"]]
        table += [
            [
                r["ingredient"] if r["line_kind"] == "ingredient" else f"{r['line_kind']}: {r['ingredient']}",
                r["route"] or "the formula",
                r["grams_per_100g"],
                r["amount"],
                r["source"],
            ]
            for r in mine
        ]
        story.append(_table(table, st, [38 * mm, 42 * mm, 15 * mm, 15 * mm, 70 * mm]))
    e = d.declared_energy
    story.append(Paragraph("Energy factors used", st["h2"]))
    erows = [["component", "kJ/g", "kcal/g", "source"]]
    for fac in e.factor_set.factors:
        erows.append(
            [
                ", ".join(fac.components),
                "" if fac.kj is None else f"{fac.kj:g}",
                "" if fac.kcal is None else f"{fac.kcal:g}",
                f"{fac.citation} ({fac.confidence})",
            ]
        )
    story.append(_table(erows, st, [50 * mm, 14 * mm, 14 * mm, 102 * mm]))
    unknown = [r for r in rows if r["kind"] == "unknown"]
    story.append(Paragraph("Unknown inputs", st["h2"]))
    story.append(Paragraph(_esc("; ".join(f"{r['label']}: {r['source']}" for r in unknown) or "none"), st["base"]))
    zeros = [r for r in rows if r["kind"] == "assumed zero"]
    story.append(Paragraph("Assumed zeros (stated in the ingredient library with a reason)", st["h2"]))
    text = "; ".join(f"{r['ingredient']}: {r['label']} ({r['source']})" for r in zeros) or "none"
    story.append(Paragraph(_esc(text), st["base"]))
    return story


def write_panel_pdf(
    items: list[tuple[Assessment, list[Check]]], path: Path, date: str, *, calculation: bool = True
) -> Path:
    """Write one product-and-market PDF (one part per scenario) atomically; identical inputs give identical bytes."""
    st = _styles()
    rl_config.invariant = 1
    a = items[0][0]
    f = a.declaration.composition.formula
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    label = f"{f.id} / {a.market}"
    doc = SimpleDocTemplate(
        str(tmp),
        pagesize=A4,
        leftMargin=15 * mm,
        rightMargin=15 * mm,
        topMargin=14 * mm,
        bottomMargin=18 * mm,
        title=f"{f.header.name} — {a.market} panel draft",
        author="labelcalc",
        subject=f"formula hash {f.content_hash}",
        creator=f"labelcalc {__version__}",
        invariant=1,
    )
    try:
        story: list = []
        for i, (ai, checks) in enumerate(items):
            if i:
                story.append(PageBreak())
            story += build_story(ai, checks, date, st, calculation=calculation)
        doc.build(story, onFirstPage=_footer(date, label), onLaterPages=_footer(date, label))
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path
