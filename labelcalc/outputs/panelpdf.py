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
from labelcalc.labelling.ingredients import allergen_name, render_items
from labelcalc.labelling.model import BASIS_LABEL, ELIGIBLE, Assessment, Declaration, display_unit
from labelcalc.labelling.rounding import fill_amount, plain_label
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


def _lines_with_descent(size: float) -> float:
    """Space below a baseline that a rule must keep clear of (descenders of g, p, y)."""
    return size * 0.3


def line_body(size: float) -> tuple[float, float]:
    """How far the body of a line of ``size``-point type reaches above and below its baseline (the font's
    ascent and descent, together the type size): the space between two lines is measured between bodies."""
    ascent, descent = pdfmetrics.getAscentDescent(FONT, size)
    return ascent, -descent


class PanelDrawing(Flowable):
    """The nutrition panel of one declaration, drawn from the pack's rows and ``panel.layout``.

    Layout first measures every cell (labels, amounts, percentages, column headings) and sizes the
    columns to their content, so headings never collide and labels wrap only when the panel has
    reached ``max_width_mm``.  Rules keep clear of the text above and below them.
    """

    def __init__(self, decl: Declaration):
        super().__init__()
        self.d = decl
        self.lay = decl.pack.panel.layout
        self.size = self.lay.body_size_pt
        self.pack_rows = {r.nutrient: r for r in decl.pack.rows}
        self.lines = self._build()
        self.cols = self._columns()

    # ---- content -------------------------------------------------------------------------------
    def amount(self, r, basis: str) -> str:
        t = r.text(basis)
        return "".join(t.rsplit(" ", 1)) if self.lay.compact_units and " " in t else t

    def percent(self, r, basis: str) -> str:
        p = r.percent.get(basis) or ""
        return p.replace("%", " %") if self.lay.percent_spaced and p.endswith("%") and " " not in p else p

    def label(self, r, basis: str) -> str:
        second = self.pack_rows[r.nutrient].label_second
        if r.amount_in_label:
            return fill_amount(r.label, self.amount(r, basis))
        return f"{r.label} / {second}" if second else r.label

    def _build(self):
        d = self.d
        rows = []
        in_columns = not (self.lay.amount_after_label and len(d.columns) == 1)
        for r in d.shown_rows:
            pct = {b: self.percent(r, b) for b in d.columns}
            if r.amount_in_label and in_columns:  # dual columns: the amounts go in the columns
                rows.append((r, plain_label(r.label), [self.amount(r, b) for b in d.columns], pct))
                continue
            cells = [] if r.amount_in_label or r.percent_only else [self.amount(r, b) for b in d.columns]
            rows.append((r, self.label(r, d.columns[0]), cells, pct))
        return rows

    def _columns(self):
        """(kind, basis) of each column right of the labels, in order: each value column followed by its
        percentage column where percentages are shown for it (21 CFR 101.9(e) pairs them in dual panels)."""
        d = self.d
        pct_basis = d.pack.panel.percent_basis
        shown = {b for _, _, _, pct in self.lines for b, p in pct.items() if p}
        one_after = self.lay.amount_after_label and len(d.columns) == 1
        cols = []
        for b in d.columns:
            if not one_after:
                cols.append(("value", b))
            if b in shown and (pct_basis is None or b == pct_basis or d.dual_column):
                cols.append(("pct", b))
        return cols

    def _header(self, kind: str, basis: str) -> str:
        d, lay = self.d, self.lay
        if kind == "value":
            return lay.column_headers.get(basis, d.pack.panel.column_labels.get(basis, BASIS_LABEL[basis]))
        if lay.percent_header != "columns":
            return lay.percent_label_short or "" if d.dual_column else ""
        return (lay.percent_label_short if d.dual_column else None) or d.pack.panel.percent_label or "%"

    # ---- measuring -----------------------------------------------------------------------------
    def _widths(self):
        """Column widths, the label width and the panel width (points)."""
        size, lay = self.size, self.lay
        hsize = size * 0.85
        gap = 2.2 * mm
        widths: list[float] = []
        wide: list[float] = []  # the same columns with every heading on one line
        for kind, b in self.cols:
            cells = [c[self.d.columns.index(b)] for _, _, c, _ in self.lines if c] if kind == "value" else []
            if kind == "pct":
                cells = [p[b] for _, _, _, p in self.lines if p.get(b)]
            cw = max((pdfmetrics.stringWidth(c, BOLD, size) for c in cells), default=0)
            h = self._header(kind, b)
            hw = max((pdfmetrics.stringWidth(w, BOLD, hsize) for w in h.split()), default=0)
            w = max(cw, hw)
            while h and len(wrap_lines(h, BOLD, hsize, w)) > 2:  # a heading takes two lines at most
                w += 1
            one_line = max(cw, pdfmetrics.stringWidth(h, BOLD, hsize))
            widths.append(w + gap)
            wide.append(one_line + gap)
        pad = self._pad()
        need_label = 0.0  # widest label line (with its amount where amounts follow the labels)
        for r, label, cells, _ in self.lines:
            font = BOLD if r.bold else FONT
            w = pdfmetrics.stringWidth(label, font, size) + r.indent * 3 * mm
            if self.lay.amount_after_label and not [c for k, c in self.cols if k == "value"] and cells:
                w += pdfmetrics.stringWidth(" " + cells[0], FONT, size)
            need_label = max(need_label, w)
        widest = lay.max_width_mm * mm - 2 * pad
        for line_w in self._serving_widths():  # where the law sets the serving lines' size, the panel grows first
            need_label = max(need_label, min(line_w, widest) - gap - sum(widths))
        shown_pct = any(k == "pct" for k, _ in self.cols)
        for fn in self.d.pack.panel.footnotes:  # a short footnote line should not wrap either
            if fn.when == "always" or shown_pct:
                for t in [fn.text, fn.text_second or ""]:
                    if pdfmetrics.stringWidth(t, FONT, size * 0.8) < lay.max_width_mm * mm - 2 * pad:
                        need_label = max(need_label, pdfmetrics.stringWidth(t, FONT, size * 0.8) - gap - sum(widths))
        if 2 * pad + need_label + gap + sum(wide) <= lay.max_width_mm * mm:
            widths = wide  # room for one-line headings
        W = max(lay.width_mm * mm, min(lay.max_width_mm * mm, 2 * pad + need_label + gap + sum(widths)))
        label_w = W - 2 * pad - sum(widths)
        return widths, label_w, W

    def _pad(self) -> float:
        return 2.2 * mm if self.lay.style == "boxed" else 1.2 * mm

    def wrap(self, aw, ah):
        if not hasattr(self, "_laid_out"):
            self._laid_out = self._layout()
        self.width_pt = self._laid_out[2]
        self.height = self._laid_out[1]
        return self.width_pt, self.height

    def draw(self):
        ops, H, W = self._laid_out if hasattr(self, "_laid_out") else self._layout()
        self._paint(self.canv, ops, H, W)

    def serving_type(self) -> tuple[float, float, float, bool]:
        """Size of the servings line, size of the serving size line, the smallest size the serving size line may
        shrink to when it does not fit, and whether it is bold: the pack's ``panel.layout.serving_type`` where it
        sets them (US: 21 CFR 101.9(d)(3)(i)-(ii)), otherwise the drawing's own proportions of the body size."""
        lay, size = self.lay, self.size
        t = lay.serving_type
        per_line = lay.serving_style == "per_line"
        servings = float(t.servings_pt) if t and t.servings_pt else size
        serving = float(t.serving_pt) if t and t.serving_pt else size * (1.1 if per_line else 1.15)
        floor = float(t.serving_min_pt) if t and t.serving_min_pt else 5.0
        bold = t.serving_bold if t and t.serving_bold is not None else not per_line
        return servings, serving, floor, bold

    def servings_line(self) -> str | None:
        """The servings line as printed ("5 servings per container"), or None where the panel has none."""
        d, lay = self.d, self.lay
        if not (lay.serving_lines_on_top or lay.style == "boxed"):
            return None
        n = d.servings_text
        stext = lay.servings_text_one if (n == "1" and lay.servings_text_one) else lay.servings_text
        return stext.format(n=n) if n and stext else None

    def _serving_widths(self) -> list[float]:
        """Widths (points) the servings and serving size lines need on one line each, at the sizes the pack sets;
        none where the pack sets no size (the lines then shrink to the panel as drawn)."""
        t = self.lay.serving_type
        if t is None or not (self.lay.serving_lines_on_top or self.lay.style == "boxed"):
            return []
        servings_pt, serving_pt, _, bold = self.serving_type()
        out = []
        line = self.servings_line()
        if line and t.servings_pt:
            out.append(pdfmetrics.stringWidth(line, FONT, servings_pt))
        if self.d.serving_g and t.serving_pt:
            first, second, _ = self.serving_lines()
            font = BOLD if bold else FONT
            if self.lay.serving_style == "per_line":
                texts = [f"{self.lay.serving_text} {first}"]
                if self.lay.serving_text_second:
                    texts.append(f"{self.lay.serving_text_second} {second}")
            else:
                texts = [self.lay.serving_text + "   " + first]  # a little more than the least gap drawn
            out += [pdfmetrics.stringWidth(x, font, serving_pt) for x in texts]
        return out

    def serving_lines(self) -> tuple[str, str, bool]:
        """The serving declaration in the first and the second language, and whether the household measure
        is in both (a second-language panel prints it only when the formula gives it in that language)."""
        d, lay = self.d, self.lay
        sv = d.composition.formula.header.serving
        hh = sv.household if sv and lay.serving_household else None
        hh2 = (sv.household_names or {}).get(lay.second_language or "") if sv else None
        if lay.second_language and not hh2:
            hh = None  # a household measure in one language only would make the two lines disagree
        grams = f"{d.serving_g:g}g" if lay.compact_units else f"{d.serving_g:g} g"
        first = f"{hh} ({grams})" if hh else grams
        second = f"{hh2} ({grams})" if hh and hh2 else grams
        return first, second, bool(hh and hh2)

    def _layout(self):
        """The drawing operations, height and width of the panel (measured once, drawn once)."""
        d, lay, size = self.d, self.lay, self.size
        widths, label_w, W = self._widths()
        pad = self._pad()
        lh = size * 1.45
        y = 0.0  # baseline position, measured downwards from the top
        ops: list[tuple] = []
        xr = []  # right edge of each column
        x = pad + label_w
        for w in widths:
            x += w
            xr.append(x)

        def text(x, yy, s, font=FONT, sz=size, align="left"):
            ops.append(("text", x, yy, s, font, sz, align))

        lines = lay.nutrient_lines
        lead = float(lines.leading_pt) if lines and lines.leading_pt is not None else None
        bold_pct = set(lines.percent_bold_for) if lines and lines.percent_bold_for is not None else None

        def rule(weight, next_size, x_end=None, below=size, leading=None):
            """A rule under the text just drawn at ``y``, clear of its descenders and of the next line.  With
            ``leading``, the next line's body starts at least that far below this line's body and the rule is
            centred in the space between them (US: 21 CFR 101.9(d)(1)(ii)(C) and (v))."""
            nonlocal y
            if leading is None:
                y += _lines_with_descent(below) + weight / 2
                ops.append(("rule", y, weight, x_end))
                y += weight / 2 + next_size * 0.95
                return
            under, above = line_body(below)[1], line_body(next_size)[0]
            pitch = max(_lines_with_descent(below) + weight + next_size * 0.95, under + leading + above)
            ops.append(("rule", y + (under + pitch - above) / 2, weight, x_end))
            y += pitch

        def fit(s, font, sz, width, floor=5.0):
            while sz > floor and pdfmetrics.stringWidth(s, font, sz) > width:
                sz = max(floor, sz - 0.25)
            return sz

        title = d.pack.panel.title
        tsize = min(
            fit(title, BOLD, lay.title_size_pt, W - 2 * pad),
            fit(lay.title_second or "", BOLD, lay.title_size_pt, W - 2 * pad),
        )
        y = pad + tsize * 0.8
        text(pad, y, title, BOLD, tsize)
        if lay.title_second:
            y += tsize * 1.0
            text(pad, y, lay.title_second, BOLD, tsize)
        servings_pt, serving_pt, serving_floor, serving_bold = self.serving_type()
        ssize = size * 1.15
        on_top = lay.serving_lines_on_top or lay.style == "boxed"
        servings = self.servings_line()
        # the first line under the title: the rule above it keeps clear of its ascenders
        first_pt = servings_pt if servings else serving_pt if (on_top and d.serving_g and lay.serving_type) else size
        if lay.style == "boxed" and lay.title_rule is not None:  # centred between the lines (US: 101.9(d)(1)(v))
            rule(float(lay.title_rule.weight_pt), first_pt, below=tsize, leading=float(lay.title_rule.leading_pt))
        elif lay.style == "boxed":
            rule(0.6, first_pt, below=tsize * 0.7)
        else:
            y += size * 1.4 + max(0.0, first_pt - size)
        columns_top: float | None = None  # the bar the column lines hang from
        if on_top:
            if servings:
                for k, part in enumerate(wrap_lines(servings, FONT, servings_pt, W - 2 * pad)):
                    y += servings_pt * 1.2 if k else 0
                    text(pad, y, part, FONT, servings_pt)
                # at least a point between this line's descenders and the next line's ascenders
                y += max(lh * 1.1, servings_pt * 0.3 + 1 + serving_pt * 0.95)
            if d.serving_g:
                first, second, _ = self.serving_lines()
                sfont = BOLD if serving_bold else FONT
                if lay.serving_style == "per_line":
                    text(pad, y, f"{lay.serving_text} {first}", sfont, serving_pt)
                    if lay.serving_text_second:
                        y += serving_pt * 1.2
                        text(pad, y, f"{lay.serving_text_second} {second}", sfont, serving_pt)
                    ssize = serving_pt
                else:
                    whole = lay.serving_text + "  " + first
                    ssize = fit(whole, sfont, serving_pt, W - 2 * pad, serving_floor)
                    text(pad, y, lay.serving_text, sfont, ssize)
                    if pdfmetrics.stringWidth(whole, sfont, ssize) <= W - 2 * pad:
                        text(W - pad, y, first, sfont, ssize, "right")
                    else:  # too long even at the smallest size allowed: the size on its own line(s), right-aligned
                        for part in wrap_lines(first, sfont, ssize, W - 2 * pad):
                            y += ssize * 1.2
                            text(W - pad, y, part, sfont, ssize, "right")
            rule(lay.serving_rule_pt or (4 if lay.style == "boxed" else 1), size, below=ssize)
            columns_top = ops[-1][1]
        if lay.header_note and not d.dual_column:  # dual columns are headed "Per serving" / "Per container"
            text(pad, y, lay.header_note, BOLD, size * 0.95)
            y += lh * 0.9
        # column headings (each heading at most two lines, bottom-aligned)
        heads = [
            wrap_lines(self._header(k, b), BOLD, size * 0.85, w - 2.2 * mm) for (k, b), w in zip(self.cols, widths)
        ]
        heads = [h if h != [""] else [] for h in heads]
        nh = max((len(h) for h in heads), default=0)
        if nh and (len(d.columns) > 1 or lay.style == "table" or lay.percent_header == "columns"):
            for hl, xx in zip(heads, xr):
                for k, part in enumerate(hl):
                    text(xx - 1, y + (nh - len(hl) + k) * size * 1.05, part, BOLD, size * 0.85, "right")
            y += (nh - 1) * size * 1.05
            rule(0.5, size, below=size * 0.85)
        pct_heading_done = False
        first_energy = True
        baselines: list[float] = []
        rows = self.lines
        for i, (r, label, cells, pct) in enumerate(rows):
            big = lay.energy_large and first_energy and d.pack.nutrients[r.nutrient].energy is not None
            sz = size * (lay.energy_size_factor if big else 1.0)
            font = BOLD if (r.bold or big) else FONT
            indent = pad + r.indent * 3 * mm
            pct_font = BOLD if bold_pct is None or r.nutrient in bold_pct else FONT
            if r.percent_only:
                # the percentage of a group (Canada's saturated + trans) sits between the group's two lines
                mid = (baselines[-1] + baselines[-2]) / 2 if len(baselines) > 1 else y
                for (kind, b), xx in zip(self.cols, xr):
                    if kind == "pct" and pct.get(b):
                        text(xx - 1, mid + size * 0.35, pct[b], pct_font, size, "right")
                continue
            if big:  # room for the large row's ascent, and for a heading stacked above its right end
                y += (sz - size) * 0.85 + (size * 1.1 if lay.percent_header == "energy_line" else 0)
            value_cols = [k for k, _ in self.cols if k == "value"]
            avail = label_w - r.indent * 3 * mm
            lab_lines = wrap_lines(label, font, sz, avail)
            step = sz * 1.2 if lead is None or big else max(sz * 1.2, sz + lead)  # a nutrient line's own lines too
            for k, part in enumerate(lab_lines):
                text(indent, y + k * step, part, font, sz)
            y += (len(lab_lines) - 1) * step
            baselines.append(y)
            after_x = indent + pdfmetrics.stringWidth(lab_lines[-1], font, sz) + sz * 0.3
            if not value_cols and cells:
                if big and lay.energy_amount == "right":
                    text(W - pad, y, cells[0], BOLD, sz, "right")
                    after_x = W - pad
                else:
                    text(after_x, y, cells[0], BOLD if big else FONT, sz)
                    after_x += pdfmetrics.stringWidth(cells[0], BOLD if big else FONT, sz)
            ci = 0
            for (kind, b), xx in zip(self.cols, xr):
                if kind == "value":
                    if ci < len(cells):
                        text(xx - 1, y, cells[ci], BOLD if big else FONT, sz, "right")
                    ci += 1
                elif pct.get(b):
                    text(xx - 1, y, pct[b], pct_font, size, "right")
            if big and lay.percent_header == "energy_line" and not pct_heading_done:
                text(W - pad, y - size * 1.1, d.pack.panel.percent_label or "", BOLD, size * 0.85, "right")
                if lay.percent_label_second:
                    text(W - pad, y, lay.percent_label_second, BOLD, size * 0.85, "right")
                pct_heading_done = True
            last = i == len(rows) - 1 or all(x[0].percent_only for x in rows[i + 1 :])
            nxt = size * (1.0 if not last else 0.8)
            heading_next = (
                big
                and lay.percent_header == "below_energy"
                and not d.dual_column
                and any(k == "pct" for k, _ in self.cols)
            )
            # the leading of a nutrient line: below every nutrient line, and below the energy row when a nutrient
            # line follows it directly (no percentage heading between them)
            row_lead = None if heading_next else lead
            if last and lay.rule_before_footnotes_pt:
                rule(lay.rule_before_footnotes_pt, nxt, below=sz, leading=row_lead)
            elif r.nutrient in lay.heavy_rule_after or big:
                x_end = after_x + 1.5 * mm if (big and lay.energy_rule_partial) else None
                rule(lay.heavy_rule_pt, nxt, x_end, below=sz, leading=row_lead)
            elif r.nutrient in lay.no_rule_after and not last:
                y += lh if row_lead is None else max(lh, size + row_lead)
            else:
                rule(0.35, nxt, below=sz, leading=row_lead)
            if big:
                first_energy = False
                if heading_next:
                    text(W - pad, y, d.pack.panel.percent_label or "%", BOLD, size * 0.95, "right")
                    rule(0.35, size, below=size if lead is None else size * 0.95, leading=lead)
                    pct_heading_done = True
        if lay.column_rules is not None and len(d.columns) > 1:
            # vertical lines between the columns of figures (US: 101.9(e)(3) and (e)(6)), from the bar above the
            # column headings down to the last rule of the rows, in the gap left of each column's figures
            bottom = max((op[1] for op in ops if op[0] == "rule"), default=y)
            firsts = [k for k, (kind, _) in enumerate(self.cols) if kind == "value"]
            for k in firsts if lay.column_rules.left_of_first else firsts[1:]:
                left = xr[k] - widths[k]
                top = columns_top if columns_top is not None else pad
                ops.append(("vline", left + (2.2 * mm - 1) / 2, top, bottom, float(lay.column_rules.weight_pt)))
        shown_pct = any(k == "pct" for k, _ in self.cols)
        for fn in d.pack.panel.footnotes:
            if not (fn.when == "always" or shown_pct):
                continue
            for t in [fn.text] + ([fn.text_second] if fn.text_second else []):
                for part in wrap_lines(t, FONT, size * 0.8, W - 2 * pad):
                    text(pad, y, part, FONT, size * 0.8)
                    y += size * 0.8 * 1.25
        y += pad - size * 0.8 * 0.5
        return ops, y, W

    def _paint(self, c, ops, H, W) -> None:
        lay = self.lay
        pad = self._pad()
        if c is not None:
            c.saveState()
            c.setFillColor(INK)
            c.setStrokeColor(INK)
            c.setLineCap(0)
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
                elif op[0] == "vline":
                    _, xx, y0, y1, weight = op
                    c.setLineWidth(weight)
                    c.line(xx, H - y0, xx, H - y1)
                else:
                    _, yy, weight, x_end = op
                    c.setLineWidth(weight)
                    c.line(pad * 0.5, H - yy, x_end if x_end is not None else W - pad * 0.5, H - yy)
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

    def show(it: dict) -> str:
        return allergen_name({**it, "name": _esc(it["name"])}, emph, bold=lambda s: f"<b>{s}</b>")

    return Paragraph(f"<b>{_esc(il['heading'])}</b> " + render_items(il["printed_items"], show) + ".", st["base"])


