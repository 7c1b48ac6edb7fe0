"""Consistency checks of a label record, run before any panel is written (the record's ``checks``).

* the declared energy agrees with energy recomputed from the declared
  macronutrients, within what rounding allows;
* no sub-row exceeds its parent (sugars within carbohydrate, saturates within fat);
* printed kJ and kcal each agree with the market's factors;
* the panel carries the formula's content hash;
* the formula's stated serving follows the market's reference amount rules, where the pack states them
  (``servings.stated_serving_check``): a failure where the rule can be judged, a review where it needs a person.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from labelcalc.formulation.composition import COL
from labelcalc.formulation.energy import energy_inputs, energy_vectors
from labelcalc.intake.formula import Formula
from labelcalc.intake.quantities import parse_quantity
from labelcalc.labelling.model import Assessment, Declaration
from labelcalc.labelling.rulepack import StatedServingCheck


@dataclass
class Check:
    name: str
    ok: bool
    detail: str
    review: bool = False  # passed as far as a program can tell; a person must still judge it (detail says what)

    @property
    def result(self) -> str:
        """The check's result in words: "ok", "review" or "FAILED"."""
        return "FAILED" if not self.ok else "review" if self.review else "ok"


STATED_SERVING = "stated serving and reference amount"


def _unit_kind_problem(f: Formula, rule: StatedServingCheck) -> str | None:
    """Words of the failure when a one-serving package's serving is not stated in the net quantity's kind of unit
    (mass or volume), where the pack asks for it (``single_serving_same_unit``); None otherwise."""
    if not rule.single_serving_same_unit or not f.header.serving or not f.header.net_quantity:
        return None
    kinds = ("mass", "volume")
    serving = parse_quantity(f.header.serving.size, allowed=kinds)
    net = parse_quantity(f.header.net_quantity, allowed=kinds)
    if serving.kind == net.kind:
        return None
    want = "grams" if net.kind == "mass" else "millilitres"
    return (
        f"the net quantity is shown by {'weight' if net.kind == 'mass' else 'volume'} ({net.text}), so the serving "
        f"is stated in {want}, not as '{serving.text}'. {rule.single_serving_same_unit.strip()}"
    )


def stated_serving_check(decl: Declaration) -> Check | None:
    """The formula's stated serving against the market's reference amount rules (None where the pack states no
    such rule or the product has no reference amount or stated serving).

    Below ``single_serving_below_percent`` of the reference amount the serving of stated size is the net quantity
    (a stated serving that differs fails); a package at or above it that is stated as one serving, or a
    multiple-serving package, is passed for review with the pack's words of the rule that then applies."""
    pack = decl.pack
    rule = pack.servings.stated_serving_check
    f = decl.composition.formula
    stated = f.serving_grams()
    if rule is None or decl.reference_amount is None or stated is None:
        return None
    category, ra_g, _ = decl.reference_amount
    net = f.net_grams()
    ra_text = f"the reference amount ({ra_g:g} g, category '{category}')"
    cite = f" [{rule.citation.strip()}]"
    if net is None:
        return Check(
            STATED_SERVING,
            True,
            f"no net quantity, so the package cannot be judged against {ra_text}: {rule.multi_serving.strip()}{cite}",
            review=True,
        )
    pct = net / ra_g * 100
    limit = pack.servings.single_serving_below_percent
    whole = abs(stated - net) <= 1e-9
    unit_problem = _unit_kind_problem(f, rule) if (whole or (limit is not None and pct < limit)) else None
    if limit is not None and pct < limit:
        if whole and unit_problem:
            return Check(STATED_SERVING, False, f"single-serving package: {unit_problem}{cite}")
        if whole:
            return Check(
                STATED_SERVING,
                True,
                f"single-serving package: {net:g} g is {pct:.0f} % of {ra_text}, below {limit:g} %, and the stated "
                f"serving is the net quantity{cite}",
            )
        return Check(
            STATED_SERVING,
            False,
            f"the package holds {net:g} g, {pct:.0f} % of {ra_text}, below {limit:g} %: the serving of stated size "
            f"must be the net quantity, {net:g} g, not the stated {stated:g} g. {rule.single_serving.strip()}{cite}",
        )
    if whole and unit_problem:
        return Check(STATED_SERVING, False, f"the stated serving is the whole package: {unit_problem}{cite}")
    if whole:
        return Check(
            STATED_SERVING,
            True,
            f"the stated serving is the whole package ({net:g} g, {pct:.0f} % of {ra_text}): "
            f"{(rule.whole_package_above_limit or rule.multi_serving).strip()}{cite}",
            review=True,
        )
    return Check(
        STATED_SERVING,
        True,
        f"multiple-serving package ({net:g} g, {pct:.0f} % of {ra_text}); the stated serving of {stated:g} g "
        f"({stated / ra_g * 100:.0f} % of the reference amount) must follow: {rule.multi_serving.strip()}{cite}",
        review=True,
    )


