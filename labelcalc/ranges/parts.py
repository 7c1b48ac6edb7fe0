"""Part files of a streamed range run: each share's summary rows, written by the process that made them.

A range run hands its products to worker processes in shares ordered by product id.  Each share's summary
rows, sorted, go to one part file in a private temporary folder, together with what the writers need to
know before they read a row: the columns in order of first appearance and, per market, the workbook
sheet's :class:`~labelcalc.outputs.xlsxout.SheetPlan`.  The parent keeps only this small
:class:`PartInfo` per share; the summary files are then written by reading the parts back in order, one
batch at a time, so memory stays flat however large the range.

Part files are pickles written and read by this run only, in a folder created for it (mode 0700) and
removed at the end; they are never read from anywhere else.
"""

from __future__ import annotations

import pickle
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

from labelcalc.outputs.xlsxout import SheetPlan

BATCH = 500  # rows per pickle record: large enough to pickle fast, small enough to read back in little memory


def row_key(r: dict) -> tuple[str, str, str]:
    """The order of the summary: product, market, scenario."""
    return (r["product_id"], r["market"], r["scenario"])


@dataclass
class PartInfo:
    """One part file: where it is, how many rows, their first and last keys, columns and sheet plans."""

    path: str
    rows: int = 0
    first: tuple[str, str, str] | None = None
    last: tuple[str, str, str] | None = None
    columns: list[str] = field(default_factory=list)
    sheets: dict[str, SheetPlan] = field(default_factory=dict)


def write_part(path: Path, rows: list[dict]) -> PartInfo:
    """Sort ``rows`` into summary order and write them to ``path``."""
    rows.sort(key=row_key)
    info = PartInfo(str(path), len(rows))
    seen: set[str] = set()
    for r in rows:
        for k in r:
            if k not in seen:
                seen.add(k)
                info.columns.append(k)
        plan = info.sheets.get(r["market"])
        if plan is None:
            plan = info.sheets[r["market"]] = SheetPlan()
        plan.add(r)
    if rows:
        info.first, info.last = row_key(rows[0]), row_key(rows[-1])
    with path.open("wb") as fh:
        for i in range(0, len(rows), BATCH):
            pickle.dump(rows[i : i + BATCH], fh, protocol=pickle.HIGHEST_PROTOCOL)
    return info


def read_part(info: PartInfo) -> Iterator[dict]:
    with open(info.path, "rb") as fh:
        while True:
            try:
                batch = pickle.load(fh)
            except EOFError:
                return
            yield from batch


def in_order(parts: list[PartInfo]) -> bool:
    """Whether the parts, one after the other, are already in summary order (shares are cut by product id,
    so they are; checked, never assumed)."""
    last = None
    for p in parts:
        if not p.rows:
            continue
        if last is not None and p.first is not None and p.first < last:
            return False
        last = p.last
    return True


def read_rows(parts: list[PartInfo]) -> Iterator[dict]:
    """Every row of the parts in summary order."""
    if in_order(parts):
        for p in parts:
            yield from read_part(p)
    else:  # shares overlap only if ids sort differently from how shares were cut
        yield from sorted((r for p in parts for r in read_part(p)), key=row_key)


def columns(parts: list[PartInfo]) -> list[str]:
    """The summary's columns in order of first appearance, as if read row by row."""
    lists = [p.columns for p in parts] if in_order(parts) else [list(r) for r in read_rows(parts)]
    return list(dict.fromkeys(k for cols in lists for k in cols))


def sheet_plans(parts: list[PartInfo]) -> dict[str, SheetPlan]:
    """Per market, the workbook sheet's plan over all parts (in order)."""
    out: dict[str, SheetPlan] = {}
    for p in parts:
        for market, plan in p.sheets.items():
            out.setdefault(market, SheetPlan()).merge(plan)
    return out
