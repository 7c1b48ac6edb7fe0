"""Public food-composition tables: one reader per database, one mapping file per database.

``read_table(database, path)`` returns a :class:`~labelcalc.tables.model.FoodTable`; ``maps/<database>.yaml``
says which of its nutrient codes become which labelcalc components, with citations and conversions;
:mod:`labelcalc.tables.library` writes ingredient-library entries from chosen foods.
"""

from __future__ import annotations

from importlib import import_module
from pathlib import Path

from labelcalc.errors import InputError, Problem
from labelcalc.tables.model import FoodTable

#: database key -> (reader module, what to point it at)
DATABASES: dict[str, tuple[str, str]] = {
    "fdc": (
        "labelcalc.tables.fdc",
        "the unzipped FoodData Central CSV folder (food.csv, nutrient.csv, food_nutrient.csv)",
    ),
    "cnf": (
        "labelcalc.tables.cnf",
        "the Canadian Nutrient File CSV folder (FOOD NAME.csv, NUTRIENT AMOUNT.csv, NUTRIENT NAME.csv)",
    ),
    "cofid": ("labelcalc.tables.cofid", "the CoFID workbook (.xlsx)"),
    "afcd": ("labelcalc.tables.afcd", "the AFCD nutrient workbook (.xlsx), food details workbook beside it"),
    "ciqual": ("labelcalc.tables.ciqual", "the CIQUAL XML folder (alim_*.xml, compo_*.xml, const_*.xml)"),
}

_CACHE: dict[tuple[str, str, str | None], FoodTable] = {}


def read_table(database: str, path: str | Path, release: str | None = None) -> FoodTable:
    """Read a downloaded table in place (cached per path for the run)."""
    if database not in DATABASES:
        raise InputError(
            Problem(f"unknown database '{database}'", field="database", fix=f"one of: {', '.join(DATABASES)}")
        )
    p = Path(path)
    if not p.exists():
        raise InputError(Problem("table not found", file=str(p), fix=f"point at {DATABASES[database][1]}"))
    key = (database, str(p.resolve()), release)
    if key not in _CACHE:
        _CACHE[key] = import_module(DATABASES[database][0]).read(p, release)
    return _CACHE[key]