def _half_step(decl: Declaration, nutrient: str, basis: str) -> float:
    row = next(r for r in decl.pack.rows if r.nutrient == nutrient)
    dr = next(r for r in decl.rows if r.nutrient == nutrient).declared[basis]
    rule = decl.pack.rounding[row.rounding]
    band = rule.bands[dr.band]
    if band.step:
        return band.step / 2
    if band.declare is not None:
        bound = band.below if band.below is not None else band.up_to
        return float(bound or 0)
    if dr.number is not None and dr.number != 0:  # half a unit in the last significant place
        exp = dr.number.adjusted() - band.significant_figures + 1
        return max(10.0**exp, band.min_step or 0.0) / 2
    return 0.0


def _energy_check(decl: Declaration, basis: str) -> list[Check]:
    out = []
    pack = decl.pack
    comp = decl.composition
    fs = decl.declared_energy.factor_set
    kj_v, kcal_v = energy_vectors(fs)
    law_vals, _ = energy_inputs(comp.per_100g[None, :], comp.unknown[None, :], fs)  # as the law reads them
    vals = np.nan_to_num(law_vals[0])
    energy_rows = {pack.nutrients[r.nutrient].energy: r for r in decl.shown_rows if pack.nutrients[r.nutrient].energy}
    top = [r for r in decl.shown_rows if r.indent == 0 and not pack.nutrients[r.nutrient].energy and r.unit == "g"]
    for unit, er in energy_rows.items():
        vec = kcal_v if unit == "kcal" else kj_v
        d = er.declared.get(basis)
        if d is None or d.number is None:
            continue
        recomputed = 0.0
        tol = _half_step(decl, er.nutrient, basis)
        covered = np.zeros(len(vals), dtype=bool)
        for r in top:
            nd = pack.nutrients[r.nutrient]
            comps = [c for k in (nd.sum or {}) for c in _expand(k)]
            if fs.factor_set.protein_from_nitrogen:  # protein defined from nitrogen carries the protein energy
                comps = ["protein" if c == "nitrogen" else c for c in comps]
            cols = [COL[c] for c in comps if c in COL]
            grams = r.value_per_100g or 0.0
            if grams <= 0:
                continue
            factor = float(np.dot(vals[cols], vec[cols])) / grams
            covered[cols] = True
            dv = r.declared.get(basis)
            if dv is None:
                continue
            amount = float(dv.number) if dv.number is not None else r.unrounded.get(basis) or 0.0
            recomputed += amount * factor
            tol += _half_step(decl, r.nutrient, basis) * factor
        scale = {
            "per_100g": 1.0,
            "per_serving": (decl.serving_g or 0) / 100,
            "per_container": (decl.container_g or 0) / 100,
        }[basis]
        rest = float(np.dot(np.where(covered, 0.0, vals), vec)) * scale
        if decl.declared_energy.factor_set.factor_set.ingredient_specific:
            rest = 0.0
            tol += 0.05 * float(d.number)
        recomputed += rest
        ok = abs(float(d.number) - recomputed) <= tol + 1e-6
        out.append(
            Check(
                f"energy ({unit}, {basis.replace('_', ' ')})",
                ok,
                f"declared {d.text} {unit}; from the declared amounts {recomputed:.0f} {unit} "
                f"(rounding allows ±{tol:.0f})",
            )
        )
        # the printed figure must be the rounding of the factor-set energy
        un = er.unrounded.get(basis)
        if un is not None:
            ok2 = abs(float(d.number) - un) <= _half_step(decl, er.nutrient, basis) + 1e-6
            out.append(
                Check(
                    f"{unit} from the market's factors ({basis.replace('_', ' ')})",
                    ok2,
                    f"{decl.declared_energy.factor_set.id}: {un:.1f} {unit} unrounded, printed {d.text}",
                )
            )
    return out


def _expand(key: str) -> list[str]:
    from labelcalc import components as C

    return list(C.DERIVED.get(key, (key,)))


def _subrow_checks(decl: Declaration, basis: str) -> list[Check]:
    out = []
    stack: list = []
    for r in decl.shown_rows:
        while stack and stack[-1].indent >= r.indent:
            stack.pop()
        parent = stack[-1] if stack else None
        if parent is not None and r.indent > 0 and parent.unit == r.unit:
            a, b = r.declared.get(basis), parent.declared.get(basis)
            if a is not None and b is not None and a.number is not None and b.number is not None:
                label = r.label.replace("{amount}", "").replace("Includes", "").strip()
                out.append(
                    Check(
                        f"{label} within {parent.label} ({basis.replace('_', ' ')})",
                        a.number <= b.number,
                        f"{a.text} {r.unit} vs {b.text} {parent.unit}",
                    )
                )
        stack.append(r)
    return out


def run_checks(a: Assessment) -> list[Check]:
    d = a.declaration
    checks: list[Check] = []
    for basis in d.columns:
        checks += _energy_check(d, basis)
        checks += _subrow_checks(d, basis)
    h = d.composition.formula.content_hash
    checks.append(Check("formula content hash", bool(h), f"panel drawn from formula hash {h}"))
    serving = stated_serving_check(d)
    if serving is not None:
        checks.append(serving)
    return checks
