"""The one process pool: every worker runs with one BLAS thread (the runs are the parallelism)."""

from convsim.pool import process_pool


def _blas_threads():
    """BLAS threads of the worker once numpy is loaded, as in a run (the limit is set before
    numpy's BLAS is loaded in a fresh worker, so it must reach libraries loaded later)."""
    import numpy  # noqa: F401
    from threadpoolctl import threadpool_info
    return [lib["num_threads"] for lib in threadpool_info() if lib["user_api"] == "blas"]


def test_workers_have_one_blas_thread():
    with process_pool(1) as pool:
        threads = pool.submit(_blas_threads).result(timeout=120)
    assert threads and all(n == 1 for n in threads)
