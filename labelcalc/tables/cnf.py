"""Canadian Nutrient File (Health Canada), CSV download.

Layout read (Health Canada, "Canadian Nutrient File - Database Structure", 2015,
https://www.canada.ca/en/health-canada/services/food-nutrition/healthy-eating/nutrient-data/canadian-nutrient-file-compilation-canadian-food-composition-data-database-structure.html;
the FoodID primary key is stated there, the other column names are from memory — verify against the
2026 "database structure and file content description"):

* ``FOOD NAME.csv``: ``FoodID``, ``FoodCode``, ``FoodDescription`` (English), ...;
* ``NUTRIENT AMOUNT.csv``: ``FoodID``, ``NutrientID``, ``NutrientValue`` (per 100 g edible portion), ...;
* ``NUTRIENT NAME.csv``: ``NutrientID``, ``NutrientCode``, ``NutrientSymbol``, ``NutrientUnit``, ``NutrientName``.

Nutrient codes in the mapping are ``NutrientID`` values.  Older downloads are Latin-1 encoded; both are read.
"""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd

from labelcalc.errors import InputError, Problem, display_path
from labelcalc.tables.model import FoodTable, norm_code, norm_unit, read_csv

DATABASE = "cnf"
_HINT = "is this the Canadian Nutrient File CSV download?"


def _find(base: Path, name: str) -> Path:
    for p in base.iterdir():
        if p.suffix.lower() == ".csv" and norm_code(p.stem) == norm_code(name):
            return p
    raise InputError(
        Problem(f"{name}.csv not found", file=display_path(base), fix="point at the unzipped CNF CSV folder")
    )


def read(folder: str | Path, release: str | None = None) -> FoodTable:
    base = Path(folder)
    food = read_csv(_find(base, "FOOD NAME"), ("FoodID", "FoodDescription"), _HINT)
    amount = read_csv(_find(base, "NUTRIENT AMOUNT"), ("FoodID", "NutrientID", "NutrientValue"), _HINT)
    name = read_csv(_find(base, "NUTRIENT NAME"), ("NutrientID", "NutrientUnit", "NutrientName"), _HINT)
    foods = pd.DataFrame(
        {"name": food["FoodDescription"].values, "food_code": food.get("FoodCode", food["FoodID"]).values},
        index=food["FoodID"].str.strip(),
    )
    units = dict(zip(name["NutrientID"].str.strip(), name["NutrientUnit"].map(norm_unit)))
    values = pd.DataFrame(
        {
            "food_id": amount["FoodID"].str.strip(),
            "code": amount["NutrientID"].str.strip(),
            "amount": pd.to_numeric(amount["NutrientValue"].str.replace(",", ".", regex=False), errors="coerce"),
            "note": "",
            "unit": amount["NutrientID"].str.strip().map(units).fillna(""),
        }
    )
    names = {norm_code(i): n for i, n in zip(name["NutrientID"].str.strip(), name["NutrientName"])}
    m = re.search(r"(20\d\d)", base.resolve().name)
    rel = release or (m.group(1) if m else "release not stated")
    return FoodTable(DATABASE, rel, display_path(base) or str(base), foods, values, names)
