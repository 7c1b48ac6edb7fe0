"""A food-composition table read into one shape, and the mapping files that turn its nutrients into components.

Every reader (one module per database) returns a :class:`FoodTable`: the foods (id, name and per-food
metadata such as the nitrogen factor) and the values in long form (food id, nutrient code, amount, the
table's own text of the value, unit).  Nothing here knows a database by name: what a code means is in
``maps/<database>.yaml`` (see DEVELOPERS.md, "How to add a database mapping").
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from functools import lru_cache
from importlib.resources import files
from pathlib import Path

import pandas as pd
from pydantic import BaseModel, ConfigDict, Field, ValidationError, model_validator

from labelcalc import components as C
from labelcalc.errors import InputError, Problem, RuleError
from labelcalc.yamlsafe import load_yaml, pydantic_problems

_UNITS = {"g": "g", "mg": "mg", "ug": "ug", "µg": "ug", "μg": "ug", "mcg": "ug", "iu": "IU", "kcal": "kcal", "kj": "kJ"}


def norm_unit(text: str | None) -> str:
    """A table's unit written one way (``G``, ``µg`` and ``mcg`` become ``g`` and ``ug``)."""
    t = (text or "").strip()
    return _UNITS.get(t.lower(), t)


def norm_code(text: object) -> str:
    """A nutrient code or column title compared loosely: case, spaces and line breaks ignored."""
    return re.sub(r"\s+", " ", str(text)).strip().lower().replace("µ", "u").replace("μ", "u")


def unit_in_title(title: str) -> str:
    """The unit a column title ends with, e.g. ``Protein (g)`` -> ``g``; empty when none."""
    m = re.search(r"\(([^()]*)\)\s*$", str(title).strip())
    return norm_unit(m.group(1)) if m else ""


_BELOW = re.compile(r"^\s*<\s*([0-9]+(?:[.,][0-9]+)?)\s*$")


def parse_amount(cell: object) -> tuple[float | None, str]:
    """A table cell as (number or None when not given, note).

    Tables mark values in their own ways: empty, ``N`` or ``-`` (not measured: unknown), ``Tr`` or
    ``traces`` (present below quantification: taken as 0, said so in the note), ``< 0.5`` (below a
    limit: taken as 0, said so), decimal commas.  Hand-written because each table's markers differ
    and a wrong reading here would be a silent zero.
    """
    if cell is None or (isinstance(cell, float) and math.isnan(cell)):
        return None, ""
    if isinstance(cell, int | float):
        return float(cell), ""
    text = str(cell).strip()
    low = text.lower()
    if low in ("", "n", "-", "na", "n/a", "nd"):
        return None, ""
    if low in ("tr", "trace", "traces"):
        return 0.0, f"table gives '{text}' (trace): taken as 0"
    m = _BELOW.match(text)
    if m:
        return 0.0, f"table gives '{text}' (below the limit of quantification): taken as 0"
    try:
        return float(text.replace(",", ".")), ""
    except ValueError:
        return None, f"table gives '{text}': not read as a number"


@dataclass
class FoodTable:
    """One database release read into long form."""

    database: str
    release: str
    path: str
    foods: pd.DataFrame  # index: food id (str); columns: name, and per-food metadata where the table has it
    values: pd.DataFrame  # columns: food_id, code, amount (float, NaN = not given), note, unit
    nutrient_names: dict[str, str] = field(default_factory=dict)  # code -> the table's own name

    def search(self, words: str, limit: int = 20) -> pd.DataFrame:
        """Foods whose name holds every word (case-insensitive), shortest names first."""
        names = self.foods["name"].astype(str)
        hit = pd.Series(True, index=self.foods.index)
        for w in words.lower().split():
            hit &= names.str.lower().str.contains(re.escape(w))
        found = self.foods[hit].copy()
        found["_len"] = found["name"].astype(str).str.len()
        return found.sort_values("_len").drop(columns="_len").head(limit)

    def food(self, food_id: str) -> pd.Series:
        key = str(food_id).strip()
        if key not in self.foods.index:
            raise InputError(
                Problem(
                    f"food '{key}' is not in this table",
                    file=self.path,
                    fix="find its id with `labelcalc library search`",
                )
            )
        return self.foods.loc[key]

    def values_of(self, food_id: str) -> dict[str, tuple[float | None, str, str]]:
        """code -> (amount, note, unit) for one food (normalised codes)."""
        rows = self.values[self.values["food_id"] == str(food_id)]
        out: dict[str, tuple[float | None, str, str]] = {}
        for code, amount, note, unit in zip(rows["code"], rows["amount"], rows["note"], rows["unit"]):
            out[norm_code(code)] = (None if pd.isna(amount) else float(amount), str(note or ""), str(unit or ""))
        return out