def second_language_list(a: Assessment) -> tuple[str, list[str]] | None:
    """The ingredient list in the market's second official language (Canada: FDR B.01.012(2)), from the
    'label_names' of the library entries and sub-formulas; names it cannot find are shown in brackets
    and returned, so the draft says what to translate."""
    rule = a.declaration.pack.ingredient_list
    il = a.ingredient_list
    if not il or rule is None or not rule.heading_second or not rule.second_language:
        return None
    lang = rule.second_language
    f = a.declaration.composition.formula
    names: dict[str, str] = {i.id: i.label_names.get(lang, "") for i in f.ingredients_used()}
    todo = [f]
    while todo:
        g = todo.pop()
        names[g.id] = (g.header.label_names or {}).get(lang, "")
        todo += g.sub_formulas()
    emph = a.allergens.get("emphasis", "bold")
    missing: list[str] = []

    def render(items) -> str:
        parts = []
        for it in items:
            name = names.get(it.get("id", ""), "")
            if not name:
                missing.append(it["name"])
                name = f"[{it['name']}]"
            allergens = [second_allergen.get(n, n) for n in it.get("allergen_names", [])]
            shown = allergen_name(
                {**it, "name": _esc(name), "allergen_names": allergens}, emph, bold=lambda x: f"<b>{x}</b>"
            )
            if it.get("quid"):
                shown += f" ({_esc(it['quid'])})"
            if it["components"]:
                shown += " (" + render(it["components"]) + ")"
            parts.append(shown)
        return ", ".join(parts)

    entries = a.declaration.pack.allergens.entries.values() if a.declaration.pack.allergens else []
    second_allergen = {e.name: (e.name_second or e.name).lower() for e in entries}
    body = render(il["items"])
    return f"<b>{_esc(rule.heading_second)}</b> {body}.", list(dict.fromkeys(missing))


