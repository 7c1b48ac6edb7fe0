"""Claims, required statements, allergens, the ingredient list and front-of-pack
verdicts for one composition under one market pack.

Claims are tested on unrounded figures.  Where a figure is missing (unknown
value, no reference amount, no reference formula) the verdict is "cannot
tell" with what is missing — never a confident answer built on a zero.
Where the work can hurt someone (allergens, laxative or phenylalanine
statements, missing fortification) the engine errs toward flagging.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from decimal import Decimal

from labelcalc.formulation import components as C
from labelcalc.formulation.composition import Composition, _fkey, _steps_of
from labelcalc.labelling.declare import Declaration, declare, nutrient_values
from labelcalc.labelling.rounding import format_number, to_decimal
from labelcalc.labelling.rulepack import RulePack
from labelcalc.labelling.rulepack_assess import Claim, Condition, FrontOfPack, Statement

ELIGIBLE, NOT_ELIGIBLE, CANNOT_TELL = "eligible", "not eligible", "cannot tell"
ALLERGEN_CAUTION = (
    "Allergen information is computed from ingredient data; confirm every supplier specification, "
    "sub-ingredient and cross-contact risk with a qualified regulatory professional."
)


@dataclass
class Figure:
    quantity: str
    basis: str
    value: float | None
    unit: str
    missing: str | None = None


@dataclass
class ClaimVerdict:
    claim: str
    label: str
    verdict: str
    failed: list[str]
    missing: list[str]
    figures: list[Figure]
    texts: list[str]
    citation: str
    confidence: str
    notes: list[str] = field(default_factory=list)
    intended: bool = False


@dataclass
class StatementFlag:
    statement: str
    text: str
    trigger: str
    figures: list[str]
    citation: str
    confidence: str
    caution: str | None
    placement: str | None
    status: str = "required"  # or "review"


@dataclass
class Assessment:
    market: str
    declaration: Declaration
    claims: list[ClaimVerdict]
    statements: list[StatementFlag]
    allergens: dict
    ingredient_list: dict | None
    front_of_pack: list[dict]
    reviews: list[str]


class _Context:
    """Unrounded figures of one composition under one pack, on every claim basis."""

    def __init__(self, comp: Composition, pack: RulePack, decl: Declaration):
        self.comp, self.pack, self.decl = comp, pack, decl
        self.values = decl.values or nutrient_values(comp, pack, decl.declared_energy)
        self.energy_key = next((k for k, n in pack.nutrients.items() if n.energy == "kcal"), None)
        ref = decl.reference_amount
        self.ref_g = ref[1] if ref else None
        ra = pack.servings.reference_amounts.get(ref[0]) if ref else None
        self.small = bool(ra and (ra.small if ra.small is not None else ra.amount_g <= 30))

    def unit(self, q: str) -> str:
        return self.pack.nutrients[q].unit

    def figure(self, q: str, basis: str, kcal_per_g: float | None = None) -> Figure:
        v100, unknown = self.values.get(q, (None, [q]))
        if v100 is None:
            return Figure(q, basis, None, self.unit(q), f"{q} is unknown ({', '.join(unknown)})")
        f = self.comp.formula
        if basis in ("per_100g", "per_100g_or_100ml"):
            if basis == "per_100g_or_100ml" and f.header.form == "liquid":
                if not f.header.density_g_per_ml:
                    return Figure(q, "per_100ml", None, self.unit(q), "density_g_per_ml is needed for per 100 ml")
                return Figure(q, "per_100ml", v100 * f.header.density_g_per_ml, self.unit(q))
            return Figure(q, "per_100g", v100, self.unit(q))
        if basis == "per_serving":
            s = self.decl.serving_g
            return Figure(
                q, basis, None if s is None else v100 * s / 100, self.unit(q), None if s else "no serving size"
            )
        if basis == "per_reference_amount":
            if self.ref_g is None:
                return Figure(q, basis, None, self.unit(q), "no reference amount for the product category")
            return Figure(q, basis, v100 * self.ref_g / 100, self.unit(q))
        if basis == "per_50g_if_small":
            if self.ref_g is None:
                return Figure(q, basis, None, self.unit(q), "no reference amount for the product category")
            return Figure(q, "per_50g", v100 / 2, self.unit(q))
        e = self.values.get(self.energy_key, (None, []))[0] if self.energy_key else None
        if e is None:
            return Figure(q, basis, None, self.unit(q), "energy is unknown")
        if e == 0:
            return Figure(q, basis, None, self.unit(q), "energy is zero")
        if basis == "per_100kcal":
            return Figure(q, basis, v100 / e * 100, self.unit(q))
        return Figure(q, basis, v100 * (kcal_per_g or 0) / e * 100, "% of energy")


def claim_key(name: str) -> str:
    """A claim as written in a formula ('low fat', 'Low_Fat') to a pack claim id ('low_fat')."""
    return "_".join(name.lower().replace("-", " ").split())


def _op(a: float, op: str, b: float) -> bool:
    """Compare a figure with a limit; exactly (in Decimal) when they are close enough for float noise to matter."""
    if abs(a - b) > 1e-6 * max(1.0, abs(b)):
        return {"<": a < b, "<=": a <= b, ">": a > b, ">=": a >= b}[op]
    x, y = to_decimal(a), to_decimal(b)
    return {"<": x < y, "<=": x <= y, ">": x > y, ">=": x >= y}[op]


def _check(
    cond: Condition, ctx: _Context, ref_ctx: _Context | None, describe: bool = True
) -> tuple[bool | None, Figure, str]:
    if cond.basis == "per_50g_if_small" and ctx.ref_g is not None and not ctx.small:
        return (
            True,
            Figure(cond.quantity, "per_50g", None, ctx.unit(cond.quantity), None),
            "not applicable (reference amount above 30 g)",
        )
    fig = ctx.figure(cond.quantity, cond.basis, cond.kcal_per_g)
    if fig.value is None:
        return None, fig, fig.missing or "missing"
    value = fig.value
    unit = fig.unit
    if cond.versus_reference:
        if ref_ctx is None:
            return None, fig, "no reference formula (product.reference_formula) to compare with"
        rf = ref_ctx.figure(cond.quantity, cond.basis, cond.kcal_per_g)
        if rf.value is None:
            return None, fig, f"reference formula: {rf.missing}"
        if cond.versus_reference == "reduction_absolute":
            value, unit = rf.value - fig.value, fig.unit
        elif rf.value == 0:
            return None, fig, "the reference formula has none of it: a percentage change is undefined"
        elif cond.versus_reference == "reduction_percent":
            value, unit = (rf.value - fig.value) / rf.value * 100, "%"
        else:
            value, unit = (fig.value - rf.value) / rf.value * 100, "%"
        fig = Figure(f"{cond.quantity} {cond.versus_reference.replace('_', ' ')}", fig.basis, value, unit)
    ok = _op(value, cond.op, cond.value)
    if ok and not describe:
        return ok, fig, ""
    desc = f"{fig.quantity} {fig.basis.replace('_', ' ')} = {_fmt(value)} {unit} (limit {cond.op} {format_number(to_decimal(cond.value))} {unit})"
    if not ok:
        desc += f", off by {_fmt(abs(value - cond.value))} {unit}"
    return ok, fig, desc


def _fmt(v: float) -> str:
    return format_number(to_decimal(round(v, 3)))


def evaluate_claim(
    claim: Claim, ctx: _Context, ref_ctx: _Context | None, *, ref_qualifies: bool | None = None
) -> ClaimVerdict:
    f = ctx.comp.formula
    failed, missing, figures, notes = [], [], [], []
    if claim.applies_to != "any" and claim.applies_to != f.header.form:
        return ClaimVerdict(
            claim.id,
            claim.label,
            NOT_ELIGIBLE,
            [f"applies to {claim.applies_to} foods only"],
            [],
            [],
            [],
            claim.citation,
            claim.confidence,
        )
    for cond in claim.conditions:
        ok, fig, desc = _check(cond, ctx, ref_ctx, describe=False)
        figures.append(fig)
        if ok is None:
            missing.append(desc)
        elif not ok:
            failed.append(desc)
    if claim.alternatives:
        group_results = []
        for group in claim.alternatives:
            res = [_check(c, ctx, ref_ctx) for c in group]
            figures += [r[1] for r in res]
            group_results.append(res)
        if not any(all(r[0] for r in g) for g in group_results):
            if any(any(r[0] is None for r in g) and not any(r[0] is False for r in g) for g in group_results):
                missing.append(
                    "an alternative cannot be tested: "
                    + "; ".join(r[2] for g in group_results for r in g if r[0] is None)
                )
            else:
                failed.append(
                    "no alternative holds: " + " | ".join("; ".join(r[2] for r in g if not r[0]) for g in group_results)
                )
    used = (
        [i for i in f.ingredients_used() if set(i.kinds) & set(claim.no_ingredient_kinds)]
        if claim.no_ingredient_kinds
        else []
    )
    if used:
        notes.append(
            f"uses {', '.join(i.id for i in used)} ({'/'.join(claim.no_ingredient_kinds)}): allowed only as the "
            "claim's rule permits (e.g. a footnote in the ingredient list) — review"
        )
    banned = (
        [i for i in f.ingredients_used() if set(i.kinds) & set(claim.fails_with_ingredient_kinds)]
        if claim.fails_with_ingredient_kinds
        else []
    )
    if banned:
        failed.append(
            f"an ingredient of kind {'/'.join(claim.fails_with_ingredient_kinds)} is added: "
            + ", ".join(i.id for i in banned)
        )
    if claim.reference_must_not_qualify and ref_ctx is not None and ref_qualifies:
        failed.append(f"the reference food itself qualifies for '{claim.reference_must_not_qualify}'")
    if claim.kind == "comparative" and ref_ctx is not None:
        notes.append(
            f"compared with {ref_ctx.comp.formula.header.name} ({ref_ctx.comp.formula.id}); the label must "
            "identify the reference food and state the difference"
        )
    verdict = NOT_ELIGIBLE if failed else CANNOT_TELL if missing else ELIGIBLE
    texts = [t.text for t in claim.texts] if verdict == ELIGIBLE else []
    intended = any(claim_key(c) == claim.id for c in f.header.claims)
    return ClaimVerdict(
        claim.id,
        claim.label,
        verdict,
        failed,
        missing,
        figures,
        texts,
        claim.citation,
        claim.confidence,
        notes,
        intended,
    )


def _leaf_component(ctx: _Context, components: list[str], from_kinds: list[str] | None) -> float | None:
    """Per-100 g sum of components, optionally only from ingredients of given kinds."""
    if not from_kinds:
        vals = [ctx.comp.value(k) for k in components]
        return None if any(v is None for v in vals) else float(sum(vals))
    lib = {i.id: i for i in ctx.comp.formula.ingredients_used()}
    total = 0.0
    for ing_id, g in ctx.comp.leaf_amounts().items():
        ing = lib[ing_id]
        if not set(ing.kinds) & set(from_kinds):
            continue
        for k in components:
            keys = C.DERIVED.get(k, (k,))
            for kk in keys:
                if kk not in ing.values:
                    return None
                total += g * ing.values[kk] / 100
    return total


def evaluate_statement(st: Statement, ctx: _Context, claims: list[ClaimVerdict]) -> StatementFlag | None:
    f = ctx.comp.formula
    used = f.ingredients_used()
    undecided: list[str] = []
    for t in st.triggers:
        figures: list[str] = []
        reason = None
        if t.substance:
            hits = [i.id for i in used if (i.substance or "").lower() == t.substance.lower()]
            if hits:
                reason = f"contains {t.substance} ({', '.join(hits)})"
        elif t.kind:
            hits = [i.id for i in used if t.kind in i.kinds]
            if hits:
                reason = f"contains an ingredient of kind '{t.kind}' ({', '.join(hits)})"
        elif t.components:
            v = _leaf_component(ctx, t.components, t.from_kinds)
            what = "+".join(t.components) + (f" from {'/'.join(t.from_kinds)} ingredients" if t.from_kinds else "")
            if v is None:
                undecided.append(f"{what} is unknown")
                continue
            if t.basis == "per_serving":
                if ctx.decl.serving_g is None:
                    undecided.append(f"{what} per serving: no serving size")
                    continue
                v = v * ctx.decl.serving_g / 100
            unit = C.unit_of(t.components[0])
            figures.append(f"{what} = {_fmt(v)} {unit} {t.basis.replace('_', ' ')}")
            if t.at_least is not None and to_decimal(v) >= to_decimal(t.at_least):
                reason = f"{what} {_fmt(v)} {unit} {t.basis.replace('_', ' ')} is at least {t.at_least:g}"
            elif t.above is not None and to_decimal(v) > to_decimal(t.above):
                reason = f"{what} {_fmt(v)} {unit} {t.basis.replace('_', ' ')} is above {t.above:g}"
            elif t.present and v > 0:
                reason = f"{what} present ({_fmt(v)} {unit} {t.basis.replace('_', ' ')})"
            if reason and st.daily_intake_g and v > 0:
                per_serv = (
                    v if t.basis == "per_serving" else (v * ctx.decl.serving_g / 100 if ctx.decl.serving_g else None)
                )
                if per_serv:
                    figures.append(
                        f"{st.daily_intake_g:g} g a day is reached with about {st.daily_intake_g / per_serv:.1f} servings"
                        " — judge whether that consumption is reasonably foreseeable"
                    )
        elif t.with_claim:
            intended = [c for c in claims if c.intended]
            made = intended or [c for c in claims if c.verdict == ELIGIBLE]
            if not made:
                continue
            hits = []
            for cond in t.conditions:
                ok, fig, desc = _check(cond, ctx, None)
                if ok and fig.value is not None:  # "not applicable" is not a hit
                    hits.append(desc)
            if hits or not t.conditions:
                reason = (
                    ("a claim is made (" if intended else "if any claim is made — eligible: ")
                    + ", ".join(c.claim for c in made)
                    + (")" if intended else "")
                    + (": " + "; ".join(hits) if hits else "")
                )
                figures += hits
        if reason:
            flag = StatementFlag(
                st.id, st.text, reason, figures, st.citation, st.confidence, st.caution, st.placement, status=st.status
            )
            if st.compensation:
                _compensation(st, ctx, flag)
            return flag
    if undecided:
        return StatementFlag(
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
    return None


def _compensation(st: Statement, ctx: _Context, flag: StatementFlag) -> None:
    comp = st.compensation
    base = ctx.comp.value(comp.per_gram_of)
    if base is None:
        flag.figures.append(f"{comp.per_gram_of} unknown: compensation cannot be computed — review")
        flag.status = "review"
        return
    s = ctx.decl.serving_g
    flag.figures.append(
        f"{comp.per_gram_of}: {_fmt(base)} g per 100 g" + (f", {_fmt(base * s / 100)} g per serving" if s else "")
    )
    short = False
    for k, per_g in comp.required.items():
        need = base * per_g
        have = _leaf_component(ctx, [k], comp.from_kinds)
        unit = C.unit_of(k)
        if have is None:
            flag.figures.append(f"{k}: required {_fmt(need)} {unit}/100 g; added amount unknown — review")
            short = True
            continue
        ok = to_decimal(have) >= to_decimal(need) * Decimal("0.999999")
        flag.figures.append(
            f"{k}: required {_fmt(need)} {unit}/100 g, added {_fmt(have)} {unit}/100 g"
            + ("" if ok else f" — SHORT by {_fmt(need - have)} {unit}/100 g")
        )
        short = short or not ok
    if short:
        flag.status = "review"
        flag.trigger += "; the required additions are NOT all met"


def allergen_report(ctx: _Context) -> dict:
    pack = ctx.pack
    rules = pack.allergens
    used = ctx.comp.formula.ingredients_used()
    amounts = ctx.comp.leaf_amounts()
    unknown = [i.id for i in used if i.allergens is None and amounts.get(i.id, 0) > 0]
    present: dict[str, list[str]] = {}
    if rules is None:
        return {
            "declared": [],
            "sources": {},
            "unknown_ingredients": unknown,
            "statement": None,
            "note": f"the '{pack.market}' pack has no allergen rules",
            "caution": ALLERGEN_CAUTION,
        }
    for key, entry in rules.entries.items():
        for i in used:
            if i.allergens and set(i.allergens) & set(entry.from_keys):
                present.setdefault(key, []).append(i.id)

        def below(v: float) -> bool:
            x, t = to_decimal(v * 10), to_decimal(entry.threshold_mg_per_kg)
            return x < t if entry.threshold_inclusive else x <= t

        if entry.threshold_mg_per_kg is not None and key in present:
            comp = entry.component or "sulphites"
            v = ctx.comp.value(comp)
            if v is not None and below(v):
                present[key] = [f"{x} (below {entry.threshold_mg_per_kg:g} mg/kg: not declared)" for x in present[key]]
        if entry.component and entry.threshold_mg_per_kg is not None and key not in present:
            v = ctx.comp.value(entry.component)
            if v is not None and not below(v):
                present[key] = [f"{entry.component} {v * 10:.0f} mg/kg"]
    declared = [k for k, src in present.items() if not all("not declared" in s for s in src)]
    names = [rules.entries[k].name for k in declared]
    statement = f"{rules.summary_prefix} {', '.join(names)}." if names else None
    return {
        "declared": names,
        "sources": {rules.entries[k].name: v for k, v in present.items()},
        "unknown_ingredients": unknown,
        "statement": statement,
        "summary": rules.summary,
        "emphasis": rules.emphasis,
        "review": (
            [
                f"allergens unknown for {', '.join(unknown)}: no allergen data — treat as possibly containing "
                "allergens until the supplier confirms"
            ]
            if unknown
            else []
        ),
        "citation": rules.citation,
        "caution": ALLERGEN_CAUTION,
    }


def ingredient_list(ctx: _Context, allergens: dict) -> dict | None:
    rule = ctx.pack.ingredient_list
    if rule is None:
        return None
    comp = ctx.comp
    f = comp.formula
    alg_map = ctx.pack.allergens.entries if ctx.pack.allergens else {}

    def names_of(ing) -> list[str]:
        keys = set(ing.allergens or [])
        return [e.name for e in alg_map.values() if keys & set(e.from_keys)]

    total_water_lost = sum(s.water_lost_g for s in comp.steps) / comp.finished_grams * 100

    def items_of(formula, scale: float, finished: float, scenario: str, top: bool) -> list[dict]:
        items = []
        for ln in formula.lines:
            g = ln.grams * scale
            if ln.ingredient is not None:
                ing = ln.ingredient
                items.append(
                    {
                        "name": ln.label_name or ing.label_name,
                        "grams_per_100g": g,
                        "id": ing.id,
                        "allergen": bool(names_of(ing)),
                        "allergen_names": names_of(ing),
                        "is_water": "water" in ing.kinds or ing.id == "water",
                        "components": [
                            {"name": n, "allergen": False, "components": []} for n in (ing.sub_ingredients or [])
                        ],
                    }
                )
            else:
                sub = ln.formula
                sfin = comp._table.finished[_fkey(sub)]["low" if scenario == "nominal" else scenario]
                items.append(
                    {
                        "name": ln.label_name or sub.header.label_name or sub.header.name,
                        "grams_per_100g": g,
                        "id": sub.id,
                        "allergen": False,
                        "is_water": False,
                        "components": items_of(sub, g / sfin, sfin, scenario, False),
                    }
                )
        for st, res in zip(formula.steps, _steps(comp, formula)):
            if not st.oil_ref or res <= 0:
                continue
            g = res * scale
            if st.oil_ingredient is not None:
                ing = st.oil_ingredient
                items.append(
                    {
                        "name": ing.label_name,
                        "grams_per_100g": g,
                        "id": ing.id,
                        "is_water": False,
                        "allergen": bool(names_of(ing)),
                        "allergen_names": names_of(ing),
                        "components": [],
                    }
                )
            else:
                sub = st.oil_formula
                sfin = comp._table.finished[_fkey(sub)]["low" if scenario == "nominal" else scenario]
                for it in items_of(sub, g / sfin, sfin, scenario, False):
                    items.append(it)
        return items

    items = items_of(f, 100.0 / comp.finished_grams, comp.finished_grams, comp.scenario, True)
    items = _merge(items)
    notes = []
    if rule.water == "finished_product":
        for it in items:
            if it["is_water"]:
                it["grams_per_100g"] = max(it["grams_per_100g"] - total_water_lost, 0.0)
        omit = rule.water_omit_up_to_percent
        if omit is not None:
            for it in [x for x in items if x["is_water"] and x["grams_per_100g"] <= omit]:
                notes.append(
                    f"added water ({it['grams_per_100g']:.1f} g/100 g in the finished product) is at or below "
                    f"{omit:g} % and need not be listed"
                )
                items.remove(it)
    _sort(items)
    quid = []
    if rule.quid:
        pname = f.header.name.lower()
        for it in _flatten(items):
            name = it["name"].lower()
            words = [w for w in name.replace(",", " ").split() if len(w) >= 3]
            if name in pname or any(_stem(w) in pname for w in words):
                pct = it["grams_per_100g"]
                it["quid"] = (
                    rule.quid.over_100_text.format(grams=round(pct), name=it["name"].lower())
                    if pct > 100
                    else f"{format_number(to_decimal(round(pct)))}%"
                )
                quid.append({"ingredient": it["name"], "percent": pct, "text": it["quid"]})
    emphasis = ctx.pack.allergens.emphasis if ctx.pack.allergens else "bold"
    text = rule.heading + " " + _render(items, emphasis) + "."
    return {
        "heading": rule.heading,
        "items": items,
        "text": text,
        "quid": quid,
        "notes": notes,
        "citation": rule.citation,
        "confidence": rule.confidence,
    }


def _stem(word: str) -> str:
    """'potatoes' -> 'potato', 'onions' -> 'onion' (enough to find an ingredient named in a product name)."""
    for suffix in ("oes", "es", "s"):
        if word.endswith(suffix) and len(word) - len(suffix) >= 4:
            return word[: -len(suffix)] + ("o" if suffix == "oes" else "")
    return word


def _steps(comp: Composition, formula) -> list[float]:
    return _steps_of(formula, comp.scenario, comp._table)


def _merge(items: list[dict]) -> list[dict]:
    out: dict[str, dict] = {}
    for it in items:
        k = it["id"]
        if k in out and not it["components"]:
            out[k]["grams_per_100g"] += it["grams_per_100g"]
        else:
            out[k if k not in out else k + f"#{len(out)}"] = it
    return list(out.values())


def _sort(items: list[dict]) -> None:
    items.sort(key=lambda x: -x["grams_per_100g"])
    for it in items:
        if it["components"] and "grams_per_100g" in it["components"][0]:
            it["components"] = _merge(it["components"])
            _sort(it["components"])


def _flatten(items):
    for it in items:
        yield it
        yield from (c for c in _flatten([x for x in it["components"] if "grams_per_100g" in x]))


def allergen_name(it: dict, emphasis: str, bold=str.upper) -> str:
    """An ingredient's name with the market's allergen emphasis: bold (UPPER CASE in plain
    text, bold in PDFs) or the allergen's name in parentheses, e.g. "Whey powder (milk)"."""
    name = it["name"]
    if not it.get("allergen"):
        return name
    if emphasis == "parentheses":
        missing = [n for n in it.get("allergen_names", []) if n.lower() not in name.lower()]
        return f"{name} ({', '.join(missing)})" if missing else name
    return bold(name)


