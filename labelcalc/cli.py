"""The ``labelcalc`` command: a thin layer over the Python API.

Every command reports bad input as one clear message (file, line or field,
what to fix) on standard error and exits with code 2; it never prints a
traceback for bad input.
"""

from __future__ import annotations

import functools
import json
import os
import sys
import tempfile
import traceback
from pathlib import Path

import typer

from labelcalc import __version__, threads  # noqa: F401 - threads first: before numpy loads (see its notes)
from labelcalc.api import find_library
from labelcalc.errors import InputError, LabelError, Problem
from labelcalc.formulation.composition import compose
from labelcalc.formulation.energy import energy_of, load_factor_set, rules_dir
from labelcalc.intake.formula import load_formula
from labelcalc.intake.library import load_library
from labelcalc.labelling.declare import declare
from labelcalc.labelling.rounding import plain_label
from labelcalc.labelling.rulepack import check_formula_against_packs, get_packs, load_pack_file, load_packs
from labelcalc.outputs.jsondoc import composition_dict, declaration_dict
from labelcalc.outputs.textreport import compose_text, declare_text

# Plain help (no rich panels): option lists read "--out PATH", flags carry no "<bool>" and arguments
# print as FORMULA, not as typer's "{formula}" placeholders.
app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    rich_markup_mode=None,
    help="From a food product formula to finished-product composition, energy and label drafts for several markets. "
    "Every output is a draft: verify it against current local regulation with a qualified regulatory professional.",
)
rules_app = typer.Typer(
    no_args_is_help=True,
    rich_markup_mode=None,
    help="The market rule packs: list, show, check, and the values still to verify against the law.",
)
app.add_typer(rules_app, name="rules")
library_app = typer.Typer(
    no_args_is_help=True,
    help="Ingredient libraries from public food-composition tables (fdc, cofid, cnf, afcd, ciqual).",
)
app.add_typer(library_app, name="library")

LibraryOpt = typer.Option(
    None,
    "--library",
    "-l",
    help="Ingredient library (folder or file). Default: the nearest 'ingredients/' folder beside the formula.",
)
JsonOpt = typer.Option(False, "--json", help="Write a JSON document instead of the table.")
RulesOpt = typer.Option(
    None, "--rules", help="Folder of market rule packs to use instead of the built-in rules/markets."
)
MarketOpt = typer.Option("us,eu", "--market", "-m", help="Comma-separated market codes: us, eu, uk, ca, anz, codex.")


def friendly(fn):
    """Turn LabelError into one message and exit code 2; an unexpected error into one line, a crash report and
    exit code 3."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except LabelError as exc:
            typer.echo(f"error: {exc}", err=True)
            raise typer.Exit(2) from None
        except (BrokenPipeError, KeyboardInterrupt):  # pragma: no cover
            raise typer.Exit(1) from None
        except (typer.Exit, typer.Abort, SystemExit):
            raise
        except OSError as exc:  # a file that cannot be read or written: the environment, not a bug
            typer.echo(f"error: {_os_problem(exc)}", err=True)
            raise typer.Exit(2) from None
        except Exception as exc:  # noqa: BLE001 - never a traceback: one line and a crash report
            from labelcalc.ranges.publish import write_crash_report

            out = kwargs.get("out") if isinstance(kwargs.get("out"), Path) else None
            report = _crash_report_path(out)
            what = " ".join(f"{k}={v}" for k, v in kwargs.items() if isinstance(v, (str, Path)))
            write_crash_report(
                report, [{"traceback": "".join(traceback.format_exception(exc))}], f"labelcalc {fn.__name__}: {what}"
            )
            typer.echo(
                f"error: internal error ({type(exc).__name__}: {exc}) while working on {what or 'the input'}; "
                f"crash report: {report}",
                err=True,
            )
            raise typer.Exit(3) from None

    return wrapper


def _load(formula: Path, library: Path | None):
    """The ingredient library and the validated formula of a command."""
    lib = _library(formula, library)
    return lib, load_formula(formula, lib)


def _library(formula: Path, library: Path | None):
    if not formula.exists():
        from labelcalc.errors import InputError, Problem

        raise InputError(Problem("file not found", file=str(formula), fix="check the path"))
    return load_library(library or find_library(formula))


def _energy_sets() -> list[str]:
    ids = sorted(p.stem for p in (rules_dir() / "energy").glob("*.yaml"))
    return ["available"] + [i for i in ids if i != "available"]


@app.command("compose")
@friendly
def compose_cmd(
    formula: Path = typer.Argument(..., help="Formula file (YAML)."),
    library: Path | None = LibraryOpt,
    as_json: bool = JsonOpt,
):
    """Finished-product composition per 100 g and per serving, with available and declared-basis energy."""
    lib, f = _load(formula, library)
    comps = compose(f, lib)
    if as_json:
        typer.echo(
            json.dumps(
                composition_dict(f, comps, [load_factor_set(i) for i in _energy_sets()]), indent=2, ensure_ascii=False
            )
        )
        return
    sets = [load_factor_set(i) for i in _energy_sets()]
    energies = {f.id: [[energy_of(c, fs) for fs in sets] for c in comps]}
    typer.echo(compose_text(comps, energies))


@app.command("declare")
@friendly
def declare_cmd(
    formula: Path = typer.Argument(..., help="Formula file (YAML)."),
    market: str = MarketOpt,
    library: Path | None = LibraryOpt,
    rules: Path | None = RulesOpt,
    as_json: bool = JsonOpt,
    trace: bool = typer.Option(
        False, "--trace", help="With --json: add each shown figure's trace down to the leaf ingredients."
    ),
):
    """Each market's declared values: rows, rounding, reference values, columns."""
    lib, f = _load(formula, library)
    packs = get_packs(market.split(","), rules)
    check_formula_against_packs(f, packs)
    comps = compose(f, lib)
    decls = [declare(c, p) for p in packs for c in comps]  # all computed before anything is printed
    if as_json:
        doc = {
            "product": {"id": f.id, "name": f.header.name, "version": f.header.version, "content_hash": f.content_hash},
            "declarations": [declaration_dict(d, trace=trace) for d in decls],
        }
        typer.echo(json.dumps(doc, indent=2, ensure_ascii=False, default=str))
    else:
        typer.echo(declare_text(decls))


