"""Writing a range run's outputs: all of them appear together, or none do.

Every file of a run is written into a staging folder inside the output folder; when all are written they are
moved into place (each move an atomic rename on the same file system), and outputs an earlier run wrote but
this one does not (a ``changes.csv`` or crash report) are removed, so the folder never mixes two runs. A run
that stops before the moves leaves the previous run's outputs as they were; its staging folder is removed by
the next run. The label register is updated only after the moves (see ``labelcalc.cli.range_cmd``).

Files are byte-identical for identical input: rows are sorted, JSON keys keep their order, the workbook has
fixed zip dates, and nothing carries the time of the run.
"""

from __future__ import annotations

import contextlib
import csv
import os
import platform
import shutil
import tempfile
from collections.abc import Callable, Iterable
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

from labelcalc import __version__
from labelcalc.files import atomic_write
from labelcalc.outputs.jsonstream import Lazy
from labelcalc.ranges import parts
from labelcalc.ranges.rangerun import CRASH_REPORT, RangeResult
from labelcalc.workers import mp_context

STAGE_PREFIX = ".labelcalc-stage-"
#: every name a range run may write at the top of its output folder
RUN_OUTPUTS = (
    "summary.csv",
    "summary.xlsx",
    "summary.json",
    "errors.csv",
    "files.csv",
    "changes.csv",
    CRASH_REPORT,
    "panels",
)
ERROR_COLUMNS = ["product_id", "market", "file", "line", "field", "message"]
FILE_COLUMNS = ["file", "kind", "id", "outcome"]
CHANGE_COLUMNS = ["status", "product_id", "market", "scenario", "what_moved", "why"]


def _columns(rows: list[dict]) -> list[str]:
    """Every key of the rows, in order of first appearance."""
    return list(dict.fromkeys(k for r in rows for k in r))


def write_csv(path: Path, rows: Iterable[dict], columns: list[str] | None = None) -> None:
    cols = columns or _columns(rows)  # type: ignore[arg-type]  # without columns, rows is a list

    def w(tmp: Path):
        with tmp.open("w", newline="", encoding="utf-8") as fh:
            wr = csv.DictWriter(fh, fieldnames=cols, extrasaction="ignore")
            wr.writeheader()
            for r in rows:
                wr.writerow({k: ("" if v is None else v) for k, v in r.items()})

    atomic_write(path, w)


def write_json(path: Path, doc) -> None:
    """A JSON document (``json``'s text with indent 1); a top-level mapping's :class:`Lazy` values are streamed."""
    from labelcalc.outputs.jsonstream import encode, write_document

    def w(tmp: Path):
        with tmp.open("w", encoding="utf-8") as fh:  # streamed: a large range never sits in memory as one string
            if isinstance(doc, dict):
                write_document(fh, list(doc.items()))
            else:
                fh.write(encode(doc))

    atomic_write(path, w)


def write_crash_report(path: Path, crashes: list[dict], context: str = "") -> None:
    """What a developer needs to reproduce an internal error: versions, the product, the file, the traceback."""
    lines = [
        "labelcalc crash report — an internal error, not a problem with your input.",
        "Please send this file (and the input files it names, if you can) to the labelcalc maintainers.",
        f"labelcalc {__version__}, Python {platform.python_version()}, {platform.system()}",
    ]
    if context:
        lines.append(context)
    for c in crashes:
        lines += ["", f"product: {c.get('product_id') or '-'}", f"file: {c.get('file') or '-'}", c["traceback"]]
    atomic_write(path, lambda tmp: tmp.write_text("\n".join(lines) + "\n", encoding="utf-8"))


def _workbook(path: Path, result: RangeResult, changes: list[dict] | None, packs: dict | None) -> None:
    """The summary workbook; in a streamed run this runs in its own process (see :func:`write_outputs`)."""
    from labelcalc.outputs.xlsxout import write_summary_workbook, write_summary_workbook_streamed

    if result.parts:
        plans = parts.sheet_plans(result.parts)
        atomic_write(
            path,
            lambda tmp: write_summary_workbook_streamed(
                tmp, plans, lambda: parts.read_rows(result.parts), result.errors, changes, packs, ERROR_COLUMNS
            ),
        )
    else:
        atomic_write(
            path, lambda tmp: write_summary_workbook(tmp, result.rows, result.errors, changes, packs, ERROR_COLUMNS)
        )


