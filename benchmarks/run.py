"""Benchmarks for range runs (not a test: CI never runs this).

    python3 benchmarks/run.py              # 10,000 and 20,000 formulas x 3 markets, PDFs, one-panel start-up
    python3 benchmarks/run.py --quick      # 1,000 and 2,000 formulas, fewer repeats: a smoke check
    python3 benchmarks/run.py --with-100k  # adds the memory run over 100,000 formulas

Every goal is measured as a ratio within one run, so a busy or a fast machine moves both sides alike:

1. range time / parse time: `labelcalc range` (declarations, claims, statements, allergens, front of pack; summary
   written; no register, no PDFs) for 3 markets with --jobs 1 and --jobs 2, against merely parsing the same files
   with PyYAML's C-accelerated safe loader in one process. Parse and range runs are interleaved and repeated; the
   ratio is taken pair by pair and reported as min and median.
2. peak memory summed over the parent and its worker processes (sampled from the process tree): resident sets
   (a page shared by forked processes counted in each) and proportional sets (shared pages split among them).
3. the 20,000-formula time over the 10,000-formula time (--jobs 2).
4. PDF panels per second with --jobs 2 (the range with --panels, less the same range without).
5. `labelcalc panel` for one demo product and one market, interpreter start included.

Results are printed and written to benchmarks/results.json (results-quick.json with --quick), with the machine
and the date.  Memory is read with psutil (the `bench` extra: pip install -e '.[bench]').
"""

from __future__ import annotations

import argparse
import contextlib
import datetime
import json
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import yaml

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))
from generate import generate  # noqa: E402

MARKETS = "us,eu,ca"


def parse_only(folder: Path) -> float:
    """Seconds to parse every formula file of a generated range in one process (the yardstick)."""
    files = sorted((folder / "products").glob("*.yaml"))
    t = time.perf_counter()
    for f in files:
        yaml.load(f.read_text(encoding="utf-8"), Loader=yaml.CSafeLoader)
    return time.perf_counter() - t


def tree_memory_mb(pid: int) -> tuple[float, float]:
    """Memory [MB] of a process and all its descendants: (summed resident set, summed proportional set).

    The resident sets count a page shared by several processes (workers forked from one server share the
    libraries it loaded) once per process; the proportional sets split it among them, so their sum is the
    memory the run occupies.  Without PSS (not Linux) the second figure repeats the first."""
    import psutil

    try:
        p = psutil.Process(pid)
        procs = [p, *p.children(recursive=True)]
    except psutil.NoSuchProcess:
        return 0.0, 0.0
    rss = pss = 0
    for q in procs:
        with contextlib.suppress(psutil.NoSuchProcess, psutil.AccessDenied):
            info = q.memory_full_info()
            rss += info.rss
            pss += getattr(info, "pss", info.rss)
    return rss / 2**20, pss / 2**20


def run(cmd: list[str]) -> tuple[float, float, float]:
    """Wall time [s] of a command and the peaks of its process tree's summed resident and proportional
    memory [MB] (see :func:`tree_memory_mb`)."""
    t = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    peak = peak_pss = 0.0
    stop = threading.Event()

    def sample() -> None:
        nonlocal peak, peak_pss
        while not stop.is_set():
            rss, pss = tree_memory_mb(proc.pid)
            peak, peak_pss = max(peak, rss), max(peak_pss, pss)
            stop.wait(0.05)

    th = threading.Thread(target=sample, daemon=True)
    th.start()
    _, err = proc.communicate()
    wall = time.perf_counter() - t
    stop.set()
    th.join()
    if proc.returncode not in (0, 1):  # 1: some generated formulas are refused, correctly
        raise SystemExit(f"{' '.join(cmd)} failed ({proc.returncode}): {err.decode()[-2000:]}")
    return wall, peak, peak_pss


def range_cmd(src: Path, out: Path, jobs: int, *, panels: bool = False) -> list[str]:
    cmd = [sys.executable, "-m", "labelcalc.cli", "range", str(src), "--market", MARKETS, "--out", str(out)]
    cmd += ["--library", str(src / "ingredients"), "--jobs", str(jobs), "--no-register", "-q"]
    return cmd + (["--panels"] if panels else [])


def _stats(xs: list[float]) -> dict:
    return {"min": round(min(xs), 3), "median": round(statistics.median(xs), 3)}


