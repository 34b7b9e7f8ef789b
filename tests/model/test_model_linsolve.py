"""Sparse SPD back ends and the lagged-factor CG (convsim.model.linsolve) on the 2D Poisson
matrix, against a dense solve by numpy (an independent library)."""

import numpy as np
import pytest
import scipy.sparse as sp

from convsim.errors import SolverError
from convsim.model.linsolve import (FACTORIZERS, LaggedFactorSolver, _pcg, available_factorizers,
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


def _energy_error(A, x_exact, x):
    """||x* - x||_A / ||x*||_A by dense algebra."""
    e = x_exact - x
    return float(np.sqrt(e @ (A @ e) / (x_exact @ (A @ x_exact))))


def test_cg_error_estimate_is_the_dissipation_norm_error_when_preconditioned_exactly():
    """With M = A (the factor of A itself) r . M^-1 r = ||x* - x||_A^2 exactly, so the estimate
    sqrt(r . M^-1 r / b . x) is the relative A-norm error up to b . x vs ||x*||_A^2 (first
    order in the error): checked against dense algebra (numpy)."""
    rng = np.random.default_rng(3)
    A = _poisson(10)
    x_exact = rng.normal(size=A.shape[0])
    b = A @ x_exact
    factor = make_factorizer("superlu")
    factor.factor(A)
    guess = x_exact + 1e-3 * rng.normal(size=A.shape[0])
    run = _pcg(A, b, factor.solve, guess, 1e-16, 1, error_rtol=1.0)
    assert run.iterations == 1 and run.converged
    assert run.flow_error == pytest.approx(_energy_error(A, x_exact, guess), rel=1e-3)
    assert _energy_error(A, x_exact, run.x) < 1e-12     # one step with M = A: the solution


def test_lagged_factor_cg_stops_at_the_requested_flow_error():
    """The factor of a nearby matrix: CG stops once its estimate is <= error_rtol, one update
    later; the true relative A-norm error (dense algebra) is then below the target, reached
    in fewer iterations than the residual target 1e-14 alone needs."""
    rng = np.random.default_rng(4)
    A0, A = _poisson(12), _poisson(12, 0.3)
    x_exact = rng.normal(size=A.shape[0])
    b = A @ x_exact
    factor = make_factorizer("superlu")
    factor.factor(A0)
    guess = x_exact + 1e-2 * rng.normal(size=A.shape[0])
    by_error = _pcg(A, b, factor.solve, guess, 1e-14, 50, error_rtol=1e-6)
    by_residual = _pcg(A, b, factor.solve, guess, 1e-14, 50)
    assert by_error.converged and 0.0 < by_error.flow_error <= 1e-6
    assert _energy_error(A, x_exact, by_error.x) <= 1e-6
    assert by_error.iterations < by_residual.iterations


def test_a_drifting_matrix_is_refactored_when_the_added_iterations_pay_for_a_factor():
    """The amortised rule (rent or buy, common practice): a matrix drifting away from its factor
    costs more CG iterations each solve; once the iterations above the first solve's count,
    summed, reach REFACTOR_IN_SOLVES, the next solve refactors (before the 6-iteration limit
    would).  Answers against a dense solve (numpy); the bookkeeping re-done by hand."""
    from convsim.model import linsolve
    rng = np.random.default_rng(5)
    b = rng.normal(size=144)
    solver = LaggedFactorSolver(make_factorizer("superlu"), "adaptive", rtol=1e-10)
    first, extra, refactor_steps = -1, 0, []
    for k in range(40):
        shift = 0.002 * k
        A = _poisson(12, shift)
        due = extra >= linsolve.REFACTOR_IN_SOLVES
        x, rep = solver.solve(A, b, weights=np.array([shift]))
        exact = np.linalg.solve(A.toarray(), b)
        assert np.abs(x - exact).max() <= 1e-8 * np.abs(exact).max()
        assert not due or rep.refactored
        if rep.refactored:
            refactor_steps.append(k)
            first, extra = -1, 0
        elif first < 0:
            first = rep.iterations
        else:
            extra += max(rep.iterations - first, 0)
        assert rep.iterations <= solver.max_iterations
    assert len(refactor_steps) >= 3          # the first factor and at least two renewals
    assert solver.counts() == {"first_iterations": first, "stale_iterations": extra}
