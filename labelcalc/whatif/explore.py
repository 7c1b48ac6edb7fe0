"""Formulation what-if: compare formulas, sweep a substitution, find a claim's target level.

A substitution replaces a share of one ingredient (wherever it is used: batch
lines at any depth, sub-formula lines such as the oil of a frying blend, the
frying oil itself) by another, keeping every amount and processing step as it
is.  Each level is an ordinary formula, so every figure comes from the same
engine as ``declare`` and ``assess``.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from pathlib import Path

from labelcalc.errors import InputError, Problem
from labelcalc.formulation.composition import compose
from labelcalc.intake.formula import Formula, Header, Line, map_tree
from labelcalc.intake.library import Library
from labelcalc.intake.quantities import Quantity
from labelcalc.labelling.engine import LabelEngine, require_labelled
from labelcalc.labelling.model import ELIGIBLE
from labelcalc.labelling.record import label_record
from labelcalc.labelling.rulepack import RulePack
from labelcalc.whatif.costing import cost_of


def _line(part, grams: float) -> Line:
    q = Quantity(grams, "mass", f"{grams:g} g")
    if isinstance(part, Formula):
        return Line(part.id, grams, q, formula=part)
    return Line(part.id, grams, q, ingredient=part)


def _name(part) -> str:
    return part.header.label_name or part.header.name if isinstance(part, Formula) else part.label_name


def _blend(old, new, share: float) -> Formula:
    """A 100 g blend: (100 - share) g of old and share g of new (zero lines dropped); either may be a sub-formula."""
    lines = []
    if share < 100:
        lines.append(_line(old, 100.0 - share))
    if share > 0:
        lines.append(_line(new, share))
    h = hashlib.sha256(f"{old.id}>{new.id}@{share!r}".encode()).hexdigest()[:16]
    head = Header(
        id=f"{old.id}__to__{new.id}__{share:g}",
        name=f"{_name(old)} / {_name(new)} ({share:g} % replaced)",
        label_name=_name(old) if share < 50 else _name(new),
    )
    return Formula(head, "subformula", lines, [], "(substitution)", h, 100.0)


def _sub_formulas(f: Formula) -> dict[str, Formula]:
    found: dict[str, Formula] = {}
    for sub in f.sub_formulas():
        found.setdefault(sub.id, sub)
        found.update({k: v for k, v in _sub_formulas(sub).items() if k not in found})
    return found


def _part(ident: str, f: Formula, library: Library, option: str):
    """An ingredient of the library or a sub-formula (of this formula or in its folder) by id."""
    subs = _sub_formulas(f)
    if ident in subs:
        return subs[ident]
    if ident in library:
        return library.get(ident)
    from labelcalc.intake.formula import FormulaIndex, load_formula

    index = FormulaIndex([Path(f.file).resolve().parent])
    if ident in index.paths and index.kinds.get(ident) == "subformula":
        return load_formula(index.paths[ident], library, _index=index)
    return library.get(ident, field=option)  # raises with close-match suggestions


def substitute(f: Formula, old_id: str, new_id: str, share: float, library: Library) -> Formula:
    """A copy of ``f`` with ``share`` % of ``old_id`` replaced by ``new_id`` everywhere it is used (batch lines at
    any depth, sub-formula lines, the frying oil).  Either may be an ingredient or a sub-formula (e.g. one frying
    blend for another)."""
    if not 0 <= share <= 100:
        raise InputError(Problem(f"replacement level {share:g} % is outside 0-100 %"))
    old = _part(old_id, f, library, "--replace")
    new = _part(new_id, f, library, "--with")
    used = {i.id for i in f.ingredients_used()} | set(_sub_formulas(f))
    if old_id not in used:
        raise InputError(
            Problem(
                f"'{old_id}' is not used in {f.id} (directly, in a sub-formula or as frying oil)",
                file=f.file,
                field="--replace",
            )
        )
    blend = _blend(old, new, share)
    is_sub = isinstance(old, Formula)

    def matches(ing, formula) -> bool:
        return (formula is not None and formula.id == old_id) if is_sub else (ing is not None and ing.id == old_id)

    def on_line(ln: Line) -> None:
        if matches(ln.ingredient, ln.formula):
            ln.ingredient, ln.formula = None, blend

    def on_step(_g, _j, st) -> None:
        if st.oil_ref and matches(st.oil_ingredient, st.oil_formula):
            st.oil_ingredient, st.oil_formula = None, blend

    return map_tree(f, blend.content_hash, on_line=on_line, on_step=on_step)


@dataclass
class Point:
    """Figures of one formula (one scenario) for one market."""

    label: str
    scenario: str
    market: str
    available_kcal_per_serving: float | None
    available_kcal_per_100g: float | None
    declared_kcal_per_serving: float | None
    declared_kcal_per_100g: float | None
    declared: dict[str, str]
    claims: list[str]
    statements: list[str]
    front_of_pack: dict[str, str]
    cost_per_kg: float | None
    cost_per_serving: float | None
    currency: str | None
    extra: dict = field(default_factory=dict)


def figures(
    f: Formula, library: Library, packs: list[RulePack], label: str, prices=None, reference=None
) -> list[Point]:
    """Points for every market and scenario of a formula."""
    return figures_many([(label, f)], library, packs, prices, reference)[0]


def figures_many(
    formulas: list[tuple[str, Formula]], library: Library, packs: list[RulePack], prices=None, reference=None
) -> list[list[Point]]:
    """Points for every market and scenario of each formula, labelled together: one engine per market for
    all formulas and scenarios (a sweep of 21 levels is one table operation per market, not 21)."""
    comps = [compose(f, library) for _, f in formulas]
    flat = [(k, i, c) for k, cs in enumerate(comps) for i, c in enumerate(cs)]
    refs = [reference[min(i, len(reference) - 1)] if reference else None for _, i, _ in flat]
    out: list[list[Point]] = [[] for _ in formulas]
    for p in packs:
        eng = LabelEngine(p, [c for _, _, c in flat], refs)
        require_labelled(eng)
        for j, (k, _, c) in enumerate(flat):
            out[k].append(_point(formulas[k][0], c, label_record(eng, j).assessment, prices))
    return out


def _point(label: str, c, a, prices) -> Point:
    d = a.declaration
    s = d.serving_g
    cost = cost_of(c, prices)
    av, de = d.available_energy.kcal, d.declared_energy.kcal
    main = d.columns[0]
    return Point(
        label,
        c.scenario,
        d.market,
        None if av is None or s is None else av * s / 100,
        av,
        None if de is None or s is None else de * s / 100,
        de,
        {r.nutrient: (r.label_for(main) if r.amount_in_label else r.text(main)) for r in d.shown_rows},
        [x.claim for x in a.claims if x.verdict == ELIGIBLE],
        [x.statement for x in a.statements],
        {
            f"{fo['scheme']}:{k}": str(v.get("colour", v.get("high_in")))
            for fo in a.front_of_pack
            for k, v in fo.get("verdicts", {}).items()
        },
        cost.per_kg,
        cost.per_serving,
        cost.currency,
        {"missing_prices": cost.missing_prices, "claim_verdicts": a.claims},
    )


def sweep(
    f: Formula,
    library: Library,
    packs: list[RulePack],
    old: str,
    new: str,
    levels: list[float],
    prices=None,
    reference=None,
) -> list[tuple[float, list[Point]]]:
    """Every level of a substitution, labelled together (see :func:`figures_many`)."""
    level_formulas = [(f"{x:g} %", substitute(f, old, new, x, library)) for x in levels]
    return list(zip(levels, figures_many(level_formulas, library, packs, prices, reference)))


def first_levels(rows: list[tuple[float, list[Point]]]) -> dict[str, float]:
    """The first level at which each claim becomes eligible or each statement required (per market)."""
    firsts: dict[str, float] = {}
    prev: dict[str, bool] = {}
    for x, points in rows:
        seen = set()
        for pt in points:
            seen |= {f"{pt.market}: claim {c}" for c in pt.claims}
            seen |= {f"{pt.market}: statement {s}" for s in pt.statements}
        for key in sorted(seen):  # sorted: the same input gives the same output
            if key not in firsts and not prev.get(key, False) and x != rows[0][0]:
                firsts[key] = x
        prev = {k: True for k in seen}
    return firsts


@dataclass
class TargetResult:
    claim: str
    market: str
    level: float | None
    tolerance: float
    reachable: bool
    blocking: list[str]
    points: list[Point]
    note: str


def find_target(
    f: Formula,
    library: Library,
    pack: RulePack,
    old: str,
    new: str,
    claim: str,
    *,
    tolerance: float = 0.01,
    prices=None,
    reference=None,
) -> TargetResult:
    """The smallest replacement level (0-100 %) at which ``claim`` is eligible in every scenario.

    A scan in 1 % steps finds the first eligible level; bisection then narrows the step in which
    it changes to ``tolerance`` percentage points (rounding makes eligibility piecewise)."""
    if claim not in {c.id for c in pack.claims}:
        raise InputError(
            Problem(
                f"the '{pack.market}' pack has no claim '{claim}'", fix="known: " + ", ".join(c.id for c in pack.claims)
            )
        )

    def ok(x: float) -> tuple[bool, list[Point]]:
        pts = figures(substitute(f, old, new, x, library), library, [pack], f"{x:g} %", prices, reference)
        return all(claim in p.claims for p in pts), pts

    # the 1 % grid in one engine run, then bisection inside the first step that turns eligible
    grid = [float(i) for i in range(0, 101)]
    scan = figures_many(
        [(f"{x:g} %", substitute(f, old, new, x, library)) for x in grid], library, [pack], prices, reference
    )
    eligible = [all(claim in p.claims for p in pts) for pts in scan]
    if eligible[0]:
        return TargetResult(claim, pack.market, 0.0, tolerance, True, [], scan[0], "eligible without any replacement")
    first = next((k for k, e in enumerate(eligible) if e), None)
    if first is not None:
        lo, hi, hi_pts = grid[first - 1], grid[first], scan[first]
        while hi - lo > tolerance:
            mid = (lo + hi) / 2
            g, p2 = ok(mid)
            if g:
                hi, hi_pts = mid, p2
            else:
                lo = mid
        return TargetResult(
            claim,
            pack.market,
            hi,
            tolerance,
            True,
            [],
            hi_pts,
            f"eligible from {hi:.2f} % replacement (to within {tolerance:g} percentage points)",
        )
    pts = scan[-1]
    blocking = []
    for p in pts:
        for v in p.extra["claim_verdicts"]:
            if v.claim == claim:
                blocking += [f"[{p.scenario}] {x}" for x in v.failed + v.missing]
    return TargetResult(
        claim,
        pack.market,
        None,
        tolerance,
        False,
        blocking,
        pts,
        "the claim cannot be reached by this substitution, even at 100 %",
    )


def _pct(a, b):
    return None if a is None or b is None or b == 0 else (a - b) / b * 100


def cost_per_kcal_saved(p: Point, b: Point) -> float | None:
    """Extra cost per serving for each kcal of available energy saved per serving against ``b`` (None: none
    saved, or a price or figure unknown)."""
    if None in (p.cost_per_serving, b.cost_per_serving, p.available_kcal_per_serving, b.available_kcal_per_serving):
        return None
    saved = b.available_kcal_per_serving - p.available_kcal_per_serving  # type: ignore[operator]
    return None if saved <= 0 else (p.cost_per_serving - b.cost_per_serving) / saved  # type: ignore[operator]


def _energy_fields(p: Point) -> dict:
    """Market, scenario and energy of a point, as every what-if table starts its row."""
    return {
        "market": p.market,
        "scenario": p.scenario,
        "available_kcal_per_serving": p.available_kcal_per_serving,
        "declared_kcal_per_serving": p.declared_kcal_per_serving,
        "available_kcal_per_100g": p.available_kcal_per_100g,
        "declared_kcal_per_100g": p.declared_kcal_per_100g,
    }


def sweep_rows(rows: list[tuple[float, list[Point]]]) -> list[dict]:
    """One table row per level, market and scenario of a sweep, costs against the first level."""
    base = {(p.market, p.scenario): p for p in rows[0][1]}
    return [
        {
            "level_percent": lvl,
            **_energy_fields(p),
            "cost_per_serving": p.cost_per_serving,
            "currency": p.currency,
            "cost_per_kcal_saved_per_serving": cost_per_kcal_saved(p, base[(p.market, p.scenario)]),
            "claims_eligible": "; ".join(p.claims),
            "statements_required": "; ".join(p.statements),
            "front_of_pack": "; ".join(f"{k}={v}" for k, v in p.front_of_pack.items()),
            **{f"declared:{k}": v for k, v in p.declared.items()},
        }
        for lvl, pts in rows
        for p in pts
    ]


def comparison_rows(loaded: list[Formula], pts: list[list[Point]]) -> list[dict]:
    """Each formula's points beside the first formula's (the basis): energy and cost changes, declared figures
    that changed, claims gained or lost, statements added or removed."""
    base = pts[0]
    doc = []
    for f, fp in zip(loaded, pts):
        for p, b in zip(fp, base):
            doc.append(
                {
                    "formula": f.id,
                    **_energy_fields(p),
                    "change_available_kcal_per_serving": None
                    if p.available_kcal_per_serving is None or b.available_kcal_per_serving is None
                    else p.available_kcal_per_serving - b.available_kcal_per_serving,
                    "change_available_percent": _pct(p.available_kcal_per_serving, b.available_kcal_per_serving),
                    "change_declared_percent": _pct(p.declared_kcal_per_serving, b.declared_kcal_per_serving),
                    "declared": p.declared,
                    "declared_changed": {
                        k: [b.declared.get(k), v] for k, v in p.declared.items() if b.declared.get(k) != v
                    },
                    "claims_gained": sorted(set(p.claims) - set(b.claims)),
                    "claims_lost": sorted(set(b.claims) - set(p.claims)),
                    "statements_added": sorted(set(p.statements) - set(b.statements)),
                    "statements_removed": sorted(set(b.statements) - set(p.statements)),
                    "cost_per_serving": p.cost_per_serving,
                    "cost_per_kg": p.cost_per_kg,
                    "currency": p.currency,
                    "cost_change_per_serving": None
                    if p.cost_per_serving is None or b.cost_per_serving is None
                    else p.cost_per_serving - b.cost_per_serving,
                    "cost_per_kcal_saved_per_serving": cost_per_kcal_saved(p, b),
                    "missing_prices": p.extra["missing_prices"],
                }
            )
    return doc
