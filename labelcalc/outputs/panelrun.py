"""Writing panel drafts and calculation sheets for one product or a range."""

from __future__ import annotations

from concurrent.futures import ProcessPoolExecutor
from datetime import date as _date
from pathlib import Path

from labelcalc.errors import LabelError
from labelcalc.files import inside, safe_name
from labelcalc.formulation.composition import compose
from labelcalc.intake.formula import Formula, FormulaIndex, build_formula, load_formula
from labelcalc.intake.library import Library, load_library
from labelcalc.labelling.assess import assess_against
from labelcalc.labelling.checks import run_checks
from labelcalc.labelling.rulepack import RulePack, get_packs
from labelcalc.outputs.calcsheet import write_calculation_csv
from labelcalc.outputs.panelpdf import write_panel_pdf


def panels_for(
    formula_path: Path | Formula,
    library: Library,
    packs: list[RulePack],
    out: Path,
    date: str,
    reference=None,
    *,
    calculation_pages: bool = True,
    index: FormulaIndex | None = None,
) -> tuple[list[Path], list[str]]:
    """Write `<id>.<market>.pdf` and `<id>.<market>.calculation.csv` for every market.

    Returns the files and the failed pre-flight checks (as text)."""
    if isinstance(formula_path, Formula):
        f = formula_path
    else:
        f = load_formula(formula_path, library, _index=index) if index else load_formula(formula_path, library)
    comps = compose(f, library)
    files, failures = [], []
    out.mkdir(parents=True, exist_ok=True)
    stem = safe_name(f.id)
    for p in packs:
        items = []
        try:
            for i, c in enumerate(comps):
                a = assess_against(c, p, reference, i)
                checks = a.declaration.record.checks if a.declaration.record else run_checks(a)
                failures += [f"{f.id} [{p.market}, {c.scenario}] {x.name}: {x.detail}" for x in checks if not x.ok]
                items.append((a, checks))
        except LabelError as exc:  # this market cannot label the product; the others still get their panels
            failures.append(f"{f.id} [{p.market}]: {exc}")
            continue
        pdf = write_panel_pdf(items, inside(out, f"{stem}.{p.market}.pdf"), date, calculation=calculation_pages)
        csvp = write_calculation_csv([a for a, _ in items], inside(out, f"{stem}.{p.market}.calculation.csv"))
        files += [pdf, csvp]
    return files, failures


_STATE: dict = {}


def _one(args):
    """Panels of one product of a range; library and sub-formula index are loaded once per process."""
    item, lib_path, markets, rules, out, date, search = args
    key = (lib_path, tuple(search))
    if key not in _STATE:
        _STATE.clear()
        _STATE[key] = (load_library(lib_path), FormulaIndex([Path(x) for x in search]) if search else None)
    lib, index = _STATE[key]
    name = item if isinstance(item, str) else f"{item.file} [{item.product_id}]"
    try:
        if isinstance(item, str):
            target: Path | Formula = Path(item)
        else:  # a product of a sheet
            if "__error__" in item.data:
                raise item.data["__error__"]
            target = build_formula(item.data, item.file, item.lines, lib, index or FormulaIndex([]), {})
        # range runs: panel pages in the PDF, the calculation sheet as CSV (labelcalc panel adds its PDF pages)
        return panels_for(target, lib, get_packs(markets, rules), Path(out), date, calculation_pages=False, index=index)
    except LabelError as exc:
        return [], [f"{name}: {exc}"]
    except Exception as exc:  # noqa: BLE001 - one product's drawing error must not lose the others' panels
        return [], [f"{name}: internal error while drawing ({type(exc).__name__}: {exc})"]


def write_panels(
    source: Path, lib_path: Path, markets: list[str], rules, out: Path, *, jobs: int = 1, date: str | None = None
) -> tuple[list[Path], list[str]]:
    """Panels for every product of a range (a folder of formula files or a sheet) in ``out/panels``.

    Returns the files written and notes for the products that got no panel (and why)."""
    from labelcalc.intake.sources import sheet_products

    date = date or _date.today().isoformat()
    search = [str(source if source.is_dir() else source.parent)]
    items: list = []
    if source.is_dir():
        index = FormulaIndex([source])
        items = [str(p) for p in index.products if not any(p in ps for ps in index.duplicates.values())]
    elif source.suffix.lower() in (".csv", ".xlsx"):
        items = sheet_products(source)[0]
    elif source.suffix.lower() in (".yaml", ".yml"):
        items = [str(source)]
    args = [
        (it, str(lib_path), markets, str(rules) if rules else None, str(out / "panels"), date, search) for it in items
    ]
    files: list[Path] = []
    skipped: list[str] = []
    results = []
    if jobs > 1 and len(args) > 1:
        with ProcessPoolExecutor(max_workers=jobs) as ex:
            results = list(ex.map(_one, args, chunksize=max(1, len(args) // (jobs * 4) or 1)))
    else:
        results = [_one(a) for a in args]
    for fs, notes in results:
        files += fs
        if not fs:
            skipped += notes
    notes = [f"panels: none for {n}" for n in skipped]
    if not items:
        notes.append(f"panels: {source} holds no product to draw")
    return files, notes
