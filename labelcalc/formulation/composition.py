"""Composition engine: mass balance from batch lines and processing steps.

The core is table arithmetic.  All formulas of one nesting level are composed
together: an (formulas x inputs) matrix of grams times an (inputs x
components) matrix of composition per 100 g, then each processing step is
applied to every formula at once as a small linear solve per row.  Unknown
values travel as a mask beside the numbers and are never read as zero.

Processing step semantics (per step, on the product as it enters the step):

* ``moisture_loss.percent_of_batch p``: water lost = p % of the mass entering.
* ``moisture_loss.final_water w``: water lost so that water is w g/100 g after the step.
* ``yield y`` / ``finished_weight``: mass after = y x mass entering (or the
  measured weight); the mass lost is water (common practice for baking and
  drying losses).
* ``oil_uptake.per_100g u``: oil taken up = u g per 100 g of product after the step.
* ``oil_uptake.final_fat f``: oil taken up so that total lipid is f g/100 g after the step.

A step with both water and oil terms (frying) is solved simultaneously.
Water removal never scales any other component.  A loss larger than the
water present is refused.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from labelcalc import components as C
from labelcalc.errors import InputError, Problem
from labelcalc.intake.formula import Formula, ProcessStep
from labelcalc.intake.library import Library

#: Extra additive columns that ride through the mass balance so that energy
#: rules that depend on the ingredient (own lipid factors, specific Atwater
#: factors) stay linear.  Per 100 g, like the components.
#: Components that ingredient-specific Atwater factors replace (US method A).
ATWATER_REPLACED = ("protein", "fat", "sugars", "starch", "fibre_soluble", "fibre_insoluble", *C.POLYOLS)
EXTRAS = (
    "partial_lipid_kj",
    "partial_lipid_kcal",
    "partial_lipid_salatrim",
    "partial_lipid_other",
    "specific_atwater_kcal",
    *(f"atwater_covered_{k}" for k in ATWATER_REPLACED),
)
COLUMNS: tuple[str, ...] = C.KEYS + EXTRAS
COL = {k: i for i, k in enumerate(COLUMNS)}
SCENARIOS = ("low", "high")
_W, _LIPIDS = COL["water"], [COL[k] for k in C.DERIVED["total_lipid"]]
EPS = 1e-9


def ingredient_row(ing) -> np.ndarray:
    """An ingredient's composition over :data:`COLUMNS`; NaN = unknown."""
    v = np.full(len(COLUMNS), np.nan)
    v[: len(C.KEYS)] = ing.vector()
    pl = v[COL["partial_lipid"]]
    if ing.lipid_energy is not None:
        v[COL["partial_lipid_kj"]] = pl * ing.lipid_energy.kj_per_g
        v[COL["partial_lipid_kcal"]] = pl * ing.lipid_energy.kcal_per_g
    elif pl == 0:
        v[COL["partial_lipid_kj"]] = v[COL["partial_lipid_kcal"]] = 0.0
    is_salatrim = ing.lipid_energy is not None and (ing.lipid_energy.kind or "").lower() == "salatrim"
    v[COL["partial_lipid_salatrim"]] = pl if is_salatrim else (0.0 if not np.isnan(pl) else np.nan)
    v[COL["partial_lipid_other"]] = 0.0 if is_salatrim and not np.isnan(pl) else pl
    # Ingredient-specific Atwater factors: the energy they give, and the mass of
    # each component they cover (the rest gets the factor set's general factors).
    if ing.atwater is not None:
        carb = sum(v[COL[k]] for k in ATWATER_REPLACED[2:])
        v[COL["specific_atwater_kcal"]] = (
            v[COL["protein"]] * ing.atwater.protein + v[COL["fat"]] * ing.atwater.fat + carb * ing.atwater.carbohydrate
        )
        for k in ATWATER_REPLACED:
            v[COL[f"atwater_covered_{k}"]] = v[COL[k]]
    else:
        v[COL["specific_atwater_kcal"]] = 0.0
        for k in ATWATER_REPLACED:
            v[COL[f"atwater_covered_{k}"]] = 0.0
    return v


