"""Worker processes for range runs and range panels, started one way everywhere."""

from __future__ import annotations

import multiprocessing
import multiprocessing.context


def mp_context() -> multiprocessing.context.BaseContext:
    """Worker processes start from a small server process (``forkserver``) where the platform has one, not as
    copies of the main process: they do not carry the main process's memory (a large range's file index)."""
    if "forkserver" in multiprocessing.get_all_start_methods():
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(["labelcalc.ranges.rangerun", "labelcalc.ranges.publish"])
        return ctx
    return multiprocessing.get_context("spawn")  # pragma: no cover - platforms without fork


def start_early() -> None:
    """Start the fork server now (it loads labelcalc's modules while the caller goes on), so the first worker
    process later starts at once; nothing where workers are spawned."""
    ctx = mp_context()
    if ctx.get_start_method() == "forkserver":
        from multiprocessing import forkserver

        forkserver.ensure_running()
