"""What every YAML file in a folder tree is: a product, a sub-formula, a recognised non-product, or an error.

Range runs and sub-formula look-ups both start here.  Each file is parsed as YAML (never peeked at line by
line), so a quoted key, an anchor, a flow mapping or an id far down the header are read as YAML reads them.
A file is then one of:

* a **formula**: top-level ``product:`` or ``subformula:`` with an ``id``;
* a recognised **non-product**: an ingredient library (``ingredients:``), a price list (``prices:``), a lab
  certificate (``certificate:``), a market rule pack (``pack:``), an energy factor set (``factor_set:``) or a
  food-composition table mapping (``database:``);
* an **error**: unreadable, not UTF-8, not YAML, empty, no id, or a first key that names nothing we read
  (a misspelling gets a suggestion).

An id used by more than one formula file is a *duplicate*: none of the files is picked; each becomes an error,
and so does every formula that refers to the id.
"""

from __future__ import annotations

import contextlib
import difflib
import os
import pickle
import sqlite3
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO

from labelcalc.errors import InputError, Problem, display_path, real_file_path
from labelcalc.yamlsafe import load_yaml

YAML_SUFFIXES = (".yaml", ".yml")

#: top-level key -> what a file with it is (non-products a range folder may hold)
NON_PRODUCTS = {
    "ingredients": "ingredient library",
    "prices": "price list",
    "certificate": "lab certificate",
    "pack": "rule pack",
    "factor_set": "energy factor set",
    "database": "food-table mapping",
}
FORMULA_KEYS = ("product", "subformula")


@dataclass(frozen=True, slots=True)
class Spooled:
    """Where the parsed data of a product file was put while classifying it (see :func:`classify_to_spool`)."""

    file: str
    offset: int
    size: int


@dataclass(slots=True)
class CatalogueEntry:
    """One YAML file: its kind ('product', 'subformula', a non-product kind or 'error') and id if any."""

    path: Path
    kind: str
    id: str | None = None
    problems: list[Problem] | None = None
    spooled: Spooled | None = None

    @property
    def shown(self) -> str:
        return display_path(self.path) or str(self.path)


def other_files(folder: Path) -> list[Path]:
    """Files under ``folder`` that are not YAML (and not hidden, nor inside a hidden folder), in path order:
    a range lists them as not read, so a product saved as ``.yml~`` or ``.json`` is never silently missed."""
    return sorted(
        f
        for f in folder.rglob("*")
        if f.is_file()
        and f.suffix.lower() not in YAML_SUFFIXES
        and not any(part.startswith(".") for part in f.relative_to(folder).parts)
    )


def yaml_files(folder: Path) -> list[Path]:
    """Every YAML file under ``folder`` (any case of the extension), in path order."""
    return sorted(f for f in folder.rglob("*") if f.suffix.lower() in YAML_SUFFIXES and f.is_file())


def yaml_file_names(folder: Path) -> Iterator[tuple[str, bool]]:
    """The files :func:`yaml_files` lists, in the same order (folders depth first, names sorted: the order
    of their paths' parts), as text with whether each is a link: a range names every file, and a path object
    takes several times the memory of its text.  Linked folders are not entered, as with :func:`yaml_files`."""

    def walk(d: str) -> Iterator[tuple[str, bool]]:
        try:
            with os.scandir(d) as it:
                found = sorted(it, key=lambda e: e.name)
        except PermissionError:
            return
        for e in found:
            try:
                is_dir = e.is_dir()
            except OSError:
                is_dir = False
            if is_dir and not e.is_symlink():
                yield from walk(e.path)
                continue
            i = e.name.rfind(".")
            if 0 < i < len(e.name) - 1 and e.name[i:].lower() in YAML_SUFFIXES and e.is_file():
                yield e.path, e.is_symlink()

    return walk(str(folder))


def classify(path: Path) -> CatalogueEntry:
    """Parse one file and say what it is; never raises for bad content."""
    return _classify(path)[0]