@dataclass
class StepResult:
    name: str
    water_lost_g: float
    oil_taken_up_g: float
    oil_ref: str | None
    oil_column: int | None
    mass_after_g: float


@dataclass
class Composition:
    """Finished-product composition of one formula in one scenario.

    ``per_100g`` holds every column of :data:`COLUMNS`; ``unknown`` marks the
    columns that depend on an unknown input value (their number is NaN).
    """

    formula: Formula
    scenario: str  # "nominal" or, for formulas with a range, "low" / "high"
    per_100g: np.ndarray
    unknown: np.ndarray
    batch_grams: float
    finished_grams: float
    steps: list[StepResult]
    _table: CompositionTable = field(repr=False)

    def value(self, key: str) -> float | None:
        """Value per 100 g of a component or derived total; None when unknown."""
        if key in C.DERIVED:
            parts = [self.value(k) for k in C.DERIVED[key] if k not in C.UNSPLIT_OF]
            parts += [self._raw(k) for k in C.DERIVED[key] if k in C.UNSPLIT_OF]
            return None if any(p is None for p in parts) else float(sum(parts))
        if key in C.UNSPLIT_OF and self.split_unknown(key):
            return None
        return self._raw(key)

    def _raw(self, key: str) -> float | None:
        i = COL[key]
        return None if self.unknown[i] else float(self.per_100g[i])

    def split_unknown(self, key: str) -> bool:
        """True when ``key`` (soluble or insoluble fibre) cannot be told because part of its whole
        has no split; the whole and the energy (each factor set's own rule) stay known."""
        whole = COL[C.UNSPLIT_OF[key]]
        return bool(self.unknown[whole] or self.per_100g[whole] > EPS)

    @property
    def assumptions(self) -> list[tuple[str, list[str], str]]:
        """Zeros stated in the library for the ingredients used: (ingredient, components, reason)."""
        return self._table.library.assumptions([ing.id for ing in self.formula.ingredients_used()])

    def per_serving(self, key: str) -> float | None:
        v, s = self.value(key), self.formula.serving_grams()
        return None if v is None or s is None else v * s / 100.0

    def as_dict(self) -> dict[str, float | None]:
        return {k: self.value(k) for k in C.KEYS}

    @property
    def unknown_components(self) -> list[str]:
        return [k for k in C.KEYS if self.value(k) is None]

    def unknown_inputs(self, key: str) -> list[str]:
        """Ingredient ids (through sub-formulas) whose unknown value makes ``key`` unknown."""
        keys = C.DERIVED.get(key, (key,))
        used = self.formula.ingredients_used()
        out = [ing.id for ing in used if any(k not in ing.values for k in keys)]
        if key in C.UNSPLIT_OF:
            out += [i.id for i in used if i.id not in out and i.values.get(C.UNSPLIT_OF[key], 0.0) > 0]
        return out

    def finished_grams_of(self, f: Formula) -> float:
        """Finished mass [g] of a batch of ``f`` (this product or one of its sub-formulas) in this scenario."""
        return self._table.finished[_fkey(f)]["low" if self.scenario == "nominal" else self.scenario]

    def steps_of(self, f: Formula) -> list[StepResult]:
        """Results of the processing steps of ``f`` (this product or one of its sub-formulas), per batch of ``f``."""
        if f is self.formula:
            return self.steps
        return self._table.step_results.get(_fkey(f), {}).get(
            "low" if self.scenario == "nominal" else self.scenario, []
        )

    def oil_taken_up(self, f: Formula) -> list[float]:
        """Oil taken up [g] in each processing step of ``f``, per batch of ``f``."""
        return _steps_of(f, self.scenario, self._table)

    def leaf_amounts(self) -> dict[str, float]:
        """Grams of each library ingredient used per 100 g of finished product
        (as used, before processing), through sub-formulas and frying oils."""
        return _leaf_amounts(self.formula, self.scenario, self._table, self.finished_grams)

    @cached_property
    def contributions(self) -> tuple[list[str], np.ndarray]:
        """Per-line contributions per 100 g of finished product.

        Returns (labels, matrix) where rows are batch lines, then for each
        processing step "water lost" and "oil taken up"; the rows add up to
        ``per_100g`` (unknown cells are NaN).
        """
        T = self._table.matrix(self.scenario)
        labels, rows = [], []
        scale = 100.0 / self.finished_grams
        for ln in self.formula.lines:
            col = self._table.column_of(ln)
            labels.append(ln.ref)
            rows.append(ln.grams * T[col] / 100.0 * scale)
        for st in self.steps:
            if st.water_lost_g:
                r = np.zeros(len(COLUMNS))
                r[_W] = -st.water_lost_g * scale
                labels.append(f"{st.name}: water lost")
                rows.append(r)
            if st.oil_column is not None:
                labels.append(f"{st.name}: oil taken up ({st.oil_ref})")
                rows.append(st.oil_taken_up_g * T[st.oil_column] / 100.0 * scale)
        return labels, np.vstack(rows)


