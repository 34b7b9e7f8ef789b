"""How many threads convsim's numerics may use: one by default, in every path.

A 2-core laptop or a shared server usually runs convsim beside other work (another
run, a sweep's workers, a notebook).  Threaded BLAS pools that spin while waiting
then fight the co-load: measured here, a 128 x 128 constant-viscosity run beside one
busy process took 14.85 s with threaded BLAS and 4.81 s with one BLAS thread.  The
matrices of a 2D run are too small to gain much from threads, and parallel studies
(bench, sweeps, onset brackets) get their parallelism from worker processes.

So every run limits, for the whole process: the BLAS pools (numpy's and cvxopt's
OpenBLAS, through threadpoolctl), the OpenMP pools, and numba's thread count; scipy's
FFTs already use one worker unless asked.  The user may ask for more threads with
``convsim run --threads N`` or the environment variable ``CONVSIM_THREADS``.
"""

from __future__ import annotations

import os
import sys

__all__ = ["limit_threads", "requested_threads", "reapply_limit"]

ENVIRONMENT_VARIABLE = "CONVSIM_THREADS"
# Not NUMBA_NUM_THREADS: numba reads it again at every compile and refuses a value other
# than the one its pool was launched with; numba.set_num_threads below limits it instead.
_POOL_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")


def requested_threads(threads: int | None = None) -> int:
    """The thread count to use: ``threads`` if given, else $CONVSIM_THREADS, else 1."""
    if threads is None:
        text = os.environ.get(ENVIRONMENT_VARIABLE, "1")
        try:
            threads = int(text)
        except ValueError:
            threads = 1
    return max(1, int(threads))


_current: int | None = None       # the last limit set in this process


def reapply_limit():
    """Apply the last limit (or the default) again: for pools loaded since (cvxopt's BLAS)."""
    return limit_threads(_current)


def limit_threads(threads: int | None = None):
    """Limit every thread pool of this process to ``requested_threads(threads)``.

    Also sets the pool environment variables (when not set already) so that libraries
    loaded later (cvxopt's own OpenBLAS) start with the same limit.  Returns the
    threadpoolctl limiter, or None when threadpoolctl is missing.
    """
    global _current
    n = _current = requested_threads(threads)
    for var in _POOL_VARIABLES:
        os.environ.setdefault(var, str(n))
    numba = sys.modules.get("numba")    # not imported for it: ``reapply_limit`` once loaded
    if numba is not None:
        try:
            numba.set_num_threads(min(n, numba.config.NUMBA_NUM_THREADS))
        except ValueError:  # pragma: no cover
            pass
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover
        return None
    return threadpool_limits(limits=n)
