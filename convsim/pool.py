"""The one process pool for independent runs (bench, sweeps, onset brackets).

Each worker limits every BLAS to one thread before its first task: the runs are
the parallelism, and two spinning BLAS thread pools (numpy's and cvxopt's) on a
small machine slow every step several times over (see
``convsim.model.linsolve.limit_blas_threads``).
"""

from __future__ import annotations

import multiprocessing
import os
import signal
import threading
import time
from concurrent.futures import ProcessPoolExecutor

__all__ = ["process_pool", "one_blas_thread", "die_with_parent", "stop_workers", "START_METHODS"]

START_METHODS = ("spawn", "fork-if-available")


def one_blas_thread() -> None:
    """One BLAS thread in this process."""
    from convsim.model.linsolve import limit_blas_threads
    limit_blas_threads(1)


def die_with_parent(parent_pid: int) -> None:
    """End this worker when the process that made the pool dies (killed, even by SIGKILL), so
    that no worker runs on alone or idles forever (and the resource tracker, whose pipe the
    workers hold, ends with them).  Linux: the kernel sends SIGKILL (prctl
    PR_SET_PDEATHSIG); everywhere: a daemon thread that watches the parent's process id."""
    try:
        import ctypes
        ctypes.CDLL(None, use_errno=True).prctl(1, int(signal.SIGKILL))   # PR_SET_PDEATHSIG
    except (OSError, AttributeError, TypeError):
        pass
    if os.getppid() != parent_pid:          # the parent died before this worker started
        os._exit(1)

    def watch():
        while os.getppid() == parent_pid:
            time.sleep(1.0)
        os._exit(1)

    threading.Thread(target=watch, name="convsim-parent-watch", daemon=True).start()


def worker_start(parent_pid: int) -> None:
    """Worker initializer: one BLAS thread; die with the parent."""
    die_with_parent(parent_pid)
    one_blas_thread()


def stop_workers(pool: ProcessPoolExecutor) -> None:
    """Send SIGTERM to the pool's workers: a run ends at its next step with a final snapshot
    (status interrupted), an idle worker exits.  For a cancelled sweep or bench."""
    for process in list((getattr(pool, "_processes", None) or {}).values()):
        try:
            process.terminate()
        except (OSError, AttributeError):
            pass


def process_pool(workers: int, *, start: str = "spawn",
                 max_tasks_per_child: int | None = None) -> ProcessPoolExecutor:
    """A ``ProcessPoolExecutor`` of ``workers`` processes with one BLAS thread each.

    Parameters
    ----------
    workers : int
        Number of worker processes (>= 1).
    start : {'spawn', 'fork-if-available'}
        'spawn' starts clean interpreters (safe with threads, the default);
        'fork-if-available' forks where the platform can, so that a caller's script
        without a ``__main__`` guard is not re-run in every worker.
    max_tasks_per_child : int, optional
        Replace a worker after this many tasks (1: a fresh process per run, so the
        peak memory of a run is its own).
    """
    if start not in START_METHODS:
        raise ValueError(f"start = {start!r}: expected one of {', '.join(START_METHODS)}")
    method = start
    if start == "fork-if-available":
        method = "fork" if "fork" in multiprocessing.get_all_start_methods() else "spawn"
    return ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context(method),
                               initializer=worker_start, initargs=(os.getpid(),),
                               max_tasks_per_child=max_tasks_per_child)
