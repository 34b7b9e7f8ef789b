"""Single-threaded by default in every path (convsim.threads); more only when asked.

Common practice: on a shared or small machine a numerics code runs its BLAS, OpenMP and
numba pools with the thread count the user asked for, one unless told otherwise.
"""

import numba
import pytest
from threadpoolctl import threadpool_info

from convsim import api
from convsim.config import Config
from convsim.threads import limit_threads, requested_threads


def _pool_threads(only_numpy: bool = False) -> set:
    """Thread counts of the loaded BLAS pools (numpy's alone: an OpenBLAS loaded later, as
    cvxopt's, keeps the ceiling of the environment it was loaded with)."""
    return {pool["num_threads"] for pool in threadpool_info() if pool["user_api"] == "blas"
            and (not only_numpy or "numpy" in pool["filepath"])}


def _tiny() -> Config:
    return Config().replace(domain__nx=8, domain__nz=8, stop__max_steps=3, stop__steady=False,
                            viscosity__law="frank-kamenetskii", viscosity__thermal_contrast=10.0)


def test_a_run_limits_every_pool_to_one_thread_by_default(monkeypatch):
    monkeypatch.delenv("CONVSIM_THREADS", raising=False)
    limit_threads(2)
    assert numba.get_num_threads() == min(2, numba.config.NUMBA_NUM_THREADS)
    api.run(_tiny())
    assert _pool_threads() == {1}
    assert numba.get_num_threads() == 1


def test_threads_are_given_by_argument_or_environment(monkeypatch):
    monkeypatch.setenv("CONVSIM_THREADS", "2")
    assert requested_threads() == 2
    assert requested_threads(3) == 3
    monkeypatch.setenv("CONVSIM_THREADS", "many")
    assert requested_threads() == 1
    try:
        api.run(_tiny(), threads=2)
        assert _pool_threads(only_numpy=True) == {2}
        assert numba.get_num_threads() == min(2, numba.config.NUMBA_NUM_THREADS)
    finally:
        limit_threads(1)
    assert _pool_threads() == {1}


@pytest.mark.parametrize("value", ["0", "two", "-1"])
def test_bad_thread_count_is_one_line_and_exit_2(value, capsys):
    from convsim.cli import main
    with pytest.raises(SystemExit) as exc:
        main(["run", "configs/benchmark_case_1a.toml", "--threads", value])
    assert exc.value.code == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert "--threads" in err[-1] and value in err[-1]