def _reference(f, lib, packs):
    """Compose the formula's reference formula (for comparative claims), if it names one."""
    ref = f.header.reference_formula
    if not ref:
        return None
    from labelcalc.intake.formula import FormulaIndex

    index = FormulaIndex([Path(f.file).resolve().parent])
    path = index.paths.get(ref) or (Path(f.file).resolve().parent / ref)
    if not Path(path).exists():
        raise LabelError(
            f"{f.file}: reference_formula '{ref}' not found (give a product id in the same folder or a path)"
        )
    rf = load_formula(path, lib)
    return compose(rf, lib)


def assessments(f, lib, packs):
    from labelcalc.labelling.assess import assess_against

    comps = compose(f, lib)
    ref = _reference(f, lib, packs)
    return [assess_against(c, p, ref, i) for p in packs for i, c in enumerate(comps)]


@app.command("assess")
@friendly
def assess_cmd(
    formula: Path = typer.Argument(..., help="Formula file (YAML)."),
    market: str = MarketOpt,
    library: Path | None = LibraryOpt,
    rules: Path | None = RulesOpt,
    as_json: bool = JsonOpt,
):
    """Claims, required statements, allergens, ingredient list and front-of-pack verdicts, each with its figures and citation."""
    from labelcalc.outputs.jsondoc import assessment_dict
    from labelcalc.outputs.textreport import assess_text

    lib, f = _load(formula, library)
    packs = get_packs(market.split(","), rules)
    check_formula_against_packs(f, packs)
    items = assessments(f, lib, packs)
    if as_json:
        doc = {
            "product": {"id": f.id, "name": f.header.name, "content_hash": f.content_hash},
            "assessments": [assessment_dict(a) for a in items],
        }
        typer.echo(json.dumps(doc, indent=2, ensure_ascii=False, default=str))
    else:
        typer.echo(assess_text(items))


@app.command("panel")
@friendly
def panel_cmd(
    formula: Path = typer.Argument(..., help="Formula file (YAML)."),
    market: str = MarketOpt,
    out: Path = typer.Option(Path("labelcalc-out/panels"), "--out", "-o", help="Output folder."),
    library: Path | None = LibraryOpt,
    rules: Path | None = RulesOpt,
    date: str | None = typer.Option(
        None, "--date", help="Date printed on the drafts (YYYY-MM-DD); default today. Fix it for byte-identical output."
    ),
):
    """Panel draft PDFs (one per market) with the calculation sheet (PDF pages and CSV)."""
    from datetime import date as _date

    from labelcalc.outputs.panelrun import panels_for

    if date is not None:
        try:
            _date.fromisoformat(date)
        except ValueError:
            raise InputError(
                Problem(f"'{date}' is not a date", field="--date", fix="write it as YYYY-MM-DD, e.g. 2026-03-31")
            ) from None
    lib = _library(formula, library)
    packs = get_packs(market.split(","), rules)
    f = load_formula(formula, lib)
    check_formula_against_packs(f, packs)
    files, failures = panels_for(f, lib, packs, out, date or _date.today().isoformat(), _reference(f, lib, packs))
    for p in files:
        typer.echo(f"wrote {p}")
    for x in failures:
        typer.echo(f"PRE-FLIGHT CHECK FAILED: {x}", err=True)
    typer.echo("DRAFT: verify against current local regulation with a qualified regulatory professional.")
    if failures:
        raise typer.Exit(1)


PricesOpt = typer.Option(
    None, "--prices", help="Price file (YAML: prices: {ingredient: {per_kg, currency}}); overrides library prices."
)


def _prices(path):
    if path is None:
        return None
    from labelcalc.whatif.costing import load_prices

    return load_prices(path)


@app.command("compare")
@friendly
def compare_cmd(
    formulas: list[Path] = typer.Argument(
        ..., help="Two or more formula files; the first is the basis of the differences."
    ),
    market: str = MarketOpt,
    library: Path | None = LibraryOpt,
    rules: Path | None = RulesOpt,
    prices: Path | None = PricesOpt,
    as_json: bool = JsonOpt,
):
    """Formulas side by side: energy, declared values, claims gained or lost, statements, cost."""
    from labelcalc.whatif.explore import comparison_rows, figures_many

    if len(formulas) < 2:
        raise LabelError("compare needs at least two formula files")
    lib = _library(formulas[0], library)
    packs = get_packs(market.split(","), rules)
    pr = _prices(prices)
    loaded = [load_formula(p, lib) for p in formulas]
    doc = comparison_rows(loaded, figures_many([(f.id, f) for f in loaded], lib, packs, pr))
    if as_json:
        typer.echo(
            json.dumps({"compared": [f.id for f in loaded], "basis": loaded[0].id, "rows": doc}, indent=2, default=str)
        )
        return
    from labelcalc.outputs.textreport import num, table

    rows = [
        [
            r["formula"],
            r["market"],
            r["scenario"],
            num(r["available_kcal_per_serving"], 1),
            num(r["declared_kcal_per_serving"], 1),
            num(r["change_available_percent"], 1) + " %" if r["change_available_percent"] is not None else "-",
            (f"{r['cost_per_serving']:.4f} {r['currency']}" if r["cost_per_serving"] is not None else "unknown"),
            (
                f"{r['cost_per_kcal_saved_per_serving']:.4f} {r['currency']}"
                if r["cost_per_kcal_saved_per_serving"] is not None
                else "-"
            ),
            " ".join([f"+{c}" for c in r["claims_gained"]] + [f"-{c}" for c in r["claims_lost"]]),
            " ".join([f"+{c}" for c in r["statements_added"]] + [f"-{c}" for c in r["statements_removed"]]),
        ]
        for r in doc
    ]
    typer.echo(f"Compared with {loaded[0].id} (energy per serving in kcal; DRAFT figures)")
    typer.echo(
        table(
            [
                "formula",
                "market",
                "scenario",
                "available",
                "declared",
                "available vs basis",
                "cost/serving",
                "cost per kcal saved",
                "claims",
                "statements",
            ],
            rows,
            "lllrrrrrll",
        )
    )
    typer.echo("cost per kcal saved: extra cost per serving for each kcal of available energy saved ('-': none saved)")
    labels = {p.market: {r.nutrient: plain_label(r.label) for r in p.rows} for p in packs}
    for r in doc:
        if r["declared_changed"] and r["formula"] != loaded[0].id:
            names = labels.get(r["market"], {})
            typer.echo(
                f"{r['formula']} [{r['market']}, {r['scenario']}]: "
                + "; ".join(
                    f"{names.get(k, k)} {'not on the panel' if a is None else a} -> {'not on the panel' if b is None else b}"
                    for k, (a, b) in r["declared_changed"].items()
                )
            )


