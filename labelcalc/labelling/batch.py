"""Range labelling as table operations: many compositions under one market pack at once.

This is the range-run path of ``declare`` + ``assess``: the same pack data and the same
semantics, computed over a (products x nutrients) table instead of product by product, so
that a range of tens of thousands of formulas stays fast.  It produces what a range run
needs — the summary row and the register record of each label — and
``tests/test_batch.py`` checks that it agrees with ``declare``/``assess`` label by label.

Exactness: every value is taken to 9 decimal places as an integer (``round(x * 1e9)``),
the same quantisation ``rounding.to_decimal`` applies, so thresholds and rounding bands are
compared and applied in exact integer arithmetic.
"""

from __future__ import annotations

from dataclasses import dataclass
from decimal import Decimal

import numpy as np

from labelcalc.errors import LabelError
from labelcalc.formulation import components as C
from labelcalc.formulation.composition import ATWATER_REPLACED, COL, Composition
from labelcalc.formulation.energy import _prepare, load_factor_set
from labelcalc.labelling.assess import _Context, _leaf_component, claim_key, fop_threshold
from labelcalc.labelling.declare import display_unit, energy_method, serving_plan
from labelcalc.labelling.rounding import format_number, to_decimal
from labelcalc.labelling.rulepack import RulePack

Q = 10**9  # values are handled as integers of 1e-9 units
NONE = np.iinfo(np.int64).min  # "no number" (a fixed text such as "less than 1")


def q_of(x: np.ndarray) -> np.ndarray:
    """Float array to exact 1e-9 integers (NaN -> 0; mask unknowns separately)."""
    return np.round(np.nan_to_num(x) * Q).astype(np.int64)


def _qs(v: float) -> int:
    return int(round(v * Q))


_TEXT_CACHE: dict[tuple[int, int | None], str] = {}


def text_of(qv: int, places: int | None) -> str:
    key = (qv, places)
    t = _TEXT_CACHE.get(key)
    if t is None:
        d = Decimal(int(qv)).scaleb(-9)
        t = format_number(d, None if places is None else Decimal(1).scaleb(-places))
        if len(_TEXT_CACHE) < 2_000_000:
            _TEXT_CACHE[key] = t
    return t


def _step_round(qv: np.ndarray, step: np.ndarray | int, tie: str) -> np.ndarray:
    n, rem = np.divmod(qv, step)
    twice = 2 * rem
    up = twice > step
    if tie == "half_up":
        up |= twice == step
    else:
        up |= (twice == step) & (n % 2 == 1)
    return (n + up) * step


@dataclass
class RoundedArray:
    number: np.ndarray  # int64 in 1e-9 units, NONE for a text-only form
    band: np.ndarray  # int band index
    texts: list[str]


def round_array(values: np.ndarray, rule, others: dict[str, np.ndarray] | None = None) -> RoundedArray:
    """Vector form of :func:`rounding.apply_rounding` for non-negative values (1e-9 exact)."""
    qv = q_of(values)
    n = len(qv)
    band = np.full(n, -1)
    number = np.zeros(n, dtype=np.int64)
    fixed_text: dict[int, str] = {}
    places = np.full(n, -1)
    open_ = np.ones(n, dtype=bool)
    for i, b in enumerate(rule.bands):
        if not open_.any():
            break
        holds = open_.copy()
        if b.below is not None:
            holds &= qv < _qs(b.below)
        elif b.up_to is not None:
            holds &= qv <= _qs(b.up_to)
        for c in b.only_if:
            other = (others or {}).get(c.nutrient)
            if other is None:
                holds &= False
                continue
            oq, known = other
            ok = known.copy()
            if c.below is not None:
                ok &= oq < _qs(c.below)
            if c.up_to is not None:
                ok &= oq <= _qs(c.up_to)
            if c.at_least is not None:
                ok &= oq >= _qs(c.at_least)
            holds &= ok
        if not holds.any():
            continue
        band[holds] = i
        if b.declare is not None:
            number[holds] = NONE if b.value is None else _qs(b.value)
            fixed_text[i] = b.declare
        elif b.step is not None:
            st = _qs(b.step)
            number[holds] = _step_round(qv[holds], st, rule.tie)
            if rule.keep_trailing_zeros:
                places[holds] = max(0, -Decimal(str(b.step)).normalize().as_tuple().exponent)
        else:
            x = qv[holds]
            pos = x > 0
            digits = np.zeros_like(x)
            digits[pos] = np.floor(np.log10(x[pos].astype(float))).astype(np.int64) + 1
            # correct float log10 at powers of ten
            p10 = np.power(10, np.clip(digits - 1, 0, 18)).astype(np.int64)
            digits = np.where(pos & (x < p10), digits - 1, digits)
            exp = np.clip(digits - b.significant_figures, 0, 18)
            step = np.power(10, exp).astype(np.int64)
            r = np.where(pos, _step_round(x, step, rule.tie), 0)
            if b.min_step:
                r = _step_round(r, _qs(b.min_step), rule.tie)
            number[holds] = r
        open_ &= ~holds
    texts = []
    for i in range(n):
        bi = int(band[i])
        if bi in fixed_text:
            texts.append(fixed_text[bi])
        else:
            texts.append(text_of(int(number[i]), None if places[i] < 0 else int(places[i])))
    return RoundedArray(number, band, texts)