def _render(items: list[dict], emphasis: str = "bold") -> str:
    parts = []
    for it in items:
        name = allergen_name(it, emphasis)
        if it.get("quid"):
            name += f" ({it['quid']})"
        if it["components"]:
            name += " (" + _render(it["components"], emphasis) + ")"
        parts.append(name)
    return ", ".join(parts)


def front_of_pack(ctx: _Context) -> list[dict]:
    out = []
    for fop in ctx.pack.front_of_pack:
        f = ctx.comp.formula
        if f.header.category and f.header.category in fop.exempt_kinds:
            out.append({"scheme": fop.id, "name": fop.name, "exempt": True, "verdicts": {}, "citation": fop.citation})
            continue
        if fop.kind == "colour_bands":
            out.append(_colours(fop, ctx))
        else:
            out.append(_high_in(fop, ctx))
    return out


def _colours(fop: FrontOfPack, ctx: _Context) -> dict:
    f = ctx.comp.formula
    bands = (fop.liquid_nutrients if f.header.form == "liquid" and fop.liquid_nutrients else fop.nutrients) or {}
    verdicts = {}
    s = ctx.decl.serving_g
    per_ml = f.header.form == "liquid" and fop.liquid_nutrients is not None
    for n, b in bands.items():
        v = ctx.values[n][0]
        if v is not None and per_ml:
            if not f.header.density_g_per_ml:
                verdicts[n] = {
                    "colour": "cannot tell",
                    "per_100g": None,
                    "why": "a drink needs density_g_per_ml for per 100 ml",
                }
                continue
            v = v * f.header.density_g_per_ml
        if v is None:
            verdicts[n] = {"colour": "cannot tell", "per_100g": None}
            continue
        d = to_decimal(v)
        colour = (
            "green (low)"
            if d <= to_decimal(b.low_up_to)
            else "red (high)"
            if d > to_decimal(b.high_above)
            else "amber (medium)"
        )
        entry = {"colour": colour, "per_100g": v, "unit": b.unit}
        if s and fop.portion_rule_above_g and s > fop.portion_rule_above_g and b.portion_high_above is not None:
            portion = v * s / 100
            entry["per_portion"] = portion
            if to_decimal(portion) > to_decimal(b.portion_high_above):
                entry["colour"] = "red (high)"
                entry["why"] = f"per portion {_fmt(portion)} {b.unit} is above {b.portion_high_above:g} {b.unit}"
        verdicts[n] = entry
    return {
        "scheme": fop.id,
        "name": fop.name,
        "exempt": False,
        "verdicts": verdicts,
        "citation": fop.citation,
        "confidence": fop.confidence,
    }


