"""Ingredient library: composition per 100 g with a source for every value.

A library is a folder (or a single file) of YAML and CSV files.  YAML layout::

    library:
      name: Demo library
      note: DEMO DATA - invented values for the demo scenario
    ingredients:
      potato_raw:
        label_name: Potatoes
        source: "where the values come from"
        per_100g: {water: 79.0, protein: 2.0, fat: 0.1, ...}
        sources: {water: "a different source for one value"}
        basis: {protein: "N x 6.25"}   # analytical basis where the source states it
        nitrogen_factor: 6.25          # the factor the source used for protein, if stated
        assumed_zero:                  # zeros with a stated reason, never silent
          - components: [polyols, ethanol]
            reason: "potatoes: no polyols or alcohol (common practice)"
        allergens: []            # [] = none; omit = unknown (flagged)

A component left out is **unknown**.  It is zero only when ``assumed_zero``
names it (or a group holding it: ``polyols``, ``fibre``, ``total_lipid``,
``available_carbohydrate``) with a reason; the short form
``assumed_zero: {carbohydrate_key: "reason"}`` is accepted too.  Every such
assumption is listed by ``labelcalc compose`` and in its JSON.

Total fibre without its soluble / insoluble split is accepted: it is held
as ``fibre_unsplit`` (see ``components.UNSPLIT_OF``).

CSV layout: see :mod:`labelcalc.intake.library_csv`.
"""

from __future__ import annotations

import difflib
from functools import cached_property
from pathlib import Path

import numpy as np
from pydantic import ValidationError

from labelcalc import components as C
from labelcalc.errors import InputError, Problem, ProblemList, display_path
from labelcalc.intake.ingredient import Ingredient, check_ingredient
from labelcalc.yamlsafe import LoadedYaml, load_yaml, pydantic_problems


class Library:
    """A validated ingredient library with its composition matrix."""

    def __init__(self, ingredients: dict[str, Ingredient], name: str = "library", files: list[str] | None = None):
        self.ingredients = ingredients
        self.name = name
        self.files = files or []

    def __contains__(self, key: str) -> bool:
        return key in self.ingredients

    def get(
        self, key: str, *, file: str | None = None, line: int | None = None, field: str | None = None
    ) -> Ingredient:
        try:
            return self.ingredients[key]
        except KeyError:
            near = difflib.get_close_matches(key, list(self.ingredients), n=3)
            fix = f"did you mean {', '.join(near)}?" if near else "add it to the ingredient library or check the id"
            raise InputError(
                Problem(f"unknown ingredient '{key}'", file=file, line=line, field=field, fix=fix)
            ) from None

    def assumptions(self, ids: list[str] | None = None) -> list[tuple[str, list[str], str]]:
        """Every stated zero as (ingredient id, components, reason), one line per reason."""
        out = []
        for key in ids if ids is not None else self.ids:
            by_reason: dict[str, list[str]] = {}
            for comp, reason in self.ingredients[key].zeros.items():
                by_reason.setdefault(reason, []).append(comp)
            out += [(key, comps, reason) for reason, comps in by_reason.items()]
        return out

    @cached_property
    def ids(self) -> list[str]:
        return list(self.ingredients)

    @cached_property
    def matrix(self) -> np.ndarray:
        """(ingredients x components) per 100 g; NaN where unknown."""
        if not self.ingredients:
            return np.zeros((0, len(C.KEYS)))
        return np.vstack([ing.vector() for ing in self.ingredients.values()])


