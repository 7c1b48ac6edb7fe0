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

from functools import cached_property
from typing import Any

import numpy as np

from labelcalc import components as C
from labelcalc.errors import InputError, LabelError, Problem, RuleError
from labelcalc.formulation.composition import COL, Composition
from labelcalc.formulation.energy import EnergyResult, EnergyTable, energy_table, load_factor_set
from labelcalc.labelling.claims_table import claim_key, compare
from labelcalc.labelling.front_table import FrontOfPackTables
from labelcalc.labelling.ingredients import allergen_report
from labelcalc.labelling.plan import ServingPlan, energy_method, serving_plan
from labelcalc.labelling.rounding import NONE, Q, RoundedArray, q_of, q_scalar, round_values
from labelcalc.labelling.rulepack import Row, RulePack
from labelcalc.labelling.statement_table import StatementTables


class LabelEngine(StatementTables, FrontOfPackTables):
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
    def new_engine(self, comps: list[Composition]) -> LabelEngine:
        return LabelEngine(self.pack, comps, rules_root=self.rules_root)

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

    @cached_property
    def products_by_substance(self) -> dict[str, list[int]]:
        """Which products use an ingredient of each named substance (lower case)."""
        out: dict[str, list[int]] = {}
        for i, f in enumerate(self.products):
            for sub in {(g.substance or "").lower() for g in f.ingredients_used() if g.substance}:
                out.setdefault(sub, []).append(i)
        return out

    @cached_property
    def claim_keys(self) -> dict[int, list[str]]:
        """The claims each product's header says it makes, as keys, for the products that make any."""
        return {i: [claim_key(x) for x in f.header.claims] for i, f in enumerate(self.products) if f.header.claims}

    def _claims_where(self, test) -> np.ndarray:
        """Products whose header makes a claim whose key passes ``test``."""
        out = np.zeros(self.n, dtype=bool)
        for i, keys in self.claim_keys.items():
            out[i] = any(test(k) for k in keys)
        return out

    def ingredients_of_kinds(self, kinds: list[str]) -> dict[int, list[str]]:
        """The ingredients (ids, sorted) of any of ``kinds``, for each product that uses one (worked out once
        per set of kinds: many claims share one; callers only read the result)."""
        want = frozenset(kinds)
        memo = self.__dict__.setdefault("_of_kinds", {})
        got = memo.get(want)
        if got is None:
            got = memo[want] = {
                i: sorted(ing.id for ing in self.products[i].ingredients_used() if not want.isdisjoint(ing.kinds))
                for i in sorted({i for k in want for i in self.products_by_kind.get(k, [])})
            }
        return got

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

    def declared_energy(self, i: int) -> EnergyResult:
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
                ok &= self._claims_where(lambda k, w=want: w in k)
                criteria += 1
            if t.added_source is not None:
                parts = nutrient_components(self.pack, row.nutrient)
                brings = np.zeros(n, dtype=bool)
                for i in self.products_by_kind.get(t.added_source, []):
                    brings[i] = bool(parts & self.added_sources[i].get(t.added_source, set()))
                ok &= brings
                criteria += 1
            if t.claim is not None:
                want = "_".join(t.claim.lower().split())
                ok &= self._claims_where(lambda k, w=want: k.startswith(w))
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


def nutrient_components(pack: RulePack, nutrient: str) -> set[str]:
    """Leaf components a pack nutrient is built from."""
    return {k for c in pack.nutrients[nutrient].sum or {} for k in C.DERIVED.get(c, (c,))}


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