def fop_threshold(fop: FrontOfPack, ref_g: float | None, category: str | None) -> float | None:
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


def assess_against(
    comp: Composition, pack: RulePack, reference: list[Composition] | None, index: int = 0, **kw
) -> Assessment:
    """Declare and assess ``comp``; with a reference formula's compositions, comparative claims use the
    reference scenario of the same index (low with low, high with high)."""
    d = declare(comp, pack)
    ref = None
    if reference:
        rc = reference[min(index, len(reference) - 1)]
        ref = (rc, declare(rc, pack))
    return assess(comp, pack, d, ref, **kw)


def _high_in(fop: FrontOfPack, ctx: _Context) -> dict:
    ref_g = ctx.ref_g
    s = ctx.decl.serving_g
    if ref_g is None and s is None:
        return {
            "scheme": fop.id,
            "name": fop.name,
            "verdicts": {},
            "missing": "no serving and no reference amount",
            "citation": fop.citation,
        }
    basis_g = max(x for x in (ref_g, s) if x is not None)
    threshold = fop_threshold(fop, ref_g, ctx.comp.formula.header.category)
    verdicts = {}
    for n, ref_key in (fop.high_in or {}).items():
        v = ctx.values[n][0]
        ref = ctx.pack.reference_values[ref_key].amount
        if v is None:
            verdicts[n] = {"high_in": "cannot tell"}
            continue
        pct = v * basis_g / 100 / ref * 100
        verdicts[n] = {
            "high_in": to_decimal(pct) >= to_decimal(threshold),
            "percent_dv": pct,
            "threshold_percent": threshold,
            "basis_g": basis_g,
        }
    return {
        "scheme": fop.id,
        "name": fop.name,
        "exempt": False,
        "verdicts": verdicts,
        "symbol_required": any(x.get("high_in") is True for x in verdicts.values()),
        "citation": fop.citation,
        "confidence": fop.confidence,
    }