def classify_to_spool(files: list[Path], spool: Path) -> list[CatalogueEntry]:
    """Classify files as :func:`classify` does; the parsed data of each product file is appended to ``spool``
    (pickled) and its entry says where, so a range parses each product file once however many processes
    share the work and however large the range (the parent keeps three numbers per product, not its data).
    ``spool`` is a private file of the run, read back only by :class:`SpoolReader` in the same run."""
    return list(iter_classify_to_spool(files, spool))


def iter_classify_to_spool(files: Iterable[Path | str], spool: Path) -> Iterator[CatalogueEntry]:
    """:func:`classify_to_spool`, each entry given as soon as its file is classified."""
    name = str(spool)  # one text object for every entry of the share (pickled once with them)
    with spool.open("ab") as fh:
        for f in files:
            e, data = _classify(Path(f))
            if e.kind == "product":
                blob = pickle.dumps(data, protocol=pickle.HIGHEST_PROTOCOL)
                e.spooled = Spooled(name, fh.tell(), len(blob))
                fh.write(blob)
            yield e


class SpoolReader:
    """Reads spooled parsed data back (one open file per spool); use as a context manager."""

    def __init__(self) -> None:
        self._open: dict[str, BinaryIO] = {}

    def read(self, ref: Spooled):
        fh = self._open.get(ref.file)
        if fh is None:
            fh = self._open[ref.file] = open(ref.file, "rb")  # noqa: SIM115 - closed in close()
        fh.seek(ref.offset)
        return pickle.loads(fh.read(ref.size))

    def close(self) -> None:
        for fh in self._open.values():
            fh.close()
        self._open.clear()

    def __enter__(self) -> SpoolReader:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def _classify(path: Path) -> tuple[CatalogueEntry, object]:
    try:
        data = load_yaml(path, with_lines=False).data
    except InputError as exc:
        return CatalogueEntry(path, "error", problems=exc.problems), None
    return _kind_of(path, data), data


def _kind_of(path: Path, data) -> CatalogueEntry:
    shown = display_path(path) or str(path)
    if not isinstance(data, dict) or not data:
        what = "empty" if data is None else "not a mapping"
        return CatalogueEntry(
            path,
            "error",
            problems=[
                Problem(
                    f"not a formula file ({what})",
                    file=shown,
                    line=1,
                    fix="a formula file starts with 'product:' or 'subformula:'",
                )
            ],
        )
    heads = [k for k in FORMULA_KEYS if k in data]
    if len(heads) == 1:
        head = data[heads[0]]
        ident = head.get("id") if isinstance(head, dict) else None
        if isinstance(ident, bool) or not isinstance(ident, (str, int)) or not str(ident).strip():
            return CatalogueEntry(
                path,
                "error",
                problems=[
                    Problem(
                        f"'{heads[0]}' has no id",
                        file=shown,
                        field=f"{heads[0]}.id",
                        fix="give the formula a stable id (a word without spaces)",
                    )
                ],
            )
        return CatalogueEntry(path, heads[0], str(ident))
    if len(heads) == 2:
        return CatalogueEntry(
            path,
            "error",
            problems=[Problem("a formula file has one of 'product:' or 'subformula:', not both", file=shown)],
        )
    for key, kind in NON_PRODUCTS.items():
        if key in data:
            return CatalogueEntry(path, kind)
    keys = [str(k) for k in data]
    known = list(FORMULA_KEYS) + list(NON_PRODUCTS)
    near = [n for k in keys for n in difflib.get_close_matches(k.strip("\"' "), known, n=1, cutoff=0.6)]
    return CatalogueEntry(
        path,
        "error",
        problems=[
            Problem(
                f"not a formula file: top-level keys {', '.join(repr(k) for k in keys[:5])}",
                file=shown,
                line=1,
                fix=(
                    f"did you mean '{near[0]}:'?" if near else "a formula file starts with 'product:' or 'subformula:'"
                ),
            )
        ],
    )