ReplaceOpt = typer.Option(
    ...,
    "--replace",
    help="Ingredient or sub-formula id to replace (wherever it is used, frying oil included).",
    metavar="ID",
)
WithOpt = typer.Option(..., "--with", help="Ingredient or sub-formula id that replaces it.", metavar="ID")


@app.command("sweep")
@friendly
def sweep_cmd(
    formula: Path = typer.Argument(..., help="Formula file (YAML)."),
    replace: str = ReplaceOpt,
    with_: str = WithOpt,
    start: float = typer.Option(0, "--from", help="First replacement level [%]."),
    stop: float = typer.Option(100, "--to", help="Last replacement level [%]."),
    step: float = typer.Option(10, "--step", help="Step between levels [%]."),
    market: str = MarketOpt,
    out: Path = typer.Option(
        Path("labelcalc-out/sweeps"), "--out", "-o", help="Output folder for CSV, JSON and the chart."
    ),
    library: Path | None = LibraryOpt,
    rules: Path | None = RulesOpt,
    prices: Path | None = PricesOpt,
):
    """Replace a share of one ingredient by another, step by step: energy, declared values, claims, statements, cost, and a chart."""
    from labelcalc.files import inside, safe_name
    from labelcalc.outputs.charts import sweep_chart, sweep_series
    from labelcalc.ranges.publish import write_csv, write_json
    from labelcalc.whatif.explore import first_levels, sweep, sweep_rows

    if step <= 0 or stop < start:
        raise LabelError("--step must be above 0 and --to at least --from")
    lib = _library(formula, library)
    packs = get_packs(market.split(","), rules)
    f = load_formula(formula, lib)
    ref = _reference(f, lib, packs) or compose(f, lib)
    levels, x = [], start
    while x <= stop + 1e-9:
        levels.append(round(x, 6))
        x += step
    rows = sweep(f, lib, packs, replace, with_, levels, _prices(prices), ref)
    firsts = first_levels(rows)
    table_rows = sweep_rows(rows)
    out.mkdir(parents=True, exist_ok=True)
    stem = safe_name(f"{f.id}.{replace}-to-{with_}")
    csvp, jsonp = inside(out, stem + ".csv"), inside(out, stem + ".json")
    write_csv(csvp, table_rows)
    write_json(
        jsonp,
        {
            "formula": f.id,
            "replace": replace,
            "with": with_,
            "levels": levels,
            "rows": table_rows,
            "first_levels": firsts,
            "chart_series": sweep_series(rows),
        },
    )

    def shown(key: str) -> str:  # an ingredient's label name, or a sub-formula's id
        return lib.ingredients[key].label_name if key in lib else key

    names = {}
    for p in packs:
        names.update({f"{p.market}: claim {c.id}": f"{p.market.upper()}: {c.label}" for c in p.claims})
        names.update({f"{p.market}: statement {st.id}": f"{p.market.upper()}: {st.text}" for st in p.statements})
    charts = sweep_chart(
        rows,
        firsts,
        f"{f.header.name}: {shown(replace)} replaced by {shown(with_)}",
        shown(replace),
        shown(with_),
        inside(out, stem + ".chart"),
        names,
    )
    from labelcalc.outputs.textreport import num, table

    typer.echo(
        table(
            [
                "level %",
                "market",
                "scenario",
                "available kcal/serving",
                "declared kcal/serving",
                "cost/serving",
                "claims",
            ],
            [
                [
                    f"{r['level_percent']:g}",
                    r["market"],
                    r["scenario"],
                    num(r["available_kcal_per_serving"], 1),
                    num(r["declared_kcal_per_serving"], 1),
                    "unknown" if r["cost_per_serving"] is None else f"{r['cost_per_serving']:.4f} {r['currency']}",
                    r["claims_eligible"],
                ]
                for r in table_rows
            ],
            "lllrrrl",
        )
    )
    for k, v in sorted(firsts.items(), key=lambda kv: kv[1]):
        typer.echo(f"from {v:g} %: {k}")
    for p in (csvp, jsonp, *charts):
        typer.echo(f"wrote {p}")


