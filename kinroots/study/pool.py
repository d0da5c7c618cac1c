"""A local pool of worker processes for independent grid points (sweeps, thresholds).

What it guarantees:

* **Start-up paid once.**  On Linux, workers are forked from the main process, which has
  imported the solver stack already, so a worker costs a fork, not a fresh interpreter
  importing numpy, scipy and kinroots (elsewhere: a fork server that imports it once, or
  spawned interpreters).  Each worker receives the case once (its initializer), then only
  lists of point indices.  A forked worker gets fresh ``sys.stdout``/``sys.stderr``
  objects, so a lock held by a thread of the parent (a progress bar) at the moment of the
  fork cannot block it.
* **Chunks, bounded in flight.**  Points go out in chunks; at most two chunks per worker
  are queued at any time, so a grid of a million points costs no memory up front and
  finished points reach the caller (and its store) as they complete.
* **Stops promptly.**  Ctrl-C (or any exception in the caller's callback) cancels what
  is queued and terminates the workers; what was handed to the caller stays handed.
  Workers ignore SIGINT themselves (the parent decides), so no worker prints a traceback.
* **Dies with its parent.**  On Linux each worker asks the kernel for SIGKILL when its
  parent dies (``PR_SET_PDEATHSIG``), so killing the main process, even with SIGKILL,
  leaves no orphaned worker.
"""

from __future__ import annotations

import os
import signal
import sys
from collections.abc import Callable, Sequence
from typing import Any

__all__ = ["chunk_size", "run_pool"]

#: Modules imported once before the workers start (forked workers inherit them; a fork
#: server imports them).  kinroots imports scipy.optimize lazily, at the first point: were
#: it not imported here, every worker would pay that import again.
PRELOAD: tuple[str, ...] = ("kinroots.study.sweep", "scipy.optimize")
#: Largest chunk of points per task.
MAX_CHUNK: int = 16


def chunk_size(n_points: int, workers: int) -> int:
    """Points per task: about eight tasks per worker, between 1 and `MAX_CHUNK`."""
    return max(1, min(MAX_CHUNK, n_points // (8 * max(workers, 1))))


def _die_with_parent() -> None:
    """Ask Linux to SIGKILL this process when its parent exits (no-op elsewhere)."""
    if not sys.platform.startswith("linux"):
        return
    import ctypes

    try:
        libc = ctypes.CDLL(None, use_errno=True)
        pr_set_pdeathsig = 1
        libc.prctl(pr_set_pdeathsig, int(signal.SIGKILL), 0, 0, 0)
    except (OSError, AttributeError):
        return


def _worker_start(initializer: Callable[..., None], initargs: tuple) -> None:
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    sys.stdout = open(1, "w", closefd=False)  # fresh objects (and locks) after a fork
    sys.stderr = open(2, "w", closefd=False)
    parent = os.getppid()
    _die_with_parent()
    if os.getppid() != parent:  # the parent died before the request took effect
        os._exit(1)
    initializer(*initargs)


def _context() -> Any:
    import multiprocessing as mp

    methods = mp.get_all_start_methods()
    if sys.platform.startswith("linux") and "fork" in methods:
        import importlib

        for name in PRELOAD:
            importlib.import_module(name)
        return mp.get_context("fork")
    if "forkserver" in methods:
        ctx = mp.get_context("forkserver")
        ctx.set_forkserver_preload(list(PRELOAD))
        return ctx
    return mp.get_context("spawn")


def _quiet_pool_threads() -> None:
    """After an abort (Ctrl-C, an error): exceptions raised in the executor's own threads
    (its manager thread and queue feeder, racing with the workers being terminated) are
    dropped instead of printed; any other thread's exceptions still reach the previous
    hook.  The run is ending, and a traceback there would only hide the real message.
    """
    import threading

    previous = threading.excepthook

    def hook(args: Any) -> None:
        tb = args.exc_traceback
        files = []
        while tb is not None:
            files.append(tb.tb_frame.f_code.co_filename)
            tb = tb.tb_next
        internal = ("concurrent/futures", "multiprocessing")
        if files and all(any(part in f.replace("\\", "/") for part in internal)
                         or "threading.py" in f for f in files):
            return
        previous(args)

    threading.excepthook = hook


def run_pool(
    initializer: Callable[..., None],
    initargs: tuple,
    work: Callable[[list[int]], list[tuple[int, Any]]],
    indices: Sequence[int],
    on_result: Callable[[int, Any], None],
    workers: int,
) -> None:
    """Run ``work`` on chunks of ``indices`` in ``workers`` processes.

    Parameters
    ----------
    initializer, initargs : callable, tuple
        Run once in every worker (e.g. to build the case from its TOML data).
    work : callable
        Module-level function: chunk of indices -> list of (index, result).
    indices : sequence of int
        Points to compute.
    on_result : callable
        Called in this process with (index, result), in order within each chunk, as
        chunks complete.
    workers : int
        Number of worker processes (>= 2; the caller runs single-process work itself).
    """
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

    todo = list(indices)
    size = chunk_size(len(todo), workers)
    chunks = [todo[i:i + size] for i in range(0, len(todo), size)]
    ctx = _context()
    pool = ProcessPoolExecutor(max_workers=min(workers, len(chunks)), mp_context=ctx,
                               initializer=_worker_start,
                               initargs=(initializer, initargs))
    pending: set[Any] = set()
    next_chunk = 0
    try:
        while next_chunk < len(chunks) or pending:
            while next_chunk < len(chunks) and len(pending) < 2 * workers:
                pending.add(pool.submit(work, chunks[next_chunk]))
                next_chunk += 1
            done, pending = wait(pending, return_when=FIRST_COMPLETED)
            for fut in done:
                for index, result in fut.result():
                    on_result(index, result)
    except BaseException:
        _quiet_pool_threads()
        for fut in pending:
            fut.cancel()
        procs = list(getattr(pool, "_processes", {}).values())
        for proc in procs:
            proc.terminate()
        for proc in procs:
            proc.join(timeout=5)
        # Wait for the executor's manager thread too: with wait=False it can outlive the
        # pool's pipes, and the interpreter's exit hook then fails on a closed descriptor
        # (a traceback after Ctrl-C). The workers are gone, so this returns at once.
        pool.shutdown(wait=True, cancel_futures=True)
        raise
    pool.shutdown(wait=True)
