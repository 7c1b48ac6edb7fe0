"""The range path (labelcalc/batch.py) agrees with declare + assess, label by label."""

from __future__ import annotations

import sys
from pathlib import Path

from labelcalc.errors import LabelError
from labelcalc.formulation.composition import compose_many
from labelcalc.intake.formula import FormulaIndex, load_formula
from labelcalc.intake.library import load_library
from labelcalc.intake.sources import product_files
from labelcalc.labelling.assess import assess
from labelcalc.labelling.batch import BatchLabels
from labelcalc.labelling.declare import declare
from labelcalc.labelling.rulepack import load_packs
from labelcalc.ranges.rangerun import label_record, summary_row

ROOT = Path(__file__).resolve().parent.parent
MARKETS = ["us", "eu", "uk", "ca", "anz", "codex"]


def _compare(folder: Path, lib_dir: Path):
    lib = load_library(lib_dir)
    index = FormulaIndex([folder])
    cache: dict = {}
    formulas = [load_formula(p, lib, _cache=cache, _index=index) for p in product_files(folder)]
    comps, failed = compose_many(formulas, lib)
    allc = [c for f in formulas if f.id in comps for c in comps[f.id]]
    checked = 0
    for market in MARKETS:
        pack = load_packs()[market]
        batch = BatchLabels(pack, allc)
        got = {(c.formula.id, c.scenario): (row, dec, st, al, cl) for c, row, dec, st, al, cl in batch.results()}
        for c in allc:
            try:
                d = declare(c, pack)
            except LabelError:
                assert any(bc is c for bc, _ in batch.errors)
                continue
            a = assess(c, pack, d, with_ingredient_list=False)
            want_row = summary_row(c.formula, d, a)
            want_rec = label_record(c.formula, d, a, {}, "")
            row, dec, st, al, cl = got[(c.formula.id, c.scenario)]
            assert row == want_row, (
                market,
                c.formula.id,
                {k: (row.get(k), want_row.get(k)) for k in set(row) | set(want_row) if row.get(k) != want_row.get(k)},
            )
            assert (
                dec == want_rec.declared
                and st == want_rec.statements
                and al == want_rec.allergens
                and cl == want_rec.claims
            )
            checked += 1
    return checked


def test_batch_equals_single_on_demo_products():
    assert (
        _compare(ROOT / "demo_products", ROOT / "demo_products" / "ingredients") >= 48
    )  # 6 products, 8 labels, 6 markets


def test_batch_equals_single_on_a_generated_range(tmp_path):
    sys.path.insert(0, str(ROOT / "benchmarks"))
    from generate import generate

    src = generate(120, tmp_path / "r", seed=11)
    assert _compare(src, src / "ingredients") > 300
