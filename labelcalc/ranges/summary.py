"""The lean per-label results a range run writes: summary row and register fields.

They read the labelling engine's tables directly (no per-label record is built), using the same
helpers as the label record for the parts walked product by product (allergens, front of pack),
so a range summary and a single-product output cannot disagree.
"""

from __future__ import annotations

import numpy as np

from labelcalc.labelling.engine import VERDICT_ELIGIBLE, LabelEngine
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
    lists = eng.as_lists
    for r in pack.rows:
        n = r.nutrient
        if not lists["shown"][n][i]:
            continue
        text = eng.texts(n, main)[i]
        row[n] = r.label.replace("{amount}", text.replace(" ", "")) if "{amount}" in r.label else text
        pcts = lists["percent"][n]
        pct = pcts.get(pb)
        if pct and pct[i]:
            row[f"{n}_percent"] = pct[i]
        for b in plan.columns:
            declared[f"{n}|{b}"] = eng.texts(n, b)[i]
            pc = pcts.get(b)
            if pc and pc[i]:
                declared[f"{n}|{b}|%"] = pc[i]
    claims = [c.claim.id for c in eng.claims if c.verdict[i] == VERDICT_ELIGIBLE]
    listed = eng.statements_listed[:, i]
    statements = [st.id for (st, _), on in zip(eng.statements, listed) if on]
    allergens = eng.allergens(i)
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
    reviews = int(eng.energy_review_counts[i]) + zero + len(allergens.get("review", []))
    row["reviews"] = reviews
    return row, declared, sorted(statements), sorted(allergens.get("declared", [])), sorted(claims)
