"""The one process pool for independent runs (bench, sweeps, onset brackets).

Each worker limits every BLAS to one thread before its first task: the runs are
the parallelism, and two spinning BLAS thread pools (numpy's and cvxopt's) on a
small machine slow every step several times over (see
``convsim.model.linsolve.limit_blas_threads``).
"""

from __future__ import annotations

import multiprocessing
from concurrent.futures import ProcessPoolExecutor

__all__ = ["process_pool", "one_blas_thread", "START_METHODS"]

START_METHODS = ("spawn", "fork-if-available")


def one_blas_thread() -> None:
    """Worker initializer: one BLAS thread in this process."""
    from convsim.model.linsolve import limit_blas_threads
    limit_blas_threads(1)


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
                               initializer=one_blas_thread, max_tasks_per_child=max_tasks_per_child)