def _near(a: np.ndarray, b: float) -> np.ndarray:
    return np.abs(a - b) <= 1e-6 * max(1.0, abs(b))


def op_vec(a: np.ndarray, op: str, b: float) -> np.ndarray:
    """Vector form of assess._op: float comparisons, exact Decimal ones close to the limit."""
    res = {"<": a < b, "<=": a <= b, ">": a > b, ">=": a >= b}[op]
    near = _near(a, b) & np.isfinite(a)
    if near.any():
        y = to_decimal(b)
        for i in np.nonzero(near)[0]:
            x = to_decimal(float(a[i]))
            res[i] = {"<": x < y, "<=": x <= y, ">": x > y, ">=": x >= y}[op]
    return res


def _comps_of(key: str) -> tuple[str, ...]:
    return C.DERIVED.get(key, (key,))


class BatchLabels:
    """Labels of many compositions under one pack (see the module docstring)."""

    def __init__(self, pack: RulePack, comps: list[Composition]):
        self.pack = pack
        self.errors: list[tuple[Composition, LabelError]] = []
        ok, plans, methods = [], [], []
        for c in comps:
            try:
                plans.append(serving_plan(c, pack))
                methods.append(energy_method(c.formula, pack))
                ok.append(c)
            except LabelError as exc:
                self.errors.append((c, exc))
        self.comps, self.plans, self.methods = ok, plans, methods
        n = len(ok)
        self.n = n
        if not n:
            return
        self.V = np.vstack([c.per_100g for c in ok])
        self.U = np.vstack([c.unknown for c in ok])
        self.V0 = np.nan_to_num(self.V)
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
            ]
        )
        self._energy()
        self._nutrients()

    # ----------------------------------------------------------------- energy
    def _energy_for(self, fs, rows: np.ndarray):
        """Energy (kJ, kcal per 100 g; NaN when unknown) and review counts, from the factor set's group
        matrices (energy._prepare, the same the single-label energy_of uses)."""
        _, gkj, gkcal, relevant, review_cols = _prepare(fs)
        V0 = self.V0[rows].copy()
        U = self.U[rows]
        if fs.factor_set.ingredient_specific:
            for k in ATWATER_REPLACED:
                V0[:, COL[k]] -= V0[:, COL[f"atwater_covered_{k}"]]
        kj, kcal = np.zeros(len(rows)), np.zeros(len(rows))
        for ekj, ekcal in zip((V0 @ gkj.T).T, (V0 @ gkcal.T).T):  # group by group, summed in energy_of's order
            kj = kj + ekj
            kcal = kcal + ekcal
        unknown = (U & relevant.any(axis=0)).any(axis=1)
        if fs.factor_set.ingredient_specific:
            c = COL["specific_atwater_kcal"]
            kcal += V0[:, c]
            kj = (
                kj + V0[:, c] * fs.factor_set.kj_from_kcal if fs.factor_set.kj_from_kcal else np.full(len(rows), np.nan)
            )
            unknown |= U[:, c]
        by_text: dict[str, np.ndarray] = {}  # one review per distinct text, as the single-label path does
        for cols, text in review_cols:
            hit = self.V0[rows][:, cols].sum(axis=1) > 0
            by_text[text] = by_text.get(text, np.zeros(len(rows), dtype=bool)) | hit
        nrev = np.sum(list(by_text.values()), axis=0) if by_text else np.zeros(len(rows), dtype=int)
        return np.where(unknown, np.nan, kj), np.where(unknown, np.nan, kcal), nrev

    def _energy(self):
        n = self.n
        self.e_kj, self.e_kcal, self.e_reviews = np.full(n, np.nan), np.full(n, np.nan), np.zeros(n, dtype=int)
        self.factor_sets = {}
        for m in sorted(set(self.methods)):
            rows = np.array([i for i, x in enumerate(self.methods) if x == m])
            fs = load_factor_set(m)
            self.factor_sets[m] = fs
            kj, kcal, nrev = self._energy_for(fs, rows)
            self.e_kj[rows], self.e_kcal[rows], self.e_reviews[rows] = kj, kcal, nrev
        av = load_factor_set("available")
        _, self.a_kcal, _ = self._energy_for(av, np.arange(n))

    # -------------------------------------------------------------- nutrients
    def _nutrients(self):
        self.val: dict[str, np.ndarray] = {}  # per 100 g, NaN when unknown
        for key, nd in self.pack.nutrients.items():
            if nd.energy:
                self.val[key] = self.e_kcal.copy() if nd.energy == "kcal" else self.e_kj.copy()
                continue
            tot = np.zeros(self.n)
            unk = np.zeros(self.n, dtype=bool)
            for comp, fac in (nd.sum or {}).items():
                cols = [COL[k] for k in _comps_of(comp)]
                tot += self.V0[:, cols].sum(axis=1) * fac
                unk |= self.U[:, cols].any(axis=1)
            self.val[key] = np.where(unk, np.nan, tot)

    def column_values(self, key: str, basis: str) -> np.ndarray:
        cache = self.__dict__.setdefault("_colv", {})
        got = cache.get((key, basis))
        if got is None:
            v = self.val[key]
            got = v if basis == "per_100g" else v * (self.serving if basis == "per_serving" else self.container) / 100
            cache[(key, basis)] = got
        return got

    # --------------------------------------------------------------- declare
    def declare(self):
        """Declared texts and numbers of every row in every basis the pack prints (NaN where not printed)."""
        pack = self.pack
        bases = list(dict.fromkeys(list(pack.panel.bases) + ["per_container"]))
        self.bases = bases
        has_col = {b: np.array([b in p.columns for p in self.plans]) for b in bases}
        self.has_col = has_col
        self.rows: dict[str, dict[str, RoundedArray]] = {}
        self.pct: dict[str, dict[str, list[str | None]]] = {}
        self.shown: dict[str, np.ndarray] = {}
        others = {
            b: {k: (q_of(self.column_values(k, b)), ~np.isnan(self.column_values(k, b))) for k in pack.nutrients}
            for b in bases
        }
        for row in pack.rows:
            rule = pack.rounding[row.rounding]
            self.rows[row.nutrient] = {}
            for b in bases:
                vals = self.column_values(row.nutrient, b)
                self.rows[row.nutrient][b] = round_array(np.where(np.isnan(vals), 0, vals), rule, others[b])
            self.pct[row.nutrient] = self._percents(row, bases)
            self.shown[row.nutrient] = self._shown(row)

    def _percents(self, row, bases):
        out: dict[str, list[str | None]] = {}
        if not row.percent:
            return out
        ref = self.pack.reference_values[row.percent]
        rule = self.pack.rounding[row.percent_rounding or "percent"]
        mode = row.percent_from or self.pack.panel.percent_from
        for b in bases:
            ra = self.rows[row.nutrient][b]
            vals = self.column_values(row.nutrient, b)
            base_q = np.where((mode == "declared") & (ra.number != NONE), ra.number, q_of(vals))
            p = base_q / Q / ref.amount * 100
            pr = round_array(p, rule)
            zero = (ra.number == 0) if mode == "declared" else np.zeros(self.n, dtype=bool)
            unknown = np.isnan(vals)
            out[b] = [
                None if u else "0%" if z else (t if t.endswith("%") else t + "%")
                for t, u, z in zip(pr.texts, unknown, zero)
            ]
        return out

    def _shown(self, row) -> np.ndarray:
        v100 = self.val[row.nutrient]
        n = self.n
        if row.requirement == "mandatory":
            return np.ones(n, dtype=bool)
        declared_nonzero = np.zeros(n, dtype=bool)
        for b in self.bases:
            ra = self.rows[row.nutrient][b]
            declared_nonzero |= self.has_col[b] & ((ra.number == NONE) | (ra.number != 0))
        present = (~np.isnan(v100)) & (np.nan_to_num(v100) > 0) & declared_nonzero
        shown = np.zeros(n, dtype=bool)
        for t in row.when:
            ok = np.ones(n, dtype=bool)
            if t.claim is not None:
                want = "_".join(t.claim.lower().split())
                ok &= np.array(
                    [any(claim_key(x).startswith(want) for x in c.formula.header.claims) for c in self.comps]
                )
            if t.present:
                ok &= present
            if t.added is not None:
                ok &= np.array([any(t.added in i.kinds for i in c.formula.ingredients_used()) for c in self.comps])
            if t.at_least_per_100g is not None:
                ok &= (~np.isnan(v100)) & (q_of(v100) >= _qs(t.at_least_per_100g))
            if t.at_least_percent_reference is not None:
                if not row.percent:
                    ok &= False
                else:
                    ref = self.pack.reference_values[row.percent].amount
                    ok &= (~np.isnan(v100)) & op_vec(
                        np.nan_to_num(v100) / ref * 100, ">=", t.at_least_percent_reference
                    )
            if (
                t.claim is None
                and not t.present
                and t.added is None
                and t.at_least_per_100g is None
                and t.at_least_percent_reference is None
            ):
                ok &= False
            shown |= ok
        if row.requirement == "voluntary":
            if row.show == "always":
                shown |= True
            elif row.show == "when_present":
                shown |= present
        return shown

    # ----------------------------------------------------------------- claims
    def figure(self, q: str, basis: str, kcal_per_g: float | None):
        """(values, missing mask, not-applicable mask) of a claim figure."""
        v = self.val[q]
        n = self.n
        na = np.zeros(n, dtype=bool)
        if basis in ("per_100g", "per_100g_or_100ml"):
            if basis == "per_100g_or_100ml":
                liquid = np.array([c.formula.header.form == "liquid" for c in self.comps])
                dens = np.array([c.formula.header.density_g_per_ml or np.nan for c in self.comps])
                v = np.where(liquid, v * dens, v)
            return v, np.isnan(v), na
        if basis == "per_serving":
            x = v * self.serving / 100
            return x, np.isnan(x), na
        if basis == "per_reference_amount":
            x = v * self.ref_g / 100
            return x, np.isnan(x), na
        if basis == "per_50g_if_small":
            na = ~np.isnan(self.ref_g) & ~self.small
            x = v / 2
            return x, (np.isnan(x) | np.isnan(self.ref_g)) & ~na, na
        ek = next((k for k, nd in self.pack.nutrients.items() if nd.energy == "kcal"), None)
        e = self.val[ek] if ek else np.full(n, np.nan)
        with np.errstate(divide="ignore", invalid="ignore"):
            if basis == "per_100kcal":
                x = np.where(e > 0, v / e * 100, np.nan)
            else:
                x = np.where(e > 0, v * (kcal_per_g or 0) / e * 100, np.nan)
        return x, np.isnan(x), na

    def _cond(self, cond):
        """(holds, missing) arrays of one condition (no reference formula in range runs)."""
        if cond.versus_reference:
            return np.zeros(self.n, dtype=bool), np.ones(self.n, dtype=bool)
        x, missing, na = self.figure(cond.quantity, cond.basis, cond.kcal_per_g)
        holds = op_vec(np.nan_to_num(x), cond.op, cond.value) & ~missing
        return holds | na, missing & ~na

    def claims(self) -> list[list[str]]:
        """Eligible claim ids per product."""
        pack = self.pack
        n = self.n
        eligible = [[] for _ in range(n)]
        form = np.array([c.formula.header.form for c in self.comps])
        kinds = [set(k for i in c.formula.ingredients_used() for k in i.kinds) for c in self.comps]
        self.claim_verdicts: dict[str, np.ndarray] = {}
        for cl in pack.claims:
            failed = np.zeros(n, dtype=bool)
            missing = np.zeros(n, dtype=bool)
            if cl.applies_to != "any":
                failed |= form != cl.applies_to
            for cond in cl.conditions:
                h, m = self._cond(cond)
                missing |= m
                failed |= ~h & ~m
            if cl.alternatives:
                any_group = np.zeros(n, dtype=bool)
                group_missing_no_false = np.zeros(n, dtype=bool)
                for group in cl.alternatives:
                    res = [self._cond(c) for c in group]
                    all_h = np.all([h for h, _ in res], axis=0)
                    some_m = np.any([m for _, m in res], axis=0)
                    some_f = np.any([~h & ~m for h, m in res], axis=0)
                    any_group |= all_h
                    group_missing_no_false |= some_m & ~some_f
                alt_missing = ~any_group & group_missing_no_false
                alt_failed = ~any_group & ~group_missing_no_false
                missing |= alt_missing
                failed |= alt_failed
            if cl.fails_with_ingredient_kinds:
                failed |= np.array([bool(k & set(cl.fails_with_ingredient_kinds)) for k in kinds])
            verdict = np.where(failed, 0, np.where(missing, 1, 2))  # 0 not eligible, 1 cannot tell, 2 eligible
            self.claim_verdicts[cl.id] = verdict
            for i in np.nonzero(verdict == 2)[0]:
                eligible[i].append(cl.id)
        return eligible

    # ------------------------------------------------------------- statements
    def statements(self, eligible: list[list[str]]) -> list[list[str]]:
        n = self.n
        out = [[] for _ in range(n)]
        intended = [bool(c.formula.header.claims) for c in self.comps]  # any listed claim counts as made
        subs = [{(i.substance or "").lower() for i in c.formula.ingredients_used()} for c in self.comps]
        kinds = [set(k for i in c.formula.ingredients_used() for k in i.kinds) for c in self.comps]
        for st in self.pack.statements:
            fired = np.zeros(n, dtype=bool)
            undecided = np.zeros(n, dtype=bool)
            for t in st.triggers:
                if t.substance:
                    fired |= np.array([t.substance.lower() in s for s in subs])
                elif t.kind:
                    fired |= np.array([t.kind in k for k in kinds])
                elif t.components:
                    v, unk = self._trigger_value(t, kinds)
                    if t.basis == "per_serving":
                        no_s = np.isnan(self.serving)
                        undecided |= no_s & ~unk & ~fired
                        v = v * np.nan_to_num(self.serving) / 100
                        unk = unk | no_s
                    undecided |= unk & ~fired
                    ok = ~unk
                    if t.at_least is not None:
                        hit = ok & (q_of(v) >= _qs(t.at_least))
                    elif t.above is not None:
                        hit = ok & (q_of(v) > _qs(t.above))
                    elif t.present:
                        hit = ok & (np.nan_to_num(v) > 0)
                    else:
                        hit = np.zeros(n, dtype=bool)
                    fired |= hit
                elif t.with_claim:
                    made = np.array([intended[i] or bool(eligible[i]) for i in range(n)])
                    if t.conditions:
                        hit = np.zeros(n, dtype=bool)
                        for cond in t.conditions:
                            x, missing, na = self.figure(cond.quantity, cond.basis, cond.kcal_per_g)
                            hit |= op_vec(np.nan_to_num(x), cond.op, cond.value) & ~missing & ~na
                        fired |= made & hit
                    else:
                        fired |= made
            for i in np.nonzero(fired | undecided)[0]:
                out[i].append(st.id)
        return out

    def _trigger_value(self, t, kinds):
        cols = [COL[k] for c in t.components for k in _comps_of(c)]
        if not t.from_kinds:
            return self.V0[:, cols].sum(axis=1), self.U[:, cols].any(axis=1)
        v = np.zeros(self.n)
        unk = np.zeros(self.n, dtype=bool)
        for i, c in enumerate(self.comps):
            if kinds[i] & set(t.from_kinds):
                ctx = _Context.__new__(_Context)
                ctx.comp = c
                x = _leaf_component(ctx, t.components, t.from_kinds)
                if x is None:
                    unk[i] = True
                else:
                    v[i] = x
        return v, unk

    # ------------------------------------------------------------- allergens
    def allergens(self) -> tuple[list[list[str]], list[list[str]]]:
        rules = self.pack.allergens
        names, unknown = [], []
        for c in self.comps:
            used = c.formula.ingredients_used()
            amounts = c.leaf_amounts()
            unknown.append([i.id for i in used if i.allergens is None and amounts.get(i.id, 0) > 0])
            if rules is None:
                names.append([])
                continue
            keys = {
                k: [i.id for i in used if i.allergens and k in i.allergens]
                for k in {k for i in used for k in (i.allergens or [])}
            }
            got = []
            for _key, entry in rules.entries.items():
                src = [x for k in entry.from_keys for x in keys.get(k, [])]
                present = bool(src)
                comp_v = c.value(entry.component or "sulphites") if entry.threshold_mg_per_kg is not None else None

                def below(v):
                    x, t = to_decimal(v * 10), to_decimal(entry.threshold_mg_per_kg)
                    return x < t if entry.threshold_inclusive else x <= t

                if present and entry.threshold_mg_per_kg is not None and comp_v is not None and below(comp_v):
                    present = False
                if not present and entry.component and entry.threshold_mg_per_kg is not None:
                    v = c.value(entry.component)
                    present = v is not None and not below(v)
                if present:
                    got.append(entry.name)
            names.append(got)
        return names, unknown

    # ------------------------------------------------------------ front of pack
    def front_of_pack(self) -> list[str]:
        n = self.n
        parts = [[] for _ in range(n)]
        cat = [c.formula.header.category for c in self.comps]
        for fop in self.pack.front_of_pack:
            txt = [[] for _ in range(n)]
            exempt = np.array([x is not None and x in fop.exempt_kinds for x in cat])
            if fop.kind == "colour_bands":
                liquid = np.array([c.formula.header.form == "liquid" for c in self.comps])
                dens = np.array([c.formula.header.density_g_per_ml or np.nan for c in self.comps])
                for i in range(n):
                    bands = (fop.liquid_nutrients if liquid[i] and fop.liquid_nutrients else fop.nutrients) or {}
                    for k, b in bands.items():
                        v = self.val[k][i]
                        if liquid[i] and fop.liquid_nutrients is not None:
                            v = v * dens[i]
                        if np.isnan(v):
                            txt[i].append(f"{k}=cannot tell")
                            continue
                        dq = _qs(v)
                        colour = (
                            "green (low)"
                            if dq <= _qs(b.low_up_to)
                            else "red (high)"
                            if dq > _qs(b.high_above)
                            else "amber (medium)"
                        )
                        s = self.serving[i]
                        if (
                            not np.isnan(s)
                            and fop.portion_rule_above_g
                            and s > fop.portion_rule_above_g
                            and b.portion_high_above is not None
                            and _qs(v * s / 100) > _qs(b.portion_high_above)
                        ):
                            colour = "red (high)"
                        txt[i].append(f"{k}={colour}")
            else:
                for i in range(n):
                    ref_g = None if np.isnan(self.ref_g[i]) else float(self.ref_g[i])
                    s = None if np.isnan(self.serving[i]) else float(self.serving[i])
                    if ref_g is None and s is None:
                        continue
                    basis_g = max(x for x in (ref_g, s) if x is not None)
                    threshold = fop_threshold(fop, ref_g, cat[i])
                    for k, ref_key in (fop.high_in or {}).items():
                        v = self.val[k][i]
                        if np.isnan(v):
                            txt[i].append(f"{k}=cannot tell")
                            continue
                        ref = self.pack.reference_values[ref_key].amount
                        pct = v * basis_g / 100 / ref * 100
                        txt[i].append(f"{k}={to_decimal(pct) >= to_decimal(threshold)}")
            for i in range(n):
                parts[i].append(f"{fop.id}: " + ("" if exempt[i] else ", ".join(txt[i])))
        return ["; ".join(p) for p in parts]

    # ---------------------------------------------------------------- reviews
    def zero_row_reviews(self) -> np.ndarray:
        count = np.zeros(self.n, dtype=int)
        if "per_serving" not in self.bases:
            return count
        nserv = self.container / self.serving
        for row in self.pack.rows:
            nd = self.pack.nutrients[row.nutrient]
            if nd.unit != "g":
                continue
            ra = self.rows[row.nutrient]["per_serving"]
            v = self.column_values(row.nutrient, "per_serving")
            rule = self.pack.rounding[row.rounding]
            for i in np.nonzero(
                self.shown[row.nutrient] & self.has_col["per_serving"] & (ra.number == 0) & (np.nan_to_num(v) > 0)
            )[0]:
                band = rule.bands[int(ra.band[i])]
                bound = band.below if band.below is not None else band.up_to
                if bound is None:
                    continue
                ns = nserv[i]
                if v[i] >= 0.8 * bound or (not np.isnan(ns) and ns >= 2 and v[i] * ns >= bound):
                    count[i] += 1
        return count

    # ----------------------------------------------------------------- output
    def texts(self, nutrient: str, basis: str) -> list[str]:
        """Printed figures (with units) of one row and column for every product."""
        cache = self.__dict__.setdefault("_texts", {})
        got = cache.get((nutrient, basis))
        if got is None:
            unknown = np.isnan(self.column_values(nutrient, basis))
            nd = self.pack.nutrients[nutrient]
            unit = self.pack.panel.unit_labels.get(nd.unit) or display_unit(nd.unit)
            show = self._row(nutrient).show_unit
            got = [
                "unknown" if u else (f"{t} {unit}" if show else t)
                for t, u in zip(self.rows[nutrient][basis].texts, unknown)
            ]
            cache[(nutrient, basis)] = got
        return got

    def text(self, nutrient: str, basis: str, i: int) -> str:
        return self.texts(nutrient, basis)[i]

    def _row(self, nutrient):
        if not hasattr(self, "_rows_by"):
            self._rows_by = {r.nutrient: r for r in self.pack.rows}
        return self._rows_by[nutrient]

    def label_text(self, row, basis: str, i: int) -> str:
        if "{amount}" in row.label:
            return row.label.replace("{amount}", self.text(row.nutrient, basis, i).replace(" ", ""))
        return self.text(row.nutrient, basis, i)

    def results(self):
        """Summary rows and register records (the same fields as rangerun.summary_row / label_record)."""
        if not self.n:
            return []
        self.declare()
        eligible = self.claims()
        statements = self.statements(eligible)
        allergens, unknown_alg = self.allergens()
        fop = self.front_of_pack()
        zero = self.zero_row_reviews()
        pack = self.pack
        out = []
        for i, c in enumerate(self.comps):
            f = c.formula
            p = self.plans[i]
            main = p.columns[0]
            s = p.serving
            e_kcal = None if np.isnan(self.e_kcal[i]) else float(self.e_kcal[i])
            e_kj = None if np.isnan(self.e_kj[i]) else float(self.e_kj[i])
            a_kcal = None if np.isnan(self.a_kcal[i]) else float(self.a_kcal[i])
            row = {
                "product_id": f.id,
                "product_name": f.header.name,
                "file": f.file,
                "market": pack.market,
                "scenario": c.scenario,
                "formula_hash": f.content_hash,
                "column": main,
                "serving_g": s,
                "declared_energy_kcal_per_100g": e_kcal,
                "declared_energy_kj_per_100g": e_kj,
                "declared_energy_kcal_per_serving": None if e_kcal is None or s is None else e_kcal * s / 100,
                "available_energy_kcal_per_100g": a_kcal,
                "available_energy_kcal_per_serving": None if a_kcal is None or s is None else a_kcal * s / 100,
            }
            declared = {}
            for r in pack.rows:
                if not self.shown[r.nutrient][i]:
                    continue
                row[r.nutrient] = (
                    self.label_text(r, main, i) if "{amount}" in r.label else self.text(r.nutrient, main, i)
                )
                pct = self.pct[r.nutrient].get(pack.panel.percent_basis or main)
                if pct and pct[i]:
                    row[f"{r.nutrient}_percent"] = pct[i]
                for b in p.columns:
                    declared[f"{r.nutrient}|{b}"] = self.text(r.nutrient, b, i)
                    pb = self.pct[r.nutrient].get(b)
                    if pb and pb[i]:
                        declared[f"{r.nutrient}|{b}|%"] = pb[i]
            row["claims_eligible"] = "; ".join(eligible[i])
            row["statements_required"] = "; ".join(statements[i])
            row["allergens"] = "; ".join(allergens[i])
            row["allergens_unknown"] = "; ".join(unknown_alg[i])
            row["front_of_pack"] = fop[i]
            row["reviews"] = int(self.e_reviews[i]) + int(zero[i]) + (1 if unknown_alg[i] else 0)
            out.append((c, row, declared, sorted(statements[i]), sorted(allergens[i]), sorted(eligible[i])))
        return out
