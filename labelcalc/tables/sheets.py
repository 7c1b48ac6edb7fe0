"""Reading one-row-per-food workbooks (CoFID, AFCD): find the title row, an optional unit row, the foods."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from labelcalc.errors import InputError, Problem, display_path
from labelcalc.tables.model import norm_code, norm_unit, parse_amount, unit_in_title

_UNIT_WORDS = {"g", "mg", "ug", "µg", "μg", "mcg", "kcal", "kj", "iu", "%"}


def food_sheets(
    path: Path, id_title: str, name_title: str, hint: str
) -> list[tuple[str, pd.DataFrame, dict[str, str]]]:
    """Every sheet of the workbook whose title row holds ``id_title``: (sheet name, rows with titles as
    columns, {title: unit}).  Units come from a unit row under the titles, else from ``(unit)`` in a title."""
    try:
        book = pd.read_excel(path, sheet_name=None, header=None, dtype=object)
    except (OSError, ValueError, KeyError) as exc:
        raise InputError(Problem(f"cannot read the workbook: {exc}", file=display_path(path), fix=hint)) from None
    found = []
    for sheet, raw in book.items():
        head = None
        for i in range(min(len(raw), 10)):
            if norm_code(id_title) in [norm_code(x) for x in raw.iloc[i].tolist() if isinstance(x, str)]:
                head = i
                break
        if head is None:
            continue
        titles = [
            " ".join(str(x).split()) if isinstance(x, str) else f"column {j}" for j, x in enumerate(raw.iloc[head])
        ]
        units: dict[str, str] = {t: unit_in_title(t) for t in titles}
        start = head + 1
        if start < len(raw):
            row = [str(x).strip().lower() for x in raw.iloc[start].tolist() if isinstance(x, str) and str(x).strip()]
            if row and all(x in _UNIT_WORDS for x in row):
                for t, u in zip(titles, raw.iloc[start].tolist()):
                    if isinstance(u, str) and u.strip():
                        units[t] = norm_unit(u)
                start += 1
        body = raw.iloc[start:].copy()
        body.columns = titles
        if name_title not in titles:
            raise InputError(
                Problem(f"sheet '{sheet}' has no '{name_title}' column", file=display_path(path), fix=hint)
            )
        body = body[body[id_title].map(lambda x: isinstance(x, str | int) and str(x).strip() != "")]
        body[id_title] = body[id_title].map(lambda x: str(x).strip())
        found.append((str(sheet), body, units))
    if not found:
        raise InputError(Problem(f"no sheet with a '{id_title}' column", file=display_path(path), fix=hint))
    return found


def long_values(sheets: list[tuple[str, pd.DataFrame, dict[str, str]]], id_title: str, skip: set[str]) -> pd.DataFrame:
    """All value columns of all sheets in long form (food_id, code = title, amount, note, unit)."""
    rows = []
    for _, body, units in sheets:
        for title in body.columns:
            if title == id_title or norm_code(title) in skip:
                continue
            for fid, cell in zip(body[id_title], body[title]):
                amount, note = parse_amount(cell)
                rows.append((fid, title, float("nan") if amount is None else amount, note, units.get(title, "")))
    return pd.DataFrame(rows, columns=["food_id", "code", "amount", "note", "unit"])
