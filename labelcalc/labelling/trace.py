"""How each declared figure of a label record was reached, down to the leaf ingredients.

For every shown row the trace gives: the unrounded value per 100 g and in each printed column;
the nutrient's definition in the market pack; one line per leaf ingredient (through any depth of
sub-formulas) and per processing effect (water lost, oil taken up and which oil) with its
contribution and the ingredient value's source in the library; for energy rows the factor used
for each component; the rounding band applied with its citation; the percentage of the reference
value.  The line contributions add up to the unrounded value (unknown lines make it unknown).

The figures come from the record (declared values) and from the composition's leaf lines
(:mod:`labelcalc.formulation.leaves`); energy lines apply the same factor vectors the engine used.
"""

from __future__ import annotations

import numpy as np

from labelcalc import components as C
from labelcalc.formulation.composition import COL
from labelcalc.formulation.energy import FactorSet, energy_table
from labelcalc.formulation.leaves import LeafLine, leaf_lines
from labelcalc.labelling.model import Declaration
from labelcalc.labelling.rounding import RoundingRule, plain_label


def band_text(rule: RoundingRule, band_index: int) -> str:
    """A rounding band in words, with its threshold: 'from 5 up to 50: nearest 1 (ties: half up)'."""
    bands = rule.bands
    b = bands[band_index]
    prev = None
    for x in bands[:band_index]:
        bound = x.below if x.below is not None else x.up_to
        if bound is not None and not x.only_if:
            prev = (bound, x.below is not None)
    if b.below is not None:
        rng = f"below {b.below:g}"
    elif b.up_to is not None:
        rng = f"up to {b.up_to:g}"
    else:
        rng = "any amount"
    if prev is not None:
        lo, was_below = prev
        rng = (f"{lo:g} or more" if was_below else f"above {lo:g}") + ("" if rng == "any amount" else f", {rng}")
    if b.only_if:
        conds = []
        for c in b.only_if:
            parts = [
                f"below {c.below:g}" if c.below is not None else "",
                f"up to {c.up_to:g}" if c.up_to is not None else "",
                f"at least {c.at_least:g}" if c.at_least is not None else "",
            ]
            conds.append(f"{c.nutrient.replace('_', ' ')} {' '.join(p for p in parts if p)}")
        rng += " (only if " + " and ".join(conds) + ")"
    if b.step:
        act = f"to the nearest {b.step:g}"
    elif b.significant_figures:
        act = f"to {b.significant_figures} significant figures"
    else:
        act = f"declared as '{b.declare}'"
    tie = "ties rounded half up" if rule.tie == "half_up" else "ties rounded to even"
    return f"{rng}: {act} ({tie})"


def _factors(fs: FactorSet, unit: str) -> list[dict]:
    out = []
    for f in fs.factors:
        v = f.kcal if unit == "kcal" else f.kj
        out.append(
            {
                "components": f.components,
                "factor": v,
                "unit": f"{unit}/g",
                "citation": f.citation,
                "confidence": f.confidence,
            }
        )
    if fs.factor_set.protein_from_nitrogen:
        out.append(
            {
                "components": ["protein = nitrogen"],
                "factor": fs.factor_set.protein_from_nitrogen,
                "unit": "g protein/g nitrogen",
                "citation": fs.factor_set.protein_from_nitrogen_citation or "",
                "confidence": fs.factor_set.confidence,
            }
        )
    if unit == "kcal" and fs.factor_set.kcal_from_kj:
        out.append(
            {
                "components": ["energy"],
                "factor": 1 / fs.factor_set.kcal_from_kj,
                "unit": "kcal/kJ",
                "citation": fs.factor_set.title,
                "confidence": fs.factor_set.confidence,
            }
        )
    if unit == "kJ" and fs.factor_set.kj_from_kcal:
        out.append(
            {
                "components": ["energy"],
                "factor": fs.factor_set.kj_from_kcal,
                "unit": "kJ/kcal",
                "citation": fs.factor_set.title,
                "confidence": fs.factor_set.confidence,
            }
        )
    return out


