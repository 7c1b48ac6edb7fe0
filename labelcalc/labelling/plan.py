"""How a market's serving rules apply to one product: serving, container, reference amount, columns.

Serving plans are per product (they read the formula's header); the engine (:mod:`engine`) takes
one plan per product and does the table arithmetic.
"""

from __future__ import annotations

from dataclasses import dataclass

from labelcalc.errors import InputError, Problem
from labelcalc.formulation.composition import Composition
from labelcalc.labelling.rounding import apply_rounding, format_number, to_decimal
from labelcalc.labelling.rulepack import RulePack


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
    not_computed = pack.panel.energy_methods_not_computed.get(chosen)
    if not_computed is not None:
        raise InputError(
            Problem(
                f"energy method '{chosen}' cannot be computed from a formula: {not_computed.why} "
                f"({not_computed.citation})",
                file=f.file,
                field=f"product.energy_methods.{pack.market}",
                fix=f"use one of: {', '.join(allowed)}, or enter the laboratory's figure by hand",
            )
        )
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
    return ServingPlan(serving, container, ref, single, dual, list(columns), notes)


def servings_text(comp: Composition, pack: RulePack, plan: ServingPlan) -> str | None:
    """The servings-per-container text (\"about 5\", \"1\") by the pack's servings rounding."""
    serving, container, single = plan.serving, plan.container, plan.single
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
