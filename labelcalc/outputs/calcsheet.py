"""The calculation sheet: how every declared figure was reached, down to the leaf ingredients.

Rows come from the label record's trace (:mod:`labelcalc.labelling.trace`): the same record the
panel is drawn from, so the sheet, the JSON output and the register can never disagree.
"""

from __future__ import annotations

import csv
from pathlib import Path

from labelcalc.files import atomic_write
from labelcalc.labelling.model import Assessment
from labelcalc.labelling.rounding import format_number, to_decimal

COLUMNS = [
    "scenario",
    "kind",
    "nutrient",
    "label",
    "column",
    "unrounded",
    "unit",
    "rounding",
    "declared",
    "percent",
    "line_kind",
    "route",
    "ingredient",
    "grams_per_100g",
    "amount",
    "source",
]


def _num(v) -> str:
    return "unknown" if v is None else format_number(to_decimal(round(v, 4)))


def _record(a: Assessment):
    rec = a.declaration.record
    if rec is None:
        raise ValueError("the assessment carries no label record")
    return rec


def calculation_rows(a: Assessment) -> list[dict]:
    """The sheet's rows: one "figure" row per shown row and column, one "line" row per leaf ingredient or
    processing effect that contributes to it, one "unknown" row per unknown input, one "assumed zero" row per
    zero the ingredient library states (ingredient, components, reason)."""
    trace = _record(a).trace
    out: list[dict] = []
    for r in trace["rows"]:
        for b, col in r["columns"].items():
            pct = col.get("percent")
            pct_text = ""
            if pct:
                raw = pct["unrounded"]
                pct_text = (
                    f"of {pct['reference_value']:g} {pct['unit']}: "
                    + ("" if raw is None else f"{raw:.2f} %, declared ")
                    + (pct["declared"] or "-")
                )
            out.append(
                {
                    "kind": "figure",
                    "nutrient": r["nutrient"],
                    "label": r["label"],
                    "column": b.replace("_", " "),
                    "unrounded": _num(col["unrounded"]),
                    "unit": r["unit"],
                    "rounding": "unknown input" if col["rounding"] is None else col["rounding"],
                    "declared": col["declared"],
                    "percent": pct_text,
                    "source": "; ".join(r["citations"]),
                }
            )
    for r in trace["rows"]:
        for ln in r["lines"]:
            if ln["amount"] == 0 and ln["kind"] == "ingredient":  # processing steps stay: they explain the figure
                continue
            out.append(
                {
                    "kind": "line",
                    "nutrient": r["nutrient"],
                    "label": r["label"],
                    "line_kind": ln["kind"],
                    "route": ln["route"],
                    "ingredient": ln["ingredient"],
                    "grams_per_100g": _num(ln["grams_per_100g"]),
                    "amount": _num(ln["amount"]),
                    "unit": ln["unit"],
                    "source": "; ".join(sorted(set(ln["sources"].values()))),
                }
            )
        if r["unknown_inputs"]:
            out.append(
                {
                    "kind": "unknown",
                    "nutrient": r["nutrient"],
                    "label": r["label"],
                    "source": ", ".join(r["unknown_inputs"]),
                }
            )
    for ing, comps, reason in a.declaration.composition.assumptions:
        out.append({"kind": "assumed zero", "ingredient": ing, "label": ", ".join(comps), "source": reason})
    return out


def write_calculation_csv(items: list[Assessment], path: Path) -> Path:
    """The calculation sheet of every scenario of one product and market, as CSV."""

    def w(tmp: Path):
        with tmp.open("w", newline="", encoding="utf-8") as fh:
            wr = csv.DictWriter(fh, fieldnames=COLUMNS, extrasaction="ignore")
            wr.writeheader()
            for a in items:
                for row in calculation_rows(a):
                    wr.writerow({"scenario": a.declaration.composition.scenario, **row})

    atomic_write(path, w)
    return path
