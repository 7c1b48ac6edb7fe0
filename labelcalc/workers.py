"""Worker processes for range runs and range panels, started one way everywhere."""

from __future__ import annotations

import multiprocessing
import multiprocessing.context
import os

#: the numeric libraries' thread pools: one thread each in a worker process (see :func:`_start_server`)
ONE_THREAD = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


def mp_context() -> multiprocessing.context.BaseContext:
    """Worker processes start from a small server process (``forkserver``) where the platform has one, not as
    copies of the main process: they do not carry the main process's memory (a large range's file index).
    The server is started here if it is not running (see :func:`start_early`)."""
    if "forkserver" in multiprocessing.get_all_start_methods():
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(["labelcalc.ranges.rangerun", "labelcalc.ranges.publish"])
        _start_server()
        return ctx
    return multiprocessing.get_context("spawn")  # pragma: no cover - platforms without fork


def _start_server() -> None:
    """Start the fork server with one thread per numeric library.  Workers are as many as the cores: a matrix
    library's own thread pool in each would make them contend for the cores (two workers on two cores
    labelled about a third slower) and take memory.  The server, and so every worker it forks, starts with
    one thread each, unless the user set the numbers; this process keeps its own (the ``labelcalc`` command
    sets one thread for itself too, see :mod:`labelcalc.threads`)."""
    from multiprocessing import forkserver

    saved = {k: os.environ.get(k) for k in ONE_THREAD}
    try:
        for k in ONE_THREAD:
            os.environ.setdefault(k, "1")
        forkserver.ensure_running()
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def start_early() -> None:
    """Start the fork server now (it loads labelcalc's modules while the caller goes on), so the first worker
    process later starts at once; nothing where workers are spawned."""
    mp_context()
