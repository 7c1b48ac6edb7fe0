"""Where a product range comes from: a folder of formula files or a spreadsheet.

Spreadsheet layout (CSV, or XLSX via openpyxl): one row per batch line.

==========================  ============================================================
column                      meaning
==========================  ============================================================
product_id                  the product the line belongs to (required on every row)
ingredient / subformula     what the line uses (one of the two)
amount                      "400 g", "0.4 kg" or "12 %"
product_name, category,     product columns: given on the product's first row (or in a
serving_g, household,       separate ``products`` sheet of an XLSX workbook, one row
servings_per_container,     per product_id)
net_quantity_g, form,
reference_formula, claims
step, moisture_loss_percent, processing of the product (one step), on the first row
final_water, yield,         ranges as "28-36"
finished_weight_g, oil,
oil_uptake_per_100g,
final_fat
==========================  ============================================================

Sub-formulas named in a spreadsheet are looked up as formula files in the
spreadsheet's folder.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path

from labelcalc.errors import InputError, Problem, ProblemList, display_path
from labelcalc.intake.formula import FormulaIndex

PRODUCT_COLS = (
    "product_name",
    "category",
    "serving_g",
    "household",
    "servings_per_container",
    "net_quantity_g",
    "form",
    "reference_formula",
    "claims",
)
STEP_COLS = (
    "step",
    "moisture_loss_percent",
    "final_water",
    "yield",
    "finished_weight_g",
    "oil",
    "oil_uptake_per_100g",
    "final_fat",
)
LINE_COLS = ("product_id", "ingredient", "subformula", "amount")
ALL_COLS = set(PRODUCT_COLS) | set(STEP_COLS) | set(LINE_COLS)


@dataclass
class SheetProduct:
    """A product read from a spreadsheet, as formula data plus its line map."""

    product_id: str
    data: dict
    lines: dict
    file: str


def product_files(folder: Path) -> list[Path]:
    """Formula files of finished products (not sub-formulas) in a folder tree."""
    return FormulaIndex([folder]).products


def _num(v, row, col, file):
    if v in (None, ""):
        return None
    try:
        return float(v)
    except (TypeError, ValueError):
        raise InputError(Problem(f"'{v}' is not a number", file=file, line=row, field=col)) from None


def _range_or_num(v, row, col, file):
    if v in (None, ""):
        return None
    s = str(v).strip().replace("..", "-").replace("–", "-")
    if "-" in s[1:]:
        lo, hi = s.split("-", 1) if not s.startswith("-") else (s, "")
        return [_num(lo.strip(), row, col, file), _num(hi.strip(), row, col, file)]
    return _num(s, row, col, file)


def read_rows(path: Path) -> tuple[list[tuple[int, dict]], dict[str, tuple[int, dict]]]:
    """Rows of the lines sheet (with their row numbers) and, for XLSX, the products sheet by id.

    Refused with a clear message: a CSV that is not UTF-8, a header naming a column twice, an unknown column.
    A row with more cells than the header, or a product listed twice in the products sheet, becomes a row
    problem (see :func:`sheet_products`)."""
    file = display_path(path) or str(path)
    if path.suffix.lower() == ".csv":
        try:
            with path.open(newline="", encoding="utf-8-sig") as fh:
                reader = csv.reader(fh)
                header = [h.strip() for h in next(reader, [])]
                _check_columns(header, file, "")
                rows = [(i, _row(header, values, file, i)) for i, values in enumerate(reader, start=2)]
        except UnicodeDecodeError as exc:
            raise InputError(
                Problem(
                    f"not UTF-8 text (byte {exc.start + 1})",
                    file=file,
                    fix="save the sheet as 'CSV UTF-8' (or as .xlsx)",
                )
            ) from None
        except csv.Error as exc:
            raise InputError(Problem(f"cannot read CSV: {exc}", file=file)) from None
        return [(i, r) for i, r in rows if any(v for k, v in r.items() if k != EXTRA)], {}
    if path.suffix.lower() == ".xlsx":
        import openpyxl

        try:
            wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
        except Exception as exc:  # noqa: BLE001 - openpyxl raises several types for a broken file
            raise InputError(Problem(f"cannot read workbook: {exc}", file=file)) from None
        sheet = wb["lines"] if "lines" in wb.sheetnames else wb[wb.sheetnames[0]]
        rows = _sheet_rows(sheet, file)
        products: dict[str, tuple[int, dict]] = {}
        if "products" in wb.sheetnames:
            for i, r in _sheet_rows(wb["products"], file + " [products]"):
                pid = r.get("product_id")
                if not pid:
                    continue
                if pid in products:  # refused, never merged: the product gets an error row
                    first = products[pid][0]
                    r = {**products[pid][1], DUPLICATE: f"listed twice in the products sheet (rows {first} and {i})"}
                    i = first
                products[pid] = (i, r)
        return rows, products
    raise InputError(Problem("a range source is a folder of formula files, a .csv or an .xlsx file", file=file))


EXTRA = "__extra__"  # cells beyond the header
DUPLICATE = "__duplicate__"  # a product given twice


def _row(header: list[str], values, file: str, line: int) -> dict:
    r = {h: ("" if v is None else str(v).strip()) for h, v in zip(header, values) if h}
    extra = [
        str(v).strip()
        for j, v in enumerate(values)
        if (j >= len(header) or not header[j]) and v is not None and str(v).strip()
    ]
    if extra:
        r[EXTRA] = f"{len(extra)} cell(s) beyond the last column or under no heading ({', '.join(extra[:3])})"
    return r


def _sheet_rows(sheet, file):
    it = sheet.iter_rows(values_only=True)
    header = [str(h).strip() if h is not None else "" for h in next(it, [])]
    _check_columns(header, file, f" of sheet '{sheet.title}'")
    out = []
    for i, values in enumerate(it, start=2):
        r = _row(header, values, file, i)
        if any(v for k, v in r.items() if k != EXTRA) or EXTRA in r:
            out.append((i, r))
    return out


def _check_columns(cols, file, where):
    import difflib

    if "product_id" not in cols:
        raise InputError(Problem(f"missing column 'product_id'{where}", file=file, line=1))
    seen: set[str] = set()
    for c in cols:
        if c and c in seen:
            raise InputError(
                Problem(
                    f"column '{c}' appears twice{where}",
                    file=file,
                    line=1,
                    fix="keep one of them (the values would otherwise be ambiguous)",
                )
            )
        seen.add(c)
        if c and c not in ALL_COLS:
            near = difflib.get_close_matches(c, sorted(ALL_COLS), n=2)
            raise InputError(
                Problem(
                    f"unknown column '{c}'{where}",
                    file=file,
                    line=1,
                    fix=f"did you mean {', '.join(near)}?" if near else "see the layout in the README",
                )
            )


def sheet_products(path: Path) -> tuple[list[SheetProduct], list[Problem]]:
    """Products of a spreadsheet as formula data; rows that belong to no product become problems.

    A product whose rows are refused (split into separate blocks, product columns that disagree, cells beyond
    the header, listed twice in the products sheet, no batch line) is returned with its error, reported once."""
    file = display_path(path) or str(path)
    rows, products_sheet = read_rows(path)
    grouped: dict[str, list[tuple[int, dict]]] = {}
    problems: list[Problem] = []
    last = None
    for i, r in rows:
        pid = r.get("product_id", "")
        if not pid:
            problems.append(Problem("row has no product_id", file=file, line=i, field="product_id"))
            continue
        if pid in grouped and last != pid:
            r = {**r, DUPLICATE: f"rows of product '{pid}' appear in two places (row {grouped[pid][-1][0]} and {i})"}
        grouped.setdefault(pid, []).append((i, r))
        last = pid
    for pid in products_sheet:
        if pid not in grouped:
            grouped[pid] = []
    out = []
    for pid, prow in grouped.items():
        try:
            _refuse_bad_rows(pid, prow, products_sheet.get(pid), file)
            out.append(_product(pid, prow, products_sheet.get(pid), file))
        except InputError as exc:
            out.append(SheetProduct(pid, {"__error__": exc}, {}, file))
    return out, problems


def _refuse_bad_rows(pid: str, rows: list[tuple[int, dict]], prod_row, file: str) -> None:
    problems = ProblemList()
    for i, r in ([prod_row] if prod_row else []) + rows:
        for key in (DUPLICATE, EXTRA):
            if key in r:
                problems.add(r[key], file=file, line=i, field="row" if key == EXTRA else "product_id")
    if not any(r.get("ingredient") or r.get("subformula") or r.get("amount") for _, r in rows):
        problems.add(
            f"product '{pid}' has no batch line",
            file=file,
            line=prod_row[0] if prod_row else (rows[0][0] if rows else None),
            field="product_id",
            fix="add rows with ingredient (or subformula) and amount for it",
        )
    for col in PRODUCT_COLS + STEP_COLS:
        given = [(i, r[col]) for i, r in rows if r.get(col)]
        if len({v for _, v in given}) > 1:
            problems.add(
                f"'{col}' differs between rows {given[0][0]} and "
                f"{next(i for i, v in given if v != given[0][1])} of product '{pid}'",
                file=file,
                line=given[0][0],
                field=col,
                fix="give product columns once, on the product's first row",
            )
    problems.raise_if_any()


def _first(rows, col):
    for i, r in rows:
        if r.get(col):
            return i, r[col]
    return None, None


def _product(pid, rows, prod_row, file) -> SheetProduct:
    src = [prod_row] if prod_row else rows
    lines = {(): rows[0][0], ("product",): (prod_row or rows[0])[0]}
    head: dict = {"id": pid, "name": _first(src, "product_name")[1] or pid}
    for col, key in (("category", "category"), ("form", "form"), ("reference_formula", "reference_formula")):
        v = _first(src, col)[1]
        if v:
            head[key] = v
    row_s, serving = _first(src, "serving_g")
    if serving:
        head["serving"] = {"size": f"{_num(serving, row_s, 'serving_g', file):g} g"}
        hh = _first(src, "household")[1]
        if hh:
            head["serving"]["household"] = hh
    row_n, n = _first(src, "servings_per_container")
    if n:
        head["servings_per_container"] = _num(n, row_n, "servings_per_container", file)
    row_q, q = _first(src, "net_quantity_g")
    if q:
        head["net_quantity"] = f"{_num(q, row_q, 'net_quantity_g', file):g} g"
    claims = _first(src, "claims")[1]
    if claims:
        head["claims"] = [c.strip() for c in claims.split(";") if c.strip()]
    batch = []
    for k, (i, r) in enumerate(rows):
        line = {"amount": r.get("amount", "")}
        if r.get("ingredient"):
            line["ingredient"] = r["ingredient"]
        if r.get("subformula"):
            line["subformula"] = r["subformula"]
        batch.append(line)
        lines[("batch", k)] = i
        for c in ("ingredient", "subformula", "amount"):
            lines[("batch", k, c)] = i
    data: dict = {"product": head, "batch": batch}
    step: dict = {}
    srow = None
    for col in STEP_COLS:
        i, v = _first(rows, col)
        if v:
            srow = srow or i
            if col == "step":
                step["step"] = v
            elif col == "moisture_loss_percent":
                step.setdefault("moisture_loss", {})["percent_of_batch"] = _range_or_num(v, i, col, file)
            elif col == "final_water":
                step.setdefault("moisture_loss", {})["final_water"] = _range_or_num(v, i, col, file)
            elif col == "yield":
                step["yield"] = _num(v, i, col, file)
            elif col == "finished_weight_g":
                step["finished_weight"] = f"{_num(v, i, col, file):g} g"
            elif col == "oil":
                step.setdefault("oil_uptake", {})["oil"] = v
            elif col == "oil_uptake_per_100g":
                step.setdefault("oil_uptake", {})["per_100g"] = _range_or_num(v, i, col, file)
            elif col == "final_fat":
                step.setdefault("oil_uptake", {})["final_fat"] = _range_or_num(v, i, col, file)
    if step:
        step.setdefault("step", "processing")
        data["processing"] = [step]
        lines[("processing",)] = lines[("processing", 0)] = srow
    return SheetProduct(pid, data, lines, file)


def index_for(source: Path) -> FormulaIndex:
    return FormulaIndex([source if source.is_dir() else source.parent], keep_products=source.is_dir())