@app.command("target")
@friendly
def target_cmd(
    formula: Path = typer.Argument(..., help="Formula file (YAML)."),
    replace: str = ReplaceOpt,
    with_: str = WithOpt,
    claim: str = typer.Option(
        ..., "--claim", help="Claim id of the market's pack (see 'labelcalc rules show MARKET')."
    ),
    market: str = typer.Option(..., "--market", "-m", help="One market code."),
    tolerance: float = typer.Option(0.01, "--tolerance", help="Precision of the level [percentage points]."),
    library: Path | None = LibraryOpt,
    rules: Path | None = RulesOpt,
    prices: Path | None = PricesOpt,
):
    """The smallest replacement level that makes a claim eligible, with the resulting declaration and cost."""
    from labelcalc.labelling.claims_table import claim_key
    from labelcalc.whatif.explore import find_target

    lib = _library(formula, library)
    (pack,) = get_packs([market], rules)
    f = load_formula(formula, lib)
    ref = _reference(f, lib, [pack]) or compose(f, lib)
    t = find_target(
        f, lib, pack, replace, with_, claim_key(claim), tolerance=tolerance, prices=_prices(prices), reference=ref
    )
    typer.echo(f"{f.header.name} [{market}] — claim '{claim}' by replacing {replace} with {with_}: {t.note}")
    if not t.reachable:
        for b in t.blocking:
            typer.echo(f"  blocked by: {b}")
        raise typer.Exit(1)
    for p in t.points:
        typer.echo(
            f"  [{p.scenario}] available {p.available_kcal_per_serving:.1f} kcal/serving, declared "
            f"{p.declared_kcal_per_serving:.1f} kcal/serving"
            + (
                f", cost {p.cost_per_serving:.4f} {p.currency}/serving"
                if p.cost_per_serving is not None
                else ", cost unknown"
            )
        )
        typer.echo("    declared: " + "; ".join(f"{k} {v}" for k, v in p.declared.items()))
    typer.echo("Reference for the comparison: " + (f.header.reference_formula or f"the formula itself at 0 % ({f.id})"))
    typer.echo("DRAFT: verify against current local regulation with a qualified regulatory professional.")


@app.command("verify")
@friendly
def verify_cmd(
    formula: Path = typer.Argument(..., help="Formula file (YAML)."),
    lab: Path = typer.Option(..., "--lab", help="Laboratory certificate (YAML or CSV)."),
    market: str = MarketOpt,
    margin: float = typer.Option(
        5.0, "--margin", help="Flag figures within this % of the declared value from a limit."
    ),
    force: bool = typer.Option(False, "--force", help="Compare even if the certificate names another product id."),
    library: Path | None = LibraryOpt,
    rules: Path | None = RulesOpt,
    as_json: bool = JsonOpt,
):
    """Each declared figure against the lab's analysed value under the market's compliance rule."""
    from dataclasses import asdict

    from labelcalc.lab.certificates import load_lab
    from labelcalc.lab.verify import verify

    lib, f = _load(formula, library)
    cert = load_lab(lab)
    packs = get_packs(market.split(","), rules)
    reports = []
    for p in packs:
        for c in compose(f, lib):
            reports.append((c.scenario, verify(c, declare(c, p), cert, margin_percent=margin, force=force)))
    if as_json:
        typer.echo(json.dumps([{"scenario": s, **asdict(r)} for s, r in reports], indent=2, default=str))
        return
    from labelcalc.outputs.textreport import num, table

    c0 = cert.certificate
    typer.echo(
        f"Certificate {c0.reference or '-'} from {c0.lab or '-'} ({c0.sample_date or 'no date'}; {c0.samples or 'sampling not stated'})"
    )
    for scen, r in reports:
        typer.echo(
            f"\n{r.market} — {f.header.name}"
            + ("" if scen == "nominal" else f" — declaration at the {scen} end of the ranges")
        )
        rows = [
            [
                x.label,
                x.basis.replace("_", " "),
                x.declared,
                num(x.analysed, 2),
                f"{num(x.allowed[0], 2) if x.allowed[0] is not None else '-'} .. {num(x.allowed[1], 2) if x.allowed[1] is not None else '-'}",
                x.verdict.upper() if x.verdict != "within" else "within",
                x.revised or "",
                x.rule,
            ]
            for x in r.rows
        ]
        typer.echo(
            table(
                ["row", "basis", "declared", "analysed", "allowed", "verdict", "would declare", "rule"],
                rows,
                "llrrrlll",
            )
        )
        for x in r.rows:
            if x.verdict != "within":
                typer.echo(
                    f"  {x.label}: {x.risk or ''} — {x.citation}" + (f"; {'; '.join(x.notes)}" if x.notes else "")
                )
        if r.not_declared:
            typer.echo("  reported by the lab, not on this label: " + ", ".join(r.not_declared))
        typer.echo("  " + r.summary)
    typer.echo("\nDRAFT: compliance rules as the packs state them; confirm with a qualified regulatory professional.")


@app.command("calibrate")
@friendly
def calibrate_cmd(
    formula: Path = typer.Argument(..., help="Formula file (YAML)."),
    lab: Path = typer.Option(..., "--lab", help="Laboratory certificate with moisture (and fat for a fried product)."),
    out: Path = typer.Option(
        Path("labelcalc-out/calibrated"),
        "--out",
        "-o",
        help="Folder for the updated formula files (originals are never changed).",
    ),
    force: bool = typer.Option(False, "--force", help="Use a certificate that names another product id."),
    library: Path | None = LibraryOpt,
):
    """Solve for the moisture loss and oil uptake that reproduce the lab's moisture and fat, and write an updated formula."""
    from labelcalc.lab.calibrate import calibrate, write_calibrated
    from labelcalc.lab.certificates import load_lab

    lib, f = _load(formula, library)
    cal = calibrate(f, lib, load_lab(lab), force=force)
    typer.echo(f"{f.header.name}: step '{cal.step}' in {cal.in_formula}")
    rng = lambda r: f" (range {r[0]:.2f} to {r[1]:.2f} from the lab's uncertainty)" if r else ""
    typer.echo(f"  water after the step: {cal.final_water:.2f} g/100 g" + rng(cal.water_range))
    if cal.oil_per_100g is not None:
        typer.echo(f"  oil uptake: {cal.oil_per_100g:.2f} g per 100 g after the step" + rng(cal.oil_range))
    typer.echo(
        f"  reproduces: water {cal.reproduced['water']:.3f} g/100 g, total lipid {cal.reproduced['total_lipid']:.3f} g/100 g"
    )
    for n in cal.notes:
        typer.echo(f"  note: {n}")
    files = write_calibrated(f, cal, out)
    for p in files:
        typer.echo(f"wrote {p}")
    typer.echo(
        f"Use it with: labelcalc compose {files[0]} --library {lib.files[0].rsplit('/', 1)[0] if lib.files else 'LIBRARY'}"
    )