class ProductPaths:
    """Formula paths by id, as :attr:`FormulaIndex.paths` holds them, for a range of many products: the
    sub-formulas' in memory, the products' in a private SQLite file of the run, asked only for an id that is
    not a sub-formula's (a formula that uses a product as a part, or an unknown id).  Every worker process
    of a range gets a copy: without it each would hold a path for every product of the range."""

    def __init__(self, subformulas: dict[str, str], file: Path) -> None:
        self.subformulas = subformulas
        self.file = str(file)
        self._db: sqlite3.Connection | None = None

    @classmethod
    def write(cls, paths: dict, kinds: dict[str, str], file: Path) -> ProductPaths:
        """Put the products of ``paths`` (``kinds`` says which) in ``file``; the others stay in memory."""
        with contextlib.closing(sqlite3.connect(file)) as db:
            db.execute("CREATE TABLE products (id TEXT PRIMARY KEY, path TEXT NOT NULL)")
            db.executemany(
                "INSERT INTO products VALUES (?, ?)", ((k, str(p)) for k, p in paths.items() if kinds[k] == "product")
            )
            db.commit()
        return cls({k: str(p) for k, p in paths.items() if kinds[k] != "product"}, file)

    def _product(self, ident: str) -> str | None:
        if self._db is None:
            self._db = sqlite3.connect(f"file:{self.file}?mode=ro", uri=True, check_same_thread=False)
        row = self._db.execute("SELECT path FROM products WHERE id = ?", (ident,)).fetchone()
        return row[0] if row else None

    def get(self, ident: str, default=None):
        found = self.subformulas.get(ident)
        if found is None and isinstance(ident, str):
            found = self._product(ident)
        return default if found is None else found

    def __contains__(self, ident: object) -> bool:
        return ident in self.subformulas or (isinstance(ident, str) and self._product(ident) is not None)

    def __getitem__(self, ident: str) -> str:
        found = self.get(ident)
        if found is None:
            raise KeyError(ident)
        return found

    def __getstate__(self) -> dict:
        return {"subformulas": self.subformulas, "file": self.file}

    def __setstate__(self, state: dict) -> None:
        self.subformulas, self.file, self._db = state["subformulas"], state["file"], None


