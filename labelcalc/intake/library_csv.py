"""Ingredient library in CSV form: one row per ingredient.

Columns ``id``, ``label_name``, ``source``, ``allergens`` (separated by ``;``), ``sub_ingredients``,
``kinds``, ``substance``, ``price_per_kg``, ``currency``, ``assumed_zero`` (``key key: reason``, several
separated by ``|``), then one column per component.  An empty cell is *unknown*, never zero.
"""

from __future__ import annotations

import csv
import difflib
from pathlib import Path

from pydantic import ValidationError

from labelcalc import components as C
from labelcalc.errors import ProblemList, display_path
from labelcalc.intake.ingredient import Ingredient, check_ingredient

_CSV_META = {
    "id",
    "label_name",
    "source",
    "assumed_zero",
    "allergens",
    "sub_ingredients",
    "kinds",
    "substance",
    "functional_class",
    "price_per_kg",
    "currency",
}


def _csv_zeros(cell: str) -> list[dict]:
    """``assumed_zero`` cell: ``key key: reason`` (several separated by ``|``)."""
    out = []
    for part in (p.strip() for p in cell.split("|")):
        if not part:
            continue
        keys, _, reason = part.partition(":")
        out.append({"components": keys.replace(",", " ").split(), "reason": reason.strip()})
    return out


def read_csv_library(path: Path, problems: ProblemList) -> dict[str, Ingredient]:
    shown = display_path(path)
    out: dict[str, Ingredient] = {}
    with path.open(newline="", encoding="utf-8-sig") as fh:
        reader = csv.DictReader(fh)
        cols = reader.fieldnames or []
        for col in ("id", "label_name", "source"):
            if col not in cols:
                problems.add(f"missing column '{col}'", file=shown, line=1)
        allowed = set(C.KEYS) | set(C.CONVENIENCE_TOTALS) | _CSV_META
        for col in cols:
            if col not in allowed:
                near = difflib.get_close_matches(col, sorted(allowed), n=3)
                problems.add(
                    f"unknown column '{col}'",
                    file=shown,
                    line=1,
                    fix=f"did you mean {', '.join(near)}?" if near else "see DEVELOPERS.md",
                )
        if problems.problems:
            return out
        for rowno, row in enumerate(reader, start=2):
            where = {"file": shown, "line": rowno}
            per: dict[str, float | None] = {}
            bad = False
            for col in cols:
                if col in _CSV_META:
                    continue
                cell = (row.get(col) or "").strip()
                if cell == "" or cell.lower() == "unknown":
                    continue
                try:
                    per[col] = float(cell)
                except ValueError:
                    problems.add(
                        f"'{cell}' is not a number",
                        field=col,
                        fix="write a number, or leave the cell empty for unknown",
                        **where,
                    )
                    bad = True
            if bad:
                continue

            def _list(col: str) -> list[str] | None:
                if col not in cols:
                    return None
                cell = (row.get(col) or "").strip()
                if cell.lower() == "unknown":
                    return None
                if cell.lower() in ("", "none"):
                    return [] if cell.lower() == "none" else None
                return [x.strip() for x in cell.split(";") if x.strip()]

            price = None
            if (row.get("price_per_kg") or "").strip():
                price = {"per_kg": row["price_per_kg"], "currency": (row.get("currency") or "").strip()}
            try:
                ing = Ingredient.model_validate(
                    {
                        "id": (row.get("id") or "").strip(),
                        "label_name": (row.get("label_name") or "").strip(),
                        "source": (row.get("source") or "").strip(),
                        "assumed_zero": _csv_zeros(row.get("assumed_zero") or ""),
                        "per_100g": per,
                        "allergens": _list("allergens"),
                        "sub_ingredients": _list("sub_ingredients"),
                        "kinds": _list("kinds") or [],
                        "substance": (row.get("substance") or "").strip() or None,
                        "price": price,
                        "file": shown,
                        "line": rowno,
                    }
                )
            except ValidationError as exc:
                for err in exc.errors():
                    problems.add(err["msg"], field=".".join(map(str, err["loc"])), **where)
                continue
            for p in check_ingredient(ing, where):
                problems.problems.append(p)
            if ing.id in out:
                problems.add(f"ingredient id '{ing.id}' appears twice", **where)
            out[ing.id] = ing
    return out
