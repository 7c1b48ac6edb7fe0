"""From a table's food to an ingredient-library entry, through the database's mapping file.

Rules (each one stated in the entry it produces):

* energy columns are never read: labelcalc computes energy from the components;
* a component is written only when its source values are all given; otherwise it stays unknown and the
  entry's ``note`` says which codes were missing — never a zero;
* every value names its source: database, release, food id, nutrient code(s) and any conversion;
* the analytical basis the table states goes into ``basis`` (protein nitrogen factor, fibre method,
  carbohydrate basis), and the nitrogen factor into ``nitrogen_factor``;
* protein's nitrogen is taken from the table, or derived as protein / nitrogen factor (said so).
"""

from __future__ import annotations

import re

from labelcalc import components as C
from labelcalc.errors import InputError, Problem
from labelcalc.tables.model import FoodTable, Mapping, Source, norm_code, norm_unit

NEGATIVE_TOLERANCE_G = 0.5  # a difference of rounded table values may dip below 0; common practice


def _scale(from_unit: str, to_unit: str) -> float | None:
    if from_unit in C.GRAMS_PER_UNIT and to_unit in C.GRAMS_PER_UNIT:
        return C.GRAMS_PER_UNIT[from_unit] / C.GRAMS_PER_UNIT[to_unit]
    return None


def _target_unit(key: str) -> str:
    return "g" if key in ("available_carbohydrate", "fibre") else C.BY_KEY[key].unit


def _check_term(table: FoodTable, code: str, unit: str, name: str | None, stated_unit: str) -> None:
    """Refuse a mapping whose unit or name disagrees with what the table itself states."""
    if stated_unit and norm_unit(stated_unit) != norm_unit(unit):
        raise InputError(
            Problem(
                f"the mapping reads {table.database} code '{code}' as {unit}, the table states {stated_unit}",
                file=table.path,
                fix=f"correct the unit in labelcalc/tables/maps/{table.database}.yaml",
            )
        )
    have = table.nutrient_names.get(norm_code(code))
    if name and have and norm_code(name) not in norm_code(have):
        raise InputError(
            Problem(
                f"the mapping expects {table.database} code '{code}' to be '{name}', the table names it '{have}'",
                file=table.path,
                fix=f"correct the code in labelcalc/tables/maps/{table.database}.yaml",
            )
        )


def _try(
    table: FoodTable, src: Source, vals: dict, key: str, fat: float | None, fat_factor: float | None
) -> tuple[float, list[str], list[str]] | None:
    """Value of one source in the component's unit, its codes and notes; None when a term is missing."""
    total, codes, notes = 0.0, [], []
    for t in src.all_terms():
        got = vals.get(norm_code(t.code))
        if got is None or got[0] is None:
            return None
        amount, note, stated = got
        _check_term(table, t.code, t.unit, t.name, stated)
        scale = _scale(norm_unit(t.unit), _target_unit(key))
        total += amount * t.factor * (scale if scale is not None else 1.0)
        name = table.nutrient_names.get(norm_code(t.code))
        label = f"{t.code}" + (f" ({name})" if name and name != t.code else "")
        codes.append(("less " if t.factor < 0 else "") + label)
        if abs(t.factor) != 1.0:
            notes.append(f"{t.code} x {abs(t.factor):g}")
        if note:
            notes.append(note)
    if src.per_100g_fatty_acids:
        if fat is None or fat_factor is None:
            return None
        total = total * fat_factor * fat / 100.0
        notes.append(f"per 100 g fatty acids x fat conversion factor {fat_factor:g} x fat {fat:g} g / 100")
    if src.note:
        notes.append(src.note)
    return total, codes, notes