def zero_row_reviews(decl: Declaration) -> list[str]:
    """Rows declared as zero per serving whose unrounded amount is not trivial."""
    out = []
    n = None
    if decl.serving_g and decl.container_g:
        n = decl.container_g / decl.serving_g
    for r in decl.shown_rows:
        d = r.declared.get("per_serving")
        v = r.unrounded.get("per_serving")
        if d is None or v is None or d.number is None or d.number != 0 or v <= 0 or r.unit != "g":
            continue
        rule = decl.pack.rounding[decl.pack.rows[[x.nutrient for x in decl.pack.rows].index(r.nutrient)].rounding]
        band = rule.bands[d.band]
        bound = band.below if band.below is not None else band.up_to
        if bound is None:
            continue
        if v >= 0.8 * bound or (n and v * n >= bound and n >= 2):
            out.append(
                f"{r.label} is declared 0 per serving but is {_fmt(v)} {r.unit} unrounded"
                + (f" ({_fmt(v * n)} {r.unit} in the whole container)" if n else "")
                + " — review whether the zero misleads (several servings may be eaten at once)"
            )
    return out


def assess(
    comp: Composition,
    pack: RulePack,
    decl: Declaration,
    reference: tuple[Composition, Declaration] | None = None,
    *,
    with_ingredient_list: bool = True,
) -> Assessment:
    ctx = _Context(comp, pack, decl)
    ref_ctx = _Context(reference[0], pack, reference[1]) if reference else None
    claims = []
    by_id = {c.id: c for c in pack.claims}
    for cl in pack.claims:
        ref_q = None
        if cl.reference_must_not_qualify and ref_ctx is not None and cl.reference_must_not_qualify in by_id:
            ref_q = evaluate_claim(by_id[cl.reference_must_not_qualify], ref_ctx, None).verdict == ELIGIBLE
        claims.append(evaluate_claim(cl, ctx, ref_ctx, ref_qualifies=ref_q))
    for name in comp.formula.header.claims:
        if claim_key(name) not in by_id:
            claims.append(
                ClaimVerdict(
                    name,
                    name,
                    CANNOT_TELL,
                    [],
                    [f"the '{pack.market}' pack defines no claim '{name}'"],
                    [],
                    [],
                    "-",
                    "derived",
                    intended=True,
                )
            )
    eligible = {c.claim for c in claims if c.verdict == ELIGIBLE}
    for cv in claims:
        cl = by_id.get(cv.claim)
        if cl and cv.verdict == ELIGIBLE:
            cv.texts = [t.text for t in cl.texts if not set(t.unless_eligible) & eligible]
    statements = [s for s in (evaluate_statement(st, ctx, claims) for st in pack.statements) if s]
    allergens = allergen_report(ctx)
    ilist = ingredient_list(ctx, allergens) if with_ingredient_list else None
    fop = front_of_pack(ctx)
    reviews = zero_row_reviews(decl) + allergens.get("review", [])
    return Assessment(pack.market, decl, claims, statements, allergens, ilist, fop, reviews)
