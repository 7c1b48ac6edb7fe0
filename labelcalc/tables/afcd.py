"""Australian Food Composition Database (FSANZ), Excel files.

Layout read (FSANZ, "Australian Food Composition Database downloadable files", Release 2: a nutrient
file, one row per food keyed by "Public Food Key" with nutrient columns titled with their unit, and a
food details file with "Public Food Key", "Food Name", "Nitrogen Factor" and "Fat Factor";
https://www.foodstandards.gov.au/science-data/monitoringnutrients/afcd).  Point the reader at the
nutrient workbook; a food details workbook in the same folder (its name holding "food details") is read
for the nitrogen and fat factors.  Nutrient codes in the mapping are the column titles.
"""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd

from labelcalc.errors import display_path
from labelcalc.tables.model import FoodTable, norm_code
from labelcalc.tables.sheets import food_sheets, long_values

DATABASE = "afcd"
ID, NAME = "Public Food Key", "Food Name"
_HINT = "is this the AFCD nutrient file (Release 2 or later)?"
_META = {"nitrogen factor": "nitrogen_factor", "fat factor": "fat_factor"}
_TEXT = {"food name", "classification", "classification name", "derivation", "food profile id"}


def read(path: str | Path, release: str | None = None) -> FoodTable:
    p = Path(path)
    sheets = food_sheets(p, ID, NAME, _HINT)
    names: dict[str, str] = {}
    for _, body, _ in sheets:
        for fid, name in zip(body[ID], body[NAME]):
            if isinstance(name, str):
                names.setdefault(fid, name.strip())
    foods = pd.DataFrame({"name": pd.Series(names)})
    details = [d for d in p.parent.glob("*.xlsx") if "food details" in norm_code(d.stem) and d != p]
    for meta_key in _META.values():
        foods[meta_key] = None
    for d in details:
        for _, body, _ in food_sheets(d, ID, NAME, "is this the AFCD food details file?"):
            for title in body.columns:
                found = _META.get(norm_code(title))
                if found:
                    col = pd.to_numeric(body[title], errors="coerce")
                    for fid, v in zip(body[ID], col):
                        if fid in foods.index and pd.notna(v) and v > 0:
                            foods.loc[fid, found] = float(v)
    values = long_values(sheets, ID, _TEXT)
    m = re.search(r"release\s*(\d+)", p.stem, re.IGNORECASE)
    rel = release or (f"Release {m.group(1)}" if m else "release not stated")
    return FoodTable(DATABASE, rel, display_path(p) or str(p), foods, values, {})
