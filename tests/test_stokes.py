"""Stokes solver checks: an analytic mode, manufactured solutions, solver agreement, divergence."""

import numpy as np
import pytest
import sympy as sp

from convsim.model.grid import Grid
from convsim.model.linsolve import solve_spd, FACTORIZERS
from convsim.model.stokes import StokesOperator, TransformSolver, face_velocities


def _analytic_mode_error(n, periodic):
    """Constant viscosity, free-slip, T = cos(kx) sin(pi z).

    lap^2 psi = Ra dT/dx has the solution psi = -Ra k / (k^2 + pi^2)^2 sin(kx) sin(pi z)
    (the classical single-mode result, e.g. Turcotte & Schubert, Geodynamics, ch. 6).
    """
    aspect = 2.0 if periodic else 1.0
    k = np.pi
    g = Grid(n, n, aspect, periodic=periodic)
    X, Z = g.cell_mesh()
    T = np.cos(k * X) * np.sin(np.pi * Z)
    ra = 1.0e4
    op = StokesOperator(g)
    psi = op.to_nodes(TransformSolver(op).solve(op.rhs(T, ra)))
    XN, ZN = g.node_mesh()
    exact = -ra * k / (k * k + np.pi ** 2) ** 2 * np.sin(k * XN) * np.sin(np.pi * ZN)
    return np.abs(psi - exact).max() / np.abs(exact).max()


@pytest.mark.parametrize("periodic", [False, True])
def test_analytic_single_mode_converges_at_second_order(periodic):
    errors = [_analytic_mode_error(n, periodic) for n in (16, 32, 64)]
    orders = np.log2(np.array(errors[:-1]) / np.array(errors[1:]))
    assert errors[-1] < 1e-3
    assert np.all(orders > 1.9), orders


def _manufactured(bc):
    """Manufactured solution (Roache, 2002, Verification and Validation in Computational
    Science and Engineering): choose psi and eta, derive the forcing with sympy."""
    x, z = sp.symbols("x z")
    if bc == "free-slip":   # psi = psi_zz = 0 on z = 0, 1; psi = psi_xx = 0 on x = 0, 1
        psi = sp.sin(sp.pi * x) * sp.sin(sp.pi * z) + sp.Rational(3, 10) * sp.sin(2 * sp.pi * x) * sp.sin(3 * sp.pi * z)
    else:                   # no-slip top and bottom: psi = psi_z = 0; free-slip sides
        psi = sp.sin(sp.pi * x) * sp.sin(sp.pi * z) ** 2 * (1 + sp.Rational(1, 2) * z)
    eta = sp.exp(sp.Rational(3, 2) * x * z + sp.Rational(1, 2) * z)
    s = eta * (sp.diff(psi, z, 2) - sp.diff(psi, x, 2))
    forcing = sp.diff(s, z, 2) - sp.diff(s, x, 2) + 4 * sp.diff(eta * sp.diff(psi, x, z), x, z)
    f = [sp.lambdify((x, z), e, "numpy") for e in (psi, eta, forcing)]
    return f


@pytest.mark.parametrize("bc", ["free-slip", "no-slip"])
def test_variable_viscosity_manufactured_solution_second_order(bc):
    psi_f, eta_f, rhs_f = _manufactured(bc)
    errors = []
    for n in (16, 32, 64):
        g = Grid(n, n)
        op = StokesOperator(g, bc, bc)
        XN, ZN = g.node_mesh()
        XC, ZC = g.cell_mesh()
        A = op.matrix(eta_f(XN, ZN), eta_f(XC, ZC))
        b = op.from_nodes(rhs_f(XN, ZN))
        psi = op.to_nodes(solve_spd(A, b))
        exact = psi_f(XN, ZN)
        errors.append(np.abs(psi - exact).max() / np.abs(exact).max())
    orders = np.log2(np.array(errors[:-1]) / np.array(errors[1:]))
    assert errors[-1] < 2e-3, errors
    assert np.all(np.abs(orders - 2.0) < 0.25), orders


def test_matrix_is_symmetric_positive_definite_and_back_ends_agree():
    g = Grid(12, 10, 1.5)
    rng = np.random.default_rng(1)
    for bc in ("free-slip", "no-slip"):
        op = StokesOperator(g, bc, "free-slip")
        A = op.matrix(np.exp(rng.normal(size=g.node_shape)), np.exp(rng.normal(size=g.cell_shape)))
        assert abs(A - A.T).max() < 1e-9 * abs(A).max()
        assert np.linalg.eigvalsh(A.toarray()).min() > 0
        b = rng.normal(size=op.n_unknowns)
        solutions = [solve_spd(A, b, name) for name in FACTORIZERS]
        for x in solutions:
            assert np.linalg.norm(A @ x - b) < 1e-9 * np.linalg.norm(b)
        np.testing.assert_allclose(solutions[0], solutions[1], rtol=1e-8, atol=1e-12)


def test_transform_solver_equals_assembled_matrix_solve():
    for periodic in (False, True):
        g = Grid(16, 12, 2.0, periodic=periodic)
        op = StokesOperator(g)
        A = op.matrix(np.ones(g.node_shape), np.ones(g.cell_shape))
        b = np.random.default_rng(2).normal(size=op.n_unknowns)
        np.testing.assert_allclose(TransformSolver(op).solve(b), solve_spd(A, b), rtol=1e-9, atol=1e-12)


def test_face_velocities_are_divergence_free_to_round_off():
    g = Grid(20, 14, 1.3)
    psi = np.random.default_rng(3).normal(size=g.node_shape)
    u, w = face_velocities(g, psi)
    div = (u[:, 1:] - u[:, :-1]) / g.dx + (w[1:] - w[:-1]) / g.dz
    assert np.abs(div).max() < 1e-10 * np.abs(u).max() / g.dx