@app.command("range")
def range_cmd(
    source: Path = typer.Argument(..., help="Folder of formula files, or a .csv/.xlsx sheet (one row per batch line)."),
    market: str = MarketOpt,
    out: Path = typer.Option(Path("labelcalc-out"), "--out", "-o", help="Output folder for the summary tables."),
    library: Path | None = LibraryOpt,
    rules: Path | None = RulesOpt,
    jobs: int = typer.Option(1, "--jobs", "-j", min=1, help="Parallel worker processes."),
    register: Path | None = typer.Option(
        None, "--register", help="Label register file (SQLite). Default: OUT/label-register.sqlite."
    ),
    no_register: bool = typer.Option(False, "--no-register", help="Do not compare with or update the label register."),
    panels: bool = typer.Option(False, "--panels", help="Also write panel drafts (PDF) and calculation sheets."),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No progress bar."),
):
    """Declare every product of a range for every market: summary table (CSV, XLSX, JSON), errors table, the
    fate of every file (files.csv) and the label register.

    Exit code 0: every product labelled; 1: some products failed (see errors.csv), all others were written;
    2: the run could not start (bad option, library, rule pack or register); 3: an internal error (see
    crash-report.txt in the output folder)."""
    from labelcalc.ranges.publish import publish, write_crash_report, write_outputs
    from labelcalc.ranges.rangerun import run_range

    reg = None
    try:
        lib_path = library or find_library(source if source.is_dir() else source.parent / "x")
        markets = [m.strip() for m in market.split(",") if m.strip()]
        range_packs = {p.market: p for p in get_packs(markets, rules)}
        if not no_register:
            from labelcalc.ranges.register import Register

            reg = Register(register or out / "label-register.sqlite")
            reg.lock()  # held until the outputs are in place: a busy register stops the run now, not at the end
        with tempfile.TemporaryDirectory(prefix="labelcalc-parts-") as part_dir:  # summary rows, streamed
            progress, stop = _progress(quiet)
            try:
                result = run_range(
                    source,
                    lib_path,
                    markets,
                    rules,
                    jobs=jobs,
                    progress=progress,
                    with_labels=not no_register,
                    exclude=[out] + ([register.parent] if register else []),
                    part_dir=Path(part_dir),
                )
            finally:
                stop()
            failed_files = {f["file"] for f in result.files if f["outcome"] != "labelled" and f["kind"] != "subformula"}
            changes = reg.compare(result.labels, failed_files) if reg else None
            notes: list[str] = []

            def write(stage: Path) -> list[Path]:
                files = write_outputs(stage, result, changes, range_packs)
                if panels:
                    from labelcalc.outputs.panelrun import write_panels

                    written, why_not = write_panels(source, lib_path, markets, rules, stage, jobs=jobs)
                    files += written
                    notes.extend(why_not)
                return files

            files = publish(out, write)
        if reg:
            reg.record(result.labels)  # only now: an interrupted run records nothing and its rerun reports the same
    except LabelError as exc:
        typer.echo(f"error: {exc}", err=True)
        raise typer.Exit(2) from None
    except OSError as exc:  # an output folder or register that cannot be written: nothing was changed
        typer.echo(f"error: {_os_problem(exc)}", err=True)
        raise typer.Exit(2) from None
    except Exception as exc:  # noqa: BLE001 - never a traceback: one line and a crash report
        report = _crash_report_path(out)
        write_crash_report(
            report, [{"traceback": "".join(traceback.format_exception(exc))}], f"labelcalc range {source}"
        )
        typer.echo(f"error: internal error ({type(exc).__name__}: {exc}); crash report: {report}", err=True)
        raise typer.Exit(3) from None
    finally:
        if reg:
            reg.close()
    n_ok, n_bad = result.products_ok, result.products_failed
    typer.echo(
        f"{n_ok} product(s) labelled for {', '.join(markets)}; {n_bad} failed"
        + (f" (see {out / 'errors.csv'})" if n_bad or result.errors else "")
    )
    kinds = result.files.tally()  # counted in the run: a streamed inventory's part file is gone by now
    typer.echo(
        f"{len(result.files)} source item(s) accounted for: "
        + ", ".join(f"{n} {k}" for k, n in sorted(kinds.items()))
        + " (see files.csv)"
    )
    for n in notes:
        typer.echo(n)
    if changes is not None:
        counts = {
            s: sum(1 for c in changes if c["status"] == s) for s in ("new", "changed", "unchanged", "not labelled")
        }
        typer.echo(
            f"label register: {counts['new']} new, {counts['changed']} changed, {counts['unchanged']} unchanged"
            + (f", {counts['not labelled']} not labelled in this run" if counts["not labelled"] else "")
            + (f" (see {out / 'changes.csv'})" if counts["changed"] or counts["not labelled"] else "")
        )
        for c in changes:
            if c["status"] == "changed":
                typer.echo(
                    f"  changed: {c['product_id']} [{c['market']}, {c['scenario']}]: {c['what_moved']} — because {c['why'] or 'see formula'}"
                )
    from labelcalc.errors import display_path

    typer.echo(
        "wrote "
        + ", ".join(display_path(f) or str(f) for f in files[:6])
        + (f" and {len(files) - 6} more" if len(files) > 6 else "")
    )
    typer.echo("DRAFT figures: verify against current local regulation with a qualified regulatory professional.")
    if result.crashes:
        typer.echo(
            f"error: {len(result.crashes)} internal error(s); crash report: {out / 'crash-report.txt'}", err=True
        )
        raise typer.Exit(3)
    if result.errors:
        raise typer.Exit(1)