def trace_of(d: Declaration) -> dict:
    """The trace of every shown row of a declaration (see the module docstring); JSON-ready."""
    pack = d.pack
    comp = d.composition
    lines = leaf_lines(comp)
    fs = d.declared_energy.factor_set
    rows = []
    energy_rows = None  # the leaf lines through the declared factor set, once
    for r in d.shown_rows:
        nd = pack.nutrients[r.nutrient]
        prow = next(x for x in pack.rows if x.nutrient == r.nutrient)
        rule = pack.rounding[prow.rounding]
        entry: dict = {
            "nutrient": r.nutrient,
            "label": plain_label(r.label),  # a row that carries its amount is named without the slot
            "unit": r.unit,
            "unrounded_per_100g": r.value_per_100g,
            "columns": {},
            "lines": [],
            "unknown_inputs": r.unknown_inputs,
            "citations": r.source,
        }
        for b in d.columns:
            dec = r.declared.get(b)
            col: dict = {
                "unrounded": r.unrounded.get(b),
                "declared": r.text(b),
                "rounding": None if dec is None else band_text(rule, dec.band),
                "rounding_citation": rule.citation,
            }
            if prow.percent:
                ref = pack.reference_values[prow.percent]
                col["percent"] = {
                    "reference_value": ref.amount,
                    "unit": ref.unit,
                    "unrounded": r.percent_unrounded.get(b),
                    "declared": r.percent.get(b),
                    "citation": ref.citation,
                }
            entry["columns"][b] = col
        if nd.energy:
            unit = "kcal" if nd.energy == "kcal" else "kJ"
            entry["definition"] = f"energy by factor set '{fs.id}' ({fs.factor_set.title})"
            entry["factors"] = _factors(fs, unit)
            if energy_rows is None:
                rows_ = np.vstack([ln.contribution for ln in lines])
                energy_rows = energy_table(rows_, np.isnan(rows_), fs)
            per_line = energy_rows.kcal if unit == "kcal" else energy_rows.kj
            for ln, e in zip(lines, per_line):
                amount = None if np.isnan(e) else float(e)
                entry["lines"].append(_line(ln, amount, unit, sources=_sources(ln, _energy_components(fs))))
        else:
            parts = [(k, f) for k, f in (nd.sum or {}).items()]
            entry["definition"] = " + ".join(k if f == 1 else f"{f:g} x {k}" for k, f in parts)
            entry["definition_citation"] = nd.citation
            keys = [(kk, f) for k, f in parts for kk in C.DERIVED.get(k, (k,))]
            for ln in lines:
                vals = [ln.contribution[COL[kk]] * f for kk, f in keys]
                amount = None if any(np.isnan(v) for v in vals) else float(sum(vals))
                entry["lines"].append(_line(ln, amount, r.unit, sources=_sources(ln, [kk for kk, _ in keys])))
        rows.append(entry)
    return {
        "product": comp.formula.id,
        "market": d.market,
        "scenario": comp.scenario,
        "finished_grams_per_batch": comp.finished_grams,
        "batch_grams": comp.batch_grams,
        "rows": rows,
    }


def _energy_components(fs: FactorSet) -> list[str]:
    return [c for f in fs.factors for c in f.components if c in COL]


def _sources(ln: LeafLine, keys: list[str]) -> dict[str, str]:
    """The library source of each value this line contributes (only values it has)."""
    ing = ln.ingredient
    if ing is None:
        return {}
    out: dict[str, str] = {}
    for k in keys:
        if k not in C.KEYS:
            continue
        if k not in ing.values:
            out[k] = "unknown: not in the library entry"
        elif ing.values[k]:
            out[k] = ing.source_of(k)
    return out


def _line(ln: LeafLine, amount: float | None, unit: str, *, sources: dict[str, str]) -> dict:
    return {
        "kind": ln.kind,
        "route": ln.where(),
        "ingredient": ln.name,
        "ingredient_name": ln.ingredient.label_name if ln.ingredient is not None else "water",
        "grams_per_100g": ln.grams,
        "amount": amount,
        "unit": unit,
        "sources": sources,
    }
