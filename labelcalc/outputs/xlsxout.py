"""The range summary workbook (written by :mod:`labelcalc.outputs.sheetwriter`).

One sheet per market, because each market declares different nutrients on a different basis under
its own names: the columns of a sheet are that market's rows, in the pack's order, named as the
pack prints them, with the basis and the unit in the header ("Total Fat per serving [g]").  Cells
are numbers; where the printed text is not simply "number unit" ("less than 1 g", "Includes 3g
Added Sugars") a "... as printed" text column sits beside the number.  Header row frozen, column
widths set.  Then the errors and, when the register was used, the changes.

Identical input gives a byte-identical file (fixed document and zip entry dates).
"""

from __future__ import annotations

import re
from collections.abc import Callable, Iterable
from functools import lru_cache
from pathlib import Path

from labelcalc.labelling.model import BASIS_LABEL, display_unit
from labelcalc.labelling.rounding import plain_label
from labelcalc.labelling.rulepack import RulePack
from labelcalc.outputs.sheetwriter import Workbook

_NUMBER_UNIT = re.compile(r"^(-?\d+(?:\.\d+)?)\s*([A-Za-zµ]+)?$")
_PERCENT = re.compile(r"^(-?\d+(?:\.\d+)?)\s*%$")

# fixed columns of every market sheet: (summary key, header, width, decimals)
_LEAD = [
    ("product_id", "Product id", 24, None),
    ("product_name", "Product name", 30, None),
    ("scenario", "Scenario", 10, None),
    ("serving_g", "Serving [g]", 10, 1),
    ("declared_energy_kj_per_100g", "Declared energy per 100 g [kJ]", 14, 1),
    ("declared_energy_kcal_per_100g", "Declared energy per 100 g [kcal]", 14, 1),
    ("declared_energy_kcal_per_serving", "Declared energy per serving [kcal]", 14, 1),
    ("available_energy_kcal_per_100g", "Available energy per 100 g [kcal]", 14, 1),
    ("available_energy_kcal_per_serving", "Available energy per serving [kcal]", 14, 1),
]
_TAIL = [
    ("claims_eligible", "Claims eligible", 40),
    ("statements_required", "Statements", 40),
    ("allergens", "Allergens declared", 28),
    ("allergens_unknown", "Ingredients with unknown allergens", 28),
    ("front_of_pack", "Front of pack", 40),
    ("reviews", "Notes for review [count]", 12),
    ("formula_hash", "Formula hash", 18),
    ("file", "File", 36),
]


#: summary fields that are never a nutrient amount column (their printed form does not matter to the plan)
_NOT_AMOUNTS = frozenset([k for k, *_ in _LEAD] + [k for k, *_ in _TAIL] + ["market", "column"])


def _number(text):
    """(number, is plain) of a printed amount: '8.3 g' -> (8.3, True); 'less than 1 g' -> (None, False)."""
    if text is None or text == "":
        return None, True
    if isinstance(text, (int, float)):
        return text, True
    if isinstance(text, str):
        return _text_number(text)
    return _text_number(str(text))


@lru_cache(maxsize=65536)
def _text_number(text: str) -> tuple[float | None, bool]:
    """A range prints few distinct amounts: each is read once."""
    m = _NUMBER_UNIT.match(text.strip()) or _PERCENT.match(text.strip())
    if m:
        return float(m.group(1)), True
    return None, False


def _amount_of(text, template: str | None):
    """The amount part of a row printed with its amount inside the label ('Includes 3g Added Sugars' -> '3g')."""
    if template is None or not isinstance(text, str):
        return text
    head, _, tail = template.partition("{amount}")
    if text.startswith(head) and text.endswith(tail):
        return text[len(head) : len(text) - len(tail)].strip()
    return text


def _names(key: str, value, names: dict[str, str]):
    """Claim and statement ids as the pack names them ('; '-separated lists); other values unchanged."""
    if key not in ("claims_eligible", "statements_required") or not value:
        return value if value not in ("", None) else None
    return "; ".join(names.get(x.strip(), x.strip()) for x in str(value).split(";"))


def _round(v, decimals):
    return round(v, decimals) if isinstance(v, float) and decimals is not None else v


class SheetPlan:
    """What a market sheet's columns depend on, gathered row by row (so rows can be streamed): the keys
    the rows use, the keys with a value that is not simply "number unit", and the basis of the first row."""

    def __init__(self) -> None:
        self.keys: set[str] = set()
        self.printed: set[str] = set()
        self.basis: str | None = None
        self.rows = 0

    def add(self, row: dict) -> None:
        if not self.rows:
            self.basis = row.get("column", "per_serving")
        self.rows += 1
        self.keys.update(row)
        printed = self.printed
        for k, v in row.items():
            # numbers and blanks are plain; fields that are never an amount column need no look
            if v is None or k in printed or k in _NOT_AMOUNTS or isinstance(v, (int, float)):
                continue
            if not _number(v)[1]:
                printed.add(k)

    def merge(self, later: SheetPlan) -> None:
        """Add the plan of rows that come after this plan's rows."""
        if not self.rows:
            self.basis = later.basis
        self.rows += later.rows
        self.keys |= later.keys
        self.printed |= later.printed


def plan_of(rows: list[dict]) -> SheetPlan:
    plan = SheetPlan()
    for r in rows:
        plan.add(r)
    return plan