def _os_problem(exc: OSError) -> str:
    where = f"{exc.filename}: " if exc.filename else ""
    return (
        f"{where}cannot read or write: {exc.strerror or exc} — check the path and its permissions (nothing was changed)"
    )


def _crash_report_path(out: Path | None) -> Path:
    """Where an internal error's report goes: the output folder when there is one, else the temp folder."""
    import tempfile

    if out is not None:
        try:
            out.mkdir(parents=True, exist_ok=True)
            return out / "crash-report.txt"
        except OSError:
            pass
    return Path(tempfile.gettempdir()) / f"labelcalc-crash-{os.getpid()}.txt"


def _progress(quiet: bool):
    """A progress bar on an interactive terminal; nothing otherwise."""
    if quiet or not sys.stderr.isatty():
        return None, lambda: None
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    bar = Progress(
        TextColumn("labelling"),
        BarColumn(),
        MofNCompleteColumn(),
        TextColumn("{task.fields[rate]} products/s"),
        TimeRemainingColumn(),
        transient=True,
    )
    task = bar.add_task("range", total=None, rate="-")
    bar.start()

    def update(done, total):
        elapsed = bar.tasks[0].elapsed or 1e-9
        bar.update(task, completed=done, total=total, rate=f"{done / elapsed:.0f}")

    return update, bar.stop


@app.command("register")
@friendly
def register_cmd(
    db: Path = typer.Option(Path("labelcalc-out/label-register.sqlite"), "--db", help="Label register file."),
    export: Path | None = typer.Option(None, "--export", help="Write the register to this CSV file."),
):
    """List (or export) the labels recorded in the label register."""
    from labelcalc.ranges.publish import write_csv
    from labelcalc.ranges.register import Register

    if not db.exists():
        raise LabelError(f"{db}: no label register here — run 'labelcalc range' first or pass --db")
    reg = Register(db)
    rows = reg.rows()
    reg.close()
    if export:
        write_csv(export, rows)
        typer.echo(f"wrote {len(rows)} label(s) to {export}")
        return
    from labelcalc.outputs.textreport import table

    typer.echo(
        table(
            ["product", "market", "scenario", "formula", "allergens", "claims", "recorded"],
            [
                [
                    r["product_id"],
                    r["market"],
                    r["scenario"],
                    r["formula_hash"],
                    r["allergens"],
                    r["claims"],
                    r["recorded_at"],
                ]
                for r in rows
            ],
            "lllllll",
        )
    )


@app.command("where-used")
@friendly
def where_used_cmd(
    ingredient: str = typer.Argument(..., help="Ingredient id of the library."),
    db: Path = typer.Option(Path("labelcalc-out/label-register.sqlite"), "--db", help="Label register file."),
):
    """Every product and market label that uses an ingredient, directly or through sub-formulas."""
    from labelcalc.ranges.register import Register

    if not db.exists():
        raise LabelError(f"{db}: no label register here — run 'labelcalc range' first or pass --db")
    reg = Register(db)
    rows = reg.where_used(ingredient)
    reg.close()
    if not rows:
        typer.echo(f"no recorded label uses '{ingredient}'")
        return
    products: dict[tuple[str, str], list[str]] = {}
    for r in rows:
        products.setdefault((r["product_id"], r["file"]), []).append(f"{r['market']} {r['scenario']}")
    typer.echo(f"'{ingredient}' is used by {len(products)} product(s), {len(rows)} recorded label(s):")
    for (pid, file), labels in products.items():
        typer.echo(f"{pid}  {file}")
        for route in _routes(Path(file), ingredient):
            typer.echo(f"    through {route}")
        typer.echo(f"    labels: {', '.join(labels)}")


def _routes(file: Path, ingredient: str) -> list[str]:
    """How an ingredient reaches a product: each chain of sub-formulas and frying steps from the product down
    ('hl_kettle_base_fried > frying step (oil taken up)'); 'the batch directly' when it is a line of the product.
    Read from the formula file as it is now (the register keeps only the leaf ingredients)."""
    try:
        f = load_formula(file, load_library(find_library(file)))
    except (LabelError, OSError) as exc:
        return [f"(cannot read the formula now: {exc})"]

    def walk(g, trail: list[str]) -> list[str]:
        found = []
        here = " > ".join(trail) if trail else "the batch directly"
        for line in g.lines:
            if line.ingredient is not None and line.ingredient.id == ingredient:
                found.append(here + f" (batch line{' ' + str(line.line) if line.line else ''})")
            if line.formula is not None:
                found += walk(line.formula, trail + [f"sub-formula {line.formula.id}"])
        for st in g.steps:
            oil = f"{' > '.join(trail) + ' > ' if trail else ''}step '{st.name}' (oil taken up)"
            if st.oil_ingredient is not None and st.oil_ingredient.id == ingredient:
                found.append(oil)
            if st.oil_formula is not None:
                found += walk(st.oil_formula, trail + [f"step '{st.name}' oil blend {st.oil_formula.id}"])
        return found

    return walk(f, []) or ["(not found in the formula as it is now: it changed since the labels were recorded)"]


