"""The folder the workbench opened: which files it may read and write, and formulas loaded from edited text.

Every path the browser sends is relative to the opened folder and is resolved here; anything that resolves
outside it (``..``, an absolute path, a symbolic link pointing out) is refused.  The ingredient library is the
nearest ``ingredients/`` folder between the formula and the opened folder (never above it) unless the user
named one when starting the server; reference formulas are found by id inside the folder only.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from labelcalc.errors import InputError, Problem
from labelcalc.formulation.composition import Composition, compose
from labelcalc.intake.formula import Formula, FormulaIndex, build_formula, load_formula
from labelcalc.intake.library import Library, load_library
from labelcalc.labelling.rulepack import RulePack, get_packs, load_packs
from labelcalc.yamlsafe import parse_yaml_text


def load_text(p: Path, shown: str) -> str:
    try:
        return p.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise InputError(Problem("file is not UTF-8 text", file=shown, fix="save it as UTF-8")) from None
    except OSError as exc:
        raise InputError(Problem(f"cannot read file: {exc.strerror}", file=shown)) from None


class OutsideFolder(PermissionError):
    """A path that is not inside the opened folder."""


@dataclass
class Workspace:
    """An opened folder (or the folder of one opened formula file) and the settings the server started with."""

    root: Path
    only: Path | None = None  # a single opened formula file
    library_path: Path | None = None
    rules: Path | None = None
    markets: list[str] = field(default_factory=lambda: ["us", "eu"])
    _libraries: dict = field(default_factory=dict, repr=False)
    _index: FormulaIndex | None = field(default=None, repr=False)
    _index_key: tuple = field(default=(), repr=False)

    @classmethod
    def open(cls, target: Path, **kw) -> Workspace:
        """A workspace for a folder or a single formula file; a missing path is a clear error."""
        target = Path(target)
        if not target.exists():
            raise InputError(Problem("file or folder not found", file=str(target), fix="check the path"))
        if target.is_file():
            return cls(target.resolve().parent, only=target.resolve(), **kw)
        return cls(target.resolve(), **kw)

    # -- paths -------------------------------------------------------------------------------------------------
    def resolve(self, rel: str, *, must_exist: bool = True) -> Path:
        """The path of ``rel`` inside the opened folder; anything outside it raises :class:`OutsideFolder`."""
        if not rel or "\x00" in rel or Path(rel).is_absolute() or rel.startswith(("/", "\\")):
            raise OutsideFolder(rel)
        p = (self.root / rel).resolve()
        if not p.is_relative_to(self.root):
            raise OutsideFolder(rel)
        if must_exist and not p.is_file():
            raise InputError(Problem("file not found in the opened folder", file=rel, fix="pick a file from the list"))
        return p

    def formula_path(self, rel: str) -> Path:
        """A formula file (YAML) inside the folder."""
        p = self.resolve(rel)
        if p.suffix not in (".yaml", ".yml"):
            raise InputError(Problem("not a formula file (.yaml or .yml)", file=rel))
        return p

    def read_text(self, p: Path) -> str:
        """A text file of the folder; unreadable or non-UTF-8 files are the CLI's clear messages."""
        return load_text(p, self.rel(p))

    def rel(self, p: Path) -> str:
        return p.resolve().relative_to(self.root).as_posix()

    def index(self) -> FormulaIndex:
        """Formula files by id in the folder, read again only when a YAML file was added, removed or changed."""
        files = sorted(p for p in self.root.rglob("*.y*ml") if p.suffix in (".yaml", ".yml"))
        key = tuple((str(p), p.stat().st_mtime_ns) for p in files if p.is_file())
        if self._index_key != key:
            self._index, self._index_key = FormulaIndex([self.root]), key
        assert self._index is not None
        return self._index

    def products(self) -> list[dict]:
        """The products in the folder (or the one opened file): relative path, id and name."""
        paths = [self.only] if self.only else self.index().products
        out = []
        for p in paths:
            try:
                text = p.read_text(encoding="utf-8")
                data = parse_yaml_text(text, self.rel(p), with_lines=False).data
                head = (data or {}).get("product") or {}
                out.append({"path": self.rel(p), "id": head.get("id", p.stem), "name": head.get("name", "")})
            except (InputError, OSError, AttributeError):
                out.append({"path": self.rel(p), "id": p.stem, "name": "(cannot be read: open it to see why)"})
        return out

    # -- data --------------------------------------------------------------------------------------------------
    def library_for(self, formula: Path) -> Library:
        """The ingredient library of a formula (loaded once per file version)."""
        lib_path = self.library_path or self._nearest_library(formula)
        files = sorted(lib_path.rglob("*")) if lib_path.is_dir() else [lib_path]
        key = (str(lib_path), tuple((str(f), f.stat().st_mtime_ns) for f in files if f.is_file()))
        if key not in self._libraries:
            self._libraries.clear()
            self._libraries[key] = load_library(lib_path)
        return self._libraries[key]

    def _nearest_library(self, formula: Path) -> Path:
        for folder in [formula.parent, *formula.parent.parents]:
            if (folder / "ingredients").is_dir():
                return folder / "ingredients"
            if folder == self.root:
                break
        raise InputError(
            Problem(
                "no ingredient library found (an 'ingredients/' folder beside the formula or above it, inside the "
                "opened folder)",
                file=self.rel(formula),
                fix="start the workbench with --library PATH",
            )
        )

    def packs(self, markets: list[str] | None = None) -> list[RulePack]:
        return get_packs(markets or self.markets, self.rules)

    def market_codes(self) -> list[str]:
        return sorted(load_packs(self.rules))

    def formula_from_text(self, text: str, path: Path) -> tuple[Formula, Library]:
        """Validate and resolve formula text as if it were the file at ``path`` (same messages as the CLI)."""
        lib = self.library_for(path)
        loaded = parse_yaml_text(text, self.rel(path))
        return build_formula(loaded.data, loaded.file, loaded.lines, lib, self.index(), {}), lib

    def reference(self, f: Formula, lib: Library) -> list[Composition] | None:
        """Compositions of the formula's reference formula (for comparative claims), found by id in the folder."""
        ref = f.header.reference_formula
        if not ref:
            return None
        path = self.index().paths.get(ref)
        if path is None:
            raise InputError(
                Problem(
                    f"reference_formula '{ref}' is not a product id in the opened folder",
                    file=f.file,
                    field="product.reference_formula",
                    fix="give the id of a product file in this folder",
                )
            )
        return compose(load_formula(path, lib, search=[self.root]), lib)
