"""UK Composition of Foods Integrated Dataset (CoFID, McCance and Widdowson), Excel workbook.

Layout read (Public Health England, "McCance and Widdowson's The Composition of Foods Integrated Dataset
User guide" (2015, 2019 and 2021 editions): sheets Factors, Proximates, Inorganics, Vitamins, ...; one row
per food with its "Food Code" and "Food Name"; nutrient titles as in the guide's Appendix 3 "Acronyms,
descriptions and units").  Every sheet with a ``Food Code`` column is read; a unit row under the titles is
used where present.  Nutrient codes in the mapping are the column titles.  ``N`` (not measured) is
unknown; ``Tr`` (trace) is 0 with a note.  A ``Nitrogen conversion factor`` column gives the food's
nitrogen factor.
"""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd

from labelcalc.errors import display_path
from labelcalc.tables.model import FoodTable, norm_code
from labelcalc.tables.sheets import food_sheets, long_values

DATABASE = "cofid"
ID, NAME = "Food Code", "Food Name"
_META = {"nitrogen conversion factor": "nitrogen_factor", "fatty acid conversion factor": "fat_factor"}
_TEXT = {"food name", "description", "group", "previous", "main data references", "footnote"}


def read(path: str | Path, release: str | None = None) -> FoodTable:
    p = Path(path)
    sheets = food_sheets(p, ID, NAME, "is this the CoFID workbook (McCance and Widdowson's integrated dataset)?")
    names: dict[str, str] = {}
    meta: dict[str, dict[str, float]] = {}
    for _, body, _ in sheets:
        for fid, name in zip(body[ID], body[NAME]):
            if isinstance(name, str) and name.strip():
                names.setdefault(fid, name.strip())
        for title in body.columns:
            key = _META.get(norm_code(title))
            if key:
                col = pd.to_numeric(body[title], errors="coerce")
                for fid, v in zip(body[ID], col):
                    if pd.notna(v):
                        meta.setdefault(fid, {})[key] = float(v)
    foods = pd.DataFrame({"name": pd.Series(names)})
    for key in set(_META.values()):
        foods[key] = [meta.get(fid, {}).get(key) for fid in foods.index]
    values = long_values(sheets, ID, _TEXT | set(_META))
    m = re.search(r"(20\d\d)", p.name)
    rel = release or (m.group(1) if m else "release not stated")
    return FoodTable(DATABASE, rel, display_path(p) or str(p), foods, values, {})
