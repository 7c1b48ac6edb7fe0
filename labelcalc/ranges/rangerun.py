"""Runs over a whole product range: every product, every market, nothing lost.

A product that fails (bad file, bad sheet row, a market that cannot label it)
is listed in the errors table with its file, line, field and message; every
other product is still produced.
"""

from __future__ import annotations

import hashlib
import json
import pickle
import traceback
from collections.abc import Iterable, Iterator
from concurrent.futures import ProcessPoolExecutor, as_completed
from dataclasses import dataclass, field
from pathlib import Path

from labelcalc.errors import InputError, LabelError, Problem, display_path
from labelcalc.formulation.composition import compose, compose_many
from labelcalc.intake.catalogue import (
    CatalogueEntry,
    Spooled,
    SpoolReader,
    classify,
    classify_to_spool,
    iter_classify_to_spool,
    other_files,
)
from labelcalc.intake.formula import Formula, FormulaIndex, build_formula, load_formula
from labelcalc.intake.library import Library, load_library
from labelcalc.intake.sources import index_for, sheet_products
from labelcalc.labelling.engine import LabelEngine
from labelcalc.labelling.rulepack import RulePack, check_formula_against_packs, get_packs
from labelcalc.ranges.parts import PartInfo, write_part
from labelcalc.ranges.summary import label_summary
from labelcalc.workers import mp_context, start_early


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


@dataclass(slots=True)
class ProductFile:
    """A product formula file of a range folder, with the id its header gives.  The path is kept as text: a
    range holds one of these per product, and a path object takes several times the memory of its text."""

    path: str
    id: str
    spooled: Spooled | None = None  # where its data, parsed while classifying it, waits


@dataclass
class ItemError:
    """A range entry known to fail before any computing: an unreadable file, a duplicate id, a bad sheet row.
    ``counts`` says whether it stands for a product (counted as failed) or another file (listed only)."""

    product_id: str
    problems: list[Problem]
    counts: bool = True


class Inventory:
    """Every file of a range source with its kind and id, in source order, and, once the run is settled,
    what became of it (the rows of ``files.csv``).  With ``path`` (a streamed run) the entries go to that
    private part file in batches as they are found, so the main process holds none of them; iterating reads
    them back, one batch at a time, each as a row with its outcome.  Without ``path`` they stay in memory."""

    BATCH = 2000  # entries per pickle record

    def __init__(self, path: Path | None = None) -> None:
        self.path = path
        self._rows: list[tuple[str, str, str]] = []
        self._count = 0
        self._ok: set[str] = set()
        self._failed_files: set[str] = set()
        self._failed_ids: set[str] = set()
        self._tally: dict[str, int] = {}

    def add(self, file: str, kind: str, ident: str) -> None:
        self._rows.append((file, kind, ident))
        self._count += 1
        if self.path is not None and len(self._rows) >= self.BATCH:
            self._flush()

    def _flush(self) -> None:
        assert self.path is not None
        with self.path.open("ab") as fh:
            pickle.dump(self._rows, fh, protocol=pickle.HIGHEST_PROTOCOL)
        self._rows = []

    def close(self) -> None:
        """Write the entries still waiting (a streamed inventory); call when the last entry is added."""
        if self.path is not None and self._rows:
            self._flush()

    def _entries(self) -> Iterator[tuple[str, str, str]]:
        if self.path is not None and self.path.exists():
            with self.path.open("rb") as fh:
                while True:
                    try:
                        batch = pickle.load(fh)
                    except EOFError:
                        break
                    yield from batch
        yield from self._rows

    def settle(self, result: RangeResult) -> None:
        """Take what became of the products from the run's result (its labelled ids and error rows) and
        count the outcomes (see :meth:`tally`)."""
        self._ok = set(result.labelled)
        self._failed_files = {e["file"] for e in result.errors}
        self._failed_ids = {e["product_id"] for e in result.errors}
        tally: dict[str, int] = {}
        for file, kind, ident in self._entries():
            o = self._outcome(kind, ident, file)
            tally[o] = tally.get(o, 0) + 1
        self._tally = tally

    def _outcome(self, kind: str, ident: str, file: str) -> str:
        """What became of a file: labelled, failed (see errors.csv) or a recognised non-product."""
        if kind == "error":
            return "error (see errors.csv)"
        if kind.startswith("product"):
            return "labelled" if ident in self._ok else "failed (see errors.csv)"
        if kind == "subformula":
            failed = ident in self._failed_ids and file in self._failed_files
            return "error (see errors.csv)" if failed else "sub-formula"
        if kind == "not read":
            return "not read: not a YAML file"
        return f"not a product: {kind}"

    def tally(self) -> dict[str, int]:
        """How many files had each outcome (counted when settled)."""
        return dict(self._tally)

    def __iter__(self) -> Iterator[dict]:
        for file, kind, ident in self._entries():
            yield {"file": file, "kind": kind, "id": ident, "outcome": self._outcome(kind, ident, file)}

    def __len__(self) -> int:
        return self._count

    def __eq__(self, other: object) -> bool:
        if isinstance(other, (Inventory, list)):
            return list(self) == list(other)
        return NotImplemented

    __hash__ = None  # type: ignore[assignment]