class CompositionTable:
    """Composition per 100 g of every input (library ingredients, then sub-formulas)."""

    def __init__(self, library: Library):
        self.library = library
        base = (
            np.vstack([ingredient_row(i) for i in library.ingredients.values()])
            if library.ingredients
            else np.zeros((0, len(COLUMNS)))
        )
        self._rows = {s: [base] for s in SCENARIOS}
        self._cache: dict[str, np.ndarray] = {}
        self.columns: dict[str, int] = {k: i for i, k in enumerate(library.ids)}
        self.n = len(library.ids)
        #: finished mass [g] of each composed sub-formula and product, per scenario
        self.finished: dict[str, dict[str, float]] = {}
        #: the processing steps' results of each composed formula and sub-formula, per scenario
        self.step_results: dict[str, dict[str, list[StepResult]]] = {}

    def add(self, key: str, lo: np.ndarray, hi: np.ndarray) -> None:
        self._rows["low"].append(lo)
        self._rows["high"].append(hi)
        self.columns[key] = self.n
        self.n += lo.shape[0] if lo.ndim == 2 else 1
        self._cache.clear()

    def matrix(self, scenario: str) -> np.ndarray:
        s = "low" if scenario == "nominal" else scenario
        if s not in self._cache:
            self._cache[s] = np.vstack([np.atleast_2d(r) for r in self._rows[s]])
        return self._cache[s]

    def column_of(self, ln) -> int:
        return self.columns[ln.ingredient.id] if ln.ingredient is not None else self.columns[_fkey(ln.formula)]

    def oil_column(self, st: ProcessStep) -> int:
        return (
            self.columns[st.oil_ingredient.id] if st.oil_ingredient is not None else self.columns[_fkey(st.oil_formula)]
        )


def _leaf_amounts(f: Formula, scenario: str, table: CompositionTable, finished: float) -> dict[str, float]:
    s = "low" if scenario == "nominal" else scenario
    out: dict[str, float] = {}

    def add(key: str, g: float) -> None:
        out[key] = out.get(key, 0.0) + g

    def sub_amounts(sub: Formula) -> dict[str, float]:
        return _leaf_amounts(sub, scenario, table, table.finished[_fkey(sub)][s])

    scale = 100.0 / finished
    for ln in f.lines:
        if ln.ingredient is not None:
            add(ln.ingredient.id, ln.grams * scale)
        else:
            for k, g in sub_amounts(ln.formula).items():
                add(k, ln.grams * scale * g / 100.0)
    steps = iter(_steps_of(f, scenario, table))
    for st in f.steps:
        taken = next(steps, 0.0)
        if st.oil_ingredient is not None:
            add(st.oil_ingredient.id, taken * scale)
        elif st.oil_formula is not None:
            for k, g in sub_amounts(st.oil_formula).items():
                add(k, taken * scale * g / 100.0)
    return out


