"""The lean per-label results a range run writes: summary row and register fields.

They read the labelling engine's tables directly (no per-label record is built), using the same
helpers as the label record for the parts walked product by product (allergens, front of pack),
so a range summary and a single-product output cannot disagree.
"""

from __future__ import annotations

import numpy as np

from labelcalc.labelling.claims_table import VERDICT_ELIGIBLE
from labelcalc.labelling.engine import LabelEngine
from labelcalc.labelling.record import front_of_pack
from labelcalc.labelling.rounding import fill_amount


def _f(v: float) -> float | None:
    return None if v != v else v  # NaN is the one float unequal to itself


class _LazyTexts(dict):
    """Printed texts of one nutrient by column, made on first use (a summary without the register reads only
    each product's main column)."""

    def __init__(self, eng: LabelEngine, nutrient: str):
        super().__init__()
        self.eng, self.nutrient = eng, nutrient

    def __missing__(self, basis: str) -> list[str]:
        got = self[basis] = self.eng.texts(self.nutrient, basis)
        return got


class _Tables:
    """One engine's tables as plain lists, read label by label (indexing a list is far cheaper than a
    numpy scalar); built once per engine."""

    def __init__(self, eng: LabelEngine):
        pack = eng.pack
        lists = eng.as_lists
        self.e_kcal = eng.e_kcal.tolist()
        self.e_kj = eng.e_kj.tolist()
        self.a_kcal = eng.available.kcal.tolist()
        pb = pack.panel.percent_basis
        self.rows = []
        for r in pack.rows:
            n = r.nutrient
            pcts = lists["percent"][n]
            texts = _LazyTexts(eng, n)  # a column's texts only when a row reads them
            label = r.label if "{amount}" in r.label else None
            self.rows.append((n, label, lists["shown"][n], texts, pcts, f"{n}_percent", pb))
        eligible = [(c.claim.id, (c.verdict == VERDICT_ELIGIBLE).tolist()) for c in eng.claims]
        self.claims = [[cid for cid, ok in eligible if ok[i]] for i in range(eng.n)]
        ids = [st.id for st, _ in eng.statements]
        listed = eng.statements_listed.T.tolist()
        self.statements = [[x for x, on in zip(ids, col) if on] for col in listed] if ids else [[]] * eng.n
        zero = np.zeros(eng.n, dtype=int)
        for flags in eng.zero_rows.values():
            zero += np.asarray(flags, dtype=bool)
        self.reviews = (np.asarray(eng.energy_review_counts, dtype=int) + zero).tolist()


def _tables(eng: LabelEngine) -> _Tables:
    got = eng.__dict__.get("_summary_tables")
    if got is None:
        got = eng.__dict__["_summary_tables"] = _Tables(eng)
    return got


def label_summary(
    eng: LabelEngine, i: int, register: bool = True
) -> tuple[dict, dict[str, str | None], list[str], list[str], list[str]]:
    """(summary row, declared texts by "nutrient|column[|%]", statements, allergens, eligible claims) of
    product ``i``; the declared texts of every column only with ``register`` (only the register keeps them)."""
    pack = eng.pack
    tab = _tables(eng)
    comp = eng.comps[i]
    f = comp.formula
    plan = eng.plans[i]
    main = plan.columns[0]
    s = plan.serving
    e_kcal, e_kj, a_kcal = _f(tab.e_kcal[i]), _f(tab.e_kj[i]), _f(tab.a_kcal[i])
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
    columns = plan.columns
    for n, label, shown, texts, pcts, pkey, pb in tab.rows:
        if not shown[i]:
            continue
        text = texts[main][i]
        row[n] = fill_amount(label, text) if label is not None else text
        pct = pcts.get(pb or main)
        if pct and pct[i]:
            row[pkey] = pct[i]
        if not register:
            continue
        for b in columns:
            declared[f"{n}|{b}"] = texts[b][i]
            pc = pcts.get(b)
            if pc and pc[i]:
                declared[f"{n}|{b}|%"] = pc[i]
    claims = tab.claims[i]
    statements = tab.statements[i]
    allergens = eng.allergens(i)
    fop = front_of_pack(eng, i) if eng.front_of_pack else []
    row["claims_eligible"] = "; ".join(claims)
    row["statements_required"] = "; ".join(statements)
    row["allergens"] = "; ".join(allergens.get("declared", []))
    row["allergens_unknown"] = "; ".join(allergens.get("unknown_ingredients", []))
    row["front_of_pack"] = "; ".join(
        f"{fo['scheme']}: "
        + ", ".join(f"{k}={v.get('colour', v.get('high_in'))}" for k, v in fo.get("verdicts", {}).items())
        for fo in fop
    )
    row["reviews"] = tab.reviews[i] + len(allergens.get("review", []))
    return row, declared, sorted(statements), sorted(allergens.get("declared", [])), sorted(claims)