def market_columns(plan: SheetPlan, pack: RulePack | None) -> list[tuple[str, str, str, int]]:
    """(summary key, header, kind, width) of a market sheet's nutrient columns; kind is 'number',
    'printed' or 'percent'.  Names come from the pack where it is known, else from the keys."""
    keys = plan.keys
    order = [r.nutrient for r in pack.rows] if pack else sorted(k for k in keys if not k.endswith("_percent"))
    basis = plan.basis or "per_serving"
    basis_text = BASIS_LABEL.get(basis, basis.replace("_", " "))
    cols: list[tuple[str, str, str, int]] = []
    for key in order:
        if key not in keys:
            continue
        prow = next((r for r in pack.rows if r.nutrient == key), None) if pack else None
        if prow and "{amount}" in prow.label:  # 'Includes {amount} Added Sugars' -> 'Added Sugars'
            name = prow.label.split("{amount}")[-1].strip() or plain_label(prow.label)
        else:
            name = (plain_label(prow.label).lstrip("+ ") or prow.label) if prow else key.replace("_", " ")
        unit = display_unit(pack.nutrients[key].unit) if pack and key in pack.nutrients else ""
        if pack and key in pack.nutrients and pack.panel.unit_labels.get(pack.nutrients[key].unit):
            unit = pack.panel.unit_labels[pack.nutrients[key].unit]
        if prow is None or not prow.percent_only:
            cols.append((key, f"{name} {basis_text} [{unit}]" if unit else f"{name} {basis_text}", "number", 14))
            if key in plan.printed:
                cols.append((key, f"{name} as printed", "printed", 20))
        if f"{key}_percent" in keys:
            plabel = (pack.panel.percent_label or "%").rstrip("*") if pack else "%"
            cols.append((f"{key}_percent", f"{name} {plabel.strip()} [%]", "percent", 12))
    return cols


class _MarketSheet:
    """How a market's summary rows become sheet rows: the columns from the plan and the pack, the names
    of claims and statements."""

    def __init__(self, plan: SheetPlan, pack: RulePack | None):
        self.cols = cols = market_columns(plan, pack)
        self.widths = [w for _, _, w, _ in _LEAD] + [w for *_, w in cols] + [w for *_, w in _TAIL]
        self.headers = [h for _, h, _, _ in _LEAD] + [h for _, h, _, _ in cols] + [h for _, h, _ in _TAIL]
        templates = {r.nutrient: r.label for r in pack.rows if "{amount}" in r.label} if pack else {}
        self.names: dict[str, str] = {}
        if pack:
            self.names.update({c.id: c.label for c in pack.claims})
            self.names.update({s.id: s.text for s in pack.statements})

        # one converter per nutrient column: the printed value -> the cell's value, each distinct value once
        self._cells: list[tuple[str, bool, str | None, dict]] = [
            (key, kind == "printed", templates.get(key), {}) for key, _, kind, _ in self.cols
        ]

    def line(self, r: dict) -> list:
        line = [_round(r.get(k), d) for k, _, _, d in _LEAD]
        get = r.get
        for key, printed, template, seen in self._cells:
            raw = get(key)
            try:
                cell = seen[raw]
            except KeyError:
                v = _amount_of(raw, template)
                cell = seen[raw] = (None if _number(v)[1] else v) if printed else _number(v)[0]
            except TypeError:  # a value that cannot be a key
                v = _amount_of(raw, template)
                cell = (None if _number(v)[1] else v) if printed else _number(v)[0]
            line.append(cell)
        line += [_names(k, get(k), self.names) for k, _, _ in _TAIL]
        return line


def _sheet_name(market: str) -> str:
    return market.upper() if len(market) <= 5 else market[:31]


def _plain_sheet(wb: Workbook, name: str, rows: list[dict], columns: list[str] | None = None) -> None:
    cols = columns or list(dict.fromkeys(k for r in rows for k in r)) or ["(none)"]
    widths = [50 if c in ("message", "why", "what_moved") else 18 for c in cols]
    ws = wb.sheet(name, widths, freeze=(0, 1), size=(len(rows) + 1, len(cols)))
    ws.header([c.replace("_", " ").capitalize() for c in cols])
    for r in rows:
        ws.append([r.get(c) for c in cols])


def write_summary_workbook(
    path: Path,
    rows: list[dict],
    errors: list[dict],
    changes: list[dict] | None,
    packs: dict[str, RulePack] | None = None,
    error_columns: list[str] | None = None,
) -> None:
    """Write the range summary workbook to ``path`` (one sheet per market, then errors and changes)."""
    plans: dict[str, SheetPlan] = {}
    for r in rows:
        plans.setdefault(r["market"], SheetPlan()).add(r)
    write_summary_workbook_streamed(path, plans, lambda: rows, errors, changes, packs, error_columns)


def write_summary_workbook_streamed(
    path: Path,
    plans: dict[str, SheetPlan],
    rows: Callable[[], Iterable[dict]],
    errors: list[dict],
    changes: list[dict] | None,
    packs: dict[str, RulePack] | None = None,
    error_columns: list[str] | None = None,
) -> None:
    """The summary workbook from rows read once per market sheet (``rows()`` gives them in summary order each
    time it is called); ``plans`` (market -> :class:`SheetPlan` of all its rows) fixes the sheets' columns."""
    with Workbook(path) as wb:
        for m in sorted(plans):
            if not plans[m].rows:
                continue
            sheet = _MarketSheet(plans[m], (packs or {}).get(m))
            size = (plans[m].rows + 1, len(sheet.headers))
            ws = wb.sheet(_sheet_name(m), sheet.widths, freeze=(2, 1), size=size)
            ws.header(sheet.headers)
            line = sheet.line
            for r in rows():
                if r["market"] == m:
                    ws.append(line(r))
        _plain_sheet(wb, "errors", errors, error_columns)
        if changes is not None:
            _plain_sheet(wb, "changes", changes, ["status", "product_id", "market", "scenario", "what_moved", "why"])
