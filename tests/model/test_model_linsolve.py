"""Sparse SPD back ends and the lagged-factor CG (convsim.model.linsolve) on the 2D Poisson
matrix, against a dense solve by numpy (an independent library)."""

import numpy as np
import pytest
import scipy.sparse as sp

from convsim.errors import SolverError
from convsim.model.linsolve import (FACTORIZERS, LaggedFactorSolver, available_factorizers,
                                    make_factorizer, solve_spd)


def _poisson(n, shift=0.0):
    """The five-point -Laplacian on an n x n interior grid (+ shift I): SPD, the classic test."""
    t = sp.diags([-np.ones(n - 1), 4.0 * np.ones(n), -np.ones(n - 1)], [-1, 0, 1])
    off = sp.diags([-np.ones(n - 1), -np.ones(n - 1)], [-1, 1])
    A = sp.kron(sp.identity(n), t) + sp.kron(off, sp.identity(n))
    return (A + shift * sp.identity(n * n)).tocsc()


@pytest.mark.parametrize("name", list(FACTORIZERS))
def test_back_ends_agree_with_a_dense_solve(name):
    if name not in available_factorizers():
        pytest.fail(f"{name} missing: install the test extras")
    A = _poisson(9)
    b = np.random.default_rng(0).normal(size=A.shape[0])
    np.testing.assert_allclose(solve_spd(A, b, name), np.linalg.solve(A.toarray(), b),
                               rtol=1e-10, atol=1e-12)


def test_unknown_back_end_lists_the_valid_ones():
    with pytest.raises(SolverError) as err:
        make_factorizer("pardiso")
    assert all(name in str(err.value) for name in FACTORIZERS)


def test_lagged_factor_preconditions_cg_on_a_nearby_matrix_and_refactors_when_far():
    """The factor of A0 preconditions CG on A0 + small shift (a few iterations, no new
    factor); a matrix far away needs more than the limit and is refactored. Both answers
    against a dense solve."""
    rng = np.random.default_rng(1)
    A0, near, far = _poisson(12), _poisson(12, 0.01), _poisson(12, 3.0)
    b = rng.normal(size=A0.shape[0])
    solver = LaggedFactorSolver(make_factorizer("superlu"), "adaptive", rtol=1e-12)
    _, first = solver.solve(A0, b, weights=np.array([0.0]))
    assert first.refactored
    x, rep = solver.solve(near, b, weights=np.array([0.01]))
    assert not rep.refactored and 0 < rep.iterations <= solver.max_iterations
    np.testing.assert_allclose(x, np.linalg.solve(near.toarray(), b), rtol=1e-9)
    x, rep = solver.solve(far, b, weights=np.array([3.0]))
    assert rep.refactored
    np.testing.assert_allclose(x, np.linalg.solve(far.toarray(), b), rtol=1e-10)
    always = LaggedFactorSolver(make_factorizer("superlu"), "always")
    always.solve(A0, b, weights=np.array([0.0]))
    assert always.solve(near, b, weights=np.array([0.01]))[1].refactored
