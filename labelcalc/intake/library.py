"""Ingredient library: composition per 100 g with a source for every value.

A library is a folder (or a single file) of YAML and CSV files.  YAML layout::

    library:
      name: Demo library
      note: DEMO DATA - invented values for the demo scenario
    ingredients:
      potato_raw:
        label_name: Potatoes
        source: "where the values come from"
        unlisted: unknown        # or "zero": components not listed are 0 g
        per_100g: {water: 79.0, protein: 2.0, fat: 0.1, ...}
        sources: {water: "a different source for one value"}
        allergens: []            # [] = none; omit = unknown (flagged)

CSV layout: one row per ingredient; columns ``id``, ``label_name``,
``source``, ``unlisted``, ``allergens`` (separated by ``;``), then one column
per component.  An empty cell is *unknown*, never zero.
"""

from __future__ import annotations

import csv
import difflib
import math
from functools import cached_property
from pathlib import Path
from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator

from labelcalc import components as C
from labelcalc.errors import InputError, Problem, ProblemList, display_path
from labelcalc.intake.yamlsafe import LoadedYaml, load_yaml, pydantic_problems

SUM_TOLERANCE_G = 0.5  # published tables are rounded; common practice


class AtwaterFactors(BaseModel):
    """Ingredient-specific energy factors [kcal/g] (21 CFR 101.9(c)(1)(i)(A))."""

    model_config = ConfigDict(extra="forbid")
    protein: float = Field(gt=0, le=9.5, description="[kcal/g]")
    fat: float = Field(gt=0, le=9.5, description="[kcal/g]")
    carbohydrate: float = Field(gt=0, le=4.5, description="[kcal/g], applied to total carbohydrate")
    source: str = Field(min_length=3)


class LipidEnergy(BaseModel):
    """Energy factor of a partially absorbed lipid [kJ/g and kcal/g]."""

    model_config = ConfigDict(extra="forbid")
    kj_per_g: float = Field(ge=0, le=38)
    kcal_per_g: float = Field(ge=0, le=9.1)
    kind: str | None = Field(None, description="e.g. 'salatrim' where a market gives that kind its own factor")
    source: str = Field(min_length=3)


class Price(BaseModel):
    model_config = ConfigDict(extra="forbid")
    per_kg: float = Field(gt=0)
    currency: str = Field(min_length=3, max_length=3)


class Ingredient(BaseModel):
    """One library entry.  ``values`` holds known values only (unknown = absent)."""

    model_config = ConfigDict(extra="forbid")
    id: str
    label_name: str
    source: str = Field(min_length=3)
    unlisted: Literal["unknown", "zero"] = "unknown"
    per_100g: dict[str, float | None] = Field(default_factory=dict)
    sources: dict[str, str] = Field(default_factory=dict)
    allergens: list[str] | None = None
    sub_ingredients: list[str] | None = None
    kinds: list[str] = Field(default_factory=list)
    substance: str | None = None
    atwater: AtwaterFactors | None = None
    lipid_energy: LipidEnergy | None = None
    price: Price | None = None
    file: str | None = None
    line: int | None = None

    @field_validator("id")
    @classmethod
    def _id(cls, v: str) -> str:
        if not v or any(ch.isspace() for ch in v):
            raise ValueError("ingredient id must be a non-empty word without spaces")
        return v

    @cached_property
    def values(self) -> dict[str, float]:
        """Known leaf values per 100 g after expanding convenience totals."""
        return _expand(self.per_100g, self.unlisted)[0]

    def source_of(self, key: str) -> str:
        return self.sources.get(key, self.source)

    def vector(self) -> np.ndarray:
        """Composition as a float vector over :data:`components.KEYS`; NaN = unknown."""
        v = np.full(len(C.KEYS), np.nan)
        for k, x in self.values.items():
            v[C.INDEX[k]] = x
        return v


