"""Ingredient-library files from a food-composition table: copied values, or references read in place.

A copied entry carries every value with its source; a reference entry (``from_table``) is read from the
downloaded table each time the library is loaded, so a new release of the table is picked up by
pointing at it.  Either way the user's own ``per_100g``, ``sources`` and ``assumed_zero`` of the entry
take precedence over the table's values.
"""

from __future__ import annotations

import json
from pathlib import Path

import yaml
from pydantic import BaseModel, ConfigDict, Field, ValidationError

from labelcalc.errors import InputError, Problem
from labelcalc.tables import read_table
from labelcalc.tables.convert import entry_key, to_entry
from labelcalc.tables.model import FoodTable, load_mapping


def pick(table: FoodTable, food_id: str, key: str | None = None) -> tuple[str, dict, list[str]]:
    """(ingredient id, library entry, components left unknown) for one food of ``table``."""
    food = table.food(food_id)
    entry, unknown = to_entry(table, load_mapping(table.database), str(food_id).strip())
    return key or entry_key(str(food["name"])), entry, unknown


class TableReference(BaseModel):
    """``from_table:`` in a library entry: read this food of a downloaded table when the library loads."""

    model_config = ConfigDict(extra="forbid")
    database: str = Field(description="fdc, cofid, cnf, afcd or ciqual")
    path: str = Field(description="the downloaded table, relative to the library file")
    food: str | int = Field(description="the food's id in the table")
    release: str | None = Field(None, description="release to name in every source (default: from the download)")


def find_one(table: FoodTable, words: str) -> str:
    """The id of the one food whose name holds every word; an error listing the candidates otherwise
    (never a guess between several foods)."""
    found = table.search(words, limit=6)
    if len(found) == 1:
        return str(found.index[0])
    if found.empty:
        raise InputError(Problem(f"no food of {table.database} matches '{words}'", fix="try fewer or other words"))
    shown = "; ".join(f"{i} {n}" for i, n in zip(found.index[:5], found["name"][:5]))
    raise InputError(
        Problem(
            f"{len(found)}{'+' if len(found) > 5 else ''} foods match '{words}': {shown}",
            fix="pick one by id: -f ID=KEY",
        )
    )


def from_reference(ref: dict, base: Path) -> tuple[dict, list[str]]:
    """The table's entry for ``from_table: {database, path, food, release}`` (path relative to ``base``)."""
    try:
        r = TableReference.model_validate(ref)
    except ValidationError as exc:
        err = exc.errors()[0]
        raise InputError(
            Problem(
                f"from_table: {err['msg']} ({'.'.join(map(str, err['loc']))})",
                fix="give database, path and food (and optionally release)",
            )
        ) from None
    path = Path(r.path)
    table = read_table(r.database, path if path.is_absolute() else base / path, r.release)
    _, entry, unknown = pick(table, str(r.food))
    return entry, unknown


def merge(table_entry: dict, own: dict, where: str) -> dict:
    """The user's entry over the table's: own values, sources and basis win; everything else is kept.
    A value the user gives without a source is marked as given in ``where`` (the library file)."""
    out = {k: (dict(v) if isinstance(v, dict) else v) for k, v in table_entry.items()}
    for k, v in own.items():
        if k == "from_table":
            continue
        if k in ("per_100g", "sources", "basis") and isinstance(v, dict):
            out.setdefault(k, {}).update(v)
        elif k == "assumed_zero":  # the table's stated zeros and the user's, both listed
            own_zeros = [{"components": [c], "reason": r} for c, r in v.items()] if isinstance(v, dict) else v
            out[k] = list(out.get(k) or []) + list(own_zeros or [])
        else:
            out[k] = v
    own_sources = own.get("sources") or {}
    for comp in own.get("per_100g") or {}:
        if comp not in own_sources:
            out.setdefault("sources", {})[comp] = f"given in {where} (replaces the table's value)"
    return out


def library_text(
    table: FoodTable, picks: list[tuple[str, str | None]], *, in_place: bool = False, table_path: str | None = None
) -> str:
    """A library YAML file for the chosen foods: copied values, or ``from_table`` references."""
    mapping = load_mapping(table.database)
    lines = [
        f"# Ingredient library built by `labelcalc library from-table` from {mapping.title}, {table.release}.",
        "# Every value names its source (database, release, food id, nutrient code). A value the table does",
        "# not give is left out, so it is UNKNOWN: never read as zero. Where you know a component is truly",
        "# zero, state it under assumed_zero with a reason (cited, or marked common practice).",
        "# Energy columns of the table are not read: labelcalc computes energy from the components.",
        "library:",
        f"  name: {json.dumps(f'{mapping.title} {table.release}', ensure_ascii=False)}",
        "ingredients:",
    ]
    seen: set[str] = set()
    for food_id, key in picks:
        ident, entry, unknown = pick(table, food_id, key)
        if ident in seen:
            raise InputError(Problem(f"ingredient id '{ident}' chosen twice", fix="give each food its own id: ID=KEY"))
        seen.add(ident)
        lines.append("")
        if unknown:
            lines.append(f"  # not given by the table (unknown): {', '.join(unknown)}")
        if in_place:
            entry = {
                "label_name": entry["label_name"],
                "from_table": {"database": table.database, "path": table_path or table.path, "food": str(food_id)},
            }
        body = yaml.safe_dump({ident: entry}, sort_keys=False, allow_unicode=True, width=120)
        lines += ["  " + ln if ln else ln for ln in body.rstrip("\n").split("\n")]
    return "\n".join(lines) + "\n"
