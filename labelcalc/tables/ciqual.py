"""ANSES CIQUAL French food composition table, XML download.

Layout read (ANSES, "Table Ciqual de composition nutritionnelle des aliments", description of the
published files: foods ``alim`` (``alim_code``, ``alim_nom_fr``, ``alim_nom_eng``), components
``const`` (``const_code``, ``const_nom_fr``, ``const_nom_eng`` with the unit in the name, e.g.
"(g/100 g)") and contents ``compo`` (``alim_code``, ``const_code``, ``teneur``, ``min``, ``max``,
``code_confiance``, ``source_code``); https://ciqual.anses.fr/).  Point the reader at the folder of the
unzipped XML files (``alim_*.xml``, ``const_*.xml``, ``compo_*.xml``).  ``-`` is unknown; ``traces``
and ``< x`` are 0 with a note; decimal commas are read.  Nutrient codes in the mapping are ``const_code``.
The XML is parsed with the standard library: pandas' XML reader needs lxml, which labelcalc does not ship.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from pathlib import Path

import pandas as pd

from labelcalc.errors import InputError, Problem, display_path
from labelcalc.tables.model import FoodTable, norm_code, norm_unit, parse_amount

DATABASE = "ciqual"


def _records(path: Path, tag: str) -> list[dict[str, str]]:
    out = []
    try:
        for _, el in ET.iterparse(path):
            if el.tag == tag:
                out.append({c.tag: (c.text or "").strip() for c in el})
                el.clear()
    except ET.ParseError as exc:
        raise InputError(Problem(f"cannot read the XML: {exc}", file=display_path(path))) from None
    return out


def _one(base: Path, stem: str) -> Path:
    found = sorted(base.glob(f"{stem}*.xml"))
    if not found:
        raise InputError(
            Problem(f"{stem}_*.xml not found", file=display_path(base), fix="point at the unzipped CIQUAL XML folder")
        )
    return found[-1]


def _unit(name: str) -> str:
    m = re.search(r"\(([^()]*?)\s*/\s*100\s*(?:g|ml)\)\s*$", name)
    return norm_unit(m.group(1)) if m else ""


def read(folder: str | Path, release: str | None = None) -> FoodTable:
    base = Path(folder)
    alim_path = _one(base, "alim_")
    alim = [r for r in _records(alim_path, "ALIM") if r.get("alim_code")]
    const = [r for r in _records(_one(base, "const_"), "CONST") if r.get("const_code")]
    compo = _records(_one(base, "compo_"), "COMPO")
    foods = pd.DataFrame(
        {
            "name": [r.get("alim_nom_eng") or r.get("alim_nom_fr", "") for r in alim],
            "name_fr": [r.get("alim_nom_fr", "") for r in alim],
        },
        index=[r["alim_code"] for r in alim],
    )
    names = {norm_code(r["const_code"]): r.get("const_nom_eng") or r.get("const_nom_fr", "") for r in const}
    units = {norm_code(r["const_code"]): _unit(r.get("const_nom_eng") or r.get("const_nom_fr", "")) for r in const}
    parsed = [parse_amount(r.get("teneur")) for r in compo]
    values = pd.DataFrame(
        {
            "food_id": [r.get("alim_code", "") for r in compo],
            "code": [r.get("const_code", "") for r in compo],
            "amount": [float("nan") if a is None else a for a, _ in parsed],
            "note": [n for _, n in parsed],
            "unit": [units.get(norm_code(r.get("const_code", "")), "") for r in compo],
        }
    )
    m = re.search(r"(\d{4})_(\d{2})_(\d{2})", alim_path.stem)
    rel = release or (f"{m.group(1)}-{m.group(2)}-{m.group(3)}" if m else "release not stated")
    return FoodTable(DATABASE, rel, display_path(base) or str(base), foods, values, names)