@dataclass
class RangeResult:
    rows: list[dict] = field(default_factory=list)
    errors: list[dict] = field(default_factory=list)
    labels: list[LabelRecord] = field(default_factory=list)
    products_ok: int = 0
    products_failed: int = 0
    labelled: list[str] = field(default_factory=list)  # ids of the products labelled for every market
    crashes: list[dict] = field(default_factory=list)  # unexpected errors: product, file, traceback
    files: Inventory = field(default_factory=Inventory)  # every file of the source and what became of it
    parts: list[PartInfo] = field(default_factory=list)  # streamed runs: the summary rows, in part files

    def merge(self, other: RangeResult) -> None:
        self.rows += other.rows
        self.parts += other.parts
        self.errors += other.errors
        self.labels += other.labels
        self.products_ok += other.products_ok
        self.products_failed += other.products_failed
        self.labelled += other.labelled
        self.crashes += other.crashes


def _hash(obj) -> str:
    return hashlib.sha256(json.dumps(obj, sort_keys=True, default=str).encode()).hexdigest()[:16]


def ingredient_hash(ing) -> str:
    return _hash(ing.model_dump(exclude={"file", "line"}))


def rules_hash(pack: RulePack) -> str:
    from labelcalc.formulation.energy import load_factor_set

    return _hash([pack.model_dump(), load_factor_set(pack.panel.energy_factor_set, pack.energy_root).model_dump()])


def _error_row(product: str, exc: LabelError, market: str = "") -> list[dict]:
    return _problem_rows(product, exc.problems, market)


def _problem_rows(product: str, problems: list[Problem], market: str = "") -> list[dict]:
    return [
        {
            "product_id": product,
            "market": market,
            "file": p.file or "",
            "line": p.line or "",
            "field": p.field or "",
            "message": p.message + (f" — {p.fix}" if p.fix else ""),
        }
        for p in problems
    ]


def _crash(res: RangeResult, product: str, file: str, exc: BaseException) -> None:
    """An unexpected error inside one product: one error row naming product and file, and a crash report entry."""
    res.errors.append(
        {
            "product_id": product,
            "market": "",
            "file": file,
            "line": "",
            "field": "",
            "message": f"internal error ({type(exc).__name__}: {exc}) — details in {CRASH_REPORT}; "
            "please report it with that file",
        }
    )
    res.crashes.append(
        {
            "product_id": product,
            "file": file,
            "error": f"{type(exc).__name__}: {exc}",
            "traceback": "".join(traceback.format_exception(exc)),
        }
    )
    res.products_failed += 1


CRASH_REPORT = "crash-report.txt"


def enumerate_products(
    source: Path, index: FormulaIndex | None = None, exclude: list[Path] | None = None
) -> tuple[list, Inventory]:
    """The entries of a range source (product files, sheet products, known failures) and the inventory of its
    files: every file of a folder with its kind and id (files in ``exclude`` folders, such as the run's own
    output folder, left out), or the products of a sheet.  A streamed run over a folder goes through
    :func:`scan_products` instead."""
    files = Inventory()
    if source.is_dir():
        index = index or FormulaIndex([source])
        items: list = []
        for e in index.entries:
            files.add(e.shown, e.kind, e.id or "")
            if e.kind == "error":
                items.append(ItemError(e.path.stem, e.problems or []))
            elif e.id in index.duplicates:
                items.append(
                    ItemError(
                        e.id or "",
                        [index.duplicate_problem(e.id or "", e.shown, field=f"{e.kind}.id")],
                        counts=e.kind == "product",
                    )
                )
            elif e.kind == "product":
                items.append(ProductFile(str(e.path), e.id or "", e.spooled))
        _not_read(source, exclude, files)
        return items, files
    if source.suffix.lower() in (".csv", ".xlsx"):
        products, problems = sheet_products(source)
        shown = display_path(source) or str(source)
        for p in products:
            files.add(shown, "product (sheet)", p.product_id)
        return products + [ItemError("", [p], counts=False) for p in problems], files
    if source.suffix.lower() in (".yaml", ".yml"):
        entry = classify(source)
        files.add(entry.shown, entry.kind, entry.id or "")
        if entry.kind == "error":
            return [ItemError(source.stem, entry.problems or [])], files
        return ([ProductFile(str(source), entry.id or "")] if entry.kind == "product" else []), files
    raise InputError(
        Problem("a range source is a folder of formula files, a .csv or an .xlsx file", file=display_path(source))
    )