class FormulaIndex:
    """Every YAML file of a set of folders (recursively), classified; formulas found by id.

    ``paths`` and ``kinds`` hold ids used by exactly one formula file; ``duplicates`` maps an id used by
    several files to all of them; ``products`` lists product files (duplicates included, so each can be
    reported); ``entries`` is every file with its kind, for accounting."""

    def __init__(
        self,
        folders: list[Path],
        *,
        keep_products: bool | int = False,
        classify_all: Callable[[list[Path]], list[CatalogueEntry]] | None = None,
    ):
        """``classify_all`` classifies a list of files as :func:`classify` does, in order (range runs pass
        one that shares the files out to worker processes); not with ``keep_products``, which keeps the parsed
        data of product files for their one later load (a number: of at most that many files, so memory stays
        bounded on a large range, whose other files are parsed again when loaded)."""
        self.entries: list[CatalogueEntry] = []
        self._parsed: dict[Path, object] = {}  # product files' parsed data, kept for one later load (ranges)
        self.paths: dict[str, Path | str] = {}  # str in a look-up copy (see lookup_only)
        self.kinds: dict[str, str] = {}
        self.duplicates: dict[str, list[Path]] = {}
        self.duplicate_kinds: dict[str, list[str]] = {}  # the kind of each file in ``duplicates`` (ranges)
        seen: set[str] = set()  # resolved paths as text: a range holds one per file
        by_id: dict[str, list[CatalogueEntry]] = {}
        files = []
        for folder in folders:
            for f in yaml_files(folder):
                key = real_file_path(str(f))
                if key not in seen:
                    seen.add(key)
                    files.append(f)
        if classify_all is not None and not keep_products:
            pairs: Iterable[tuple[CatalogueEntry, object]] = ((e, None) for e in classify_all(files))
        else:
            pairs = (_classify(f) for f in files)
        for f, (e, data) in zip(files, pairs):
            e.path = f  # one path object per file (an entry from a worker process brings its own copy)
            self.entries.append(e)
            if keep_products and e.kind == "product" and (keep_products is True or len(self._parsed) < keep_products):
                self._parsed[f] = data
            if e.id is not None:
                by_id.setdefault(e.id, []).append(e)
        for ident, es in by_id.items():
            if len(es) > 1:
                self.duplicates[ident] = [e.path for e in es]
                self.duplicate_kinds[ident] = [e.kind for e in es]
            else:
                self.paths[ident] = es[0].path
                self.kinds[ident] = es[0].kind
        self.products: list[Path] = [e.path for e in self.entries if e.kind == "product"]

    def take_parsed(self, path: Path):
        """The parsed data of a product file read while classifying (once; None if not kept)."""
        return self._parsed.pop(path, None)

    def forget_parsed(self) -> None:
        """Drop kept parsed data (when the products are loaded elsewhere, e.g. in worker processes)."""
        self._parsed.clear()

    def lookup_only(self) -> FormulaIndex:
        """A copy for finding sub-formulas by id only (no file list), cheap to send to worker processes: paths
        as text (a path object takes several times the memory of its text, times every file of a range)."""
        twin = FormulaIndex([])
        twin.paths = {k: str(p) for k, p in self.paths.items()}
        twin.kinds, twin.duplicates = dict(self.kinds), dict(self.duplicates)
        return twin

    @classmethod
    def scan(
        cls,
        folder: Path,
        classify_all: Callable[[list[str]], Iterable[CatalogueEntry]],
        take: Callable[[CatalogueEntry], None],
    ) -> FormulaIndex:
        """A range's one pass over a folder: every YAML file (as :func:`yaml_files` lists them) classified by
        ``classify_all`` (as :func:`classify` does, in order; entries may come as they are made) and handed to
        ``take`` with its path as text, then dropped.  Returns the look-up of formulas by id only, as
        :meth:`lookup_only` gives it (paths as text), with ``duplicate_kinds``; no file list: a range of
        100,000 files keeps no entry per file here."""
        names: list[str] = []
        links = False
        for name, link in yaml_file_names(folder):
            names.append(name)
            links = links or link
        if links:  # a file and a link to it are one file, as in __init__ (without links no two names meet)
            seen: set[str] = set()
            kept = []
            for name in names:
                key = real_file_path(name)
                if key not in seen:
                    seen.add(key)
                    kept.append(name)
            names = kept
        index = cls([])
        paths = index.paths
        for name, e in zip(names, classify_all(names)):
            e.path = name  # type: ignore[assignment]  # text: see yaml_file_names
            ident = e.id
            if ident is not None:
                if ident in index.duplicates:
                    index.duplicates[ident].append(name)  # type: ignore[arg-type]
                    index.duplicate_kinds[ident].append(e.kind)
                elif ident in paths:
                    index.duplicates[ident] = [paths.pop(ident), name]  # type: ignore[list-item]
                    index.duplicate_kinds[ident] = [index.kinds.pop(ident), e.kind]
                else:
                    paths[ident] = name
                    index.kinds[ident] = e.kind
            take(e)
        return index

    def products_apart(self, file: Path) -> FormulaIndex:
        """A look-up copy (as :meth:`lookup_only`) whose product paths wait in ``file`` (see
        :class:`ProductPaths`) and whose ``kinds`` name the sub-formulas only (all the suggestions for an
        unknown id read): what a range's worker processes get."""
        twin = FormulaIndex([])
        twin.paths = ProductPaths.write(self.paths, self.kinds, file)  # type: ignore[assignment]
        twin.kinds = {k: kind for k, kind in self.kinds.items() if kind != "product"}
        twin.duplicates, twin.duplicate_kinds = dict(self.duplicates), dict(self.duplicate_kinds)
        return twin

    def duplicate_problem(self, ident: str, file: str | None = None, **where) -> Problem:
        """The message for a use (or definition) of an id that several files define."""
        others = ", ".join(display_path(p) or str(p) for p in self.duplicates[ident])
        return Problem(
            f"id '{ident}' is defined by {len(self.duplicates[ident])} files ({others}); none of them is used",
            file=file,
            fix="give each formula its own id (or remove the stale copy)",
            **where,
        )
