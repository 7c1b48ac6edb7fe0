"""The documented JSON forms of a label record (see README, "JSON output").

Both read the label record's declaration and assessment; nothing here computes a figure.
"""

from __future__ import annotations

from dataclasses import asdict

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
