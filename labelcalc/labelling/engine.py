"""The labelling engine: many compositions under one market pack, as table operations.

This is the one implementation of the labelling rules.  A single product is a range of one:
``declare``/``assess`` and range runs all go through :class:`LabelEngine`, so they cannot disagree.

The engine computes, for N compositions at once, every number and verdict a label needs: declared
energy beside available energy, each nutrient per 100 g, the columns each product prints, the rounded
figures and percentages, which rows show, claim conditions and verdicts, statement triggers,
front-of-pack verdicts and zero-row reviews.  Per-ingredient structure (allergens, the ingredient
list) is walked product by product.  :mod:`labelcalc.labelling.record` turns row ``i`` of these
tables into the label record every output reads; it explains figures, it never recomputes them.

Exactness: thresholds and rounding bands are compared in exact 1e-9 integer arithmetic
(:mod:`labelcalc.labelling.rounding`); claim limits are compared in floating point, exactly
(``Decimal``) where a figure is within float noise of its limit (:func:`compare`).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

from labelcalc import components as C
from labelcalc.errors import InputError, LabelError, Problem, RuleError
from labelcalc.formulation.composition import COL, Composition
from labelcalc.formulation.energy import EnergyTable, energy_table, load_factor_set
from labelcalc.labelling.ingredients import allergen_report
from labelcalc.labelling.plan import ServingPlan, energy_method, serving_plan
from labelcalc.labelling.rounding import NONE, Q, RoundedArray, q_of, q_scalar, round_values, to_decimal
from labelcalc.labelling.rulepack import Row, RulePack
from labelcalc.labelling.rulepack_assess import Claim, Condition, Statement, StatementTrigger

VERDICT_NOT_ELIGIBLE, VERDICT_CANNOT_TELL, VERDICT_ELIGIBLE = 0, 1, 2

# why a claim figure is missing (see record.missing_text)
MISS_NONE, MISS_VALUE, MISS_DENSITY, MISS_SERVING, MISS_REF_AMOUNT, MISS_ENERGY, MISS_ENERGY_ZERO = range(7)
MISS_NO_REFERENCE, MISS_REFERENCE_FIGURE, MISS_REFERENCE_ZERO = 7, 8, 9


def compare(a: np.ndarray, op: str, b: float) -> np.ndarray:
    """``a op b`` element-wise: in floating point, exactly (``Decimal``) where ``a`` is within float
    noise of ``b`` so that a figure of exactly 3 g meets a limit of "3 g or less"."""
    a = np.asarray(a, dtype=float)
    res = {"<": a < b, "<=": a <= b, ">": a > b, ">=": a >= b}[op]
    near = (np.abs(a - b) <= 1e-6 * max(1.0, abs(b))) & np.isfinite(a)
    if near.any():
        y = to_decimal(b)
        for i in np.nonzero(near)[0]:
            x = to_decimal(float(a[i]))
            res[i] = {"<": x < y, "<=": x <= y, ">": x > y, ">=": x >= y}[op]
    return res


def claim_key(name: str) -> str:
    """A claim as written in a formula ('low fat', 'Low_Fat') to a pack claim id ('low_fat')."""
    return "_".join(name.lower().replace("-", " ").split())


@dataclass
class FigureTable:
    """One claim figure for every product: value (NaN when missing), why missing, not applicable."""

    value: np.ndarray
    miss: np.ndarray  # MISS_* code per product
    na: np.ndarray  # not applicable (e.g. the per-50 g basis for a large reference amount)
    basis: list[str]  # the basis as applied per product (per_100ml for a liquid, per_50g...)
    unit: str

    @property
    def missing(self) -> np.ndarray:
        return (self.miss != MISS_NONE) & ~self.na


@dataclass
class CondResult:
    """A claim condition evaluated for every product."""

    cond: Condition
    figure: FigureTable  # the product's own figure
    value: np.ndarray  # compared value (after the comparison with the reference formula)
    unit: str
    holds: np.ndarray
    missing: np.ndarray
    na: np.ndarray
    miss: np.ndarray
    reference_miss: np.ndarray  # MISS_* of the reference formula's figure, where MISS_REFERENCE_FIGURE


@dataclass
class ClaimResult:
    claim: Claim
    conditions: list[CondResult]
    alternatives: list[list[CondResult]]
    applies: np.ndarray
    banned: dict[int, list[str]]  # product -> ingredients of a kind that fails the claim
    flagged: dict[int, list[str]]  # product -> ingredients of a kind the claim allows only as its rule permits
    reference_qualifies: np.ndarray  # the reference food itself qualifies for reference_must_not_qualify
    verdict: np.ndarray  # VERDICT_*


@dataclass
class TriggerResult:
    """A statement trigger evaluated for every product."""

    trigger: StatementTrigger
    hit: np.ndarray
    undecided: np.ndarray
    value: np.ndarray | None = None  # components triggers: the figure compared
    hits: list[list[str]] | None = None  # substance/kind triggers: the ingredients found
    conditions: list[CondResult] | None = None  # with_claim triggers
    parts: list[TriggerResult] | None = None  # all_of triggers
    base_unknown: np.ndarray | None = None  # components triggers: the per-100 g sum is unknown


class LabelEngine:
    """Labels of many compositions under one pack (see the module docstring).

    ``references`` gives, per composition, the composition of its reference formula (or None) for
    comparative claims.  Products the pack cannot label (no serving size where one is required,
    an unknown category...) are in :attr:`errors`; the tables cover the others (:attr:`comps`).
    """

    def __init__(
        self,
        pack: RulePack,
        comps: list[Composition],
        references: list[Composition | None] | None = None,
        *,
        rules_root: str | None = None,
    ):
        self.pack = pack
        self.rules_root = rules_root or pack.energy_root  # a --rules folder's own energy/ sets (#13)
        self._check_pack()
        self.errors: list[tuple[Composition, LabelError]] = []
        ok, plans, methods, refs = [], [], [], []
        for i, c in enumerate(comps):
            try:
                plans.append(serving_plan(c, pack))
                methods.append(energy_method(c.formula, pack))
            except LabelError as exc:
                if len(plans) > len(methods):
                    plans.pop()
                self.errors.append((c, exc))
                continue
            ok.append(c)
            refs.append(references[i] if references else None)
        self.comps: list[Composition] = ok
        self.plans: list[ServingPlan] = plans
        self.methods: list[str] = methods
        self.n = n = len(ok)
        self.V = np.vstack([c.per_100g for c in ok]) if n else np.zeros((0, len(COL)))
        self.U = np.vstack([c.unknown for c in ok]) if n else np.zeros((0, len(COL)), dtype=bool)
        # For nutrient sums (not energy): a part cannot be told while some of its whole has no split,
        # as Composition.value says (soluble / insoluble fibre beside fibre_unsplit) (#16).
        self.U_parts = self.U.copy()
        for part, whole in C.UNSPLIT_OF.items():
            w = COL[whole]
            self.U_parts[:, COL[part]] |= self.U[:, w] | (np.nan_to_num(self.V[:, w]) > 1e-9)
        self.serving = np.array([p.serving if p.serving is not None else np.nan for p in plans])
        self.container = np.array([p.container if p.container is not None else np.nan for p in plans])
        self.ref_g = np.array([p.ref[1] if p.ref else np.nan for p in plans])
        ras = pack.servings.reference_amounts
        self.small = np.array(
            [
                bool(
                    p.ref and (ras[p.ref[0]].small if ras[p.ref[0]].small is not None else ras[p.ref[0]].amount_g <= 30)
                )
                for p in plans
            ],
            dtype=bool,
        )
        self.forms = np.array([c.formula.header.form for c in ok], dtype=object)
        self.liquid = self.forms == "liquid"
        self.density = np.array([c.formula.header.density_g_per_ml or np.nan for c in ok])
        self.has_reference = np.array([r is not None for r in refs], dtype=bool)
        self._references = refs
        self._energy()
        self._nutrients()
        self._declare()

    # ------------------------------------------------------------------ setup
    def _check_pack(self) -> None:
        for row in self.pack.rows:
            if row.percent:
                ref = self.pack.reference_values[row.percent]
                unit = self.pack.nutrients[row.nutrient].unit
                if ref.unit != unit:
                    raise RuleError(
                        Problem(
                            f"row '{row.nutrient}': reference value '{row.percent}' is in {ref.unit}, the nutrient in {unit}",
                            field=f"reference_values.{row.percent}",
                        )
                    )

    @cached_property
    def products(self) -> list:
        return [c.formula for c in self.comps]

    @cached_property
    def kinds(self) -> list[set[str]]:
        """Kinds of the ingredients each product uses (through sub-formulas)."""
        return [{k for i in f.ingredients_used() for k in i.kinds} for f in self.products]

    @cached_property
    def products_by_kind(self) -> dict[str, list[int]]:
        """Which products use an ingredient of each kind."""
        out: dict[str, list[int]] = {}
        for i, ks in enumerate(self.kinds):
            for k in ks:
                out.setdefault(k, []).append(i)
        return out

    def ingredients_of_kinds(self, kinds: list[str]) -> dict[int, list[str]]:
        """The ingredients (ids, sorted) of any of ``kinds``, for each product that uses one."""
        want = set(kinds)
        return {
            i: sorted(ing.id for ing in self.products[i].ingredients_used() if set(ing.kinds) & want)
            for i in sorted({i for k in want for i in self.products_by_kind.get(k, [])})
        }

    @cached_property
    def as_lists(self) -> dict[str, Any]:
        """Shown flags and printed percentages as plain lists, for per-label readers (range summaries)."""
        return {
            "shown": {k: v.tolist() for k, v in self.shown.items()},
            "percent": {k: {b: t for b, (t, _) in cols.items()} for k, cols in self.percent.items()},
        }

    # ----------------------------------------------------------------- energy
    def _energy(self) -> None:
        n = self.n
        self.energy_tables: dict[str, EnergyTable] = {}
        self.energy_rows: dict[str, np.ndarray] = {}
        self.e_kj, self.e_kcal = np.full(n, np.nan), np.full(n, np.nan)
        for m in sorted(set(self.methods)):
            rows = np.array([i for i, x in enumerate(self.methods) if x == m], dtype=int)
            t = energy_table(self.V[rows], self.U[rows], load_factor_set(m, self.rules_root))
            self.energy_tables[m], self.energy_rows[m] = t, rows
            self.e_kj[rows], self.e_kcal[rows] = t.kj, t.kcal
        self.available = energy_table(self.V, self.U, load_factor_set("available", self.rules_root))

    def declared_energy(self, i: int):
        """The declared-energy result of product ``i`` (its market's factor set)."""
        m = self.methods[i]
        pos = int(np.searchsorted(self.energy_rows[m], i))
        return self.energy_tables[m].result(pos)

    @cached_property
    def energy_review_counts(self) -> np.ndarray:
        """Number of distinct review notes of each product's declared-energy factor set."""
        counts = np.zeros(self.n, dtype=int)
        for m, rows in self.energy_rows.items():
            hits: dict[str, np.ndarray] = {}
            for text, hit in self.energy_tables[m].review_hits:
                hits[text] = hits.get(text, np.zeros(len(rows), dtype=bool)) | hit
            counts[rows] = np.sum(list(hits.values()), axis=0) if hits else 0
        return counts

    def allergens(self, i: int) -> dict:
        """The allergen report of product ``i`` (walked through its ingredients; see :mod:`ingredients`)."""
        cache = self.__dict__.setdefault("_allergens", {})
        got = cache.get(i)
        if got is None:
            got = cache[i] = allergen_report(self.comps[i], self.pack)
        return got

    # -------------------------------------------------------------- nutrients
    def _nutrients(self) -> None:
        """Every nutrient the pack defines, per 100 g (NaN when unknown)."""
        V0 = np.nan_to_num(self.V)
        self.val: dict[str, np.ndarray] = {}
        for key, nd in self.pack.nutrients.items():
            if nd.energy:
                self.val[key] = (self.e_kcal if nd.energy == "kcal" else self.e_kj).copy()
                continue
            tot = np.zeros(self.n)
            unk = np.zeros(self.n, dtype=bool)
            for comp, fac in (nd.sum or {}).items():
                cols = [COL[k] for k in C.DERIVED.get(comp, (comp,))]
                tot += V0[:, cols].sum(axis=1) * fac
                unk |= (self.U_parts if comp in C.UNSPLIT_OF else self.U)[:, cols].any(axis=1)
            self.val[key] = np.where(unk, np.nan, tot)
        ek = next((k for k, nd in self.pack.nutrients.items() if nd.energy == "kcal"), None)
        self.energy_kcal_key = ek

    def column_values(self, key: str, basis: str) -> np.ndarray:
        """Unrounded values of a nutrient in a column (per 100 g, per serving, per container)."""
        cache = self.__dict__.setdefault("_colv", {})
        got = cache.get((key, basis))
        if got is None:
            v = self.val[key]
            got = v if basis == "per_100g" else v * (self.serving if basis == "per_serving" else self.container) / 100
            cache[(key, basis)] = got
        return got

    # ---------------------------------------------------------------- declare
    def _declare(self) -> None:
        pack = self.pack
        self.bases = list(dict.fromkeys([*pack.panel.bases, "per_container"]))
        self.has_col = {b: np.array([b in p.columns for p in self.plans], dtype=bool) for b in self.bases}
        self.rounded: dict[str, dict[str, RoundedArray]] = {}
        self.percent: dict[str, dict[str, tuple[list[str | None], np.ndarray]]] = {}
        self.shown: dict[str, np.ndarray] = {}
        self.trigger_hits: dict[str, list[np.ndarray]] = {}
        self.present: dict[str, np.ndarray] = {}
        others = {
            b: {k: (q_of(self.column_values(k, b)), ~np.isnan(self.column_values(k, b))) for k in pack.nutrients}
            for b in self.bases
        }
        for row in pack.rows:
            rule = pack.rounding[row.rounding]
            self.rounded[row.nutrient] = {
                b: round_values(others[b][row.nutrient][0], rule, others[b]) for b in self.bases
            }
            self.percent[row.nutrient] = self._percents(row)
            self._shown(row)

    def _percents(self, row: Row) -> dict[str, tuple[list[str | None], np.ndarray]]:
        """Per column: printed percentages of the reference value and the unrounded percentages."""
        out: dict[str, tuple[list[str | None], np.ndarray]] = {}
        if not row.percent:
            return out
        ref = self.pack.reference_values[row.percent]
        rule = self.pack.rounding[row.percent_rounding or "percent"]
        from_declared = (row.percent_from or self.pack.panel.percent_from) == "declared"
        for b in self.bases:
            ra = self.rounded[row.nutrient][b]
            vals = self.column_values(row.nutrient, b)
            base_q = np.where(from_declared & (ra.number != NONE), ra.number, q_of(vals))
            if from_declared and row.percent_of_declared_sum:  # e.g. saturated + trans from their declared amounts
                nums = [self.rounded[k][b].number for k in row.percent_of_declared_sum]
                all_numbers = np.all([x != NONE for x in nums], axis=0)
                base_q = np.where(all_numbers, np.sum(nums, axis=0), base_q)
            raw = base_q / Q / ref.amount * 100
            pr = round_values(q_of(raw), rule)
            zero = (ra.number == 0) if from_declared else np.zeros(self.n, dtype=bool)
            unknown = np.isnan(vals)
            texts = [
                None if u else "0%" if z else (t if t.endswith("%") else t + "%")
                for t, u, z in zip(pr.texts, unknown, zero)
            ]
            out[b] = (texts, np.where(unknown, np.nan, raw))
        return out

    def _shown(self, row: Row) -> None:
        v100 = self.val[row.nutrient]
        n = self.n
        declared_nonzero = np.zeros(n, dtype=bool)
        for b in self.bases:
            ra = self.rounded[row.nutrient][b]
            declared_nonzero |= self.has_col[b] & ((ra.number == NONE) | (ra.number != 0))
        present = ~np.isnan(v100) & (np.nan_to_num(v100) > 0) & declared_nonzero
        self.present[row.nutrient] = present
        hits = []
        for t in row.when:  # alternatives; every criterion of one trigger must hold
            ok = np.ones(n, dtype=bool)
            criteria = 0
            if t.form != "any":  # a filter, not a criterion on its own
                ok &= self.liquid if t.form == "liquid" else ~self.liquid
            if t.claim_about is not None:
                want = "_".join(t.claim_about.lower().split())
                ok &= np.array([any(want in claim_key(x) for x in f.header.claims) for f in self.products], dtype=bool)
                criteria += 1
            if t.added_source is not None:
                parts = nutrient_components(self.pack, row.nutrient)
                ok &= np.array([bool(parts & s.get(t.added_source, set())) for s in self.added_sources], dtype=bool)
                criteria += 1
            if t.claim is not None:
                want = "_".join(t.claim.lower().split())
                ok &= np.array(
                    [any(claim_key(x).startswith(want) for x in f.header.claims) for f in self.products], dtype=bool
                )
                criteria += 1
            if t.present:
                ok &= present
                criteria += 1
            if t.added is not None:
                ok &= np.array([t.added in k for k in self.kinds], dtype=bool)
                criteria += 1
            if t.at_least_per_100g is not None:
                ok &= ~np.isnan(v100) & (q_of(v100) >= q_scalar(t.at_least_per_100g))
                criteria += 1
            if t.at_least_percent_reference is not None:
                if row.percent:
                    ref = self.pack.reference_values[row.percent].amount
                    v = self.on_reference_basis(v100, t.reference_basis)
                    ok &= ~np.isnan(v) & compare(np.nan_to_num(v) / ref * 100, ">=", t.at_least_percent_reference)
                else:
                    ok &= False
                criteria += 1
            if not criteria:
                ok &= False
            hits.append(ok)
        self.trigger_hits[row.nutrient] = hits
        shown = np.any(hits, axis=0) if hits else np.zeros(n, dtype=bool)
        if row.requirement == "mandatory":
            shown = np.ones(n, dtype=bool)
        elif row.requirement == "voluntary":
            if row.show == "always":
                shown = np.ones(n, dtype=bool)
            elif row.show == "when_present":
                shown = shown | present
        self.shown[row.nutrient] = shown

    @cached_property
    def added_sources(self) -> list[dict[str, set[str]]]:
        """Per product: ingredient kind -> components the ingredients of that kind bring (value above zero)."""
        out = []
        brought: dict[int, set[str]] = {}  # per ingredient object: products share their ingredients
        for f in self.products:
            got: dict[str, set[str]] = {}
            for ing in f.ingredients_used():
                b = brought.get(id(ing))
                if b is None:
                    b = brought[id(ing)] = {k for k, v in ing.values.items() if v > 0}
                for kind in ing.kinds:
                    got.setdefault(kind, set()).update(b)
            out.append(got)
        return out

    @cached_property
    def single_portion(self) -> np.ndarray:
        """The package is one portion: the market's single-serving rule says so, or the serving is the package."""
        return np.array(
            [
                bool(p.single or (p.serving and p.container and abs(p.serving - p.container) <= 1e-9))
                for p in self.plans
            ],
            dtype=bool,
        )

    def on_reference_basis(self, v100: np.ndarray, basis: str) -> np.ndarray:
        """Per-100 g values on a row trigger's basis (NaN where that basis does not apply or is unknown)."""
        if basis == "per_100ml":
            return v100 * self.density
        if basis == "per_container_if_single":
            return np.where(self.single_portion, v100 * self.container / 100, np.nan)
        return v100

    def texts(self, nutrient: str, basis: str) -> list[str]:
        """Printed figures (with units) of one row and column for every product ("unknown" where unknown)."""
        cache = self.__dict__.setdefault("_texts", {})
        got = cache.get((nutrient, basis))
        if got is None:
            unknown = np.isnan(self.column_values(nutrient, basis))
            nd = self.pack.nutrients[nutrient]
            unit = self.pack.panel.unit_labels.get(nd.unit) or display_unit(nd.unit)
            show = self.row_rule(nutrient).show_unit
            got = [
                "unknown" if u else (f"{t} {unit}" if show else t)
                for t, u in zip(self.rounded[nutrient][basis].texts, unknown)
            ]
            cache[(nutrient, basis)] = got
        return got

    def row_rule(self, nutrient: str) -> Row:
        rows = self.__dict__.setdefault("_rows_by", {r.nutrient: r for r in self.pack.rows})
        return rows[nutrient]

    # ------------------------------------------------------------------ claims
    def figure(self, q: str, basis: str, kcal_per_g: float | None) -> FigureTable:
        """A claim figure for every product on a named basis."""
        n = self.n
        v = self.val[q]
        unit: str = self.pack.nutrients[q].unit
        miss = np.where(np.isnan(v), MISS_VALUE, MISS_NONE)
        na = np.zeros(n, dtype=bool)
        names = [basis] * n
        if basis in ("per_100g", "per_100g_or_100ml"):
            if basis == "per_100g_or_100ml":
                names = ["per_100ml" if liq else "per_100g" for liq in self.liquid]
                no_density = self.liquid & np.isnan(self.density)
                miss = np.where((miss == MISS_NONE) & no_density, MISS_DENSITY, miss)
                v = np.where(self.liquid, v * self.density, v)
            else:
                names = ["per_100g"] * n
        elif basis == "per_serving":
            miss = np.where((miss == MISS_NONE) & np.isnan(self.serving), MISS_SERVING, miss)
            v = v * self.serving / 100
        elif basis == "per_reference_amount":
            miss = np.where((miss == MISS_NONE) & np.isnan(self.ref_g), MISS_REF_AMOUNT, miss)
            v = v * self.ref_g / 100
        elif basis == "per_50g_if_small":
            names = ["per_50g"] * n
            na = ~np.isnan(self.ref_g) & ~self.small
            miss = np.where((miss == MISS_NONE) & np.isnan(self.ref_g), MISS_REF_AMOUNT, miss)
            v = v / 2
        else:  # per_100kcal, percent_energy
            e = self.val[self.energy_kcal_key] if self.energy_kcal_key else np.full(n, np.nan)
            miss = np.where((miss == MISS_NONE) & np.isnan(e), MISS_ENERGY, miss)
            miss = np.where((miss == MISS_NONE) & (np.nan_to_num(e) == 0), MISS_ENERGY_ZERO, miss)
            with np.errstate(divide="ignore", invalid="ignore"):
                if basis == "per_100kcal":
                    v = np.where(e > 0, v / e * 100, np.nan)
                else:
                    v = np.where(e > 0, v * (kcal_per_g or 0) / e * 100, np.nan)
                    unit = "% of energy"
        v = np.where(miss == MISS_NONE, v, np.nan)
        return FigureTable(v, miss, na, names, unit)

    def reference_of(self, i: int) -> Composition | None:
        """The composition of product ``i``'s reference formula, if it has one."""
        return self._references[i]

    @cached_property
    def reference_engine(self) -> LabelEngine | None:
        """The engine over the products' reference formulas (for comparative claims), if any."""
        refs = [r for r in self._references if r is not None]
        if not refs:
            return None
        return LabelEngine(self.pack, refs, rules_root=self.rules_root)

    def reference_rows(self) -> np.ndarray:
        """Row of each product's reference formula in :attr:`reference_engine` (-1: none or not labelled)."""
        eng = self.reference_engine
        rows = np.full(self.n, -1)
        if eng is None:
            return rows
        where = {id(c): j for j, c in enumerate(eng.comps)}
        for i, r in enumerate(self._references):
            if r is not None and id(r) in where:
                rows[i] = where[id(r)]
        return rows

    def condition(self, cond: Condition) -> CondResult:
        """One claim condition for every product."""
        cache = self.__dict__.setdefault("_conds", {})
        key = id(cond)
        if key in cache:
            return cache[key]
        fig = self.figure(cond.quantity, cond.basis, cond.kcal_per_g)
        value, unit, miss = fig.value.copy(), fig.unit, fig.miss.copy()
        ref_miss = np.full(self.n, MISS_NONE)
        if cond.versus_reference:
            rows = self.reference_rows()
            eng = self.reference_engine
            rv = np.full(self.n, np.nan)
            if eng is not None:
                rfig = eng.figure(cond.quantity, cond.basis, cond.kcal_per_g)
                has = rows >= 0
                rv[has] = rfig.value[rows[has]]
                ref_miss[has] = np.where(rfig.na[rows[has]], MISS_NONE, rfig.miss[rows[has]])
            own_ok = miss == MISS_NONE
            miss = np.where(own_ok & (rows < 0), MISS_NO_REFERENCE, miss)
            miss = np.where((miss == MISS_NONE) & (ref_miss != MISS_NONE), MISS_REFERENCE_FIGURE, miss)
            with np.errstate(divide="ignore", invalid="ignore"):
                if cond.versus_reference == "reduction_absolute":
                    value = rv - fig.value
                else:
                    miss = np.where((miss == MISS_NONE) & (rv == 0), MISS_REFERENCE_ZERO, miss)
                    if cond.versus_reference == "reduction_percent":
                        value = (rv - fig.value) / rv * 100
                    else:
                        value = (fig.value - rv) / rv * 100
                    unit = "%"
            value = np.where(miss == MISS_NONE, value, np.nan)
        na = fig.na
        missing = (miss != MISS_NONE) & ~na
        holds = (compare(np.nan_to_num(value), cond.op, cond.value) & ~missing) | na
        res = CondResult(cond, fig, value, unit, holds, missing, na, miss, ref_miss)
        cache[key] = res
        return res

    @cached_property
    def claims(self) -> list[ClaimResult]:
        """Every claim of the pack for every product."""
        out = []
        by_id = {c.id: c for c in self.pack.claims}
        ref_rows = self.reference_rows()
        for cl in self.pack.claims:
            n = self.n
            applies = np.ones(n, dtype=bool) if cl.applies_to == "any" else (self.forms == cl.applies_to)
            conds = [self.condition(c) for c in cl.conditions]
            failed = ~applies.copy()
            missing = np.zeros(n, dtype=bool)
            for cr in conds:
                missing |= cr.missing
                failed |= ~cr.holds & ~cr.missing
            alts = [[self.condition(c) for c in group] for group in cl.alternatives]
            if alts:
                any_group = np.zeros(n, dtype=bool)
                undecided = np.zeros(n, dtype=bool)
                for group in alts:
                    all_h = np.all([g.holds for g in group], axis=0)
                    some_m = np.any([g.missing for g in group], axis=0)
                    some_f = np.any([~g.holds & ~g.missing for g in group], axis=0)
                    any_group |= all_h
                    undecided |= some_m & ~some_f
                missing |= ~any_group & undecided
                failed |= ~any_group & ~undecided
            banned = self.ingredients_of_kinds(cl.fails_with_ingredient_kinds)
            if banned:
                failed[list(banned)] = True
            flagged = self.ingredients_of_kinds(cl.no_ingredient_kinds)
            ref_q = np.zeros(n, dtype=bool)
            if cl.reference_must_not_qualify and cl.reference_must_not_qualify in by_id and self.reference_engine:
                rv = next(r for r in self.reference_engine.claims if r.claim.id == cl.reference_must_not_qualify)
                has = ref_rows >= 0
                ref_q[has] = rv.verdict[ref_rows[has]] == VERDICT_ELIGIBLE
                failed |= ref_q
            verdict = np.where(failed, VERDICT_NOT_ELIGIBLE, np.where(missing, VERDICT_CANNOT_TELL, VERDICT_ELIGIBLE))
            out.append(ClaimResult(cl, conds, alts, applies, banned, flagged, ref_q, verdict))
        return out

    def eligible(self, i: int) -> list[str]:
        return [c.claim.id for c in self.claims if c.verdict[i] == VERDICT_ELIGIBLE]

    @cached_property
    def intended(self) -> list[bool]:
        """A claim is listed in the formula (any listed claim counts as made)."""
        return [bool(f.header.claims) for f in self.products]

    # -------------------------------------------------------------- statements
    @cached_property
    def statements(self) -> list[tuple[Statement, list[TriggerResult]]]:
        """Each statement of the pack with its triggers evaluated for every product."""
        return [(st, [self.trigger(t) for t in st.triggers]) for st in self.pack.statements]

    @cached_property
    def statements_listed(self) -> np.ndarray:
        """(statements x products): the statement is required, or flagged for review because a trigger
        cannot be decided."""
        if not self.statements:
            return np.zeros((0, self.n), dtype=bool)
        return np.array(
            [np.any([t.hit | t.undecided for t in triggers], axis=0) for _, triggers in self.statements], dtype=bool
        ).reshape(len(self.statements), self.n)

    def trigger(self, t: StatementTrigger) -> TriggerResult:
        n = self.n
        no = np.zeros(n, dtype=bool)
        if t.all_of:
            parts = [self.trigger(x) for x in t.all_of]
            hit = np.all([p.hit for p in parts], axis=0)
            decided_false = np.any([~p.hit & ~p.undecided for p in parts], axis=0)
            undecided = ~hit & ~decided_false
            return TriggerResult(t, hit, undecided, parts=parts)
        if t.form != "any":
            form_ok = self.liquid if t.form == "liquid" else ~self.liquid
            inner = self.trigger(t.model_copy(update={"form": "any"}))
            inner.trigger = t
            inner.hit, inner.undecided = inner.hit & form_ok, inner.undecided & form_ok
            return inner
        if t.header_flag:
            flag = np.array([bool(getattr(f.header, t.header_flag)) for f in self.products], dtype=bool)
            return TriggerResult(t, flag, no)
        if t.substance:
            want = t.substance.lower()
            hits = [[i.id for i in f.ingredients_used() if (i.substance or "").lower() == want] for f in self.products]
            return TriggerResult(t, np.array([bool(h) for h in hits], dtype=bool), no, hits=hits)
        if t.kind:
            hits = [[i.id for i in f.ingredients_used() if t.kind in i.kinds] for f in self.products]
            return TriggerResult(t, np.array([bool(h) for h in hits], dtype=bool), no, hits=hits)
        if t.components:
            v, base_unk = self._trigger_value(t)
            unk = base_unk
            if t.basis == "per_serving":
                unk = unk | np.isnan(self.serving)
                v = v * self.serving / 100
            elif t.basis == "per_100ml":
                unk = unk | np.isnan(self.density)
                v = v * self.density
            ok = ~unk
            if t.at_least is not None:
                hit = ok & (q_of(v) >= q_scalar(t.at_least))
            elif t.above is not None:
                hit = ok & (q_of(v) > q_scalar(t.above))
            elif t.present:
                hit = ok & (np.nan_to_num(v) > 0)
            else:
                hit = no
            return TriggerResult(t, hit, unk, value=np.where(unk, np.nan, v), base_unknown=base_unk)
        if t.with_claim:
            made = np.array([self.intended[i] or bool(self.eligible(i)) for i in range(n)], dtype=bool)
            conds = [self.condition(c) for c in t.conditions]
            if conds:
                any_hit = np.any([c.holds & ~c.missing & ~c.na for c in conds], axis=0)
                return TriggerResult(t, made & any_hit, no, conditions=conds)
            return TriggerResult(t, made, no, conditions=[])
        return TriggerResult(t, no, no)

    def _trigger_value(self, t: StatementTrigger) -> tuple[np.ndarray, np.ndarray]:
        """Per-100 g sum of components, optionally only from ingredients of given kinds."""
        comps = t.components or []
        cols = [COL[k] for c in comps for k in C.DERIVED.get(c, (c,))]
        if not t.from_kinds:
            unk = np.zeros(self.n, dtype=bool)
            for key in comps:
                cc = [COL[k] for k in C.DERIVED.get(key, (key,))]
                unk |= (self.U_parts if key in C.UNSPLIT_OF else self.U)[:, cc].any(axis=1)
            return np.nan_to_num(self.V[:, cols]).sum(axis=1), unk
        v = np.zeros(self.n)
        want = set(t.from_kinds)
        for i, c in enumerate(self.comps):
            if self.kinds[i] & want:
                x = leaf_sum(c, comps, t.from_kinds)
                v[i] = np.nan if x is None else x
        return np.nan_to_num(v), np.isnan(v)

    # ------------------------------------------------------------ front of pack
    @cached_property
    def front_of_pack(self) -> list[dict]:
        """Per scheme: exempt mask and, per nutrient, the verdict arrays."""
        out = []
        n = self.n
        cat = [f.header.category for f in self.products]
        for fop in self.pack.front_of_pack:
            exempt = np.array([c is not None and c in fop.exempt_kinds for c in cat], dtype=bool)
            entry: dict = {"fop": fop, "exempt": exempt, "nutrients": {}}
            if fop.kind == "colour_bands":
                keys = list(dict.fromkeys([*(fop.nutrients or {}), *(fop.liquid_nutrients or {})]))
                for k in keys:
                    use_liquid = self.liquid & (fop.liquid_nutrients is not None)
                    band_of = [
                        ((fop.liquid_nutrients if use_liquid[i] else fop.nutrients) or {}).get(k) for i in range(n)
                    ]
                    applies = np.array([b is not None for b in band_of], dtype=bool)
                    v = np.where(use_liquid, self.val[k] * self.density, self.val[k])
                    no_density = use_liquid & np.isnan(self.density)
                    code = np.full(n, -1)  # -1 cannot tell, 0 low, 1 medium, 2 high
                    portion = np.full(n, np.nan)
                    portion_red = np.zeros(n, dtype=bool)
                    for i in np.nonzero(applies & ~np.isnan(v))[0]:
                        b = band_of[i]
                        assert b is not None  # applies
                        dq = q_scalar(float(v[i]))
                        code[i] = 0 if dq <= q_scalar(b.low_up_to) else 2 if dq > q_scalar(b.high_above) else 1
                        s = self.serving[i]
                        if (
                            not np.isnan(s)
                            and portion_rule_applies(fop, float(s), bool(use_liquid[i]), float(self.density[i]))
                            and b.portion_high_above is not None
                        ):
                            portion[i] = v[i] * s / 100
                            if q_scalar(float(portion[i])) > q_scalar(b.portion_high_above):
                                portion_red[i] = True
                                code[i] = 2
                    entry["nutrients"][k] = {
                        "applies": applies,
                        "value": v,
                        "no_density": no_density,
                        "code": code,
                        "portion": portion,
                        "portion_red": portion_red,
                        "bands": band_of,
                    }
            else:
                basis_g = np.fmax(self.ref_g, self.serving)  # NaN only where both are missing
                threshold = np.array(
                    [
                        np.nan if (t := fop_threshold(fop, None if np.isnan(r) else float(r), c)) is None else t
                        for r, c in zip(self.ref_g, cat)
                    ]
                )
                entry["basis_g"], entry["threshold"] = basis_g, threshold
                for k, ref_key in (fop.high_in or {}).items():
                    ref = self.pack.reference_values[ref_key].amount
                    pct = self.val[k] * basis_g / 100 / ref * 100
                    high = np.array(
                        [
                            bool(not np.isnan(p) and not np.isnan(t) and to_decimal(float(p)) >= to_decimal(float(t)))
                            for p, t in zip(pct, threshold)
                        ],
                        dtype=bool,
                    )
                    entry["nutrients"][k] = {"percent": pct, "high": high, "unknown": np.isnan(self.val[k])}
            out.append(entry)
        return out

    # ---------------------------------------------------------------- reviews
    @cached_property
    def zero_rows(self) -> dict[str, np.ndarray]:
        """Rows declared 0 per serving whose unrounded amount is not trivial (several servings may be eaten)."""
        out: dict[str, np.ndarray] = {}
        if "per_serving" not in self.bases:
            return out
        with np.errstate(divide="ignore", invalid="ignore"):
            nserv = self.container / self.serving
        for row in self.pack.rows:
            if self.pack.nutrients[row.nutrient].unit != "g":
                continue
            ra = self.rounded[row.nutrient]["per_serving"]
            v = self.column_values(row.nutrient, "per_serving")
            rule = self.pack.rounding[row.rounding]
            flag = np.zeros(self.n, dtype=bool)
            cand = self.shown[row.nutrient] & self.has_col["per_serving"] & (ra.number == 0) & (np.nan_to_num(v) > 0)
            for i in np.nonzero(cand)[0]:
                band = rule.bands[int(ra.band[i])]
                bound = band.below if band.below is not None else band.up_to
                if bound is None:
                    continue
                ns = nserv[i]
                flag[i] = bool(v[i] >= 0.8 * bound or (not np.isnan(ns) and ns >= 2 and v[i] * ns >= bound))
            out[row.nutrient] = flag
        return out


def portion_rule_applies(fop, serving_g: float, drink: bool, density: float) -> bool:
    """Whether a colour scheme's per-portion limits apply: foods above ``portion_rule_above_g``, drinks
    (judged per 100 ml) above ``liquid_portion_rule_above_ml`` of portion volume (needs the density)."""
    if drink:
        limit = fop.liquid_portion_rule_above_ml
        return bool(limit and not np.isnan(density) and q_scalar(serving_g / density) > q_scalar(limit))
    return bool(fop.portion_rule_above_g and q_scalar(serving_g) > q_scalar(fop.portion_rule_above_g))


def nutrient_components(pack: RulePack, nutrient: str) -> set[str]:
    """Leaf components a pack nutrient is built from."""
    return {k for c in pack.nutrients[nutrient].sum or {} for k in C.DERIVED.get(c, (c,))}


def fop_threshold(fop, ref_g: float | None, category: str | None) -> float | None:
    """The %DV threshold of a 'high in' scheme for a product: small reference amounts, main dishes, or general."""
    for t in fop.thresholds or []:
        if "reference_amount_up_to" in t and ref_g is not None and ref_g <= t["reference_amount_up_to"]:
            return t["percent"]
        if (
            t.get("main_dish")
            and category in t.get("categories", [])
            and (ref_g or 0) >= t.get("reference_amount_at_least", 0)
        ):
            return t["percent"]
        if set(t) == {"percent"}:
            return t["percent"]
    return None


def leaf_sum(comp: Composition, components: list[str], from_kinds: list[str] | None) -> float | None:
    """Per-100 g sum of ``components`` in ``comp``, only from ingredients of the given kinds when
    ``from_kinds`` is set (e.g. polyols from added sweeteners); None when a value needed is unknown."""
    if not from_kinds:
        vals = [comp.value(k) for k in components]
        return None if any(v is None for v in vals) else float(sum(v for v in vals if v is not None))
    lib = {i.id: i for i in comp.formula.ingredients_used()}
    want = set(from_kinds)
    total = 0.0
    for ing_id, g in comp.leaf_amounts().items():
        ing = lib[ing_id]
        if not set(ing.kinds) & want:
            continue
        for k in components:
            for kk in C.DERIVED.get(k, (k,)):
                if kk not in ing.values:
                    return None
                total += g * ing.values[kk] / 100
    return total


def display_unit(unit: str) -> str:
    """Unit as printed on a label ("ug" is stored, "µg" is printed)."""
    return "µg" if unit == "ug" else unit


def label_many(
    pack: RulePack, comps: list[Composition], references: list[Composition | None] | None = None
) -> LabelEngine:
    """Label ``comps`` under ``pack`` (the engine; see :class:`LabelEngine`)."""
    return LabelEngine(pack, comps, references)


def require_labelled(engine: LabelEngine) -> None:
    """Raise the first product's error when the pack could not label it (single-product commands)."""
    if engine.errors:
        raise engine.errors[0][1]
    if not engine.n:
        raise InputError(Problem("nothing to label"))