def _steps_of(f: Formula, scenario: str, table: CompositionTable) -> list[float]:
    s = "low" if scenario == "nominal" else scenario
    got = table.step_results.get(_fkey(f), {}).get(s)
    return [st.oil_taken_up_g for st in got] if got else [0.0] * len(f.steps)


def _fkey(f: Formula) -> str:
    return f"formula:{f.content_hash}:{f.id}"


def _all_formulas(formulas: list[Formula]) -> dict[str, tuple[Formula, int]]:
    """Every formula and sub-formula with its nesting depth (leaf sub-formulas 0)."""
    found: dict[str, tuple[Formula, int]] = {}

    def depth(f: Formula) -> int:
        k = _fkey(f)
        if k in found:
            return found[k][1]
        subs = f.sub_formulas()
        d = 1 + max((depth(s) for s in subs), default=-1)
        found[k] = (f, d)
        return d

    for f in formulas:
        depth(f)
    return found


def compose_many(
    formulas: list[Formula], library: Library, table: CompositionTable | None = None
) -> tuple[dict[str, list[Composition]], dict[str, InputError]]:
    """Compose many formulas in table operations.

    Returns ({formula key: [Composition, ...]}, {formula key: error}) where
    the key is ``formula.id``.  A formula with a range (or a sub-formula with
    one) gets a "low" and a "high" composition, others one "nominal".
    """
    table = table or CompositionTable(library)
    every = _all_formulas(formulas)
    results: dict[str, list[Composition]] = {}
    failed: dict[str, InputError] = {}
    levels = sorted({d for _, d in every.values()})
    done: dict[str, tuple[np.ndarray, np.ndarray, list]] = {}
    for level in levels:
        group = [f for f, d in every.values() if d == level]
        ok = []
        for f in group:
            bad = [l.formula for l in f.lines if l.formula and _fkey(l.formula) in failed] + [
                s.oil_formula for s in f.steps if s.oil_formula and _fkey(s.oil_formula) in failed
            ]
            if bad:
                failed[_fkey(f)] = InputError(
                    Problem(f"sub-formula '{bad[0].id}' could not be composed: {failed[_fkey(bad[0])]}", file=f.file)
                )
            else:
                ok.append(f)
        if not ok:
            continue
        out = _compose_level(ok, table)
        for f, res in zip(ok, out):
            if isinstance(res, InputError):
                failed[_fkey(f)] = res
                continue
            done[_fkey(f)] = res
            table.step_results[_fkey(f)] = {sc: res[2][i][3] for i, sc in enumerate(SCENARIOS)}
        for f in ok:
            k = _fkey(f)
            if k in done and k not in table.columns:
                lo, hi, extra = done[k]
                table.add(k, lo[0], hi[0])
                table.finished[k] = {"low": extra[0][2], "high": extra[1][2]}
    for f in formulas:
        k = _fkey(f)
        if k in failed:
            failed_err = failed[k]
            results.pop(f.id, None)
            failed[f.id] = failed_err
            continue
        lo, hi, extra = done[k]
        comps = []
        scen = SCENARIOS if f.has_range else ("nominal",)
        for s in scen:
            si = 1 if s == "high" else 0
            vals, unk, fin, steps = extra[si]
            comps.append(Composition(f, s, vals, unk, f.batch_grams, fin, steps, table))
        results[f.id] = comps
    return results, {k: v for k, v in failed.items() if not k.startswith("formula:")}


def compose(formula: Formula, library: Library) -> list[Composition]:
    """Compose one formula; raises :class:`InputError` when it cannot be composed."""
    res, err = compose_many([formula], library)
    if formula.id in err:
        raise err[formula.id]
    return res[formula.id]