def _not_read(source: Path, exclude: list[Path] | None, files: Inventory) -> None:
    """The folder's files that are not YAML, listed as not read (those in ``exclude`` folders left out)."""
    skip = [x.resolve() for x in exclude or []]
    for f in other_files(source):
        if any(f.resolve().is_relative_to(x) for x in skip):
            continue
        files.add(display_path(f) or str(f), "not read", "")


def scan_products(
    source: Path,
    classify_all,
    files: Inventory,
    exclude: list[Path] | None = None,
) -> tuple[list, FormulaIndex]:
    """:func:`enumerate_products` for a folder in one pass (:meth:`FormulaIndex.scan`): each file goes to the
    inventory as it is classified, a product file becomes a :class:`ProductFile` (path and id as text, where
    its parsed data waits), and nothing else of a file is kept.  Returns the entries and the look-up of
    sub-formulas by id."""
    items: list = []

    def take(e: CatalogueEntry) -> None:
        shown = display_path(e.path) or str(e.path)
        files.add(shown, e.kind, e.id or "")
        if e.kind == "error":
            items.append(ItemError(Path(e.path).stem, e.problems or []))
        elif e.kind == "product":
            items.append(ProductFile(str(e.path), e.id or "", e.spooled))

    index = FormulaIndex.scan(source, classify_all, take)
    _not_read(source, exclude, files)
    if index.duplicates:  # no file of an id that several files define is used: each is a known failure
        items = [it for it in items if not (isinstance(it, ProductFile) and it.id in index.duplicates)]
        for ident, paths in index.duplicates.items():
            for p, kind in zip(paths, index.duplicate_kinds[ident]):
                shown = display_path(p) or str(p)
                problem = index.duplicate_problem(ident, shown, field=f"{kind}.id")
                items.append(ItemError(ident, [problem], counts=kind == "product"))
    return items, index


def _item_ident(it) -> tuple[str, str]:
    if isinstance(it, ProductFile):
        return it.id, display_path(it.path) or str(it.path)
    return it.product_id, it.file


Hashes = tuple[dict[str, str], dict[str, str]]


def run_hashes(library: Library, packs: list[RulePack]) -> Hashes:
    """Rule pack hashes by market and ingredient hashes by id: computed once per run (or per worker)."""
    return {p.market: rules_hash(p) for p in packs}, {i.id: ingredient_hash(i) for i in library.ingredients.values()}


def run_chunk(
    items: list,
    library: Library,
    packs: list[RulePack],
    index: FormulaIndex,
    with_labels: bool = True,
    part: Path | None = None,
    hashes: Hashes | None = None,
    subformulas: dict | None = None,
) -> RangeResult:
    """Load, compose, declare and assess a list of products (one process's share).  With ``part``, the
    summary rows go to that part file (sorted; see :mod:`labelcalc.ranges.parts`) instead of ``rows``.

    Nothing here fails the whole share: bad input becomes the product's error rows, and an unexpected
    exception becomes one error row naming the product and file plus a crash report entry.  ``subformulas``
    carries loaded sub-formulas from share to share, so each sub-formula file is read once per process."""
    if with_labels and hashes is None:
        hashes = run_hashes(library, packs)
    res = RangeResult()
    cache: dict = dict(subformulas) if subformulas else {}
    formulas: list[Formula] = []
    spool = SpoolReader()
    for it in items:
        if isinstance(it, ItemError):
            res.errors += _problem_rows(it.product_id, it.problems)
            res.products_failed += int(it.counts)
            continue
        pid, file = _item_ident(it)
        try:
            if isinstance(it, ProductFile):
                data = spool.read(it.spooled) if it.spooled else None
                f = load_formula(it.path, library, _cache=cache, _index=index, fast=True, parsed=data)
            else:
                if "__error__" in it.data:
                    raise it.data["__error__"]
                f = build_formula(it.data, it.file, it.lines, library, index, cache)
            check_formula_against_packs(f, packs)
        except LabelError as exc:
            res.errors += _error_row(pid, exc)
            res.products_failed += 1
            continue
        except Exception as exc:  # noqa: BLE001 - one product's crash must not lose the range
            _crash(res, pid, file, exc)
            continue
        formulas.append(f)
    spool.close()
    if subformulas is not None:
        subformulas.update((k, g) for k, g in cache.items() if g.kind == "subformula")
    try:
        res.merge(_label(formulas, library, packs, index, hashes))
    except Exception:  # noqa: BLE001 - retry one by one so only the product that crashes is lost
        for f in formulas:
            try:
                res.merge(_label([f], library, packs, index, hashes))
            except Exception as exc:  # noqa: BLE001
                _crash(res, f.id, f.file, exc)
    if part is not None:
        res.parts.append(write_part(part, res.rows))
        res.rows = []
    return res


