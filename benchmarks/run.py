"""Benchmarks for range runs (not a test: CI never runs this).

    python3 benchmarks/run.py            # 10,000 and 20,000 formulas x 3 markets, PDF panels
    python3 benchmarks/run.py --quick    # 1,000 and 2,000 formulas, for a smoke check

Measures, in one run on this machine:
1. the time to merely parse every formula file with PyYAML's C-accelerated safe loader;
2. the time of `labelcalc range` (declarations, claims, statements, front of pack; no PDFs) for
   3 markets, with --jobs 1 and --jobs 2, and the ratio to (1);
3. peak memory of that run (resident set size of the process and its workers);
4. the ratio of the 20,000-formula time to the 10,000-formula time;
5. PDF panels per second with --jobs 2.
Results are printed and written to benchmarks/results.json.
"""

from __future__ import annotations

import json
import platform
import subprocess
import sys
import time
from pathlib import Path

import yaml

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from generate import generate  # noqa: E402

MARKETS = "us,eu,ca"


def parse_only(folder: Path) -> float:
    files = sorted((folder / "products").glob("*.yaml"))
    t = time.perf_counter()
    for f in files:
        yaml.load(f.read_text(encoding="utf-8"), Loader=yaml.CSafeLoader)
    return time.perf_counter() - t


def run(cmd: list[str]) -> tuple[float, float]:
    """Wall time [s] and peak RSS [MB] of a child command (and its own children)."""
    t = time.perf_counter()
    code = (
        f"import resource, subprocess, sys; r = subprocess.run({cmd!r}); "
        "u = resource.getrusage(resource.RUSAGE_CHILDREN); print(u.ru_maxrss); sys.exit(0)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    wall = time.perf_counter() - t
    rss_kb = int(out.stdout.strip().splitlines()[-1])
    return wall, rss_kb / 1024


def range_cmd(src: Path, out: Path, jobs: int, panels: bool = False) -> list[str]:
    cmd = [
        sys.executable,
        "-m",
        "labelcalc.cli",
        "range",
        str(src),
        "--market",
        MARKETS,
        "--out",
        str(out),
        "--library",
        str(src / "ingredients"),
        "--jobs",
        str(jobs),
        "--no-register",
        "-q",
    ]
    return cmd + (["--panels"] if panels else [])


def main() -> None:
    quick = "--quick" in sys.argv
    n1, n2, npdf = (1000, 2000, 60) if quick else (10000, 20000, 300)
    work = Path("/tmp") / "labelcalc-bench"
    results: dict = {"machine": platform.platform(), "python": platform.python_version(), "markets": MARKETS}
    for n in (n1, n2):
        src = generate(n, work / f"range{n}")
        parse = parse_only(src)
        t1, m1 = run(range_cmd(src, work / f"out{n}-j1", 1))
        t2, m2 = run(range_cmd(src, work / f"out{n}-j2", 2))
        results[str(n)] = {
            "parse_s": round(parse, 2),
            "range_jobs1_s": round(t1, 2),
            "range_jobs2_s": round(t2, 2),
            "ratio_jobs1": round(t1 / parse, 2),
            "ratio_jobs2": round(t2 / parse, 2),
            "peak_rss_mb_jobs1": round(m1),
            "peak_rss_mb_jobs2": round(m2),
        }
        print(n, results[str(n)], flush=True)
    results["scaling_20k_over_10k_jobs2"] = round(
        results[str(n2)]["range_jobs2_s"] / results[str(n1)]["range_jobs2_s"], 2
    )
    src = generate(npdf, work / f"pdf{npdf}")
    t_plain, _ = run(range_cmd(src, work / "pdf-plain", 2))
    t_pdf, _ = run(range_cmd(src, work / "pdf-out", 2, panels=True))
    n_pdf = len(list((work / "pdf-out" / "panels").glob("*.pdf")))
    results["pdf"] = {
        "products": npdf,
        "pdfs": n_pdf,
        "seconds_for_pdfs": round(t_pdf - t_plain, 2),
        "pdfs_per_second_jobs2": round(n_pdf / max(t_pdf - t_plain, 1e-9), 1),
    }
    print("pdf", results["pdf"])
    (HERE / ("results-quick.json" if quick else "results.json")).write_text(json.dumps(results, indent=2) + "\n")


if __name__ == "__main__":
    main()
