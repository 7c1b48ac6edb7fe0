"""The lean per-label results a range run writes: summary row and register fields.

They read the labelling engine's tables directly (no per-label record is built), using the same
helpers as the label record for the parts walked product by product (allergens, front of pack),
so a range summary and a single-product output cannot disagree.
"""

from __future__ import annotations

import numpy as np

from labelcalc.labelling.engine import VERDICT_ELIGIBLE, LabelEngine
from labelcalc.labelling.ingredients import allergen_report
from labelcalc.labelling.record import front_of_pack


def _f(v: float) -> float | None:
    return None if np.isnan(v) else float(v)


def label_summary(eng: LabelEngine, i: int) -> tuple[dict, dict[str, str | None], list[str], list[str], list[str]]:
    """(summary row, declared texts by "nutrient|column[|%]", statements, allergens, eligible claims) of
    product ``i``."""
    pack = eng.pack
    comp = eng.comps[i]
    f = comp.formula
    plan = eng.plans[i]
    main = plan.columns[0]
    s = plan.serving
    e_kcal, e_kj, a_kcal = _f(eng.e_kcal[i]), _f(eng.e_kj[i]), _f(eng.available.kcal[i])
    row: dict = {
        "product_id": f.id,
        "product_name": f.header.name,
        "file": f.file,
        "market": pack.market,
        "scenario": comp.scenario,
        "formula_hash": f.content_hash,
        "column": main,
        "serving_g": s,
        "declared_energy_kcal_per_100g": e_kcal,
        "declared_energy_kj_per_100g": e_kj,
        "declared_energy_kcal_per_serving": None if e_kcal is None or s is None else e_kcal * s / 100,
        "available_energy_kcal_per_100g": a_kcal,
        "available_energy_kcal_per_serving": None if a_kcal is None or s is None else a_kcal * s / 100,
    }
    declared: dict[str, str | None] = {}
    pb = pack.panel.percent_basis or main
    for r in pack.rows:
        if not eng.shown[r.nutrient][i]:
            continue
        text = eng.texts(r.nutrient, main)[i]
        row[r.nutrient] = r.label.replace("{amount}", text.replace(" ", "")) if "{amount}" in r.label else text
        pct = eng.percent[r.nutrient].get(pb)
        if pct and pct[0][i]:
            row[f"{r.nutrient}_percent"] = pct[0][i]
        for b in plan.columns:
            declared[f"{r.nutrient}|{b}"] = eng.texts(r.nutrient, b)[i]
            pc = eng.percent[r.nutrient].get(b)
            if pc and pc[0][i]:
                declared[f"{r.nutrient}|{b}|%"] = pc[0][i]
    claims = [c.claim.id for c in eng.claims if c.verdict[i] == VERDICT_ELIGIBLE]
    statements = []
    for st, triggers in eng.statements:
        hit, undecided = eng.statement_fired(triggers)
        if hit[i] or undecided[i]:
            statements.append(st.id)
    allergens = allergen_report(comp, pack)
    fop = front_of_pack(eng, i)
    row["claims_eligible"] = "; ".join(claims)
    row["statements_required"] = "; ".join(statements)
    row["allergens"] = "; ".join(allergens.get("declared", []))
    row["allergens_unknown"] = "; ".join(allergens.get("unknown_ingredients", []))
    row["front_of_pack"] = "; ".join(
        f"{fo['scheme']}: "
        + ", ".join(f"{k}={v.get('colour', v.get('high_in'))}" for k, v in fo.get("verdicts", {}).items())
        for fo in fop
    )
    zero = sum(bool(flags[i]) for flags in eng.zero_rows.values())
    reviews = len(eng.declared_energy_reviews(i)) + zero + len(allergens.get("review", []))
    row["reviews"] = reviews
    return row, declared, sorted(statements), sorted(allergens.get("declared", [])), sorted(claims)
