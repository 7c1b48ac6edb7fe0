"""USDA FoodData Central, CSV download (Foundation Foods, SR Legacy).

Layout read (FoodData Central "Download Field Descriptions", USDA ARS, Oct 2020,
https://fdc.nal.usda.gov/download-datasets.html; fields as listed there):

* ``food.csv``: ``fdc_id``, ``data_type``, ``description``, ``food_category_id``, ``publication_date``;
* ``nutrient.csv``: ``id``, ``name``, ``unit_name``, ``nutrient_nbr``, ``rank``;
* ``food_nutrient.csv``: ``id``, ``fdc_id``, ``nutrient_id``, ``amount`` (per 100 g), ...;
* optional ``food_nutrient_conversion_factor.csv`` (``id``, ``fdc_id``) with
  ``food_protein_conversion_factor.csv`` (``food_nutrient_conversion_factor_id``, ``value``): the
  food's nitrogen-to-protein factor.

Nutrient codes in the mapping are ``nutrient.id`` values (e.g. 1003 protein).  The release is taken
from the folder name of the download (e.g. ``FoodData_Central_sr_legacy_food_csv_2018-04``) unless given.
"""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd

from labelcalc.errors import InputError, Problem, display_path
from labelcalc.tables.model import FoodTable, norm_code, norm_unit, read_csv

DATABASE = "fdc"
FILES = ("food.csv", "nutrient.csv", "food_nutrient.csv")


_HINT = "is this the FoodData Central CSV download (Foundation Foods or SR Legacy)?"


def _csv(path: Path, columns: tuple[str, ...]) -> pd.DataFrame:
    return read_csv(path, columns, _HINT)


def read(folder: str | Path, release: str | None = None) -> FoodTable:
    base = Path(folder)
    for name in FILES:
        if not (base / name).exists():
            raise InputError(
                Problem(
                    f"{name} not found",
                    file=display_path(base),
                    fix="point at the unzipped FoodData Central CSV folder (food.csv, nutrient.csv, food_nutrient.csv)",
                )
            )
    food = _csv(base / "food.csv", ("fdc_id", "description"))
    nutrient = _csv(base / "nutrient.csv", ("id", "name", "unit_name"))
    fn = _csv(base / "food_nutrient.csv", ("fdc_id", "nutrient_id", "amount"))
    foods = pd.DataFrame(
        {"name": food["description"].values, "data_type": food.get("data_type", pd.Series([""] * len(food))).values},
        index=food["fdc_id"].str.strip(),
    )
    fac = base / "food_nutrient_conversion_factor.csv"
    pro = base / "food_protein_conversion_factor.csv"
    if fac.exists() and pro.exists():
        link = _csv(fac, ("id", "fdc_id"))
        val = _csv(pro, ("food_nutrient_conversion_factor_id", "value"))
        merged = val.merge(link, left_on="food_nutrient_conversion_factor_id", right_on="id")
        nf = pd.to_numeric(merged.set_index(merged["fdc_id"].str.strip())["value"], errors="coerce")
        foods["nitrogen_factor"] = nf[~nf.index.duplicated()].reindex(foods.index)
    units = dict(zip(nutrient["id"].str.strip(), nutrient["unit_name"].map(norm_unit)))
    amounts = pd.to_numeric(fn["amount"], errors="coerce")
    values = pd.DataFrame(
        {
            "food_id": fn["fdc_id"].str.strip(),
            "code": fn["nutrient_id"].str.strip(),
            "amount": amounts,
            "note": "",
            "unit": fn["nutrient_id"].str.strip().map(units).fillna(""),
        }
    )
    names = {norm_code(i): n for i, n in zip(nutrient["id"].str.strip(), nutrient["name"])}
    return FoodTable(DATABASE, release or _release(base), display_path(base) or str(base), foods, values, names)


def _release(base: Path) -> str:
    m = re.search(r"(\d{4}-\d{2}(?:-\d{2})?)", base.resolve().name)
    kind = (
        "SR Legacy"
        if "sr_legacy" in base.name.lower()
        else "Foundation Foods"
        if "foundation" in base.name.lower()
        else ""
    )
    return " ".join(x for x in (kind, m.group(1) if m else "release not stated") if x)
