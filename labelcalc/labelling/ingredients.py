"""Allergens and the ingredient list of one product under one market pack.

These walk the formula's tree of ingredients and sub-formulas, product by product; the engine
calls them for every product it labels.  Where the work can hurt someone the code errs toward
flagging: an ingredient without allergen data is reported as possibly containing allergens.
"""

from __future__ import annotations

from labelcalc.formulation.composition import Composition
from labelcalc.labelling.rounding import format_number, to_decimal
from labelcalc.labelling.rulepack import RulePack

ALLERGEN_CAUTION = (
    "Allergen information is computed from ingredient data; confirm every supplier specification, "
    "sub-ingredient and cross-contact risk with a qualified regulatory professional."
)


def _below(v: float, entry) -> bool:
    """Whether an amount [g/100 g] is under an entry's threshold [mg/kg] (decimal-exact; inclusive or not)."""
    x, t = to_decimal(v * 10), to_decimal(entry.threshold_mg_per_kg or 0)
    return x < t if entry.threshold_inclusive else x <= t


def allergen_report(comp: Composition, pack: RulePack) -> dict:
    """Allergens the market requires to be declared, with the ingredients they come from; ingredients
    without allergen data are listed as unknown (treated as possibly containing allergens)."""
    rules = pack.allergens
    used = comp.formula.ingredients_used()
    lacking = [i for i in used if i.allergens is None]
    amounts = comp.leaf_amounts() if lacking else {}  # walked only when some ingredient has no allergen data
    unknown = [i.id for i in lacking if amounts.get(i.id, 0) > 0]
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
    hits: dict[str, list[str]] = {}
    not_declared: set[str] = set()  # present only below the entry's threshold
    for i in used:
        if i.allergens:
            for key in rules.entries_hit(i.allergens):
                hits.setdefault(key, []).append(i.id)
    for key, entry in rules.entries.items():
        if key in hits:
            present[key] = hits[key]
        if entry.threshold_mg_per_kg is None:
            continue
        if key in present:
            v = comp.value(entry.component or "sulphites")
            if v is not None and _below(v, entry):
                present[key] = [f"{x} (below {entry.threshold_mg_per_kg:g} mg/kg: not declared)" for x in present[key]]
                not_declared.add(key)
        elif entry.component:
            v = comp.value(entry.component)
            if v is not None and not _below(v, entry):
                present[key] = [f"{entry.component} {v * 10:.0f} mg/kg"]
    declared = [k for k in present if k not in not_declared]
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


def ingredient_list(comp: Composition, pack: RulePack) -> dict | None:
    """The ingredient list in descending order of weight at use, sub-formulas as compound ingredients
    with their components in parentheses, allergens emphasised, QUID where the pack asks."""
    rule = pack.ingredient_list
    if rule is None:
        return None
    f = comp.formula
    alg_map = pack.allergens.entries if pack.allergens else {}

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
                        "functional_class": ing.functional_class,
                        "kinds": list(ing.kinds),
                        "components": [
                            {"name": n, "allergen": False, "components": []} for n in (ing.sub_ingredients or [])
                        ],
                    }
                )
            else:
                sub = ln.formula
                sfin = comp.finished_grams_of(sub)
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
        for st, res in zip(formula.steps, comp.oil_taken_up(formula)):
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
                sfin = comp.finished_grams_of(sub)
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
    emphasis = pack.allergens.emphasis if pack.allergens else "bold"
    printed = _by_class(items, rule)
    text = rule.heading + " " + render_items(printed, lambda it: allergen_name(it, emphasis)) + "."
    return {
        "heading": rule.heading,
        "items": items,
        "printed_items": printed,
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


def _by_class(items: list[dict], rule) -> list[dict]:
    """The items as printed where a market names additives by functional class: those of one class are
    grouped where the first (heaviest) of them stands, e.g. 'Sweeteners: aspartame, acesulfame K' (style of
    the pack's rule); ingredients of a grouped kind are listed under one heading placed by their total weight,
    e.g. 'Sugars (sugar, glucose syrup)'. A group is an item whose ``group`` says how its members (its
    ``components``) are written (see :func:`render_items`). Grouping is done by hand here: it is the market's
    wording rule, no library does it."""
    if not rule.functional_classes and not rule.kind_groups:
        return items
    style = {"class_parentheses": "parentheses", "name_then_class": "after"}.get(rule.functional_class_style, "colon")
    out: list[dict] = []
    groups: dict[str, dict] = {}
    kind_heads: dict[str, dict] = {}
    for it in items:
        kind = next((k for k in it.get("kinds", []) if k in rule.kind_groups), None)
        if kind is not None:  # listed under the kind's heading, placed by the total weight of its members
            head = rule.kind_groups[kind]
            g = kind_heads.get(head.many)
            if g is None:
                g = kind_heads[head.many] = {**it, "name": head.many, "group": "parentheses", "components": []}
                g["grams_per_100g"] = 0.0
                g["allergen"] = False
                out.append(g)
            g["grams_per_100g"] += it["grams_per_100g"]
            g["components"].append({**it, "name": it["name"].lower(), "components": []})
            continue
        cls = rule.functional_classes.get(it.get("functional_class") or "")
        if cls is None:
            comps = it["components"]
            out.append({**it, "components": _by_class(comps, rule)} if comps else it)
            continue
        g = groups.get(cls.one)
        if g is None:
            g = groups[cls.one] = {**it, "group": style, "cls": cls, "allergen": False, "components": []}
            out.append(g)
        g["components"].append({**it, "components": []})
    for g in groups.values():
        cls = g.pop("cls")
        g["name"] = cls.one if len(g["components"]) == 1 else cls.many
    if kind_heads:
        out.sort(key=lambda x: -x["grams_per_100g"])
    return out


def render_items(items: list[dict], show) -> str:
    """An ingredient list's items as text: ``show(item)`` writes one name (with the market's allergen
    emphasis, escaped as the output needs); compound ingredients take their components in parentheses,
    functional-class groups their members as the group's style says."""
    parts = []
    for it in items:
        name = show(it)
        if it.get("quid"):
            name += f" ({it['quid']})"
        inner = render_items(it["components"], show) if it["components"] else ""
        group = it.get("group")
        if group == "colon":
            name = f"{name}: {inner}"
        elif group == "after":
            name = f"{inner} ({name})"
        elif inner:
            name += f" ({inner})"
        parts.append(name)
    return ", ".join(parts)