def _expand(raw: dict[str, float | None], unlisted: str) -> tuple[dict[str, float], list[str]]:
    """Resolve convenience totals into leaves.  Returns (values, problems)."""
    problems: list[str] = []
    vals = {k: float(v) for k, v in raw.items() if v is not None and k in C.BY_KEY}
    if unlisted == "zero":
        for k in C.KEYS:
            if k not in raw:
                vals[k] = 0.0
    carb = raw.get("available_carbohydrate")
    if carb is not None:
        have = [k for k in ("sugars", "starch") if raw.get(k) is not None]
        if len(have) == 2:
            if abs(vals["sugars"] + vals["starch"] - carb) > SUM_TOLERANCE_G:
                problems.append("available_carbohydrate differs from sugars + starch; give only the parts")
        elif len(have) == 1:
            other = "starch" if have[0] == "sugars" else "sugars"
            rest = carb - vals[have[0]]
            if rest < -SUM_TOLERANCE_G:
                problems.append(f"{have[0]} exceeds available_carbohydrate")
            vals[other] = max(rest, 0.0)
        else:
            problems.append("available_carbohydrate needs sugars (or starch) beside it so the split is known")
    fib = raw.get("fibre")
    if fib is not None:
        have = [k for k in ("fibre_soluble", "fibre_insoluble") if raw.get(k) is not None]
        if len(have) == 1:
            other = "fibre_insoluble" if have[0] == "fibre_soluble" else "fibre_soluble"
            rest = fib - vals[have[0]]
            if rest < -SUM_TOLERANCE_G:
                problems.append(f"{have[0]} exceeds fibre")
            vals[other] = max(rest, 0.0)
        elif not have:
            problems.append(
                "fibre needs fibre_soluble (or fibre_insoluble) beside it: energy rules treat them differently"
            )
    salt = raw.get("salt")
    if salt is not None:
        if raw.get("sodium") is not None:
            problems.append("give salt or sodium, not both")
        else:
            vals["sodium"] = salt / C.SALT_PER_SODIUM * 1000.0
    return vals, problems


def check_ingredient(ing: Ingredient, where: dict) -> list[Problem]:
    """Physical checks on one entry: names, signs, parts within wholes, sum <= 100 g."""
    out: list[Problem] = []
    allowed = set(C.KEYS) | set(C.CONVENIENCE_TOTALS)
    for k, v in ing.per_100g.items():
        if k not in allowed:
            near = difflib.get_close_matches(k, sorted(allowed), n=3)
            hint = f"did you mean {', '.join(near)}?" if near else "see the component list in DEVELOPERS.md"
            out.append(Problem(f"unknown component '{k}'", field=f"{ing.id}.per_100g.{k}", fix=hint, **where))
        elif v is not None and (not math.isfinite(v) or v < 0):
            out.append(
                Problem(
                    f"value {v} must be a number >= 0 (or null for unknown)", field=f"{ing.id}.per_100g.{k}", **where
                )
            )
    for k in ing.sources:
        if k not in allowed:
            out.append(Problem(f"source given for unknown component '{k}'", field=f"{ing.id}.sources.{k}", **where))
    if out:
        return out
    vals, msgs = _expand(ing.per_100g, ing.unlisted)
    out += [Problem(m, field=f"{ing.id}.per_100g", **where) for m in msgs]
    total = sum(vals.get(k, 0.0) for k in C.TOTAL_KEYS)
    if total > 100 + SUM_TOLERANCE_G:
        out.append(
            Problem(
                f"components sum to {total:.2f} g per 100 g (more than 100 g)",
                field=f"{ing.id}.per_100g",
                fix="check the values and their units (g vs mg)",
                **where,
            )
        )
    fa = sum(vals.get(k, 0.0) for k in ("saturated_fa", "trans_fa", "monounsaturated_fa", "polyunsaturated_fa"))
    if "fat" in vals and fa > vals["fat"] + SUM_TOLERANCE_G:
        out.append(
            Problem(f"fatty acids ({fa:.2f} g) exceed fat ({vals['fat']:.2f} g)", field=f"{ing.id}.per_100g", **where)
        )
    for comp in C.COMPONENTS:
        if comp.part_of and comp.key in vals and comp.part_of in vals:
            scale = 1000.0 if comp.unit == "mg" and C.BY_KEY[comp.part_of].unit == "g" else 1.0
            if vals[comp.key] > vals[comp.part_of] * scale + SUM_TOLERANCE_G * scale:
                out.append(
                    Problem(f"{comp.key} exceeds {comp.part_of}", field=f"{ing.id}.per_100g.{comp.key}", **where)
                )
    if vals.get("partial_lipid", 0) > 0 and ing.lipid_energy is None:
        out.append(
            Problem(
                "partial_lipid needs lipid_energy (its own kJ/g and kcal/g with a source)",
                field=f"{ing.id}.lipid_energy",
                **where,
            )
        )
    return out


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


_CSV_META = {
    "id",
    "label_name",
    "source",
    "unlisted",
    "allergens",
    "sub_ingredients",
    "kinds",
    "substance",
    "price_per_kg",
    "currency",
}


def _read_csv_library(path: Path, problems: ProblemList) -> dict[str, Ingredient]:
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
                ing = Ingredient(
                    id=(row.get("id") or "").strip(),
                    label_name=(row.get("label_name") or "").strip(),
                    source=(row.get("source") or "").strip(),
                    unlisted=(row.get("unlisted") or "unknown").strip() or "unknown",
                    per_100g=per,
                    allergens=_list("allergens"),
                    sub_ingredients=_list("sub_ingredients"),
                    kinds=_list("kinds") or [],
                    substance=(row.get("substance") or "").strip() or None,
                    price=price,
                    file=shown,
                    line=rowno,
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
            found = _read_csv_library(f, problems)
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