def _compose_level(group: list[Formula], table: CompositionTable):
    """Compose formulas whose inputs are all in ``table``.  Returns per formula
    (low_row, high_row, [(vals, unknown, finished_g, steps) per scenario]) or an error."""
    n = len(group)
    # only the inputs this level uses: the table grows with every composed formula, the amounts do not
    cols = sorted({table.column_of(ln) for f in group for ln in f.lines})
    pos = {c: k for k, c in enumerate(cols)}
    A = np.zeros((n, len(cols)))
    for r, f in enumerate(group):
        for ln in f.lines:
            A[r, pos[table.column_of(ln)]] += ln.grams
    used = A > 0
    per_scen = []
    errors: dict[int, InputError] = {}
    for si, s in enumerate(SCENARIOS):
        T = table.matrix(s)
        unkT = np.isnan(T)
        Tu, unkTu = T[cols], unkT[cols]
        mass = A @ np.where(unkTu, 0.0, Tu) / 100.0
        unknown = (used.astype(float) @ unkTu.astype(float)) > 0
        total = A.sum(axis=1)
        step_logs: list[list[StepResult]] = [[] for _ in range(n)]
        nsteps = max((len(f.steps) for f in group), default=0)
        for j in range(nsteps):
            rows = [r for r, f in enumerate(group) if j < len(f.steps) and r not in errors]
            if not rows:
                continue
            _apply_step(group, rows, j, si, table, T, unkT, mass, unknown, total, step_logs, errors)
        per_scen.append((mass, unknown, total, step_logs))
    out = []
    for r in range(len(group)):
        if r in errors:
            out.append(errors[r])
            continue
        rows = []
        for si in range(2):
            mass, unknown, total, logs = per_scen[si]
            vals = mass[r] / total[r] * 100.0
            unk = unknown[r].copy()
            vals = np.where(unk, np.nan, vals)
            rows.append((vals, unk, float(total[r]), logs[r]))
        out.append((rows[0][0][None, :], rows[1][0][None, :], rows))
    return out


def _range_end(rng, si):
    return None if rng is None else rng[si]


