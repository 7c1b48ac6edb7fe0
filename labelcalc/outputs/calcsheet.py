"""The calculation sheet: how every declared figure was reached.

Rows come from the same declaration and assessment the panel is drawn from,
so the sheet, the JSON output and the register can never disagree.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

from labelcalc.files import atomic_write
from labelcalc.formulation import components as C
from labelcalc.formulation.composition import COL
from labelcalc.formulation.energy import energy_by_line
from labelcalc.labelling.record import Assessment
from labelcalc.labelling.rounding import format_number, to_decimal


def _band_text(rule_key: str, rule, band_index: int) -> str:
    b = rule.bands[band_index]
    rng = f"below {b.below:g}" if b.below is not None else f"up to {b.up_to:g}" if b.up_to is not None else "above"
    act = (
        f"nearest {b.step:g}"
        if b.step
        else f"{b.significant_figures} significant figures"
        if b.significant_figures
        else f"'{b.declare}'"
    )
    return f"{rule_key}: {rng} → {act} ({rule.tie.replace('_', ' ')})"


def _num(v) -> str:
    return "unknown" if v is None else format_number(to_decimal(round(v, 4)))


def calculation_rows(a: Assessment) -> list[dict]:
    d = a.declaration
    pack = d.pack
    comp = d.composition
    out: list[dict] = []
    rules = {r.nutrient: r for r in pack.rows}
    for r in d.shown_rows:
        prow = rules[r.nutrient]
        rule = pack.rounding[prow.rounding]
        for b in d.columns:
            dec = r.declared.get(b)
            pct = ""
            if prow.percent:
                ref = pack.reference_values[prow.percent]
                raw = r.percent_unrounded.get(b)
                pct = f"{ref.amount:g} {ref.unit}: {'' if raw is None else f'{raw:.2f} % → '}{r.percent.get(b) or '-'}"
            out.append(
                {
                    "kind": "figure",
                    "nutrient": r.nutrient,
                    "label": r.label_for(b),
                    "column": b.replace("_", " "),
                    "unrounded": _num(r.unrounded.get(b)),
                    "unit": r.unit,
                    "rounding": "unknown input" if dec is None else _band_text(prow.rounding, rule, dec.band),
                    "declared": r.text(b),
                    "percent": pct,
                    "source": "; ".join(r.source),
                }
            )
    labels, rows = comp.contributions
    for r in d.shown_rows:
        nd = pack.nutrients[r.nutrient]
        if nd.energy:
            for lab, kj, kcal in energy_by_line(comp, d.declared_energy.factor_set):
                v = kcal if nd.energy == "kcal" else kj
                out.append({"kind": "contribution", "line": lab, "label": r.label, "value": _num(v) + f" {nd.unit}"})
            continue
        for lab, row in zip(labels, rows):
            total = 0.0
            unknown = False
            for key, factor in (nd.sum or {}).items():
                for k in C.DERIVED.get(key, (key,)):
                    x = row[COL[k]]
                    if np.isnan(x):
                        unknown = True
                    else:
                        total += x * factor
            out.append(
                {
                    "kind": "contribution",
                    "line": lab,
                    "label": r.label,
                    "value": "unknown" if unknown else _num(total) + f" {nd.unit}",
                }
            )
    for r in d.rows:
        if r.unknown_inputs:
            out.append({"kind": "unknown", "label": r.label, "value": ", ".join(r.unknown_inputs)})
    return out


def write_calculation_csv(items: list[Assessment], path: Path) -> Path:

    cols = [
        "scenario",
        "kind",
        "nutrient",
        "label",
        "column",
        "line",
        "unrounded",
        "unit",
        "rounding",
        "declared",
        "percent",
        "value",
        "source",
    ]

    def w(tmp: Path):
        with tmp.open("w", newline="", encoding="utf-8") as fh:
            wr = csv.DictWriter(fh, fieldnames=cols, extrasaction="ignore")
            wr.writeheader()
            for a in items:
                for row in calculation_rows(a):
                    wr.writerow({"scenario": a.declaration.composition.scenario, **row})

    atomic_write(path, w)
    return path
