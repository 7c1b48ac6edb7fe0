"""What the workbench shows for one state of a formula: computed through the public engine functions only.

Every figure comes from ``compose``, ``declare``/``assess_against`` (the :class:`Declaration` and
:class:`Assessment` records) and, for the replacement slider, :mod:`labelcalc.whatif.explore`.  A state is the
formula text being edited, the chosen markets and scenario, and an optional replacement (old, new, level).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

from labelcalc import components as C
from labelcalc.errors import LabelError, Problem
from labelcalc.formulation.composition import Composition, compose
from labelcalc.intake.formula import Formula
from labelcalc.intake.library import Library
from labelcalc.labelling.assess import assess_against
from labelcalc.labelling.checks import run_checks
from labelcalc.labelling.engine import display_unit
from labelcalc.labelling.model import BASIS_LABEL, Assessment
from labelcalc.whatif.explore import substitute, sweep
from labelcalc.workbench.panelhtml import panel_view
from labelcalc.workbench.workspace import Workspace

SWEEP_LEVELS = [float(x) for x in range(0, 101, 10)]


def number(v) -> float:
    """A number sent by the page; anything else (missing, text, NaN) counts as 0."""
    try:
        x = float(v)
    except (TypeError, ValueError):
        return 0.0
    return x if math.isfinite(x) else 0.0


@dataclass
class State:
    path: str
    text: str
    markets: list[str]
    scenario: int = 0
    replace: str = ""
    with_: str = ""
    level: float = 0.0

    @classmethod
    def from_json(cls, body: dict, default_markets: list[str]) -> State:
        level = number(body.get("level"))
        markets = body.get("markets")
        return cls(
            path=str(body.get("path") or ""),
            text=str(body.get("yaml") or ""),
            markets=[str(m) for m in markets] if isinstance(markets, list) and markets else list(default_markets),
            scenario=max(0, int(number(body.get("scenario")))),
            replace=str(body.get("replace") or ""),
            with_=str(body.get("with") or ""),
            level=min(100.0, max(0.0, level)),
        )

    @property
    def replacing(self) -> bool:
        return bool(self.replace and self.with_)


@dataclass
class Computed:
    """A formula state worked through the engine (or the problems that stop it)."""

    problems: list[Problem] = field(default_factory=list)
    formula: Formula | None = None
    library: Library | None = None
    comps: list[Composition] = field(default_factory=list)
    reference: list[Composition] | None = None
    assessments: dict[tuple[str, int], Assessment] = field(default_factory=dict)


def compute(ws: Workspace, st: State) -> Computed:
    """Validate the text, apply the replacement, compose, declare and assess for every chosen market."""
    out = Computed()
    try:
        path = ws.formula_path(st.path)
        f, lib = ws.formula_from_text(st.text, path)
        out.formula, out.library = f, lib
        out.reference = ws.reference(f, lib)
        if st.replacing:
            f = substitute(f, st.replace, st.with_, st.level, lib)
        out.comps = compose(f, lib)
        for p in ws.packs(st.markets):
            for i, c in enumerate(out.comps):
                out.assessments[(p.market, i)] = assess_against(c, p, out.reference, i)
    except LabelError as exc:
        out.problems = exc.problems
    return out


def _num(v: float | None, digits: int = 1) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return "unknown"
    return f"{v:,.{digits}f}"


def composition_rows(c: Composition) -> list[dict]:
    """Components per 100 g and per serving (zero rows left out, unknown rows kept)."""
    rows = []
    for k in C.KEYS:
        v = c.value(k)
        if v is not None and abs(v) < 1e-9:
            continue
        comp = C.BY_KEY[k]
        rows.append(
            {
                "key": k,
                "unit": display_unit(comp.unit),
                "indent": 1 if comp.part_of else 0,
                "per_100g": _num(v, 3 if comp.unit == "g" else 1),
                "per_serving": _num(c.per_serving(k), 3 if comp.unit == "g" else 1)
                if c.formula.serving_grams()
                else "",
                "unknown_inputs": ", ".join(c.unknown_inputs(k)) if v is None else "",
            }
        )
    return rows


def energy_rows(items: list[Assessment]) -> list[dict]:
    """Available beside declared energy for each market (one scenario)."""
    out = []
    for a in items:
        d = a.declaration
        s = d.serving_g
        de, av = d.declared_energy, d.available_energy
        out.append(
            {
                "market": a.market,
                "factor_set": de.factor_set.factor_set.title,
                "declared_kcal": _num(de.kcal),
                "declared_kj": _num(de.kj, 0),
                "available_kcal": _num(av.kcal),
                "available_kj": _num(av.kj, 0),
                "declared_kcal_serving": _num(de.per_serving(s)[1]) if s else "",
                "available_kcal_serving": _num(av.per_serving(s)[1]) if s else "",
                "reviews": [r.strip() for r in de.reviews],
            }
        )
    return out


def page_data(ws: Workspace, st: State, comp: Computed) -> dict:
    """Everything the results part of the page shows."""
    if comp.problems or not comp.comps:
        return {"problems": comp.problems}
    i = min(st.scenario, len(comp.comps) - 1)
    items = [a for (m, j), a in comp.assessments.items() if j == i]
    return {
        "problems": [],
        "scenarios": [c.scenario for c in comp.comps],
        "scenario_index": i,
        "scenario": comp.comps[i].scenario,
        "composition": composition_rows(comp.comps[i]),
        "serving_g": comp.comps[i].formula.serving_grams(),
        "energy": energy_rows(items),
        "markets": [
            {
                "a": a,
                "panel": panel_view(a.declaration),
                "failed_checks": [c for c in _checks(a) if not c.ok],
                "print_note": _print_note(comp, a.market, i),
            }
            for a in items
        ],
    }


def _print_note(comp: Computed, market: str, i: int) -> str | None:
    """Where an input is a range: which end's panel is printed, by the PDF draft's own rule
    (:func:`labelcalc.outputs.panelpdf.end_to_print`), said beside the end shown."""
    from labelcalc.outputs.panelpdf import end_to_print

    ends = [j for j in range(len(comp.comps)) if (market, j) in comp.assessments]
    if len(ends) < 2 or i not in ends:
        return None
    best, why = end_to_print([(comp.assessments[(market, j)], []) for j in ends])
    if ends[best] == i:
        return why
    return (
        f"NOT FOR PRINTING: this is the {comp.comps[i].scenario} end; the panel to print is the "
        f"{comp.comps[ends[best]].scenario} end, the one with the higher declared energy (the PDF draft prints it first)."
    )


def trace(comp: Computed, market: str, scenario: int, nutrient: str, basis: str) -> dict:
    """Where one declared figure comes from, read from the label record's trace (the same trace the calculation
    sheet prints): the unrounded value, the rounding band applied, the percentage, unknown inputs, sources, the
    energy factors, and one contribution line per leaf ingredient or processing effect with its route through
    sub-formulas and the library source of its values."""
    a = comp.assessments.get((market, scenario))
    if a is None:
        raise LabelError(Problem(f"no label for market '{market}' and scenario {scenario} in this view"))
    d = a.declaration
    try:
        row = d.row(nutrient)
    except KeyError:
        raise LabelError(Problem(f"the '{market}' panel has no row '{nutrient}'")) from None
    rec = d.record
    entry = next((r for r in rec.trace["rows"] if r["nutrient"] == nutrient), None) if rec is not None else None
    if entry is None:
        raise LabelError(Problem(f"the '{market}' label has no trace for '{nutrient}' (the row is not shown)"))
    col = entry["columns"].get(basis)
    pct = (col or {}).get("percent")
    lines = [
        {
            "path": [p for p in ln["route"].split(" > ") if p] + [ln["ingredient"]],
            "kind": ln["kind"],
            "grams": _num(ln["grams_per_100g"], 3),
            "value": "unknown" if ln["amount"] is None else f"{_num(ln['amount'], 4)} {display_unit(ln['unit'])}",
            "sources": sorted(set(ln["sources"].values())),
        }
        for ln in entry["lines"]
        if ln["amount"] != 0
    ]
    return {
        "market": market,
        "scenario": d.composition.scenario,
        "nutrient": nutrient,
        "label": row.label_for(basis) if basis in row.declared else row.label,
        "unit": display_unit(row.unit),
        "basis": basis,
        "basis_label": BASIS_LABEL.get(basis, basis),
        "declared": col["declared"] if col else "not printed in this column",
        "unrounded": {BASIS_LABEL.get(b, b): _num(c["unrounded"], 4) for b, c in entry["columns"].items()},
        "rounding": (col or {}).get("rounding") or "",
        "rounding_citation": (col or {}).get("rounding_citation") or "",
        "percent": pct,
        "unknown_inputs": entry["unknown_inputs"],
        "sources": entry["citations"],
        "how": entry.get("definition", ""),
        "factors": entry.get("factors", []),
        "why_shown": row.why,
        "lines": lines,
        "total_per_100g": _num(entry["unrounded_per_100g"], 4),
    }


def chart(ws: Workspace, st: State, comp: Computed, cache: dict | None = None) -> dict | None:
    """The replacement sweep (0-100 % in steps of 10) as SVG coordinates: declared and available energy per
    serving (per 100 g when there is no serving) for each chosen market, with the current level marked."""
    if not st.replacing or comp.formula is None or comp.library is None:
        return None
    packs = ws.packs(st.markets)
    key = (st.text, tuple(p.market for p in packs), st.replace, st.with_)
    cache = {} if cache is None else cache
    if key not in cache:  # the sweep does not depend on the slider's level: worked out once per formula text
        cache.clear()
        cache[key] = sweep(comp.formula, comp.library, packs, st.replace, st.with_, SWEEP_LEVELS, None, comp.reference)
    rows = cache[key]
    i = st.scenario
    series: dict[str, list[tuple[float, float | None]]] = {}
    per = "serving" if comp.formula.serving_grams() else "100 g"
    for lvl, pts in rows:
        scen = sorted({p.scenario for p in pts})
        want = [c.scenario for c in comp.comps][min(i, len(comp.comps) - 1)] if comp.comps else scen[0]
        for p in pts:
            if p.scenario != want:
                continue
            dec = p.declared_kcal_per_serving if per == "serving" else p.declared_kcal_per_100g
            av = p.available_kcal_per_serving if per == "serving" else p.available_kcal_per_100g
            series.setdefault(f"{p.market} declared", []).append((lvl, dec))
            series.setdefault(f"{p.market} available", []).append((lvl, av))
    values = [v for s in series.values() for _, v in s if v is not None]
    if not values:
        return None
    lo, hi = min(values), max(values)
    lo, hi = (lo - 1, hi + 1) if hi - lo < 1e-9 else (lo, hi)
    W, H, L, B, T = 520.0, 232.0, 48.0, 28.0, 24.0
    R = 150.0  # room for the legend

    def x(level: float) -> float:
        return L + (W - L - R) * level / 100

    def y(v: float) -> float:
        return T + (H - T - B) * (1 - (v - lo) / (hi - lo))

    lines = []
    for k, (name, pts) in enumerate(series.items()):
        coords = " ".join(f"{x(lv):.1f},{y(v):.1f}" for lv, v in pts if v is not None)
        lines.append({"name": name, "points": coords, "dashed": name.endswith("available"), "n": k})
    ticks = [lo + (hi - lo) * t / 4 for t in range(5)]
    return {
        "width": W,
        "height": H,
        "left": L,
        "bottom": H - B,
        "right": W - R,
        "top": T,
        "lines": lines,
        "yticks": [{"y": y(t), "text": f"{t:.0f}"} for t in ticks],
        "xticks": [{"x": x(lv), "text": f"{lv:g}"} for lv in (0, 25, 50, 75, 100)],
        "marker": x(st.level),
        "level": st.level,
        "unit": f"kcal per {per}",
        "legend_x": W - R + 10,
    }


def choices(comp: Computed, ws: Workspace, path: Path) -> dict:
    """What the slider can replace (used in the formula) and with what (library ingredients, sub-formulas)."""
    if comp.formula is None or comp.library is None:
        return {"used": [], "candidates": []}
    used = sorted({i.id for i in comp.formula.ingredients_used()} | _sub_ids(comp.formula))
    index = ws.index()
    subs = sorted(k for k, kind in index.kinds.items() if kind == "subformula")
    return {"used": used, "candidates": sorted(comp.library.ids) + subs}


def _sub_ids(f: Formula) -> set[str]:
    out: set[str] = set()
    for sub in f.sub_formulas():
        out |= {sub.id} | _sub_ids(sub)
    return out


def _checks(a: Assessment) -> list:
    """The label's consistency checks (the record carries them; the PDF draft prints the same)."""
    rec = a.declaration.record
    return rec.checks if rec is not None else run_checks(a)