def allergen_statement(a: Assessment) -> str:
    """The allergen summary as printed, in both official languages where the pack names them in two."""
    al = a.allergens
    rules = a.declaration.pack.allergens
    text = al["statement"]
    if rules is None or not rules.summary_prefix_second:
        return text
    by_name = {e.name: e for e in rules.entries.values()}
    second = [by_name[n].name_second or n if n in by_name else n for n in al["declared"]]
    lower = [x if x.startswith("[") else x[:1].lower() + x[1:] for x in second]
    return f"{text} / {rules.summary_prefix_second} {', '.join(lower)}."


def build_story(
    a: Assessment, checks: list[Check], date: str, st, *, calculation: bool = True, print_note: str | None = None
) -> list:
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
    if print_note:
        story.append(Paragraph(_esc(print_note), st["warn"]))
    story.append(Spacer(1, 4 * mm))
    story.append(PanelDrawing(d))
    if d.pack.panel.layout.serving_note and d.serving_g and not PanelDrawing(d).serving_lines()[2]:
        story.append(Paragraph(_esc("SERVING REVIEW: " + d.pack.panel.layout.serving_note), st["warn"]))
    story.append(Spacer(1, 4 * mm))
    ip = ingredient_paragraph(a, st)
    if ip:
        story.append(ip)
    second = second_language_list(a)
    if ip and second:
        text, missing = second
        story.append(Paragraph(text, st["base"]))
        if missing:
            story.append(
                Paragraph(
                    _esc(
                        "TRANSLATION NEEDED: no name in the second official language for "
                        + ", ".join(missing)
                        + " — add 'label_names' to the library entry or sub-formula, or translate by hand"
                    ),
                    st["warn"],
                )
            )
    al = a.allergens
    if al.get("statement"):
        story.append(Paragraph(f"<b>{_esc(allergen_statement(a))}</b>", st["base"]))
    for x in al.get("review", []):
        story.append(Paragraph(_esc("ALLERGEN REVIEW: " + x), st["warn"]))
    if a.statements:
        story.append(Paragraph("Statements", st["h2"]))
        for s in a.statements:
            story.append(Paragraph(f"<b>{_esc(s.text)}</b>", st["base"]))
            story.append(Paragraph(_esc(f"{s.status.upper()}: {s.trigger} [{s.citation}]"), st["small"]))
            for x in s.figures:
                story.append(Paragraph(_esc("· " + x), st["small"]))
            if s.caution:
                story.append(Paragraph(_esc("Caution: " + s.caution), st["small"]))
    for fop in a.front_of_pack:
        story.append(Paragraph(_esc(f"Front of pack (draft) — {fop['name']}"), st["h2"]))
        if fop.get("audience"):
            story.append(
                Paragraph(_esc(f"Values for: {fop['audience']['name']} [{fop['audience']['citation']}]"), st["small"])
            )
        story.append(_fop_table(fop, st, {r.nutrient: plain_label(r.label) for r in d.pack.rows}))
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
                [["check", "result", "detail"]] + [[c.name, c.result, c.detail] for c in checks],
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
                    + "".join(f"; REVIEW: {c.name}" for c in checks if c.ok and c.review)
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