def write_outputs(
    out: Path, result: RangeResult, changes: list[dict] | None = None, packs: dict | None = None
) -> list[Path]:
    """The run's tables in ``out`` (a staging folder when called through :func:`publish`); ``packs`` (market ->
    pack) names the workbook's columns as each pack prints them.

    A streamed run (summary rows in part files) reads the parts back for each file, one batch at a time; its
    workbook, the slowest file to write, is written by a second process while this one writes the CSV and
    JSON files."""
    out.mkdir(parents=True, exist_ok=True)
    files = [out / "summary.csv", out / "summary.xlsx", out / "summary.json", out / "errors.csv", out / "files.csv"]
    streamed = bool(result.parts)
    with contextlib.ExitStack() as stack:
        book = None
        if streamed:
            ex = stack.enter_context(ProcessPoolExecutor(max_workers=1, mp_context=mp_context()))
            slim = RangeResult(errors=result.errors, parts=result.parts)  # what the workbook reads, no more
            book = ex.submit(_workbook, files[1], slim, changes, packs)
        else:
            _workbook(files[1], result, changes, packs)
        rows: Callable[[], Iterable[dict]] = (
            (lambda: parts.read_rows(result.parts)) if streamed else (lambda: result.rows)
        )
        write_csv(files[0], rows(), parts.columns(result.parts) if streamed else None)
        write_json(
            files[2],
            {
                "tool_version": __version__,
                "summary": Lazy(rows()),
                "errors": result.errors,
                "files": Lazy(result.files),  # read back from the run's inventory part file, row by row
                "changes": changes or [],
                "draft_notice": "DRAFT — verify against current local regulation.",
            },
        )
        write_csv(files[3], result.errors, ERROR_COLUMNS)
        write_csv(files[4], result.files, FILE_COLUMNS)
        if changes is not None:
            files.append(out / "changes.csv")
            write_csv(files[-1], changes, CHANGE_COLUMNS)
        if result.crashes:
            files.append(out / CRASH_REPORT)
            write_crash_report(files[-1], result.crashes)
        if book is not None:
            book.result()
    return files


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # pragma: no cover - another user's process
        return True
    return True


def clear_stale_stages(out: Path) -> None:
    """Remove staging folders left by runs that were stopped (their process is gone)."""
    if not out.is_dir():
        return
    for d in out.glob(STAGE_PREFIX + "*"):
        pid = d.name[len(STAGE_PREFIX) :].split("-", 1)[0]
        if d.is_dir() and pid.isdigit() and not _alive(int(pid)):
            shutil.rmtree(d, ignore_errors=True)


def publish(out: Path, write: Callable[[Path], list[Path]]) -> list[Path]:
    """Call ``write(stage)`` to write every output into a fresh staging folder inside ``out``, then move the
    outputs into ``out`` together. Returns the final paths. On any error nothing in ``out`` changes."""
    out.mkdir(parents=True, exist_ok=True)
    clear_stale_stages(out)
    stage = Path(tempfile.mkdtemp(prefix=f"{STAGE_PREFIX}{os.getpid()}-", dir=out))
    try:
        # compared as absolute paths: writers may return them absolute or relative to the working folder
        base = Path(os.path.abspath(stage))
        rel = [Path(os.path.abspath(p)).relative_to(base) for p in write(stage)]
        tops = sorted({r.parts[0] for r in rel})
        for name in RUN_OUTPUTS:  # an earlier run's output this run does not write would mix two runs
            old = out / name
            if name not in tops and (old.exists() or old.is_symlink()):
                shutil.rmtree(old) if old.is_dir() and not old.is_symlink() else old.unlink()
        for name in tops:
            src, dst = stage / name, out / name
            if src.is_dir():
                if dst.exists():
                    os.replace(dst, stage / f".old-{name}")
                os.replace(src, dst)
            else:
                os.replace(src, dst)
        return [out / r for r in rel]
    finally:
        shutil.rmtree(stage, ignore_errors=True)
