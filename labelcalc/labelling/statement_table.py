"""Statement triggers of the labelling engine, for every product at once.

Part of :class:`labelcalc.labelling.engine.LabelEngine` (a mixin: it reads the engine's tables).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from labelcalc import components as C
from labelcalc.formulation.composition import COL, Composition
from labelcalc.labelling.claims_table import ClaimTables, CondResult
from labelcalc.labelling.rounding import q_of, q_scalar
from labelcalc.labelling.rulepack_assess import Statement, StatementTrigger


@dataclass
class TriggerResult:
    """A statement trigger evaluated for every product."""

    trigger: StatementTrigger
    hit: np.ndarray
    undecided: np.ndarray
    value: np.ndarray | None = None  # components triggers: the figure compared
    hits: dict[int, list[str]] | None = None  # substance/kind triggers: the ingredients found, by product
    conditions: list[CondResult] | None = None  # with_claim triggers
    parts: list[TriggerResult] | None = None  # all_of triggers
    base_unknown: np.ndarray | None = None  # components triggers: the per-100 g sum is unknown


class StatementTables(ClaimTables):
    """Statement triggers (mixed into the engine)."""

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

    @staticmethod
    def _rows_with(hits: dict[int, list[str]], n: int) -> np.ndarray:
        """Products with at least one ingredient found, as a mask."""
        out = np.zeros(n, dtype=bool)
        found = [i for i, h in hits.items() if h]
        if found:
            out[found] = True
        return out

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
            hits: dict[int, list[str]] = {}
            for i in self.products_by_substance.get(want, []):
                hits[i] = [g.id for g in self.products[i].ingredients_used() if (g.substance or "").lower() == want]
            return TriggerResult(t, self._rows_with(hits, n), no, hits=hits)
        if t.kind:
            hits = {}
            for i in self.products_by_kind.get(t.kind, []):
                hits[i] = [g.id for g in self.products[i].ingredients_used() if t.kind in g.kinds]
            return TriggerResult(t, self._rows_with(hits, n), no, hits=hits)
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
            made = np.fromiter((self.intended[i] or bool(self.eligible(i)) for i in range(n)), dtype=bool, count=n)
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