def to_entry(table: FoodTable, mapping: Mapping, food_id: str, label_name: str | None = None) -> tuple[dict, list[str]]:
    """A library entry (the YAML form read by ``intake.library``) for one food of ``table``, and the
    components the table does not give (left unknown, never zero)."""
    food = table.food(food_id)
    vals = table.values_of(str(food_id))
    head = f"{mapping.title}, {table.release}, food {food_id}"
    per: dict[str, float] = {}
    sources: dict[str, str] = {}
    basis: dict[str, str] = {}
    missing: list[str] = []
    meta = {k: food[k] for k in food.index if k != "name"}
    nfac = _number(meta.get("nitrogen_factor"))
    ffac = _number(meta.get("fat_factor"))
    for key, cmap in mapping.components.items():
        got = None
        for src in cmap.sources:
            got = _try(table, src, vals, key, per.get("fat"), ffac)
            if got is not None:
                break
        if got is None:
            missing.append(key)
            continue
        value, codes, notes = got
        if value < 0:
            if value < -NEGATIVE_TOLERANCE_G * (1000.0 if _target_unit(key) == "mg" else 1.0):
                raise InputError(Problem(f"{key} of food {food_id} comes out at {value:g} (below 0)", file=table.path))
            notes.append(f"came out at {value:.3g} from rounded table values: taken as 0")
            value = 0.0
        per[key] = round(value, 6)
        sources[key] = f"{head}, nutrient {_joined(codes)}" + (f" [{'; '.join(notes)}]" if notes else "")
        if src.basis:
            basis[key] = src.basis
    if nfac is not None and "protein" in per:
        basis.setdefault("protein", f"nitrogen x {nfac:g} (the table's factor for this food)")
        if "nitrogen" not in per:
            per["nitrogen"] = round(per["protein"] / nfac, 6)
            sources["nitrogen"] = f"derived: protein / nitrogen factor {nfac:g} ({head})"
    _settle_carbohydrate(per, sources, missing)
    name = label_name or _label_name(str(food["name"]))
    entry: dict = {
        "label_name": name,
        "source": f"{head}: {food['name']}",
        "per_100g": per,
        "sources": sources,
    }
    if basis:
        entry["basis"] = basis
    zeros = []
    for rule in mapping.assumed_zero:
        comps = [k for k in rule.components if not set(C.GROUPS.get(k, (k,))) & set(per)]
        if comps:
            zeros.append({"components": comps, "reason": f"{mapping.title}: {rule.reason}"})
    if zeros:
        entry["assumed_zero"] = zeros
    if nfac is not None:
        entry["nitrogen_factor"] = nfac
    return entry, [k for k in missing if k not in per and k not in sources]


def _settle_carbohydrate(per: dict, sources: dict, missing: list[str]) -> None:
    """Available carbohydrate is written only with sugars beside it, so that its split is known; the
    rest of it is held as starch ("starch and other available carbohydrate"), so a table's total is kept."""
    if "available_carbohydrate" not in per:
        return
    if "sugars" not in per:
        if "starch" in per:
            per["sugars"] = round(max(per["available_carbohydrate"] - per["starch"], 0.0), 6)
            sources["sugars"] = f"derived: available carbohydrate less starch ({sources['available_carbohydrate']})"
            per.pop("starch")
            return
        per.pop("available_carbohydrate")
        sources.pop("available_carbohydrate", None)
        missing.append("available_carbohydrate (its split into sugars and starch is not given)")
        return
    table_starch = per.pop("starch", None)
    rest = f"; the table's own starch is {table_starch:g} g" if table_starch is not None else ""
    sources["starch"] = f"derived: available carbohydrate less sugars ({sources['available_carbohydrate']}){rest}"


def _joined(codes: list[str]) -> str:
    out = codes[0]
    for c in codes[1:]:
        out += f" {c}" if c.startswith("less ") else f" + {c}"
    return out


def _number(v: object) -> float | None:
    try:
        x = float(v)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return None
    return x if x > 0 else None


def _label_name(table_name: str) -> str:
    return table_name.split(",")[0].strip().capitalize() or table_name


def entry_key(table_name: str) -> str:
    """An ingredient id from a food's name: lower case words joined by underscores."""
    words = re.findall(r"[a-z0-9]+", table_name.lower())
    return "_".join(words[:5]) or "food"
