"""Claim conditions and verdicts of the labelling engine, for every product at once.

Part of :class:`labelcalc.labelling.engine.LabelEngine` (a mixin: it reads the engine's tables).
Claim limits are compared in floating point, exactly (``Decimal``) where a figure is within float noise
of its limit (:func:`compare`).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from labelcalc.formulation.composition import Composition
from labelcalc.labelling.rounding import to_decimal
from labelcalc.labelling.rulepack_assess import Claim, Condition
from labelcalc.labelling.tables_base import EngineTables

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


class ClaimTables(EngineTables):
    """Claim figures, conditions and verdicts (mixed into the engine)."""

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
    def reference_engine(self) -> ClaimTables | None:
        """The engine over the products' reference formulas (for comparative claims), if any."""
        refs = [r for r in self._references if r is not None]
        if not refs:
            return None
        return self.new_engine(refs)

    @cached_property
    def reference_rows(self) -> np.ndarray:
        """Row of each product's reference formula in :attr:`reference_engine` (-1: none or not labelled);
        worked out once per engine."""
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
            rows = self.reference_rows
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
        ref_rows = self.reference_rows
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
