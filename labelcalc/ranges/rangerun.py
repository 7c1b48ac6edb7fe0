"""Runs over a whole product range: every product, every market, nothing lost.

A product that fails (bad file, bad sheet row, a market that cannot label it)
is listed in the errors table with its file, line, field and message; every
other product is still produced.
"""

from __future__ import annotations

import hashlib
import json
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass, field
from pathlib import Path

from labelcalc import __version__
from labelcalc.errors import InputError, LabelError, Problem, display_path
from labelcalc.files import atomic_write
from labelcalc.formulation.composition import compose_many
from labelcalc.intake.formula import Formula, FormulaIndex, build_formula, load_formula
from labelcalc.intake.library import Library, load_library
from labelcalc.intake.sources import index_for, sheet_products
from labelcalc.labelling.engine import LabelEngine
from labelcalc.labelling.rulepack import RulePack, get_packs
from labelcalc.ranges.summary import label_summary


@dataclass
class LabelRecord:
    """What the label register keeps for one label (product x market x scenario)."""

    product_id: str
    market: str
    scenario: str
    formula_hash: str
    ingredient_hashes: dict[str, str]
    rules_hash: str
    declared: dict[str, str]
    statements: list[str]
    allergens: list[str]
    claims: list[str]
    file: str


@dataclass
class RangeResult:
    rows: list[dict] = field(default_factory=list)
    errors: list[dict] = field(default_factory=list)
    labels: list[LabelRecord] = field(default_factory=list)
    products_ok: int = 0
    products_failed: int = 0
    formulas: dict[str, Formula] = field(default_factory=dict)

    def merge(self, other: RangeResult) -> None:
        self.rows += other.rows
        self.errors += other.errors
        self.labels += other.labels
        self.products_ok += other.products_ok
        self.products_failed += other.products_failed


def _hash(obj) -> str:
    return hashlib.sha256(json.dumps(obj, sort_keys=True, default=str).encode()).hexdigest()[:16]


def ingredient_hash(ing) -> str:
    return _hash(ing.model_dump(exclude={"file", "line"}))


def rules_hash(pack: RulePack) -> str:
    from labelcalc.formulation.energy import load_factor_set

    return _hash([pack.model_dump(), load_factor_set(pack.panel.energy_factor_set).model_dump()])


def _error_row(product: str, exc: LabelError, market: str = "") -> list[dict]:
    return [
        {
            "product_id": product,
            "market": market,
            "file": p.file or "",
            "line": p.line or "",
            "field": p.field or "",
            "message": p.message + (f" — {p.fix}" if p.fix else ""),
        }
        for p in exc.problems
    ]


def enumerate_products(source: Path, index: FormulaIndex | None = None) -> list:
    """Product references of a source: formula file paths, or sheet products (and problems found)."""
    if source.is_dir():
        index = index or FormulaIndex([source])
        dup = [
            (
                "__problem__",
                Problem(
                    f"id '{i}' is defined twice (also in {display_path(a)}); this file is skipped",
                    file=display_path(b),
                    field="product.id",
                ),
            )
            for i, a, b in index.duplicates
        ]
        return list(index.products) + dup
    if source.suffix.lower() in (".csv", ".xlsx"):
        items, problems = sheet_products(source)
        return items + [("__problem__", p) for p in problems]
    if source.suffix.lower() in (".yaml", ".yml"):
        return [source]
    raise InputError(
        Problem("a range source is a folder of formula files, a .csv or an .xlsx file", file=display_path(source))
    )


def run_chunk(
    items: list, library: Library, packs: list[RulePack], index: FormulaIndex, with_labels: bool = True
) -> RangeResult:
    """Load, compose, declare and assess a list of products (one process's share)."""
    res = RangeResult()
    cache: dict = {}
    formulas: list[Formula] = []
    for it in items:
        if isinstance(it, tuple) and it and it[0] == "__problem__":
            res.errors += _error_row("", InputError(it[1]))
            continue
        try:
            if isinstance(it, Path):
                f = load_formula(it, library, _cache=cache, _index=index, fast=True)
            else:
                if "__error__" in it.data:
                    raise it.data["__error__"]
                f = build_formula(it.data, it.file, it.lines, library, index, cache)
        except LabelError as exc:
            pid = it.stem if isinstance(it, Path) else it.product_id
            res.errors += _error_row(pid, exc)
            res.products_failed += 1
            continue
        formulas.append(f)
    comps, failed = compose_many(formulas, library)
    for fid, exc in failed.items():
        res.errors += _error_row(fid, exc)
        res.products_failed += 1
    rhash = {p.market: rules_hash(p) for p in packs}
    ihash: dict[str, str] = {i.id: ingredient_hash(i) for i in library.ingredients.values()}
    labelled = [c for f in formulas if f.id in comps for c in comps[f.id]]
    failed_ids: set[str] = set()
    for p in packs:
        eng = LabelEngine(p, labelled)
        for c, exc in eng.errors:
            if (c.formula.id, p.market) not in failed_ids:
                res.errors += _error_row(c.formula.id, exc, p.market)
            failed_ids.add((c.formula.id, p.market))
        for i, c in enumerate(eng.comps):
            row, declared, statements, allergens, claims = label_summary(eng, i)
            f = c.formula
            res.rows.append(row)
            if with_labels:
                res.labels.append(
                    LabelRecord(
                        f.id,
                        p.market,
                        c.scenario,
                        f.content_hash,
                        {i.id: ihash[i.id] for i in f.ingredients_used()},
                        rhash[p.market],
                        declared,
                        statements,
                        allergens,
                        claims,
                        f.file,
                    )
                )
    bad = {pid for pid, _ in failed_ids}
    for f in formulas:
        if f.id in comps:
            if f.id in bad:
                res.products_failed += 1
            else:
                res.products_ok += 1
    return res


