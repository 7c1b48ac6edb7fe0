"""JSON form of an assessment (see README, "JSON output")."""

from __future__ import annotations

from dataclasses import asdict

from labelcalc.labelling.assess import Assessment


def assessment_dict(a: Assessment) -> dict:
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