def _with_lines(f: Formula, exc: LabelError, library: Library, index: FormulaIndex) -> LabelError:
    """A composition error of a formula loaded without line tracking, found again with its lines."""
    if all(p.line for p in exc.problems) or not f.file.endswith((".yaml", ".yml", ".YAML", ".YML")):
        return exc
    try:
        again = load_formula(Path(f.file), library, _index=index)
        compose(again, library)
    except LabelError as exc2:
        return exc2
    except (OSError, ValueError):  # pragma: no cover - the file changed during the run
        return exc
    return exc


def _label(
    formulas: list[Formula], library: Library, packs: list[RulePack], index: FormulaIndex, hashes: Hashes | None
) -> RangeResult:
    """Compose and label formulas that loaded; every failure is a product's error row.  Register records
    are made only when ``hashes`` are given."""
    res = RangeResult()
    comps, failed = compose_many(formulas, library)
    for fid, exc in failed.items():
        f = next((g for g in formulas if g.id == fid), None)
        res.errors += _error_row(fid, _with_lines(f, exc, library, index) if f else exc)
        res.products_failed += 1
    labelled = [c for f in formulas if f.id in comps for c in comps[f.id]]
    failed_ids: set[tuple[str, str]] = set()
    for p in packs:
        eng = LabelEngine(p, labelled)  # the labelling engine: called at this one place
        for c, exc in eng.errors:
            if (c.formula.id, p.market) not in failed_ids:
                res.errors += _error_row(c.formula.id, exc, p.market)
            failed_ids.add((c.formula.id, p.market))
        for i, c in enumerate(eng.comps):
            row, declared, statements, allergens, claims = label_summary(eng, i, hashes is not None)
            f = c.formula
            res.rows.append(row)
            if hashes is not None:
                rhash, ihash = hashes
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
                res.labelled.append(f.id)
    return res


_WORKER_STATE: dict = {}


def _init_worker(lib_path: str, markets: list[str], rules: str | None, index: FormulaIndex, with_labels: bool):
    """Once per worker process: library, packs, the sub-formula look-up from the main process (no worker
    reads the whole folder again) and the run's hashes."""
    library, packs = load_library(lib_path), get_packs(markets, rules)
    _WORKER_STATE.clear()
    _WORKER_STATE.update(
        library=library,
        packs=packs,
        index=index,
        hashes=run_hashes(library, packs) if with_labels else None,
        subformulas={},
    )


def _worker(items: list, part: Path | None) -> RangeResult:
    """One share of a range, in a worker process."""
    st = _WORKER_STATE
    return run_chunk(
        items, st["library"], st["packs"], st["index"], st["hashes"] is not None, part, st["hashes"], st["subformulas"]
    )


def _classify_share(files: list[str], spool: Path | None) -> list[tuple]:
    """A share's entries as plain tuples without their paths (the main process has those): less to send back
    and to hold while a large range's entries arrive."""
    paths = [Path(f) for f in files]
    entries = classify_to_spool(paths, spool) if spool is not None else [classify(f) for f in paths]
    return [(e.kind, e.id, e.problems, e.spooled) for e in entries]