def _read_yaml_library(loaded: LoadedYaml, problems: ProblemList) -> tuple[dict[str, Ingredient], str | None]:
    data = loaded.data
    if not isinstance(data, dict) or "ingredients" not in data:
        problems.add("not an ingredient library: expected a top-level 'ingredients:' mapping", file=loaded.file, line=1)
        return {}, None
    unknown_top = set(data) - {"library", "ingredients"}
    for k in unknown_top:
        problems.add(
            "unknown top-level key",
            file=loaded.file,
            line=loaded.line_of((k,)),
            field=k,
            fix="allowed: library, ingredients",
        )
    name = (data.get("library") or {}).get("name") if isinstance(data.get("library"), dict) else None
    entries = data["ingredients"]
    if not isinstance(entries, dict):
        problems.add("'ingredients' must map ids to entries", file=loaded.file, line=loaded.line_of(("ingredients",)))
        return {}, name
    out: dict[str, Ingredient] = {}
    for key, body in entries.items():
        line = loaded.line_of(("ingredients", key))
        where = {"file": loaded.file, "line": line}
        if not isinstance(body, dict):
            problems.add("entry must be a mapping", field=str(key), **where)
            continue
        if "unlisted" in body:
            problems.add(
                "'unlisted' is no longer accepted: a left-out value is unknown, never a silent zero",
                file=loaded.file,
                line=loaded.line_of(("ingredients", key, "unlisted")) or line,
                field=f"{key}.unlisted",
                fix="remove it, and list each component that is truly zero under assumed_zero with a reason "
                "(e.g. assumed_zero: [{components: [polyols], reason: 'none in refined oil (common practice)'}])",
            )
            continue
        if "from_table" in body:
            body = _from_table(body, loaded, key, problems)
            if body is None:
                continue
        try:
            ing = Ingredient(id=str(key), file=loaded.file, line=line, **body)
        except ValidationError as exc:
            problems.problems += pydantic_problems(exc, loaded, ("ingredients", key))
            continue
        except TypeError as exc:
            problems.add(str(exc), field=str(key), **where)
            continue
        for p in check_ingredient(ing, where):
            if p.field and "." in p.field:
                sub = tuple(p.field.split(".")[1:])
                p.line = loaded.line_of(("ingredients", key) + sub) or line
            problems.problems.append(p)
        out[ing.id] = ing
    return out, name


def _from_table(body: dict, loaded: LoadedYaml, key: object, problems: ProblemList) -> dict | None:
    """An entry that reads a downloaded food-composition table in place, with the user's own values on top."""
    from labelcalc.errors import LabelError
    from labelcalc.tables.library import from_reference, merge

    ref = body.get("from_table")
    line = loaded.line_of(("ingredients", key, "from_table"))
    if not isinstance(ref, dict):
        problems.add(
            "from_table must be a mapping {database, path, food}",
            file=loaded.file,
            line=line,
            field=f"{key}.from_table",
        )
        return None
    try:
        entry, _ = from_reference(ref, Path(loaded.file).parent)
    except LabelError as exc:
        for p in exc.problems:
            problems.add(
                p.message, file=p.file or loaded.file, line=p.line or line, field=f"{key}.from_table", fix=p.fix
            )
        return None
    return merge(entry, body, loaded.file)


def load_library(path: str | Path) -> Library:
    """Load and validate a library from a file or folder (``*.yaml``, ``*.yml``, ``*.csv``)."""
    p = Path(path)
    if not p.exists():
        raise InputError(Problem("ingredient library not found", file=display_path(p), fix="check --library"))
    files = sorted(f for f in p.rglob("*") if f.suffix in (".yaml", ".yml", ".csv")) if p.is_dir() else [p]
    if not files:
        raise InputError(Problem("no .yaml or .csv files in the ingredient library folder", file=display_path(p)))
    problems = ProblemList()
    merged: dict[str, Ingredient] = {}
    name = None
    for f in files:
        if f.suffix == ".csv":
            from labelcalc.intake.library_csv import read_csv_library

            found = read_csv_library(f, problems)
        else:
            found, nm = _read_yaml_library(load_yaml(f), problems)
            name = name or nm
        for k, ing in found.items():
            if k in merged:
                problems.add(
                    f"ingredient id '{k}' is defined twice (also in {merged[k].file}, line {merged[k].line})",
                    file=ing.file,
                    line=ing.line,
                )
            merged[k] = ing
    problems.raise_if_any()
    return Library(merged, name=name or p.name, files=[display_path(f) or str(f) for f in files])
