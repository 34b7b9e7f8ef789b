"""The one process pool: every worker runs with one BLAS thread (the runs are the parallelism)."""

from convsim.pool import process_pool


def _blas_threads():
    from threadpoolctl import threadpool_info
    return [lib["num_threads"] for lib in threadpool_info() if lib["user_api"] == "blas"]


def test_workers_have_one_blas_thread():
    with process_pool(1) as pool:
        threads = pool.submit(_blas_threads).result(timeout=120)
    assert threads and all(n == 1 for n in threads)