def _apply_step(group, rows, j, si, table, T, unkT, mass, unknown, total, logs, errors):
    """Apply step j to the given rows in place (vectorised over rows)."""
    k = len(rows)
    a1, b1, c1 = np.ones(k), np.zeros(k), np.zeros(k)
    a2, b2, c2 = np.zeros(k), np.ones(k), np.zeros(k)
    oil = np.full((k, T.shape[1]), 0.0)
    oil_unk = np.zeros((k, T.shape[1]), dtype=bool)
    has_oil = np.zeros(k, dtype=bool)
    needs_water = np.zeros(k, dtype=bool)
    needs_lipid = np.zeros(k, dtype=bool)
    M = total[rows]
    W = mass[rows, _W]
    lipid = mass[rows][:, _LIPIDS].sum(axis=1)
    for i, r in enumerate(rows):
        st: ProcessStep = group[r].steps[j]
        if st.oil_ref:
            col = table.oil_column(st)
            oil[i] = np.where(unkT[col], 0.0, T[col])
            oil_unk[i] = unkT[col]
            has_oil[i] = True
        o_w = oil[i, _W] / 100.0
        o_f = oil[i, _LIPIDS].sum() / 100.0
        if st.loss_percent is not None:
            c1[i] = _range_end(st.loss_percent, si) * M[i] / 100.0
            needs_water[i] = True
        elif st.final_water is not None:
            w = _range_end(st.final_water, si) / 100.0
            a1[i], b1[i], c1[i] = w - 1.0, o_w - w, w * M[i] - W[i]
            needs_water[i] = True
        elif st.yield_factor is not None:
            c1[i] = (1.0 - st.yield_factor) * M[i]
            needs_water[i] = True
        elif st.finished_weight_g is not None:
            a1[i], b1[i], c1[i] = 1.0, -1.0, M[i] - st.finished_weight_g
            needs_water[i] = True
        if st.oil_per_100g is not None:
            u = _range_end(st.oil_per_100g, si) / 100.0
            a2[i], b2[i], c2[i] = u, 1.0 - u, u * M[i]
        elif st.oil_final_fat is not None:
            f = _range_end(st.oil_final_fat, si) / 100.0
            a2[i], b2[i], c2[i] = f, o_f - f, f * M[i] - lipid[i]
            needs_lipid[i] = True
    det = a1 * b2 - a2 * b1
    with np.errstate(divide="ignore", invalid="ignore"):
        L = (c1 * b2 - c2 * b1) / det
        U = (a1 * c2 - a2 * c1) / det
    for i, r in enumerate(rows):
        f, st = group[r], group[r].steps[j]
        where = dict(file=f.file, line=st.line, field=f"processing[{j}]")
        if needs_water[i] and (unknown[r, _W] or oil_unk[i, _W] and has_oil[i]):
            names = _unknown_water(f)
            errors[r] = InputError(
                Problem(
                    f"step '{st.name}' needs the water content of every input, unknown for: {', '.join(names) or 'an input'}",
                    fix="give water for those ingredients in the library",
                    **where,
                )
            )
            continue
        if needs_lipid[i] and (unknown[r, _LIPIDS].any() or oil_unk[i, _LIPIDS].any()):
            errors[r] = InputError(
                Problem(
                    f"step '{st.name}' targets a final fat content but the fat of an input is unknown",
                    fix="give fat values for every ingredient",
                    **where,
                )
            )
            continue
        if not np.isfinite(det[i]) or abs(det[i]) < EPS:
            errors[r] = InputError(
                Problem(
                    f"step '{st.name}': the targets cannot be met together (the oil cannot change the fat content)",
                    **where,
                )
            )
            continue
        water_avail = W[i] + oil[i, _W] * U[i] / 100.0
        tol = min(1e-7, 1e-9 * M[i])  # 1e-7 g, or relative for a tiny batch (a picogram batch must fail too)
        if L[i] < -tol:
            errors[r] = InputError(
                Problem(
                    f"step '{st.name}': the target water content is higher than the water present ({W[i] / M[i] * 100:.2f} g/100 g); a moisture loss cannot add water",
                    fix="lower final_water or remove the step",
                    **where,
                )
            )
            continue
        if L[i] > water_avail + tol:
            errors[r] = InputError(
                Problem(
                    f"step '{st.name}': moisture loss of {L[i]:.2f} g exceeds the {water_avail:.2f} g of water present",
                    fix="a moisture loss takes water only; check the loss, the yield or the finished weight",
                    **where,
                )
            )
            continue
        if U[i] < -1e-7:
            errors[r] = InputError(
                Problem(
                    f"step '{st.name}': the target fat content is below the fat already present ({lipid[i] / M[i] * 100:.2f} g/100 g)",
                    fix="raise final_fat or give the uptake per 100 g",
                    **where,
                )
            )
            continue
        if st.oil_ref and not has_oil[i]:  # pragma: no cover - guarded by validation
            errors[r] = InputError(Problem("oil uptake with no oil named", **where))
            continue
        Li, Ui = max(L[i], 0.0), max(U[i], 0.0)
        mass[r] += Ui * oil[i] / 100.0
        mass[r, _W] -= Li
        if has_oil[i] and Ui > 0:
            unknown[r] |= oil_unk[i]
        total[r] = M[i] - Li + Ui
        logs[r].append(
            StepResult(
                st.name, float(Li), float(Ui), st.oil_ref, table.oil_column(st) if st.oil_ref else None, float(total[r])
            )
        )


def _unknown_water(f: Formula) -> list[str]:
    return [ing.id for ing in f.ingredients_used() if "water" not in ing.values]
