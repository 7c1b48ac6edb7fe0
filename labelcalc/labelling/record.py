"""The label record: one product x market x scenario, read by every output.

:func:`label_record` takes row ``i`` of a :class:`~labelcalc.labelling.engine.LabelEngine` and
assembles what the outputs need: the declaration (columns, rounded rows, percentages, which rows
show and why), the assessment (claims with the conditions that fail, statements with their
triggers, allergens, ingredient list, front of pack, reviews) and, on request, the trace of every
figure to its leaf ingredients (:mod:`labelcalc.labelling.trace`).  This module explains the
engine's figures in words; it computes no rule of its own.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from labelcalc import components as C
from labelcalc.formulation.composition import COL, Composition
from labelcalc.formulation.energy import ENERGY_GROUPS, EnergyResult
from labelcalc.labelling import claims_table as CT
from labelcalc.labelling import engine as E
from labelcalc.labelling import statement_table as ST
from labelcalc.labelling.checks import Check, run_checks, stated_serving_check
from labelcalc.labelling.ingredients import ingredient_list
from labelcalc.labelling.model import (
    CANNOT_TELL,
    ELIGIBLE,
    NOT_ELIGIBLE,
    Assessment,
    ClaimVerdict,
    Declaration,
    DeclaredRow,
    Figure,
    StatementFlag,
)
from labelcalc.labelling.plan import servings_text
from labelcalc.labelling.rounding import format_number, to_decimal
from labelcalc.labelling.rulepack import RulePack
from labelcalc.labelling.tables_base import EngineTables
from labelcalc.labelling.trace import trace_of

VERDICT_TEXT = {
    CT.VERDICT_ELIGIBLE: ELIGIBLE,
    CT.VERDICT_NOT_ELIGIBLE: NOT_ELIGIBLE,
    CT.VERDICT_CANNOT_TELL: CANNOT_TELL,
}


@dataclass
class LabelRecord:
    """Everything one label needs, for one product x market x scenario (see the module docstring)."""

    engine: E.LabelEngine = field(repr=False)
    index: int
    declaration: Declaration
    with_ingredient_list: bool = True

    @cached_property
    def assessment(self) -> Assessment:
        """Claims, statements, allergens, ingredient list, front of pack and reviews (built on first use)."""
        return assessment_of(self)

    @cached_property
    def checks(self) -> list[Check]:
        """The consistency checks every panel passes before it is written (:mod:`checks`)."""
        return run_checks(self.assessment)

    @cached_property
    def trace(self) -> dict:
        """How every shown figure was reached, down to the leaf ingredients (built on first use)."""
        return trace_of(self.declaration)


def _f(v) -> float | None:
    return None if v is None or np.isnan(v) else float(v)


def _fmt(v: float) -> str:
    return format_number(to_decimal(round(v, 3)))


# ------------------------------------------------------------------ declaration
def _unknown_inputs(comp: Composition, pack: RulePack, key: str, energy: EnergyResult) -> list[str]:
    """The ingredients (and, for energy, the components) whose unknown values make ``key`` unknown."""
    nd = pack.nutrients[key]
    if nd.energy:
        v = energy.kcal if nd.energy == "kcal" else energy.kj
        if v is not None:
            return []
        fs = energy.factor_set.factor_set
        parts = [c for g in energy.unknown_because for c in ENERGY_GROUPS.get(g, ()) if c in COL]
        if fs.protein_from_nitrogen:  # the law's protein is nitrogen x its factor
            parts = ["nitrogen" if c == "protein" else c for c in parts]
        found = sorted({f"{i} ({c})" for c in parts for i in comp.unknown_inputs(c)})
        return found or ["energy: " + ", ".join(energy.unknown_because)]
    unknown: list[str] = []
    for comp_key in nd.sum or {}:
        if comp.value(comp_key) is None:
            unknown += comp.unknown_inputs(comp_key) or [comp_key]
    return sorted(set(unknown))


def _needs_nitrogen(pack: RulePack, key: str, energy: EnergyResult) -> bool:
    """The row is built from nitrogen (protein as N x 6.25, or energy from that protein)."""
    nd = pack.nutrients[key]
    if nd.energy:
        return bool(energy.factor_set.factor_set.protein_from_nitrogen) and "protein" in energy.unknown_because
    return "nitrogen" in (nd.sum or {})


def _why(eng: E.LabelEngine, row, i: int) -> str:
    if row.requirement == "mandatory":
        return "mandatory"
    for t, hit in zip(row.when, eng.trigger_hits[row.nutrient]):
        if not hit[i]:
            continue
        reasons = []
        if t.claim_about is not None:
            reasons.append(f"a claim about '{t.claim_about}' is made")
        if t.added_source is not None:
            reasons.append(f"an ingredient of kind '{t.added_source}' brings it")
        if t.claim is not None:
            reasons.append(f"a claim about '{t.claim}' is made")
        if t.present:
            reasons.append("present")
        if t.added is not None:
            reasons.append(f"an ingredient of kind '{t.added}' is added")
        if t.at_least_per_100g is not None:
            reasons.append(f"at least {format_number(to_decimal(t.at_least_per_100g))} per 100 g")
        if t.at_least_percent_reference is not None:
            basis = {"per_100g": "per 100 g", "per_100ml": "per 100 ml", "per_container_if_single": "per package"}
            reasons.append(
                f"at least {t.at_least_percent_reference:g} % of the reference value {basis[t.reference_basis]}"
            )
        return "required: " + " and ".join(reasons)
    if row.requirement == "voluntary":
        if row.show == "always":
            return "voluntary (shown by default)"
        if row.show == "when_present" and eng.present[row.nutrient][i]:
            return "voluntary, shown because present"
        return "voluntary, not shown"
    return "conditional, not triggered"


def declaration_of(eng: E.LabelEngine, i: int) -> Declaration:
    """The declaration of product ``i`` of ``eng``."""
    comp, pack, plan = eng.comps[i], eng.pack, eng.plans[i]
    f = comp.formula
    energy = eng.declared_energy(i)
    available = eng.available.result(i)
    values = {k: (_f(eng.val[k][i]), _unknown_inputs(comp, pack, k, energy)) for k in pack.nutrients}
    rows: list[DeclaredRow] = []
    for row in pack.rows:
        nd = pack.nutrients[row.nutrient]
        rule = pack.rounding[row.rounding]
        unrounded = {b: _f(eng.column_values(row.nutrient, b)[i]) for b in plan.columns}
        declared = {b: None if unrounded[b] is None else eng.rounded[row.nutrient][b].rounded(i) for b in plan.columns}
        percent: dict[str, str | None] = {}
        pct_raw: dict[str, float | None] = {}
        if row.percent:
            for b in plan.columns:
                texts, raw = eng.percent[row.nutrient][b]
                percent[b], pct_raw[b] = texts[i], _f(raw[i])
        src = [row.citation, nd.citation, rule.citation]
        if row.percent:
            src.append(pack.reference_values[row.percent].citation)
        rows.append(
            DeclaredRow(
                row.nutrient,
                row.label,
                nd.unit,
                row.requirement,
                bool(eng.shown[row.nutrient][i]),
                _why(eng, row, i),
                row.indent,
                row.bold,
                row.show_unit,
                unrounded,
                declared,
                percent,
                pct_raw,
                list(dict.fromkeys(src)),
                values[row.nutrient][1],
                values[row.nutrient][0],
                row.percent_only,
                pack.panel.unit_labels.get(nd.unit),
            )
        )
    notes = list(plan.notes)
    for r in rows:
        if r.shown and any(d is None for d in r.declared.values()):
            notes.append(
                f"{r.label}: unknown because of unknown values in {', '.join(r.unknown_inputs) or 'an input'}."
                + (
                    " This market declares protein as total nitrogen x 6.25: give 'nitrogen' [g/100 g] or the "
                    "'nitrogen_factor' used for 'protein' in those library entries."
                    if _needs_nitrogen(pack, r.nutrient, energy)
                    else ""
                )
            )
    if f.is_fried:
        notes.append(
            "Fried product: oil uptake and moisture loss are estimates; laboratory analysis of fat and moisture "
            "is the usual confirmation before a label is finalised."
        )
    if (
        energy.kcal is not None
        and available.kcal is not None
        and (bool(energy.reviews) or abs(energy.kcal - available.kcal) > 0.02 * max(available.kcal, 1.0))
    ):
        notes.append(
            f"Declared energy ({energy.kcal:.0f} kcal/100 g under {energy.factor_set.id}) differs from available "
            f"energy ({available.kcal:.0f} kcal/100 g): see the review notes."
        )
    decl = Declaration(
        pack.market,
        pack,
        comp,
        plan.columns,
        plan.serving,
        plan.container,
        servings_text(comp, pack, plan),
        plan.single,
        plan.dual,
        plan.ref,
        rows,
        energy,
        available,
        list(dict.fromkeys(notes)),
        list(dict.fromkeys(energy.reviews)),
        values,
    )
    for flag, text in pack.panel.audience_reviews.items():
        if getattr(f.header, flag):
            decl.reviews.append(text.strip())
    serving_check = stated_serving_check(decl)  # the record's check, also a review every output prints
    if serving_check is not None and (not serving_check.ok or serving_check.review):
        decl.reviews.append(f"Stated serving ({serving_check.result}): {serving_check.detail}")
    return decl


# ------------------------------------------------------------------ claims
def _missing_text(eng: EngineTables, q: str, code: int, i: int) -> str:
    if code == CT.MISS_VALUE:
        comp = eng.comps[i]
        energy = eng.declared_energy(i)
        return f"{q} is unknown ({', '.join(_unknown_inputs(comp, eng.pack, q, energy))})"
    return {
        CT.MISS_DENSITY: "density_g_per_ml is needed for per 100 ml",
        CT.MISS_SERVING: "no serving size",
        CT.MISS_REF_AMOUNT: "no reference amount for the product category",
        CT.MISS_ENERGY: "energy is unknown",
        CT.MISS_ENERGY_ZERO: "energy is zero",
        CT.MISS_NO_REFERENCE: "no reference formula (product.reference_formula) to compare with",
        CT.MISS_REFERENCE_ZERO: "the reference formula has none of it: a percentage change is undefined",
    }.get(code, "missing")


def _condition(eng: E.LabelEngine, cr: CT.CondResult, i: int) -> tuple[bool | None, Figure, str]:
    """(holds / None when it cannot be tested, the figure, a description) of one condition for product i."""
    cond, fig = cr.cond, cr.figure
    q = cond.quantity
    own_unit = eng.pack.nutrients[q].unit
    if cr.na[i]:
        return True, Figure(q, fig.basis[i], None, own_unit), "not applicable (reference amount above 30 g)"
    own = _f(fig.value[i])
    if cr.missing[i]:
        code = int(cr.miss[i])
        if code == CT.MISS_REFERENCE_FIGURE:
            ref = eng.reference_engine
            rows = eng.reference_rows
            text = "reference formula: " + (
                _missing_text(ref, q, int(cr.reference_miss[i]), int(rows[i])) if ref is not None else "missing"
            )
        else:
            text = _missing_text(eng, q, code, i)
        basis = fig.basis[i] if fig.miss[i] in (CT.MISS_NONE, CT.MISS_DENSITY) else cond.basis
        return (
            None,
            Figure(q, basis, own, fig.unit if own is not None else own_unit, text if own is None else None),
            text,
        )
    value = float(cr.value[i])
    unit = cr.unit
    shown = Figure(q, fig.basis[i], own, fig.unit)
    if cond.versus_reference:
        shown = Figure(f"{q} {cond.versus_reference.replace('_', ' ')}", fig.basis[i], value, unit)
    ok = bool(cr.holds[i])
    desc = (
        f"{shown.quantity} {shown.basis.replace('_', ' ')} = {_fmt(value)} {unit} "
        f"(limit {cond.op} {format_number(to_decimal(cond.value))} {unit})"
    )
    if not ok:
        desc += f", off by {_fmt(abs(value - cond.value))} {unit}"
    return ok, shown, desc


def claim_verdicts(eng: E.LabelEngine, i: int) -> list[ClaimVerdict]:
    f = eng.comps[i].formula
    listed = {CT.claim_key(c) for c in f.header.claims}
    eligible = set(eng.eligible(i))
    out = []
    for cr in eng.claims:
        cl = cr.claim
        if not cr.applies[i]:
            out.append(
                ClaimVerdict(
                    cl.id,
                    cl.label,
                    NOT_ELIGIBLE,
                    [f"applies to {cl.applies_to} foods only"],
                    [],
                    [],
                    [],
                    cl.citation,
                    cl.confidence,
                )
            )
            continue
        failed, missing, figures, notes = [], [], [], []
        for c in cr.conditions:
            ok, fig, desc = _condition(eng, c, i)
            figures.append(fig)
            if ok is None:
                missing.append(desc)
            elif not ok:
                failed.append(desc)
        if cr.alternatives:
            groups = [[_condition(eng, c, i) for c in g] for g in cr.alternatives]
            figures += [r[1] for g in groups for r in g]
            if not any(all(r[0] for r in g) for g in groups):
                if any(any(r[0] is None for r in g) and not any(r[0] is False for r in g) for g in groups):
                    missing.append(
                        "an alternative cannot be tested: " + "; ".join(r[2] for g in groups for r in g if r[0] is None)
                    )
                else:
                    failed.append(
                        "no alternative holds: " + " | ".join("; ".join(r[2] for r in g if not r[0]) for g in groups)
                    )
        if cr.flagged.get(i):
            notes.append(
                f"uses {', '.join(cr.flagged.get(i, []))} ({'/'.join(cl.no_ingredient_kinds)}): allowed only as the claim's "
                "rule permits (e.g. a footnote in the ingredient list) — review"
            )
        if cr.banned.get(i):
            failed.append(
                f"an ingredient of kind {'/'.join(cl.fails_with_ingredient_kinds)} is added: "
                + ", ".join(cr.banned.get(i, []))
            )
        if cr.reference_qualifies[i]:
            failed.append(f"the reference food itself qualifies for '{cl.reference_must_not_qualify}'")
        ref = eng.reference_of(i)
        if cl.kind == "comparative" and ref is not None:
            notes.append(
                f"compared with {ref.formula.header.name} ({ref.formula.id}); the label must identify the reference "
                "food and state the difference"
            )
        verdict = VERDICT_TEXT[int(cr.verdict[i])]
        texts = [t.text for t in cl.texts if not set(t.unless_eligible) & eligible] if verdict == ELIGIBLE else []
        out.append(
            ClaimVerdict(
                cl.id,
                cl.label,
                verdict,
                failed,
                missing,
                figures,
                texts,
                cl.citation,
                cl.confidence,
                notes,
                cl.id in listed,
            )
        )
    by_id = {c.id for c in eng.pack.claims}
    for name in f.header.claims:
        if CT.claim_key(name) not in by_id:
            out.append(
                ClaimVerdict(
                    name,
                    name,
                    CANNOT_TELL,
                    [],
                    [f"the '{eng.pack.market}' pack defines no claim '{name}'"],
                    [],
                    [],
                    "-",
                    "derived",
                    intended=True,
                )
            )
    return out


# ------------------------------------------------------------------ statements
def _what(t) -> str:
    return "+".join(t.components) + (f" from {'/'.join(t.from_kinds)} ingredients" if t.from_kinds else "")


def _trigger_words(eng: E.LabelEngine, st, tr: ST.TriggerResult, i: int, claims: list[ClaimVerdict]):
    """(reason, figures) of a trigger that holds for product i."""
    t = tr.trigger
    if tr.parts is not None:
        words = [_trigger_words(eng, st, p, i, claims) for p in tr.parts]
        return " and ".join(w[0] for w in words), [x for w in words for x in w[1]]
    if t.header_flag:
        return f"the formula says {t.header_flag.replace('_', ' ')}", []
    if t.substance and tr.hits is not None:
        return f"contains {t.substance} ({', '.join(tr.hits.get(i, []))})", []
    if t.kind and tr.hits is not None:
        return f"contains an ingredient of kind '{t.kind}' ({', '.join(tr.hits.get(i, []))})", []
    if t.components and tr.value is not None:
        v = float(tr.value[i])
        unit = C.unit_of(t.components[0])
        basis = t.basis.replace("_", " ")
        what = _what(t)
        figures = [f"{what} = {_fmt(v)} {unit} {basis}"]
        if t.at_least is not None:
            reason = f"{what} {_fmt(v)} {unit} {basis} is at least {t.at_least:g}"
        elif t.above is not None:
            reason = f"{what} {_fmt(v)} {unit} {basis} is above {t.above:g}"
        else:
            reason = f"{what} present ({_fmt(v)} {unit} {basis})"
        s = eng.serving[i]
        if st.daily_intake_g and v > 0:
            per_serv = v if t.basis == "per_serving" else (v * s / 100 if not np.isnan(s) else None)
            if per_serv:
                figures.append(
                    f"{st.daily_intake_g:g} g a day is reached with about {st.daily_intake_g / per_serv:.1f} servings"
                    " — judge whether that consumption is reasonably foreseeable"
                )
        return reason, figures
    intended = [c for c in claims if c.intended]
    made = intended or [c for c in claims if c.verdict == ELIGIBLE]
    hits = []
    for c in tr.conditions or []:
        ok, fig, desc = _condition(eng, c, i)
        if ok and fig.value is not None:
            hits.append(desc)
    reason = (
        ("a claim is made (" if intended else "if any claim is made — eligible: ")
        + ", ".join(c.claim for c in made)
        + (")" if intended else "")
        + (": " + "; ".join(hits) if hits else "")
    )
    return reason, hits


def _undecided_words(eng: E.LabelEngine, tr: ST.TriggerResult, i: int) -> list[str]:
    if tr.parts is not None:
        return [w for p in tr.parts if p.undecided[i] for w in _undecided_words(eng, p, i)]
    t = tr.trigger
    base_known = tr.base_unknown is not None and not tr.base_unknown[i]
    if t.basis == "per_serving" and np.isnan(eng.serving[i]) and base_known:
        return [f"{_what(t)} per serving: no serving size"]
    if t.basis == "per_100ml" and np.isnan(eng.density[i]) and base_known:
        return [f"{_what(t)} per 100 ml: density_g_per_ml is needed"]
    return [f"{_what(t)} is unknown"]


def statement_flags(eng: E.LabelEngine, i: int, claims: list[ClaimVerdict]) -> list[StatementFlag]:
    out = []
    comp = eng.comps[i]
    for st, triggers in eng.statements:
        undecided: list[str] = []
        flag = None
        for tr in triggers:
            if tr.hit[i]:
                reason, figures = _trigger_words(eng, st, tr, i, claims)
                # owed only because some claim *could* be made: conditional, not required
                conditional = tr.trigger.with_claim and st.status == "required" and not any(c.intended for c in claims)
                flag = StatementFlag(
                    st.id,
                    st.text,
                    reason,
                    figures,
                    st.citation,
                    st.confidence,
                    st.caution,
                    st.placement,
                    "if a claim is made" if conditional else st.status,
                )
                if st.compensation:
                    _compensation(st, comp, eng.serving[i], flag)
                break
            if tr.undecided[i]:
                undecided += _undecided_words(eng, tr, i)
        if flag is None and undecided:
            flag = StatementFlag(
                st.id,
                st.text,
                "cannot tell: " + "; ".join(undecided) + " — flagged for review",
                [],
                st.citation,
                st.confidence,
                st.caution,
                st.placement,
                status="review",
            )
        if flag is not None:
            out.append(flag)
    return out


def _compensation(st, comp: Composition, serving: float, flag: StatementFlag) -> None:
    c = st.compensation
    base = comp.value(c.per_gram_of)
    if base is None:
        flag.figures.append(f"{c.per_gram_of} unknown: compensation cannot be computed — review")
        flag.status = "review"
        return
    s = None if np.isnan(serving) else float(serving)
    flag.figures.append(
        f"{c.per_gram_of}: {_fmt(base)} g per 100 g" + (f", {_fmt(base * s / 100)} g per serving" if s else "")
    )
    short = False
    for k, per_g in c.required.items():
        need = base * per_g
        have = ST.leaf_sum(comp, [k], c.from_kinds)
        unit = C.unit_of(k)
        if have is None:
            flag.figures.append(f"{k}: required {_fmt(need)} {unit}/100 g; added amount unknown — review")
            short = True
            continue
        ok = bool(CT.compare(np.array([have]), ">=", need * 0.999999)[0])
        flag.figures.append(
            f"{k}: required {_fmt(need)} {unit}/100 g, added {_fmt(have)} {unit}/100 g"
            + ("" if ok else f" — SHORT by {_fmt(need - have)} {unit}/100 g")
        )
        short = short or not ok
    if short:
        flag.status = "review"
        flag.trigger += "; the required additions are NOT all met"


# ------------------------------------------------------------------ front of pack, reviews
def front_of_pack(eng: E.LabelEngine, i: int) -> list[dict]:
    out = []
    for entry in eng.front_of_pack:
        fop = entry["fop"]
        if entry["exempt"][i]:
            out.append({"scheme": fop.id, "name": fop.name, "exempt": True, "verdicts": {}, "citation": fop.citation})
            continue
        verdicts: dict[str, dict] = {}
        if fop.kind == "colour_bands":
            liquid = bool(eng.liquid[i]) and fop.liquid_nutrients is not None
            for k in (fop.liquid_nutrients if liquid else fop.nutrients) or {}:
                a = entry["nutrients"][k]
                if a["no_density"][i] and not np.isnan(eng.val[k][i]):
                    verdicts[k] = {
                        "colour": "cannot tell",
                        "per_100g": None,
                        "why": "a drink needs density_g_per_ml for per 100 ml",
                    }
                    continue
                code = int(a["code"][i])
                if code < 0:
                    verdicts[k] = {"colour": "cannot tell", "per_100g": None}
                    continue
                b = a["bands"][i]
                v = {
                    "colour": ("green (low)", "amber (medium)", "red (high)")[code],
                    "per_100g": float(a["value"][i]),
                    "unit": b.unit,
                }
                if not np.isnan(a["portion"][i]):
                    v["per_portion"] = float(a["portion"][i])
                    if a["portion_red"][i]:
                        v["why"] = (
                            f"per portion {_fmt(v['per_portion'])} {b.unit} is above {b.portion_high_above:g} {b.unit}"
                        )
                verdicts[k] = v
            out.append(
                {
                    "scheme": fop.id,
                    "name": fop.name,
                    "exempt": False,
                    "verdicts": verdicts,
                    "citation": fop.citation,
                    "confidence": fop.confidence,
                }
            )
            continue
        basis_g = entry["basis_g"][i]
        if np.isnan(basis_g):
            out.append(
                {
                    "scheme": fop.id,
                    "name": fop.name,
                    "verdicts": {},
                    "missing": "no serving and no reference amount",
                    "citation": fop.citation,
                }
            )
            continue
        threshold = _f(entry["threshold"][i])
        audience = fop.audiences[int(entry["audience"][i])] if entry["audience"][i] >= 0 else None
        for k, a in entry["nutrients"].items():
            if a["unknown"][i]:
                verdicts[k] = {"high_in": "cannot tell"}
                continue
            verdicts[k] = {
                "high_in": bool(a["high"][i]),
                "percent_dv": float(a["percent"][i]),
                "threshold_percent": threshold,
                "basis_g": float(basis_g),
            }
        item = {
            "scheme": fop.id,
            "name": fop.name,
            "exempt": False,
            "verdicts": verdicts,
            "symbol_required": any(x.get("high_in") is True for x in verdicts.values()),
            "citation": fop.citation,
            "confidence": fop.confidence,
        }
        if audience is not None:  # the values for the audience the formula header names
            item["audience"] = {
                "header_flag": audience.header_flag,
                "name": audience.name,
                "reference_values": dict(audience.high_in),
                "citation": audience.citation,
                "confidence": audience.confidence,
            }
        out.append(item)
    return out


def zero_row_reviews(eng: E.LabelEngine, decl: Declaration, i: int) -> list[str]:
    out = []
    n = decl.container_g / decl.serving_g if decl.serving_g and decl.container_g else None
    for r in decl.shown_rows:
        flags = eng.zero_rows.get(r.nutrient)
        if flags is None or not flags[i]:
            continue
        v = r.unrounded["per_serving"] or 0.0
        out.append(
            f"{r.label} is declared 0 per serving but is {_fmt(v)} {r.unit} unrounded"
            + (f" ({_fmt(v * n)} {r.unit} in the whole container)" if n else "")
            + " — review whether the zero misleads (several servings may be eaten at once)"
        )
    return out


# ------------------------------------------------------------------ the record
def assessment_of(rec: LabelRecord) -> Assessment:
    eng, i, decl = rec.engine, rec.index, rec.declaration
    comp = eng.comps[i]
    claims = claim_verdicts(eng, i)
    statements = statement_flags(eng, i, claims)
    allergens = eng.allergens(i)
    ilist = ingredient_list(comp, eng.pack) if rec.with_ingredient_list else None
    reviews = zero_row_reviews(eng, decl, i) + allergens.get("review", [])
    return Assessment(eng.pack.market, decl, claims, statements, allergens, ilist, front_of_pack(eng, i), reviews)


def label_record(eng: E.LabelEngine, i: int, *, with_ingredient_list: bool = True) -> LabelRecord:
    """The label record of product ``i`` of ``eng``."""
    rec = LabelRecord(eng, i, declaration_of(eng, i), with_ingredient_list)
    rec.declaration.record = rec
    return rec


def label_one(
    comp: Composition,
    pack: RulePack,
    reference: Composition | None = None,
    *,
    rules_root: str | None = None,
    with_ingredient_list: bool = True,
) -> LabelRecord:
    """The label record of one composition under one pack (the engine with a range of one); raises the
    product's error when the pack cannot label it."""
    eng = E.LabelEngine(pack, [comp], [reference], rules_root=rules_root)
    E.require_labelled(eng)
    return label_record(eng, 0, with_ingredient_list=with_ingredient_list)
