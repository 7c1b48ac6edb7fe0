"""Declared values per market: one composition, each market's own rules.

``declare(composition, pack)`` builds every nutrient the pack defines from the
unrounded composition, decides the columns (per 100 g, per serving, per
container) from the pack's serving rules, rounds each figure with the band
the pack names, computes percentages of reference values and decides which
rows are shown.  Nothing here knows a market by name.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from labelcalc.errors import InputError, Problem, RuleError
from labelcalc.formulation.composition import Composition
from labelcalc.formulation.energy import EnergyResult, energy_of, load_factor_set
from labelcalc.labelling.rounding import Rounded, apply_rounding, format_number, to_decimal
from labelcalc.labelling.rulepack import Row, RulePack


def display_unit(unit: str) -> str:
    """Unit as printed on a label ("ug" is stored, "µg" is printed)."""
    return "µg" if unit == "ug" else unit


BASIS_LABEL = {"per_100g": "per 100 g", "per_serving": "per serving", "per_container": "per container"}


@dataclass
class DeclaredRow:
    nutrient: str
    label: str
    unit: str
    requirement: str
    shown: bool
    why: str
    indent: int
    bold: bool
    show_unit: bool
    unrounded: dict[str, float | None]
    declared: dict[str, Rounded | None]
    percent: dict[str, str | None]
    percent_unrounded: dict[str, float | None]
    source: list[str]
    unknown_inputs: list[str] = field(default_factory=list)
    value_per_100g: float | None = None
    percent_only: bool = False

    unit_label: str | None = None

    def text(self, basis: str) -> str:
        """The figure as printed, with its unit."""
        r = self.declared.get(basis)
        if r is None:
            return "unknown"
        unit = self.unit_label or display_unit(self.unit)
        return f"{r.text} {unit}" if self.show_unit else r.text

    @property
    def amount_in_label(self) -> bool:
        """The label carries the amount itself, e.g. 'Includes {amount} Added Sugars'."""
        return "{amount}" in self.label

    def label_for(self, basis: str) -> str:
        if not self.amount_in_label:
            return self.label
        return self.label.replace("{amount}", self.text(basis).replace(" ", ""))


@dataclass
class Declaration:
    market: str
    pack: RulePack
    composition: Composition
    columns: list[str]
    serving_g: float | None
    container_g: float | None
    servings_text: str | None
    single_serving: bool
    dual_column: bool
    reference_amount: tuple[str, float, str] | None  # (category, grams, citation)
    rows: list[DeclaredRow]
    declared_energy: EnergyResult
    available_energy: EnergyResult
    notes: list[str]
    reviews: list[str]
    values: dict = field(default_factory=dict, repr=False)  # unrounded per-100 g nutrient values (and unknown inputs)

    @property
    def shown_rows(self) -> list[DeclaredRow]:
        return [r for r in self.rows if r.shown]

    def row(self, nutrient: str) -> DeclaredRow:
        for r in self.rows:
            if r.nutrient == nutrient:
                return r
        raise KeyError(nutrient)


class _LazyDecimals(dict):
    """Unrounded figures of one column as Decimals, converted only when a rounding condition asks."""

    def __init__(self, floats: dict[str, float | None]):
        super().__init__()
        self._floats = floats

    def __missing__(self, key: str):
        v = self._floats[key]
        d = None if v is None else to_decimal(v)
        self[key] = d
        return d

    def __contains__(self, key) -> bool:
        return key in self._floats


def nutrient_values(
    comp: Composition, pack: RulePack, energy: EnergyResult
) -> dict[str, tuple[float | None, list[str]]]:
    """Unrounded per-100 g value of every nutrient the pack defines, with the
    ingredients whose unknown values make it unknown."""
    out: dict[str, tuple[float | None, list[str]]] = {}
    for key, nd in pack.nutrients.items():
        if nd.energy:
            v = energy.kcal if nd.energy == "kcal" else energy.kj
            out[key] = (v, [] if v is not None else ["energy: " + ", ".join(energy.unknown_because)])
            continue
        total, unknown = 0.0, []
        for comp_key, factor in (nd.sum or {}).items():
            v = comp.value(comp_key)
            if v is None:
                unknown += comp.unknown_inputs(comp_key) or [comp_key]
            else:
                total += v * factor
        out[key] = (None, sorted(set(unknown))) if unknown else (total, [])
    return out


def _reference_amount(comp: Composition, pack: RulePack):
    f = comp.formula
    s = pack.servings
    cat = f.header.category
    if not s.reference_amounts:
        return None
    if cat is None:
        if s.reference_amount_required:
            raise InputError(
                Problem(
                    f"market '{pack.market}' needs a product category for its reference amounts",
                    file=f.file,
                    field="product.category",
                    fix=f"known categories: {', '.join(sorted(s.reference_amounts))}",
                )
            )
        return None
    if cat not in s.reference_amounts:
        if s.reference_amount_required:
            raise InputError(
                Problem(
                    f"category '{cat}' has no reference amount in the '{pack.market}' rule pack",
                    file=f.file,
                    field="product.category",
                    fix=f"known categories: {', '.join(sorted(s.reference_amounts))}",
                )
            )
        return None
    ra = s.reference_amounts[cat]
    return cat, ra.amount_g, ra.citation


def energy_method(f, pack: RulePack) -> str:
    """The energy factor set for this formula in this market: the pack's default,
    or the one the formula picks (product.energy_methods) among those the pack allows."""
    chosen = (f.header.energy_methods or {}).get(pack.market)
    if chosen is None:
        return pack.panel.energy_factor_set
    allowed = [pack.panel.energy_factor_set, *pack.panel.energy_factor_sets_allowed]
    if chosen not in allowed:
        raise InputError(
            Problem(
                f"energy method '{chosen}' is not allowed in market '{pack.market}'",
                file=f.file,
                field=f"product.energy_methods.{pack.market}",
                fix=f"allowed: {', '.join(allowed)}",
            )
        )
    return chosen


@dataclass
class ServingPlan:
    """How a market's serving rules apply to one product: serving, columns, single serving, dual column."""

    serving: float | None
    container: float | None
    ref: tuple[str, float, str] | None
    single: bool
    dual: bool
    columns: list[str]
    notes: list[str]


