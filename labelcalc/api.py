"""The small Python API that the command line is a thin layer over.

>>> from labelcalc import api                                    # doctest: +SKIP
>>> lib = api.load_library("demo_products/ingredients")           # doctest: +SKIP
>>> formula = api.load_formula("demo_products/hl_kettle_sea_salt.yaml", lib)  # doctest: +SKIP
>>> [c.scenario for c in api.compose(formula, lib)]              # doctest: +SKIP
['low', 'high']
"""

from __future__ import annotations

from pathlib import Path

from labelcalc.errors import InputError, Problem
from labelcalc.formulation.composition import Composition, compose, compose_many
from labelcalc.formulation.energy import EnergyResult, energy_of, load_factor_set, rules_dir
from labelcalc.intake.formula import Formula, load_formula
from labelcalc.intake.library import Library, load_library
from labelcalc.labelling.declare import declare
from labelcalc.labelling.model import Declaration
from labelcalc.labelling.rulepack import RulePack, get_packs, load_packs

__all__ = [
    "Composition",
    "Declaration",
    "EnergyResult",
    "Formula",
    "Library",
    "RulePack",
    "compose",
    "compose_many",
    "declare",
    "energy_of",
    "find_library",
    "get_packs",
    "load_factor_set",
    "load_formula",
    "load_library",
    "load_packs",
    "rules_dir",
]


def find_library(formula_path: str | Path) -> Path:
    """The default ingredient library of a formula: the nearest ``ingredients/``
    folder in the formula's folder or one of its parents."""
    p = Path(formula_path).resolve()
    for folder in [p if p.is_dir() else p.parent, *p.parents]:
        cand = folder / "ingredients"
        if cand.is_dir():
            return cand
    raise InputError(
        Problem(
            "no ingredient library found next to the formula (an 'ingredients/' folder)",
            file=str(formula_path),
            fix="pass --library PATH",
        )
    )