@rules_app.command("list")
@friendly
def rules_list(rules: Path | None = RulesOpt):
    """The markets with a rule pack."""
    for code, p in sorted(load_packs(rules).items()):
        typer.echo(f"{code:6} {p.pack.name} — pack {p.pack.version}, reviewed {p.pack.reviewed}")


@rules_app.command("show")
@friendly
def rules_show(market: str = typer.Argument(..., help="Market code."), rules: Path | None = RulesOpt):
    """A pack's rows, rounding rules and reference values with their citations."""
    (p,) = get_packs([market], rules)
    typer.echo(f"{p.pack.name} ({p.market}) — pack {p.pack.version}, reviewed {p.pack.reviewed}")
    for ins in p.pack.instruments:
        typer.echo(f"  instrument: {ins.title} ({ins.date})")
    typer.echo(
        f"Panel: {p.panel.title}; columns {', '.join(p.panel.bases)}; energy factors {p.panel.energy_factor_set}"
    )
    typer.echo("Rows:")
    for r in p.rows:
        typer.echo(
            f"  {'  ' * r.indent}{plain_label(r.label)} [{r.nutrient}, {r.requirement}, rounding {r.rounding}"
            + (f", % of {r.percent}" if r.percent else "")
            + f"] — {r.citation} ({r.confidence})"
        )
    typer.echo("Reference values:")
    for k, v in p.reference_values.items():
        typer.echo(f"  {k}: {v.amount:g} {v.unit} — {v.citation} ({v.confidence})")
    typer.echo("Rounding rules:")
    for k, rr in p.rounding.items():
        typer.echo(f"  {k}: {rr.citation} ({rr.confidence})")


@rules_app.command("unverified")
@friendly
def rules_unverified(
    market: str = typer.Argument(..., help="Market code."),
    all_levels: bool = typer.Option(
        False, "--all", help="Also values read in a secondary source or taken from common practice."
    ),
    rules: Path | None = RulesOpt,
):
    """Values of a pack (and its energy factors) not yet checked against the legal text, with their citations:
    what to verify first before relying on a draft."""
    from labelcalc.labelling.rulepack import NOT_CONFIRMED, UNCHECKED, unverified_entries

    (p,) = get_packs([market], rules)
    found = unverified_entries(p, NOT_CONFIRMED if all_levels else UNCHECKED)
    for where, confidence, citation in found:
        typer.echo(f"{where} ({confidence}): {citation}")
    levels = "not confirmed against the text" if all_levels else "marked 'from memory — verify'"
    typer.echo(f"{len(found)} value(s) of the '{p.market}' pack {levels}.")


@rules_app.command("check")
@friendly
def rules_check(file: Path = typer.Argument(..., help="A rule pack file or a folder of packs.")):
    """Validate a rule pack (or a folder of them); problems name the file, line and key."""
    if file.is_dir():
        packs = load_packs(file)
        typer.echo(f"ok: {len(packs)} pack(s): {', '.join(sorted(packs))}")
    else:
        p = load_pack_file(file)
        typer.echo(f"ok: {p.pack.name} ({p.market}), {len(p.rows)} rows")


@app.command("serve")
@friendly
def serve_cmd(
    folder: Path = typer.Argument(Path("."), help="A folder of formula files, or one formula file."),
    market: str = MarketOpt,
    library: Path | None = LibraryOpt,
    rules: Path | None = RulesOpt,
    host: str = typer.Option("127.0.0.1", "--host", help="Address to listen on (default: this computer only)."),
    port: int = typer.Option(8765, "--port", help="Port to listen on."),
):
    """A local workbench in the browser: edit a formula and see every chosen market's label change."""
    from labelcalc.workbench.server import is_loopback, serve
    from labelcalc.workbench.workspace import Workspace

    ws = Workspace.open(folder, library_path=library, rules=rules, markets=market.split(","))
    ws.packs()  # an unknown market code is reported before the server starts
    if not is_loopback(host):
        typer.echo(
            f"WARNING: listening on {host}: anyone who can reach this address can read and change the formula files in "
            f"{ws.root}. Use the default 127.0.0.1 unless you mean this.",
            err=True,
        )
    shown = f"[{host}]" if ":" in host else host
    typer.echo(f"labelcalc workbench for {ws.root} at http://{shown}:{port}/ (Ctrl+C stops it)")
    typer.echo("DRAFT: verify against current local regulation with a qualified regulatory professional.")
    serve(ws, host, port)


DatabaseArg = typer.Argument(..., help="Database: fdc, cofid, cnf, afcd or ciqual.")
TableArg = typer.Argument(..., help="The downloaded table: a folder of its CSV/XML files, or its workbook.")
ReleaseOpt = typer.Option(None, "--release", help="Release to name in every source (default: from the download).")


@library_app.command("search")
@friendly
def library_search(
    database: str = DatabaseArg,
    table: Path = TableArg,
    words: str = typer.Argument(..., help="Words that must all appear in the food's name."),
    limit: int = typer.Option(20, "--limit", help="At most this many foods."),
    release: str | None = ReleaseOpt,
):
    """Foods of a table whose name holds every word, with the id to pick them by."""
    from labelcalc.tables import read_table

    found = read_table(database, table, release).search(words, limit)
    if found.empty:
        typer.echo("no food found; try fewer or other words")
    for food_id, row in found.iterrows():
        typer.echo(f"{food_id:>12}  {row['name']}")


