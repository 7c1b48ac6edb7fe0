"""Declared figures of every demo product in every market, pinned as a reviewed snapshot.

The snapshot (``tests/data/snapshots/demo_labels.json``) was taken from the labelling code
before the one-engine restructure; this test shows the restructure changed no declared figure,
claim verdict, statement, allergen, ingredient list or front-of-pack verdict.  Demo data
(fictional snack maker): these are regression values of our own output, not reference values.

A deliberate change of a figure regenerates the file with
``LABELCALC_UPDATE_SNAPSHOTS=1 python3 -m pytest tests/test_snapshots.py`` and the diff is reviewed.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from typer.testing import CliRunner

from labelcalc.cli import app

ROOT = Path(__file__).resolve().parents[1]
SNAPSHOT = ROOT / "tests" / "data" / "snapshots" / "demo_labels.json"
MARKETS = "us,eu,uk,ca,anz,codex"
PRODUCTS = sorted(p.stem for p in (ROOT / "demo_products").glob("hl_*.yaml"))


def _run(*args: str) -> dict:
    res = CliRunner().invoke(app, list(args))
    assert res.exit_code == 0, res.output
    return json.loads(res.stdout)


def _r(x):
    return None if x is None else round(x, 6)


def _rounded(obj):
    """Floats to 6 decimals all through a JSON value (unrounded figures differ in float noise only)."""
    if isinstance(obj, float):
        return round(obj, 6)
    if isinstance(obj, dict):
        return {k: _rounded(v) for k, v in obj.items()}
    if isinstance(obj, list):
        return [_rounded(v) for v in obj]
    return obj


def labels_of(product: str) -> dict:
    """The figures a label carries, per market and scenario, from the JSON outputs."""
    path = str(ROOT / "demo_products" / f"{product}.yaml")
    dec = _run("declare", path, "-m", MARKETS, "--json")
    ass = _run("assess", path, "-m", MARKETS, "--json")
    out: dict = {}
    for d in dec["declarations"]:
        key = f"{d['market']}/{d['scenario']}"
        out[key] = {
            "columns": d["columns"],
            "serving_g": d["serving_g"],
            "servings_per_container": d["servings_per_container"],
            "energy": {k: _r(v) if isinstance(v, float) else v for k, v in d["energy"].items()},
            "rows": {
                r["nutrient"]: [
                    r["shown"],
                    r["declared_per_100g"],
                    r["declared_per_serving"],
                    r["declared_per_container"],
                    r["percent_reference_by_column"],
                ]
                for r in d["rows"]
            },
        }
    for a in ass["assessments"]:
        key = f"{a['market']}/{a['scenario']}"
        out[key]["claims"] = {c["claim"]: c["verdict"] for c in a["claims"]}
        out[key]["statements"] = sorted(f"{s['statement']}:{s['status']}" for s in a["statements"])
        out[key]["allergens"] = a["allergens"]["declared"]
        out[key]["ingredient_list"] = (a["ingredient_list"] or {}).get("text")
        out[key]["front_of_pack"] = _rounded(json.loads(json.dumps(a["front_of_pack"], sort_keys=True, default=str)))
        out[key]["reviews"] = len(a["reviews"])
    return out


def test_demo_labels_match_snapshot():
    got = {p: labels_of(p) for p in PRODUCTS}
    if os.environ.get("LABELCALC_UPDATE_SNAPSHOTS"):
        SNAPSHOT.write_text(json.dumps(got, indent=1, sort_keys=True) + "\n")
        pytest.skip("snapshot rewritten")
    want = json.loads(SNAPSHOT.read_text())
    for p in PRODUCTS:
        for key in want[p]:
            assert got[p][key] == want[p][key], f"{p} {key}"
    assert set(got) == set(want)