def _classify_shared(files: list[str], jobs: int, spool_dir: Path | None) -> Iterator[CatalogueEntry]:
    """Classify files (each parsed) in ``jobs`` worker processes, given in order as each share comes back;
    with ``spool_dir`` each share puts its product files' parsed data in a spool file there (see
    :func:`classify_to_spool`)."""
    n = max(1, -(-len(files) // (jobs * 4)))
    shares = [files[i : i + n] for i in range(0, len(files), n)]
    spools = [spool_dir / f"spool-{k:05d}.pickle" if spool_dir is not None else None for k in range(len(shares))]
    with ProcessPoolExecutor(max_workers=jobs, mp_context=mp_context()) as ex:
        for share, got in zip(shares, ex.map(_classify_share, shares, spools)):
            yield from (CatalogueEntry(f, *t) for f, t in zip(share, got))  # type: ignore[arg-type]


def _classify_here(files: Iterable[str], spool: Path | None) -> Iterator[CatalogueEntry]:
    """Classify files in this process, as they are asked for (with ``spool``: see :func:`classify_to_spool`)."""
    if spool is not None:
        yield from iter_classify_to_spool(files, spool)
    else:
        yield from (classify(Path(f)) for f in files)


def _share_key(it) -> str:
    """Shares are cut from the entries in product-id order, so their rows follow one another in summary order."""
    if isinstance(it, ProductFile):
        return it.id
    return it.product_id


#: products per share of a streamed run: bounds a worker's memory (about 65 kB per product while a share is
#: labelled); large enough for the table operations (per product, shares of 500 label as fast as of 1000)
STREAM_SHARE = 500


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
    exclude: list[Path] | None = None,
    part_dir: Path | None = None,
) -> RangeResult:
    """Run the whole range.  ``progress(done, total)`` is called as products finish; ``exclude``: folders whose
    files are not the range's (the output folder when it lies inside the source).

    With ``part_dir`` the run is streamed: each share's summary rows are written to a part file there by
    the process that labelled them, and the result lists the parts (:attr:`RangeResult.parts`, in summary
    order) instead of holding the rows; see :mod:`labelcalc.ranges.parts`."""
    if jobs > 1 or part_dir is not None:  # workers, or the workbook's own process at the end
        start_early()
    library = load_library(library_path)
    packs = get_packs(markets, rules)
    if source.is_dir() and (jobs > 1 or part_dir is not None):  # one pass, nothing kept per file but products
        inventory = Inventory(part_dir / "files.pickle" if part_dir is not None else None)
        if jobs > 1:  # the files are parsed to be classified by the workers too
            items, index = scan_products(source, lambda fs: _classify_shared(fs, jobs, part_dir), inventory, exclude)
        else:  # streamed: parsed data spooled from classifying to loading
            spool = part_dir / "spool.pickle" if part_dir is not None else None
            items, index = scan_products(source, lambda fs: _classify_here(fs, spool), inventory, exclude)
        inventory.close()
    else:
        index = index_for(source)
        items, inventory = enumerate_products(source, index, exclude)
    total = len(items)
    if part_dir is not None:
        items.sort(key=_share_key)
        chunk_size = max(chunk_size, min(STREAM_SHARE, -(-total // max(jobs, 1))))
    elif jobs > 1:  # fewer, larger chunks: each carries its share of the table operations
        chunk_size = max(chunk_size, -(-total // (jobs * 4)))
    chunks = [items[i : i + chunk_size] for i in range(0, total, chunk_size)] or [[]]
    del items  # each share's entries are let go once the share is labelled
    parts = [part_dir / f"part-{k:06d}.pickle" if part_dir is not None else None for k in range(len(chunks))]
    result = RangeResult()
    done = 0
    if progress:
        progress(0, total)
    if jobs <= 1:
        hashes = run_hashes(library, packs) if with_labels else None
        subformulas: dict = {}
        for k, part in enumerate(parts):
            ch, chunks[k] = chunks[k], []
            result.merge(run_chunk(ch, library, packs, index, with_labels, part, hashes, subformulas))
            done += len(ch)
            del ch
            if progress:
                progress(done, total)
    else:
        if part_dir is not None:  # product paths on disk: asked for only when a formula uses a product
            lookup = index.products_apart(part_dir / "products.sqlite")
        else:
            lookup = index.lookup_only() if index.entries else index  # a scanned index is a look-up already
        del index  # workers parse their own share; the main process keeps only the look-up
        init = (str(library_path), markets, str(rules) if rules else None, lookup, with_labels)
        with ProcessPoolExecutor(
            max_workers=jobs, mp_context=mp_context(), initializer=_init_worker, initargs=init
        ) as ex:
            futs = {ex.submit(_worker, ch, part): ch for ch, part in zip(chunks, parts)}
            del chunks
            for fut in as_completed(futs):
                try:
                    result.merge(fut.result())
                except Exception as exc:  # noqa: BLE001 - a worker process died: its products are reported
                    for it in futs[fut]:
                        if not isinstance(it, ItemError):
                            _crash(result, *_item_ident(it), exc)
                done += len(futs.pop(fut))
                if progress:
                    progress(done, total)
    result.rows.sort(key=lambda r: (r["product_id"], r["market"], r["scenario"]))
    result.parts.sort(key=lambda p: p.path)
    result.errors.sort(key=lambda e: (e["product_id"], e["market"], e["file"], str(e["line"]), e["message"]))
    result.crashes.sort(key=lambda c: (c["product_id"], c["file"]))
    inventory.settle(result)
    result.files = inventory
    return result