def _fop_table(fop: dict, st, names: dict[str, str] | None = None):
    rows = [["nutrient", "verdict", "figures"]]
    if fop.get("exempt"):
        rows.append(["all", "exempt", ""])
    for key, v in fop.get("verdicts", {}).items():
        n = (names or {}).get(key, key.replace("_", " "))
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


def _with_unit(value: str, unit: str) -> str:
    return value if value == "unknown" else f"{value} {display_unit(unit)}"


def calculation_story(a: Assessment, st) -> list:
    d = a.declaration
    story = [
        Paragraph(_esc(f"Calculation sheet — {d.composition.formula.header.name} — {d.pack.pack.name}"), st["h1"]),
        Paragraph(
            _esc(
                "Each declared figure in turn: its unrounded value in every printed column, the rounding band "
                "applied, the reference value and percentage; then what each leaf ingredient and each processing "
                "step (water lost, oil taken up) contributes per 100 g of finished product, through every "
                "sub-formula, with the source of each ingredient value; then the rule's citations. Energy factors, "
                "unknown inputs and assumed zeros follow."
            ),
            st["small"],
        ),
        Spacer(1, 3 * mm),
    ]
    rows = calculation_rows(a)
    figures = [r for r in rows if r["kind"] == "figure"]
    lines = [r for r in rows if r["kind"] == "line"]
    for nutrient in dict.fromkeys(r["nutrient"] for r in figures):
        mine = [r for r in figures if r["nutrient"] == nutrient]
        story.append(Paragraph(_esc(f"{mine[0]['label']} [{mine[0]['unit']}]"), st["h2"]))
        head = [["column", "unrounded", "rounding band applied", "declared", "reference value and %"]]
        body = [
            [r["column"], _with_unit(r["unrounded"], r["unit"]), r["rounding"], r["declared"], r["percent"]]
            for r in mine
        ]
        story.append(_table(head + body, st, [22 * mm, 24 * mm, 64 * mm, 24 * mm, 46 * mm]))
        contrib = [r for r in lines if r["nutrient"] == nutrient]
        if contrib:
            table = [
                [
                    "ingredient or processing step",
                    "through",
                    "g per 100 g",
                    f"{mine[0]['unit']} per 100 g",
                    "value source",
                ]
            ]
            table += [
                [
                    r["ingredient"] if r["line_kind"] == "ingredient" else f"{r['line_kind']}: {r['ingredient']}",
                    r["route"] or "the formula",
                    r["grams_per_100g"],
                    r["amount"],
                    r["source"],
                ]
                for r in contrib
            ]
            story.append(Spacer(1, 1 * mm))
            story.append(_table(table, st, [40 * mm, 44 * mm, 18 * mm, 18 * mm, 60 * mm]))
        story.append(Paragraph(_esc("Sources: " + mine[0]["source"]), st["small"]))
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