_WORKER_STATE: dict = {}


def _worker(args):
    """One process's share of a range; library, packs and sub-formula index are loaded once per process."""
    items, lib_path, markets, rules, index_folders, with_labels = args
    key = (lib_path, tuple(markets), rules, tuple(index_folders))
    if key not in _WORKER_STATE:
        _WORKER_STATE.clear()
        _WORKER_STATE[key] = (
            load_library(lib_path),
            get_packs(markets, rules),
            FormulaIndex([Path(x) for x in index_folders]),
        )
    library, packs, index = _WORKER_STATE[key]
    return run_chunk(items, library, packs, index, with_labels)


def run_range(
    source: Path,
    library_path: Path,
    markets: list[str],
    rules: Path | None = None,
    *,
    jobs: int = 1,
    progress=None,
    chunk_size: int = 200,
    with_labels: bool = True,
) -> RangeResult:
    """Run the whole range.  ``progress(done, total)`` is called as products finish."""
    library = load_library(library_path)
    packs = get_packs(markets, rules)
    index = index_for(source)
    items = enumerate_products(source, index)
    total = len(items)
    index_folders = [str(source if source.is_dir() else source.parent)]
    if jobs > 1:  # fewer, larger chunks: each carries its share of the table operations
        chunk_size = max(chunk_size, -(-total // (jobs * 4)))
    chunks = [items[i : i + chunk_size] for i in range(0, total, chunk_size)] or [[]]
    result = RangeResult()
    done = 0
    if progress:
        progress(0, total)
    if jobs <= 1:
        for ch in chunks:
            result.merge(run_chunk(ch, library, packs, index, with_labels))
            done += len(ch)
            if progress:
                progress(done, total)
    else:
        with ProcessPoolExecutor(max_workers=jobs) as ex:
            futs = {
                ex.submit(
                    _worker, (ch, str(library_path), markets, str(rules) if rules else None, index_folders, with_labels)
                ): len(ch)
                for ch in chunks
            }
            for fut in as_completed(futs):
                result.merge(fut.result())
                done += futs[fut]
                if progress:
                    progress(done, total)
    result.rows.sort(key=lambda r: (r["product_id"], r["market"], r["scenario"]))
    return result


# ------------------------------------------------------------------ writing


def _columns(rows: list[dict]) -> list[str]:
    cols: list[str] = []
    seen = set()
    for r in rows:
        for k in r:
            if k not in seen:
                seen.add(k)
                cols.append(k)
    return cols


def write_csv(path: Path, rows: list[dict], columns: list[str] | None = None) -> None:
    import csv

    cols = columns or _columns(rows)

    def w(tmp: Path):
        with tmp.open("w", newline="", encoding="utf-8") as fh:
            wr = csv.DictWriter(fh, fieldnames=cols, extrasaction="ignore")
            wr.writeheader()
            for r in rows:
                wr.writerow({k: ("" if v is None else v) for k, v in r.items()})

    atomic_write(path, w)


def write_json(path: Path, doc) -> None:
    def w(tmp: Path):
        with tmp.open("w", encoding="utf-8") as fh:  # streamed: a large range never sits in memory as one string
            for chunk in json.JSONEncoder(indent=1, ensure_ascii=False, default=str).iterencode(doc):
                fh.write(chunk)

    atomic_write(path, w)


ERROR_COLUMNS = ["product_id", "market", "file", "line", "field", "message"]


def write_outputs(
    out: Path, result: RangeResult, changes: list[dict] | None = None, packs: dict | None = None
) -> list[Path]:
    """Write the summary tables; ``packs`` (market -> pack) names the workbook's columns as each pack prints them."""
    from labelcalc.outputs.xlsxout import write_summary_workbook

    out.mkdir(parents=True, exist_ok=True)
    files = [out / "summary.csv", out / "summary.xlsx", out / "summary.json", out / "errors.csv"]
    write_csv(files[0], result.rows)
    atomic_write(
        files[1],
        lambda tmp: write_summary_workbook(tmp, result.rows, result.errors, changes, packs, ERROR_COLUMNS),
    )
    write_json(
        files[2],
        {
            "tool_version": __version__,
            "summary": result.rows,
            "errors": result.errors,
            "changes": changes or [],
            "draft_notice": "DRAFT — verify against current local regulation.",
        },
    )
    write_csv(files[3], result.errors, ERROR_COLUMNS)
    if changes is not None:
        files.append(out / "changes.csv")
        write_csv(files[-1], changes, ["status", "product_id", "market", "scenario", "what_moved", "why"])
    return files