def measure_range(src: Path, work: Path, repeats: int) -> dict:
    """Interleaved parse / range runs: ratios pair by pair, times and summed peak memory."""
    r1, r2, t1s, t2s, ps, m1, m2, q1, q2 = [], [], [], [], [], [], [], [], []
    for k in range(repeats):
        p = parse_only(src)
        t1, mem1, pss1 = run(range_cmd(src, work / f"out-j1-{k}", 1))
        p2 = parse_only(src)
        t2, mem2, pss2 = run(range_cmd(src, work / f"out-j2-{k}", 2))
        q1.append(pss1)
        q2.append(pss2)
        ps += [p, p2]
        t1s.append(t1)
        t2s.append(t2)
        r1.append(t1 / p)
        r2.append(t2 / p2)
        m1.append(mem1)
        m2.append(mem2)
    return {
        "parse_s": _stats(ps),
        "range_jobs1_s": _stats(t1s),
        "range_jobs2_s": _stats(t2s),
        "ratio_jobs1": _stats(r1),
        "ratio_jobs2": _stats(r2),
        "peak_summed_rss_mb_jobs1": round(max(m1)),
        "peak_summed_rss_mb_jobs2": round(max(m2)),
        "peak_summed_pss_mb_jobs1": round(max(q1)),
        "peak_summed_pss_mb_jobs2": round(max(q2)),
    }


def panel_start(repeats: int) -> dict:
    """`labelcalc panel` for one demo product and one market, interpreter start included [s]."""
    times = []
    with tempfile.TemporaryDirectory() as tmp:
        cmd = [sys.executable, "-m", "labelcalc.cli", "panel", str(ROOT / "demo_products" / "hl_kettle_sea_salt.yaml")]
        cmd += ["--market", "us", "--out", tmp]
        for _ in range(repeats):
            t = time.perf_counter()
            subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=False)
            times.append(time.perf_counter() - t)
    return _stats(times)


def _commit() -> str:
    """The commit measured (with '+changes' when the working tree differs), or 'unknown' outside git."""
    try:
        head = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=ROOT, capture_output=True, text=True)
        dirty = subprocess.run(["git", "status", "--porcelain", "--", "labelcalc"], cwd=ROOT, capture_output=True)
    except OSError:
        return "unknown"
    if head.returncode:
        return "unknown"
    return head.stdout.strip() + ("+changes" if dirty.stdout.strip() else "")


def _arguments() -> argparse.Namespace:
    ap = argparse.ArgumentParser(
        description="Time and memory of range runs, as ratios within one run (see benchmarks/README.md)."
    )
    ap.add_argument("--quick", action="store_true", help="1,000 and 2,000 formulas, fewer PDFs: a smoke check")
    ap.add_argument("--with-100k", action="store_true", help="add the memory run over 100,000 formulas")
    return ap.parse_args()


def main() -> None:
    args = _arguments()
    try:
        import psutil  # noqa: F401  # memory of the process tree
    except ImportError:
        raise SystemExit("benchmarks/run.py needs psutil to read memory: pip install -e '.[bench]'") from None
    quick = args.quick
    n1, n2, npdf, repeats = (1000, 2000, 60, 3) if quick else (10000, 20000, 300, 3)
    work = Path(tempfile.gettempdir()) / "labelcalc-bench"
    results: dict = {
        "date": datetime.date.today().isoformat(),
        "machine": platform.platform(),
        "cores": os.cpu_count(),
        "python": platform.python_version(),
        "markets": MARKETS,
        "repeats": repeats,
        "commit": _commit(),
    }
    for n in (n1, n2):
        src = generate(n, work / f"range{n}")
        results[str(n)] = measure_range(src, work, repeats)
        print(n, results[str(n)], flush=True)
    results["scaling_jobs2"] = round(
        results[str(n2)]["range_jobs2_s"]["median"] / results[str(n1)]["range_jobs2_s"]["median"], 3
    )
    print("scaling", results["scaling_jobs2"], flush=True)
    if args.with_100k:
        src = generate(100_000, work / "range100000")
        t, mem, pss = run(range_cmd(src, work / "out-100k", 2))
        results["100000"] = {
            "range_jobs2_s": round(t, 1),
            "peak_summed_rss_mb_jobs2": round(mem),
            "peak_summed_pss_mb_jobs2": round(pss),
        }
        print(100_000, results["100000"], flush=True)
    src = generate(npdf, work / f"pdf{npdf}")
    plain, with_pdf, rates = [], [], []
    for k in range(repeats):
        t_plain, *_ = run(range_cmd(src, work / f"pdf-plain-{k}", 2))
        out = work / f"pdf-out-{k}"
        t_pdf, *_ = run(range_cmd(src, out, 2, panels=True))
        n_pdf = len(list(out.rglob("*.pdf")))
        plain.append(t_plain)
        with_pdf.append(t_pdf)
        rates.append(n_pdf / max(t_pdf - t_plain, 1e-9))
    results["pdf"] = {"products": npdf, "pdfs": n_pdf, "pdfs_per_second_jobs2": _stats(rates)}
    print("pdf", results["pdf"], flush=True)
    results["panel_one_product_one_market_s"] = panel_start(max(repeats, 5))
    print("panel", results["panel_one_product_one_market_s"], flush=True)
    (HERE / ("results-quick.json" if quick else "results.json")).write_text(json.dumps(results, indent=2) + "\n")


if __name__ == "__main__":
    main()