@library_app.command("from-table")
@friendly
def library_from_table(
    database: str = DatabaseArg,
    table: Path = TableArg,
    food: list[str] = typer.Option([], "--food", "-f", help="A food id, or ID=INGREDIENT_ID; repeat for each food."),
    name: list[str] = typer.Option(
        [], "--name", "-n", help="'WORDS=INGREDIENT_ID': the one food whose name holds every word (refused if several)."
    ),
    out: Path = typer.Option(..., "--out", "-o", help="Library file (YAML) to write."),
    in_place: bool = typer.Option(
        False, "--in-place", help="Write references that read the table each time, instead of copying its values."
    ),
    release: str | None = ReleaseOpt,
):
    """Write an ingredient library file from chosen foods; every value carries its source."""
    import os

    from labelcalc.errors import InputError, Problem
    from labelcalc.files import atomic_write
    from labelcalc.tables import read_table
    from labelcalc.tables.library import find_one, library_text

    t = read_table(database, table, release)
    picks = [(f.split("=", 1)[0], f.split("=", 1)[1] if "=" in f else None) for f in food]
    picks += [(find_one(t, n.rsplit("=", 1)[0]), n.rsplit("=", 1)[1] if "=" in n else None) for n in name]
    if not picks:
        raise InputError(Problem("no food chosen", fix="give --food ID=KEY or --name 'WORDS=KEY' (see library search)"))
    rel = os.path.relpath(table.resolve(), out.resolve().parent) if in_place else None
    text = library_text(t, picks, in_place=in_place, table_path=rel)
    out.parent.mkdir(parents=True, exist_ok=True)
    atomic_write(out, lambda tmp: tmp.write_text(text, encoding="utf-8"))
    typer.echo(f"wrote {out} ({len(picks)} ingredient(s) from {t.database}, {t.release})")


def _entry_schema() -> dict:
    """A library entry: its own values and source, or a ``from_table`` reference with values on top."""
    from labelcalc.intake.ingredient import Ingredient
    from labelcalc.tables.library import TableReference

    entry = Ingredient.model_json_schema()
    entry["properties"].pop("id", None)
    entry["properties"]["from_table"] = TableReference.model_json_schema()
    entry["required"] = [r for r in entry.get("required", []) if r not in ("id", "source")]
    entry["anyOf"] = [{"required": ["source"]}, {"required": ["from_table"]}]
    return entry


@app.command("schema")
@friendly
def schema_cmd(
    out: Path = typer.Option(Path("schemas"), "--out", "-o", help="Folder to write the JSON Schema files into."),
):
    """Write JSON Schema files for formula, ingredient library and rule pack files, for editors to validate with."""
    from labelcalc.intake.formula import FormulaFile
    from labelcalc.labelling.rulepack import RulePack

    out.mkdir(parents=True, exist_ok=True)
    lib_schema = {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "title": "labelcalc ingredient library",
        "type": "object",
        "properties": {
            "library": {"type": "object"},
            "ingredients": {"type": "object", "additionalProperties": _entry_schema()},
        },
        "required": ["ingredients"],
    }
    files = {
        "formula.schema.json": FormulaFile.model_json_schema(),
        "library.schema.json": lib_schema,
        "rulepack.schema.json": RulePack.model_json_schema(),
    }
    for name, schema in files.items():
        (out / name).write_text(json.dumps(schema, indent=2) + "\n", encoding="utf-8")
        typer.echo(f"wrote {out / name}")


@app.callback(invoke_without_command=True)
def _root(version: bool = typer.Option(False, "--version", help="Print the version and exit.")):
    if version:
        typer.echo(f"labelcalc {__version__}")
        raise typer.Exit(0)


def _metavar(param) -> str:
    """A plain placeholder for an option's value: PATH, NUMBER, INTEGER or TEXT (or the one set on it)."""
    if param.metavar:
        return param.metavar
    desc = param.type_descriptor
    if desc.is_path:
        return "PATH..." if desc.is_list else "PATH"
    name = param.bare_type().lower()
    return {"float": "NUMBER", "int": "INTEGER", "bool": ""}.get(name, "TEXT")


class PlainHelpCommand(typer.core.TyperCommand):
    """Help in plain words: 'labelcalc sweep [OPTIONS] FORMULA', '--out PATH', flags without a type.

    typer prints '{formula}', '<bool>' and '<list[Path]>' placeholders of its own; these mean nothing to
    the product developers and regulatory staff who read the help."""

    def collect_usage_pieces(self, ctx):
        pieces = ["[OPTIONS]"] if any(isinstance(p, typer.core.TyperOption) for p in self.params) else []
        for p in self.params:
            if isinstance(p, typer.core.TyperArgument):
                name = (p.metavar or p.name or "").upper()
                pieces.append(name + ("..." if p.nargs != 1 else "") if p.required else f"[{name}]")
        return pieces

    def format_options(self, ctx, formatter) -> None:
        args, opts = [], []
        for p in self.params:
            if getattr(p, "hidden", False):
                continue
            extra = []
            if isinstance(p, typer.core.TyperOption):
                if p.required:
                    extra.append("required")
                elif p.show_default and not p.is_flag and p.default is not None and p.default != "":
                    extra.append(f"default: {p.default}")
                names = ", ".join(p.opts + p.secondary_opts)
                mv = "" if p.is_flag or p.count else _metavar(p)
                opts.append((f"{names} {mv}".strip(), (p.help or "") + (f" [{'; '.join(extra)}]" if extra else "")))
            else:
                args.append(((p.metavar or p.name or "").upper(), getattr(p, "help", "") or ""))
        if args:
            with formatter.section("Arguments"):
                formatter.write_dl(args)
        help_option = self.get_help_option(ctx)
        if help_option is not None:
            opts.append((", ".join(help_option.opts), help_option.help or ""))
        if opts:
            with formatter.section("Options"):
                formatter.write_dl(opts)


def _plain_help(t: typer.Typer) -> None:
    for info in t.registered_commands:
        if info.cls in (None, typer.core.TyperCommand):
            info.cls = PlainHelpCommand


_plain_help(app)
_plain_help(rules_app)


def main() -> None:  # console entry point
    app()


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
