"""The documented JSON forms of a label record (see README, "JSON output").

Both read the label record's declaration and assessment; nothing here computes a figure.
"""

from __future__ import annotations

from dataclasses import asdict

from labelcalc import components as C
from labelcalc.formulation.energy import energy_by_line, energy_of
from labelcalc.labelling.model import Assessment, Declaration


def declaration_dict(d: Declaration, *, trace: bool = False) -> dict:
    """The documented JSON form of a declaration (see README, "JSON output"); ``trace`` adds the record's
    trace of every shown figure to its leaf ingredients."""
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
    doc = {
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
    if trace and d.record is not None:
        doc["trace"] = d.record.trace
    return doc


def assessment_dict(a: Assessment) -> dict:
    """The documented JSON form of an assessment."""
    d = a.declaration
    return {
        "market": a.market,
        "scenario": d.composition.scenario,
        "claims": [asdict(c) for c in a.claims],
        "statements": [asdict(s) for s in a.statements],
        "allergens": a.allergens,
        "ingredient_list": a.ingredient_list,
        "front_of_pack": a.front_of_pack,
        "reviews": a.reviews,
        "draft_notice": d.pack.pack.draft_notice,
    }


def composition_dict(formula, comps, sets) -> dict:
    """The documented JSON form of ``labelcalc compose`` (see README): each scenario's composition, its
    sources and assumptions, and its energy under each factor set of ``sets``."""
    serving = formula.serving_grams()
    out = []
    for c in comps:
        energies = {}
        for fs in sets:
            e = energy_of(c, fs)
            energies[fs.id] = {
                "kind": "available" if fs.id == "available" else "declared basis",
                "kj_per_100g": e.kj,
                "kcal_per_100g": e.kcal,
                "kj_per_serving": e.per_serving(serving)[0],
                "kcal_per_serving": e.per_serving(serving)[1],
                "by_component_kcal_per_100g": e.by_component_kcal,
                "by_line_kcal_per_100g": {lab: kc for lab, _, kc in energy_by_line(c, fs)},
                "unknown_because": e.unknown_because,
                "reviews": [r.strip() for r in e.reviews],
                "source": f"{fs.factor_set.instrument}, {fs.factor_set.section}",
            }
        labels, rows = c.contributions
        out.append(
            {
                "scenario": c.scenario,
                "batch_g": c.batch_grams,
                "finished_g": c.finished_grams,
                "steps": [
                    {
                        "name": s.name,
                        "water_lost_g": s.water_lost_g,
                        "oil_taken_up_g": s.oil_taken_up_g,
                        "oil": s.oil_ref,
                        "mass_after_g": s.mass_after_g,
                    }
                    for s in c.steps
                ],
                "per_100g": {k: c.value(k) for k in C.KEYS},
                "per_serving": {k: c.per_serving(k) for k in C.KEYS} if serving else None,
                "units": {k: C.BY_KEY[k].unit for k in C.KEYS},
                "unknown": {k: c.unknown_inputs(k) for k in c.unknown_components},
                "contributions_per_100g": {
                    lab: {k: (None if row[i] != row[i] else float(row[i])) for i, k in enumerate(C.KEYS)}
                    for lab, row in zip(labels, rows)
                },
                "energy": energies,
            }
        )
    return {
        "ingredient_values": {
            ing.id: {
                "source": ing.source,
                "nitrogen_factor": ing.nitrogen_factor,
                "per_100g": {
                    k: {"value": v, "unit": C.unit_of(k), "source": src, "basis": basis}
                    for k, (v, src, basis) in ing.provenance().items()
                },
            }
            for ing in formula.ingredients_used()
        },
        "assumed_zero": [
            {"ingredient": ing, "components": parts, "reason": reason} for ing, parts, reason in comps[0].assumptions
        ]
        if comps
        else [],
        "product": {
            "id": formula.id,
            "name": formula.header.name,
            "version": formula.header.version,
            "file": formula.file,
            "content_hash": formula.content_hash,
            "serving_g": serving,
            "fried": formula.is_fried,
            "has_range": formula.has_range,
        },
        "scenarios": out,
        "notes": (
            [
                "Fried product: oil uptake and moisture loss are estimates; laboratory analysis of fat and moisture is "
                "the usual confirmation."
            ]
            if formula.is_fried
            else []
        ),
        "draft_notice": "DRAFT — verify against current local regulation and a qualified regulatory professional.",
    }
