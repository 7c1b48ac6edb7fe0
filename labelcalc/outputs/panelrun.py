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
#: products per share of a range's panels (one labelling engine per market and share)
PANEL_SHARE = 100


def _init(lib_path: str, index: FormulaIndex | None) -> None:
    """Once per process: the library, and the sub-formula look-up of the main process (no worker reads the
    whole folder again)."""
    _STATE.clear()
    _STATE["state"] = (load_library(lib_path), index)


def _target(item, lib: Library, index: FormulaIndex | None) -> Formula:
    if isinstance(item, str):
        return load_formula(Path(item), lib, _index=index) if index else load_formula(Path(item), lib)
    if "__error__" in item.data:  # a product of a sheet
        raise item.data["__error__"]
    return build_formula(item.data, item.file, item.lines, lib, index or FormulaIndex([]), {})


def _one(args):
    """Panels of one product of a range (after :func:`_init` in this process)."""
    item, markets, rules, out, date = args
    lib, index = _STATE["state"]
    name = item if isinstance(item, str) else f"{item.file} [{item.product_id}]"
    try:
        # range runs: panel pages in the PDF, the calculation sheet as CSV (labelcalc panel adds its PDF pages)
        f = _target(item, lib, index)
        return panels_for(f, lib, get_packs(markets, rules), Path(out), date, calculation_pages=False, index=index)
    except LabelError as exc:
        return [], [f"{name}: {exc}"]
    except Exception as exc:  # noqa: BLE001 - one product's drawing error must not lose the others' panels
        return [], [f"{name}: internal error while drawing ({type(exc).__name__}: {exc})"]


def _many(share: list) -> list[tuple[list[Path], list[str]]]:
    """Panels of a share of a range's products, as :func:`_one` gives them product by product, with one
    labelling engine per market for the whole share (an engine's fixed cost, paid per label, was most of
    the time of a panel)."""
    from labelcalc.labelling.engine import LabelEngine
    from labelcalc.labelling.record import label_record

    lib, index = _STATE["state"]
    if not share:
        return []
    _, markets, rules, out, date = share[0]
    packs = get_packs(markets, rules)
    results: list[tuple[list[Path], list[str]] | None] = [None] * len(share)
    composed = []
    for k, (item, *_) in enumerate(share):
        name = item if isinstance(item, str) else f"{item.file} [{item.product_id}]"
        try:
            f = _target(item, lib, index)
            composed.append((k, name, f, compose(f, lib)))
        except LabelError as exc:
            results[k] = ([], [f"{name}: {exc}"])
        except Exception as exc:  # noqa: BLE001
            results[k] = ([], [f"{name}: internal error while drawing ({type(exc).__name__}: {exc})"])
    flat = [c for *_, comps in composed for c in comps]
    try:
        engines = [LabelEngine(p, flat) for p in packs]
    except Exception:  # noqa: BLE001 - label them one by one, so only a product that fails is lost
        return [_one(a) for a in share]
    where = []
    for eng in engines:
        errs: dict[int, LabelError] = {}
        for c, err in eng.errors:
            errs.setdefault(id(c), err)
        where.append(({id(c): i for i, c in enumerate(eng.comps)}, errs))
    folder = Path(out)
    folder.mkdir(parents=True, exist_ok=True)
    for k, name, f, comps in composed:
        files: list[Path] = []
        failures: list[str] = []
        stem = safe_name(f.id)
        try:
            for p, eng, (pos, errs) in zip(packs, engines, where):
                bad = next((errs[id(c)] for c in comps if id(c) in errs), None)
                if bad is not None:
                    failures.append(f"{f.id} [{p.market}]: {bad}")
                    continue
                items = []
                for c in comps:
                    a = label_record(eng, pos[id(c)]).assessment
                    checks = a.declaration.record.checks if a.declaration.record else run_checks(a)
                    failures += [f"{f.id} [{p.market}, {c.scenario}] {x.name}: {x.detail}" for x in checks if not x.ok]
                    items.append((a, checks))
                pdf = write_panel_pdf(items, inside(folder, f"{stem}.{p.market}.pdf"), date, calculation=False)
                csvp = write_calculation_csv(
                    [a for a, _ in items], inside(folder, f"{stem}.{p.market}.calculation.csv")
                )
                files += [pdf, csvp]
            results[k] = (files, failures)
        except LabelError as exc:
            results[k] = ([], [f"{name}: {exc}"])
        except Exception as exc:  # noqa: BLE001
            results[k] = ([], [f"{name}: internal error while drawing ({type(exc).__name__}: {exc})"])
    return [r if r is not None else ([], []) for r in results]


def write_panels(
    source: Path, lib_path: Path, markets: list[str], rules, out: Path, *, jobs: int = 1, date: str | None = None
) -> tuple[list[Path], list[str]]:
    """Panels for every product of a range (a folder of formula files or a sheet) in ``out/panels``.

    Returns the files written and notes for the products that got no panel (and why)."""
    from labelcalc.intake.sources import sheet_products
    from labelcalc.workers import mp_context

    date = date or _date.today().isoformat()
    index = FormulaIndex([source if source.is_dir() else source.parent])
    items: list = []
    if source.is_dir():
        dups = {p for ps in index.duplicates.values() for p in ps}
        items = [str(p) for p in index.products if p not in dups]
    elif source.suffix.lower() in (".csv", ".xlsx"):
        items = sheet_products(source)[0]
    elif source.suffix.lower() in (".yaml", ".yml"):
        items = [str(source)]
    args = [(it, markets, str(rules) if rules else None, str(out / "panels"), date) for it in items]
    init = (str(lib_path), index.lookup_only())
    files: list[Path] = []
    skipped: list[str] = []
    results = []
    size = max(1, min(PANEL_SHARE, -(-len(args) // (jobs * 4))))
    shares = [args[i : i + size] for i in range(0, len(args), size)]
    if jobs > 1 and len(args) > 1:
        with ProcessPoolExecutor(max_workers=jobs, mp_context=mp_context(), initializer=_init, initargs=init) as ex:
            results = [r for rs in ex.map(_many, shares) for r in rs]
    else:
        _init(*init)
        results = [r for share in shares for r in _many(share)]
    for fs, notes in results:
        files += fs
        if not fs:
            skipped += notes
    notes = [f"panels: none for {n}" for n in skipped]
    if not items:
        notes.append(f"panels: {source} holds no product to draw")
    return files, notes