def end_to_print(items: list[tuple[Assessment, list[Check]]]) -> tuple[int, str | None]:
    """Which scenario's panel to print when an input is a range, and why.

    The end with the higher declared energy is printed: the markets' compliance rules cap declared
    energy, fat, sugars and sodium from above (21 CFR 101.9(g)(5): no more than 120 % of the declared
    value; the EU tolerance guidance's upper bounds), so the higher end is the conservative draft.  The
    reason printed cites the market's own compliance rules (none where the pack has none).
    The other end stays in the calculation sheet.
    """
    if len(items) == 1:
        return 0, None

    def energy(i: int) -> float:
        e = items[i][0].declaration.declared_energy
        return e.kj if e.kj is not None else float("-inf")

    best = max(range(len(items)), key=energy)
    scen = items[best][0].declaration.composition.scenario
    others = ", ".join(a.declaration.composition.scenario for j, (a, _) in enumerate(items) if j != best)
    pack = items[best][0].declaration.pack
    why = (
        f", since this market's compliance rules judge declared figures against analysed ones "
        f"({' '.join(pack.compliance.citation.split(';')[0].split())})"
        if pack.compliance
        else ""
    )
    return best, (
        f"PRINT THIS PANEL: the {scen} end of the stated ranges, the one with the higher declared energy — the "
        f"conservative choice{why}. The {others} end follows on later pages and in the calculation sheet, not for "
        "printing."
    )


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
        chosen, why = end_to_print(items)
        ai, checks = items[chosen]
        story: list = build_story(ai, checks, date, st, calculation=calculation, print_note=why)
        for i, (other, _) in enumerate(items):
            if i == chosen:
                continue
            scen = other.declaration.composition.scenario
            story.append(PageBreak())
            story.append(Paragraph(_esc(f"Other end of the stated ranges ({scen}) — not for printing"), st["h1"]))
            story.append(PanelDrawing(other.declaration))
            if calculation:
                story.append(PageBreak())
                story += calculation_story(other, st)
        doc.build(story, onFirstPage=_footer(date, label), onLaterPages=_footer(date, label))
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()
    return path