def serving_plan(comp: Composition, pack: RulePack) -> ServingPlan:
    """The serving basis of ``comp`` under ``pack`` (raises InputError when the market cannot label it)."""
    f = comp.formula
    notes: list[str] = []
    s = pack.servings
    serving = f.serving_grams()
    container = f.net_grams()
    if s.required and serving is None:
        raise InputError(
            Problem(
                f"market '{pack.market}' needs a serving size",
                file=f.file,
                field="product.serving",
                fix="add serving: {size: '28 g', household: '...'}",
            )
        )
    ref = _reference_amount(comp, pack)
    single = dual = False
    if ref and container is not None:
        pct = container / ref[1] * 100
        if s.single_serving_below_percent is not None and pct < s.single_serving_below_percent:
            single = True
            if serving is not None and abs(serving - container) > 1e-9:
                notes.append(
                    f"The container holds {container:g} g, {pct:.0f} % of the reference amount ({ref[1]:g} g): "
                    f"it is labelled as one serving of {container:g} g, not {serving:g} g "
                    f"({s.single_serving.citation if s.single_serving else 'single-serving rule'})."
                )
            serving = container
        elif s.dual_column and s.dual_column.from_percent <= pct <= s.dual_column.to_percent:
            dual = True
            notes.append(
                f"The container holds {pct:.0f} % of the reference amount: per-serving and per-container "
                f"columns are required ({s.dual_column.citation})."
            )
    columns = [
        b
        for b in pack.panel.bases
        if not (b == "per_serving" and serving is None)
        and not (b == "per_container" and (container is None or not dual))
    ]
    if dual and "per_container" not in columns:
        columns.append("per_container")
    if not columns:
        raise InputError(
            Problem(
                f"market '{pack.market}': no column can be printed (no serving size and no per 100 g basis)",
                file=f.file,
                field="product.serving",
            )
        )
    return ServingPlan(serving, container, ref, single, dual, columns, notes)


