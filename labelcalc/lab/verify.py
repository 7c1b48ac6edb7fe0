"""Lab results against the label: each declared figure under the market's compliance rule.

Rules come from the pack's ``compliance`` section (e.g. the US classes of
21 CFR 101.9(g), the EU tolerance bands of the Commission's December 2012
guidance).  Verdict per row: within, outside, or too close to a limit (by a
margin the user sets), with the allowed range, the direction of risk and
the citation.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from labelcalc import components as C
from labelcalc.errors import InputError, Problem
from labelcalc.formulation.composition import Composition
from labelcalc.lab.certificates import ANALYTES, LabFile, Result
from labelcalc.labelling.model import Declaration
from labelcalc.labelling.rounding import apply_rounding, format_number, plain_label, to_decimal
from labelcalc.labelling.rulepack_assess import ComplianceRule

WITHIN, OUTSIDE, CLOSE, NOT_JUDGED = "within", "outside", "too close to the limit", "not judged"


@dataclass
class RowVerdict:
    nutrient: str
    label: str
    unit: str
    basis: str
    declared: str
    declared_value: float | None
    analysed: float | None
    allowed: tuple[float | None, float | None]
    verdict: str
    risk: str
    rule: str
    citation: str
    notes: list[str] = field(default_factory=list)
    revised: str | None = None


@dataclass
class VerifyReport:
    market: str
    product_id: str
    rows: list[RowVerdict]
    not_declared: list[str]
    summary: str


def _components(pack, nutrient: str) -> tuple[set[str], float | None]:
    nd = pack.nutrients[nutrient]
    keys: set[str] = set()
    factors = set()
    for k, fac in (nd.sum or {}).items():
        keys |= set(C.DERIVED.get(k, (k,)))
        factors.add(fac)
    return keys, (factors.pop() if len(factors) == 1 else None)


def _match(pack, nutrient: str, lab: LabFile, comp: Composition) -> tuple[Result | None, float | None, str | None]:
    """The lab result that measures this nutrient, the factor that converts it, or a note why it cannot.

    A result matches when it measures the same components as the declared nutrient, or differs from it
    only by components this product does not contain (e.g. total fat vs fat when no non-absorbed lipid)."""
    nd = pack.nutrients[nutrient]
    if nd.energy:
        return lab.result("energy_kcal" if nd.energy == "kcal" else "energy_kj"), 1.0, None
    keys, factor = _components(pack, nutrient)
    if factor is None:
        return None, None, None
    for r in lab.results:
        comps, _, afactor = ANALYTES[r.analyte]
        comps = set(comps)
        if not comps or not comps & keys:
            continue
        present = lambda ks: {k for k in ks if (comp.value(k) or 0) > 0}  # noqa: E731
        if present(keys - comps):
            continue  # the lab measured only part of the declared nutrient: not this result
        extra = present(comps - keys)
        if extra:
            return (
                None,
                None,
                (
                    f"the lab's {r.analyte} also measures {', '.join(sorted(extra))}, which the declared "
                    f"{nutrient} excludes for this product: not comparable — ask the lab for a specific method"
                ),
            )
        return r, factor / afactor, None
    return None, None, None


def _part_is_whole(comp: Composition, pairs: dict[str, str]) -> bool:
    """Every part component makes up the whole of its whole (to 1e-9 g per 100 g); unknown is not."""
    for part, whole in pairs.items():
        p, w = comp.value(part), comp.value(whole)
        if p is None or w is None or abs(w - p) > 1e-9:
            return False
    return True


def _whole_result(pairs: dict[str, str], lab: LabFile) -> tuple[Result | None, float | None]:
    """Where a rule holds because a part is the whole (all sugars added), the lab's result for the whole
    (sugars) measures the part (added sugars)."""
    wholes = set(pairs.values())
    for r in lab.results:
        comps, _, afactor = ANALYTES[r.analyte]
        if set(comps) == wholes:
            return r, 1.0 / afactor
    return None, None


def _rule_for(pack, nutrient: str, comp: Composition) -> ComplianceRule | None:
    if not pack.compliance:
        return None
    keys, _ = _components(pack, nutrient)
    added = False
    used = {i.id: i for i in comp.formula.ingredients_used()}
    for ing_id, g in comp.leaf_amounts().items():
        ing = used[ing_id]
        if "fortificant" in ing.kinds and g > 0 and any(ing.values.get(k, 0) > 0 for k in keys):
            added = True
    for rule in pack.compliance.rules:
        if nutrient not in rule.nutrients:
            continue
        if rule.applies_to == "added" and not added or rule.applies_to == "naturally_occurring" and added:
            continue
        if rule.only_if_all_of and not _part_is_whole(comp, rule.only_if_all_of):
            continue
        return rule
    return None


def _limits(rule: ComplianceRule, declared: float, declared_100g: float) -> tuple[float | None, float | None]:
    lo = hi = None
    if rule.min_percent_of_declared is not None:
        lo = declared * rule.min_percent_of_declared / 100
    if rule.max_percent_of_declared is not None:
        hi = declared * rule.max_percent_of_declared / 100
    for b in rule.bands:
        if b.below is not None and not to_decimal(declared_100g) < to_decimal(b.below):
            continue
        if b.minus is not None:
            lo = declared - b.minus
        if b.minus_percent is not None:
            lo = declared * (1 - b.minus_percent / 100)
        if b.plus is not None:
            hi = declared + b.plus
        if b.plus_percent is not None:
            hi = declared * (1 + b.plus_percent / 100)
        break
    return (None if lo is None else max(lo, 0.0)), hi


def _not_judged(r, analysed: float | None, why: str) -> RowVerdict:
    """A declared row the certificate or the pack gives no way to judge."""
    return RowVerdict(
        r.nutrient, plain_label(r.label), r.unit, "-", "", None, analysed, (None, None), NOT_JUDGED, "", "-", "-", [why]
    )


def verify(
    comp: Composition, decl: Declaration, lab: LabFile, *, margin_percent: float = 5.0, force: bool = False
) -> VerifyReport:
    pack = decl.pack
    f = comp.formula
    if lab.certificate.product_id != f.id and not force:
        raise InputError(
            Problem(
                f"the certificate is for product '{lab.certificate.product_id}', not '{f.id}'",
                field="certificate.product_id",
                fix="check the files, or pass --force to compare anyway",
            )
        )
    if not pack.compliance:
        raise InputError(Problem(f"the '{pack.market}' rule pack has no compliance rules"))
    rows: list[RowVerdict] = []
    used_results: set[str] = set()
    for r in decl.shown_rows:
        res, factor, note = _match(pack, r.nutrient, lab, comp)
        rule = _rule_for(pack, r.nutrient, comp)
        if res is None and rule is not None and rule.only_if_all_of:
            res, factor = _whole_result(rule.only_if_all_of, lab)
        if res is None:
            rows.append(_not_judged(r, None, note or "not analysed on this certificate"))
            continue
        used_results.add(res.analyte)
        if rule is None:
            rows.append(_not_judged(r, res.value, "no compliance rule in the pack covers this row"))
            continue
        basis = (
            rule.basis
            if rule.basis in r.declared
            else ("per_100g" if "per_100g" in r.declared else next(iter(r.declared)))
        )
        scale = {
            "per_100g": 1.0,
            "per_serving": (decl.serving_g or 0) / 100,
            "per_container": (decl.container_g or 0) / 100,
        }[basis]
        analysed = res.value * factor * scale
        d = r.declared.get(basis)
        notes: list[str] = []
        if rule.compare_with == "declared" and d is not None and d.number is not None:
            dv = float(d.number)
        else:
            dv = r.unrounded.get(basis)
            if d is not None and d.number is None:
                notes.append(f"declared as '{d.text}': compared with the unrounded value")
        if dv is None:
            rows.append(
                RowVerdict(
                    r.nutrient,
                    plain_label(r.label),
                    r.unit,
                    basis,
                    r.text(basis),
                    None,
                    analysed,
                    (None, None),
                    NOT_JUDGED,
                    "",
                    rule.id,
                    rule.citation,
                    ["declared value unknown"],
                )
            )
            continue
        d100 = dv / scale if scale else dv
        lo, hi = _limits(rule, dv, d100)
        u = res.absolute_uncertainty()
        if rule.uncertainty == "widens":
            if u is None:
                notes.append("no measurement uncertainty given: none is applied (the rule's default)")
            else:
                uu = u * factor * scale
                lo = None if lo is None else max(lo - uu, 0.0)
                hi = None if hi is None else hi + uu
                notes.append(f"widened by the lab's expanded uncertainty ±{_f(uu)} {r.unit}")
        else:
            notes.append(
                "the limits already allow for measurement uncertainty (rule)"
                + ("" if u is not None else "; no uncertainty given")
            )
        a = to_decimal(analysed)
        outside = (lo is not None and a < to_decimal(lo)) or (hi is not None and a > to_decimal(hi))
        margin = margin_percent / 100 * max(abs(dv), 1e-9)
        close = not outside and (
            (lo is not None and analysed - lo < margin) or (hi is not None and hi - analysed < margin)
        )
        verdict = OUTSIDE if outside else CLOSE if close else WITHIN
        risk = (
            "the label under-states it (analysed above declared)"
            if analysed > dv
            else "the label over-states it (analysed below declared)"
            if analysed < dv
            else "as declared"
        )
        revised = None
        if verdict != WITHIN:
            prow = next(x for x in pack.rows if x.nutrient == r.nutrient)
            rr = apply_rounding(analysed, pack.rounding[prow.rounding])
            revised = f"{rr.text} {r.unit}" if r.show_unit else rr.text
            if revised == r.text(basis):
                revised += " (rounds to the same figure: check the sampling, the method and the formula)"
        rows.append(
            RowVerdict(
                r.nutrient,
                plain_label(r.label),
                r.unit,
                basis,
                r.text(basis),
                dv,
                analysed,
                (lo, hi),
                verdict,
                risk,
                rule.id,
                rule.citation,
                notes + ([rule.note] if rule.note else []),
                revised,
            )
        )
    not_declared = [f"{x.analyte} {x.value:g} {x.unit}" for x in lab.results if x.analyte not in used_results]
    unchecked = [x.label for x in rows if x.verdict == NOT_JUDGED]
    bad = [x for x in rows if x.verdict == OUTSIDE]
    close = [x for x in rows if x.verdict == CLOSE]
    if bad:
        summary = (
            "The label does not stand: revise "
            + "; ".join(f"{x.label} ({x.declared} -> {x.revised})" for x in bad)
            + (". Close to a limit: " + ", ".join(x.label for x in close) if close else "")
            + "."
        )
    elif close:
        summary = (
            "The label stands, but these figures are close to a limit: "
            + ", ".join(f"{x.label} (would be {x.revised})" for x in close)
            + "."
        )
    else:
        summary = "The label stands: every analysed figure is within its compliance rule."
    if unchecked:
        summary += " Not checked (no comparable lab result): " + ", ".join(unchecked) + "."
    return VerifyReport(pack.market, f.id, rows, not_declared, summary)


def _f(v: float) -> str:
    return format_number(to_decimal(round(v, 3)))