def long_from_wide(wide: pd.DataFrame, id_col: str, value_cols: list[str]) -> pd.DataFrame:
    """Melt a one-row-per-food sheet into the long form, parsing each cell and the unit from its title."""
    melted = wide.melt(id_vars=[id_col], value_vars=value_cols, var_name="code", value_name="raw")
    parsed = melted["raw"].map(parse_amount)
    return pd.DataFrame(
        {
            "food_id": melted[id_col].astype(str).str.strip(),
            "code": melted["code"].astype(str),
            "amount": [p[0] if p[0] is not None else float("nan") for p in parsed],
            "note": [p[1] for p in parsed],
            "unit": melted["code"].map(unit_in_title),
        }
    )


def read_csv(path: Path, columns: tuple[str, ...], hint: str) -> pd.DataFrame:
    """A table's CSV file as text columns (UTF-8, else Latin-1 as older downloads use), columns checked."""
    from labelcalc.errors import display_path

    for enc in ("utf-8-sig", "latin-1"):
        try:
            df = pd.read_csv(path, dtype=str, keep_default_na=False, encoding=enc)
            break
        except UnicodeDecodeError:
            continue
        except (OSError, pd.errors.ParserError) as exc:
            raise InputError(Problem(f"cannot read the file: {exc}", file=display_path(path))) from None
    df.columns = [str(c).strip() for c in df.columns]
    missing = [c for c in columns if c not in df.columns]
    if missing:
        raise InputError(Problem(f"missing column(s) {', '.join(missing)}", file=display_path(path), fix=hint))
    return df


# ------------------------------------------------------------------ mapping files


class Term(BaseModel):
    model_config = ConfigDict(extra="forbid")
    code: str
    unit: str
    factor: float = 1.0
    name: str | None = Field(None, description="the table's name for the code, checked when the table states one")


class Source(BaseModel):
    """One way to get a component: a single code, or a sum of terms (all must be given)."""

    model_config = ConfigDict(extra="forbid")
    code: str | None = None
    unit: str | None = None
    factor: float = 1.0
    name: str | None = None
    terms: list[Term] | None = None
    per_100g_fatty_acids: bool = Field(
        False, description="the value is per 100 g of fatty acids: x fat conversion factor x fat / 100"
    )
    basis: str | None = Field(None, description="the analytical basis this source states")
    note: str | None = None

    @model_validator(mode="after")
    def _one(self):
        if (self.code is None) == (self.terms is None):
            raise ValueError("give either code (with unit) or terms")
        if self.code is not None and not self.unit:
            raise ValueError("a code needs its unit as the table states it")
        return self

    def all_terms(self) -> list[Term]:
        if self.terms is not None:
            return self.terms
        assert self.code is not None and self.unit is not None
        return [Term(code=self.code, unit=self.unit, factor=self.factor, name=self.name)]


class ComponentMap(BaseModel):
    model_config = ConfigDict(extra="forbid")
    sources: list[Source] = Field(min_length=1, description="tried in order; the first fully given wins")
    citation: str = Field(min_length=3)
    confidence: str = Field(min_length=3)


class ZeroRule(BaseModel):
    """Components the table never lists separately and that its figures already account for."""

    model_config = ConfigDict(extra="forbid")
    components: list[str] = Field(min_length=1)
    reason: str = Field(min_length=10)


class Mapping(BaseModel):
    """``maps/<database>.yaml``: from a table's nutrient codes to labelcalc components."""

    model_config = ConfigDict(extra="forbid")
    database: str
    title: str
    documentation: list[str] = Field(min_length=1)
    not_read: dict[str, str] = Field(default_factory=dict, description="codes deliberately not read, and why")
    components: dict[str, ComponentMap]
    assumed_zero: list[ZeroRule] = Field(
        default_factory=list, description="zeros stated for every imported food where the table gives no value"
    )

    @model_validator(mode="after")
    def _known(self):
        allowed = set(C.KEYS) | {"available_carbohydrate", "fibre"}
        for key in self.components:
            if key not in allowed:
                raise ValueError(f"'{key}' is not a labelcalc component")
        return self


def maps_dir() -> Path:
    return Path(str(files("labelcalc") / "tables" / "maps"))


@lru_cache(maxsize=16)
def load_mapping(database: str, path: str | None = None) -> Mapping:
    """Load and validate a mapping file (the shipped one for ``database`` unless ``path`` is given)."""
    p = Path(path) if path else maps_dir() / f"{database}.yaml"
    if not p.exists():
        known = sorted(f.stem for f in maps_dir().glob("*.yaml"))
        raise InputError(Problem(f"no mapping for database '{database}'", fix=f"known: {', '.join(known)}"))
    loaded = load_yaml(p)
    try:
        return Mapping.model_validate(loaded.data)
    except ValidationError as exc:
        raise RuleError(pydantic_problems(exc, loaded)) from None