def declare(comp: Composition, pack: RulePack, *, rules_root: str | None = None) -> Declaration:
    """Declared values of one composition under one market's pack."""
    f = comp.formula
    fs = load_factor_set(energy_method(f, pack), rules_root)
    energy = energy_of(comp, fs)
    available = energy_of(comp, load_factor_set("available", rules_root))
    plan = serving_plan(comp, pack)
    serving, container, ref, single, dual, columns = (
        plan.serving,
        plan.container,
        plan.ref,
        plan.single,
        plan.dual,
        plan.columns,
    )
    notes: list[str] = list(plan.notes)
    scale = {"per_100g": 1.0, "per_serving": (serving or 0) / 100.0, "per_container": (container or 0) / 100.0}
    values = nutrient_values(comp, pack, energy)
    col_vals = {b: {k: (None if v is None else v * scale[b]) for k, (v, _) in values.items()} for b in columns}
    col_dec = {b: _LazyDecimals(col_vals[b]) for b in columns}
    claims = ["_".join(c.lower().replace("-", " ").split()) for c in f.header.claims]
    kinds = {k for _, ln in f.walk() if ln.ingredient for k in ln.ingredient.kinds}
    rows: list[DeclaredRow] = []
    for row in pack.rows:
        nd = pack.nutrients[row.nutrient]
        rule = pack.rounding[row.rounding]
        declared: dict[str, Rounded | None] = {}
        for b in columns:
            v = col_vals[b][row.nutrient]
            declared[b] = None if v is None else apply_rounding(v, rule, col_dec[b])
        percent, pct_raw = _percents(row, pack, columns, col_vals, declared)
        shown, why = _shown(row, pack, declared, values, claims, kinds)
        src = [row.citation, nd.citation, rule.citation]
        if row.percent:
            src.append(pack.reference_values[row.percent].citation)
        rows.append(
            DeclaredRow(
                row.nutrient,
                row.label,
                nd.unit,
                row.requirement,
                shown,
                why,
                row.indent,
                row.bold,
                row.show_unit,
                {b: col_vals[b][row.nutrient] for b in columns},
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
    servings_text = _servings_text(comp, pack, serving, container, single)
    reviews = list(dict.fromkeys(energy.reviews))
    for r in rows:
        if r.shown and any(d is None for d in r.declared.values()):
            notes.append(
                f"{r.label}: unknown because of unknown values in {', '.join(r.unknown_inputs) or 'an input'}."
            )
    if f.is_fried:
        notes.append(
            "Fried product: oil uptake and moisture loss are estimates; laboratory analysis of fat and moisture "
            "is the usual confirmation before a label is finalised."
        )
    differs = (
        energy.kcal is not None
        and available.kcal is not None
        and (bool(energy.reviews) or abs(energy.kcal - available.kcal) > 0.02 * max(available.kcal, 1.0))
    )
    if differs:
        notes.append(
            f"Declared energy ({energy.kcal:.0f} kcal/100 g under {fs.id}) differs from available energy "
            f"({available.kcal:.0f} kcal/100 g): see the review notes."
        )
    return Declaration(
        pack.market,
        pack,
        comp,
        columns,
        serving,
        container,
        servings_text,
        single,
        dual,
        ref,
        rows,
        energy,
        available,
        notes,
        reviews,
        values,
    )


def _percents(row: Row, pack: RulePack, columns, col_vals, declared):
    percent: dict[str, str | None] = {}
    raw: dict[str, float | None] = {}
    if not row.percent:
        return percent, raw
    ref = pack.reference_values[row.percent]
    unit = pack.nutrients[row.nutrient].unit
    if ref.unit != unit:
        raise RuleError(
            Problem(
                f"row '{row.nutrient}': reference value '{row.percent}' is in {ref.unit}, the nutrient in {unit}",
                field=f"reference_values.{row.percent}",
            )
        )
    rule = pack.rounding[row.percent_rounding or "percent"]
    mode = row.percent_from or pack.panel.percent_from
    for b in columns:
        d = declared[b]
        if d is None:
            percent[b] = raw[b] = None
            continue
        if mode == "declared" and d.number is not None:
            base = d.number
        else:
            v = col_vals[b][row.nutrient]
            base = to_decimal(v)
        p = base / to_decimal(ref.amount) * 100
        raw[b] = float(p)
        if d.number is not None and d.number == 0 and mode == "declared":
            percent[b] = "0%"
            continue
        r = apply_rounding(p, rule)
        percent[b] = r.text if r.text.endswith("%") else r.text + "%"
    return percent, raw


def _shown(row: Row, pack: RulePack, declared, values, claims, kinds) -> tuple[bool, str]:
    def present() -> bool:  # unrounded amount above zero (a "<0.5 g" of nothing is not present)
        v = values[row.nutrient][0]
        return (
            v is not None
            and v > 0
            and any(d is not None and (d.number is None or d.number != 0) for d in declared.values())
        )

    if row.requirement == "mandatory":
        return True, "mandatory"
    v100 = values[row.nutrient][0]
    for t in row.when:  # alternatives; every criterion of one trigger must hold
        reasons = []
        if t.claim is not None:
            if not any(c.startswith("_".join(t.claim.lower().split())) for c in claims):
                continue
            reasons.append(f"a claim about '{t.claim}' is made")
        if t.present:
            if not present():
                continue
            reasons.append("present")
        if t.added is not None:
            if t.added not in kinds:
                continue
            reasons.append(f"an ingredient of kind '{t.added}' is added")
        if t.at_least_per_100g is not None:
            if v100 is None or to_decimal(v100) < to_decimal(t.at_least_per_100g):
                continue
            reasons.append(f"at least {format_number(to_decimal(t.at_least_per_100g))} per 100 g")
        if t.at_least_percent_reference is not None:
            if not row.percent or v100 is None:
                continue
            ref = pack.reference_values[row.percent].amount
            if to_decimal(v100) / to_decimal(ref) * 100 < to_decimal(t.at_least_percent_reference):
                continue
            reasons.append(f"at least {t.at_least_percent_reference:g} % of the reference value per 100 g")
        if reasons:
            return True, "required: " + " and ".join(reasons)
    if row.requirement == "voluntary":
        if row.show == "always":
            return True, "voluntary (shown by default)"
        if row.show == "when_present" and present():
            return True, "voluntary, shown because present"
        return False, "voluntary, not shown"
    return False, "conditional, not triggered"


def _servings_text(comp, pack, serving, container, single) -> str | None:
    f = comp.formula
    if single:
        return "1"
    n = f.header.servings_per_container
    if n is None and serving and container:
        n = container / serving
    if n is None:
        return None
    rule_key = pack.servings.servings_rounding
    if not rule_key:
        return format_number(to_decimal(n))
    r = apply_rounding(n, pack.rounding[rule_key])
    exact = to_decimal(n)
    prefix = pack.servings.about_prefix
    if prefix and r.number is not None and r.number != exact:
        return f"{prefix} {r.text}"
    return r.text


def declaration_dict(d: Declaration) -> dict:
    """The documented JSON form of a declaration (see README, "JSON output")."""
    pb = d.pack.panel.percent_basis
    rows = []
    for r in d.rows:
        rows.append(
            {
                "nutrient": r.nutrient,
                "label": r.label_for(pb or d.columns[0]),
                "unit": r.unit,
                "shown": r.shown,
                "requirement": r.requirement,
                "why": r.why,
                "per_100g": r.value_per_100g,
                "per_serving": None
                if r.value_per_100g is None or d.serving_g is None
                else r.value_per_100g * d.serving_g / 100,
                "per_container": r.unrounded.get("per_container"),
                "declared_per_100g": r.text("per_100g") if "per_100g" in r.declared else None,
                "declared_per_serving": r.text("per_serving") if "per_serving" in r.declared else None,
                "declared_per_container": r.text("per_container") if "per_container" in r.declared else None,
                "percent_reference": r.percent.get(pb) if pb else None,
                "percent_reference_by_column": r.percent or None,
                "unknown_inputs": r.unknown_inputs,
                "source": "; ".join(r.source),
            }
        )
    return {
        "market": d.market,
        "pack_version": d.pack.pack.version,
        "panel_title": d.pack.panel.title,
        "scenario": d.composition.scenario,
        "columns": d.columns,
        "serving_g": d.serving_g,
        "container_g": d.container_g,
        "servings_per_container": d.servings_text,
        "single_serving": d.single_serving,
        "dual_column": d.dual_column,
        "reference_amount": None
        if not d.reference_amount
        else {"category": d.reference_amount[0], "grams": d.reference_amount[1], "source": d.reference_amount[2]},
        "energy": {
            "declared_factor_set": d.declared_energy.factor_set.id,
            "declared_kj_per_100g": d.declared_energy.kj,
            "declared_kcal_per_100g": d.declared_energy.kcal,
            "available_kj_per_100g": d.available_energy.kj,
            "available_kcal_per_100g": d.available_energy.kcal,
        },
        "percent_from": d.pack.panel.percent_from,
        "percent_from_source": d.pack.panel.percent_from_citation,
        "rows": rows,
        "notes": d.notes,
        "reviews": d.reviews,
        "draft_notice": d.pack.pack.draft_notice,
    }
