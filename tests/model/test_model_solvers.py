"""Stokes solver registry (convsim.model.solvers): every solver against the analytic
single-mode solution, the same answer from each, the name look-up, and the cache a restart
needs."""

import numpy as np
import pytest

from convsim.errors import ConfigError, SolverError
from convsim.model.grid import Grid
from convsim.model.linsolve import available_factorizers
from convsim.model.rheology import ViscosityLaw, viscosity
from convsim.model.solvers import (SOLVERS, StokesProblem, make_stokes_solver, suitable_solvers)
from convsim.model.stokes import StokesOperator

RA = 1.0e4


def _problem(g, law=ViscosityLaw(), top="free-slip"):
    op = StokesOperator(g, top, "free-slip")
    zn, zc = g.node_mesh()[1], g.cell_mesh()[1]

    def viscosities(T):
        tn = g.cell_to_node(T, 1.0, 0.0)
        return viscosity(law, tn, zn), viscosity(law, T, zc)
    return StokesProblem(op, viscosities, uniform=law.is_constant)


def _single_mode(n):
    """T = cos(kx) sin(pi z) with constant viscosity and free-slip walls: lap^2 psi = Ra dT/dx
    has psi = -Ra k / (k^2 + pi^2)^2 sin(kx) sin(pi z) (the classical single-mode result,
    e.g. Turcotte & Schubert, Geodynamics, ch. 6)."""
    g = Grid(n, n)
    k = np.pi
    X, Z = g.cell_mesh()
    XN, ZN = g.node_mesh()
    T = np.cos(k * X) * np.sin(np.pi * Z)
    exact = -RA * k / (k * k + np.pi ** 2) ** 2 * np.sin(k * XN) * np.sin(np.pi * ZN)
    return g, T, exact


@pytest.mark.parametrize("name", list(SOLVERS))
def test_every_solver_gives_the_analytic_single_mode_at_second_order(name):
    if name in ("cholmod", "superlu") and name not in available_factorizers():
        pytest.fail(f"{name} back end missing: install the test extras")
    errors = []
    for n in (16, 32):
        g, T, exact = _single_mode(n)
        problem = _problem(g)
        solver = make_stokes_solver(name, problem)
        x, _ = solver.solve(T, problem.operator.rhs(T, RA))
        psi = problem.operator.to_nodes(x)
        errors.append(np.abs(psi - exact).max() / np.abs(exact).max())
    assert errors[-1] < 3e-3, errors
    assert np.log2(errors[0] / errors[1]) > 1.9, errors


def test_all_solvers_give_the_same_answer():
    g, T, _ = _single_mode(24)
    problem = _problem(g)
    b = problem.operator.rhs(T, RA)
    answers = {name: make_stokes_solver(name, problem).solve(T, b)[0] for name in SOLVERS}
    reference = answers["transform"]
    for name, x in answers.items():
        np.testing.assert_allclose(x, reference, rtol=1e-9, atol=1e-12 * np.abs(reference).max(),
                                   err_msg=name)


def test_unknown_name_lists_the_valid_ones():
    g, _, _ = _single_mode(8)
    with pytest.raises(SolverError) as err:
        make_stokes_solver("multigrid", _problem(g))
    for name in SOLVERS:
        assert name in str(err.value)


def test_transform_refuses_variable_viscosity_and_no_slip_and_says_what_can():
    g = Grid(8, 8)
    for problem in (_problem(g, ViscosityLaw("frank-kamenetskii", thermal_contrast=10.0)),
                    _problem(g, top="no-slip")):
        with pytest.raises(ConfigError) as err:
            make_stokes_solver("transform", problem)
        assert "transform" not in suitable_solvers(problem)
        assert "lagged-cg" in str(err.value) and "superlu" in str(err.value)


def test_auto_picks_the_transform_only_where_it_is_exact():
    g = Grid(8, 8)
    assert make_stokes_solver("auto", _problem(g)).name == "transform"
    variable = _problem(g, ViscosityLaw("frank-kamenetskii", thermal_contrast=10.0))
    assert make_stokes_solver("auto", variable).name == "lagged-cg"
    assert make_stokes_solver("auto", variable, "always").name == available_factorizers()[0]


def _variable_case(n=12):
    g = Grid(n, n)
    X, Z = g.cell_mesh()
    T = 1.0 - Z + 0.1 * np.cos(np.pi * X) * np.sin(np.pi * Z)
    return g, T, _problem(g, ViscosityLaw("frank-kamenetskii", thermal_contrast=1e3))


def test_a_restored_solver_repeats_the_next_solve_bit_for_bit():
    """What a solver caches (the lagged factor) goes into state() and comes back by restore():
    the next solve of a fresh solver restored from it equals the original's exactly."""
    g, T, problem = _variable_case()
    b = problem.operator.rhs(T, RA)
    original = make_stokes_solver("lagged-cg", problem)
    original.solve(T, b)
    saved = {k: v.copy() for k, v in original.state().items()}
    assert saved, "the lagged solver must report its factor"
    T2 = T + 0.01 * np.sin(np.pi * g.cell_mesh()[0])
    b2 = problem.operator.rhs(T2, RA)
    restored = make_stokes_solver("lagged-cg", problem)
    restored.restore(saved)
    x_restored, rep_restored = restored.solve(T2, b2)
    x_original, rep_original = original.solve(T2, b2)
    assert rep_original.iterations > 0 and not rep_original.refactored   # CG on the old factor
    assert rep_restored.iterations == rep_original.iterations
    assert np.array_equal(x_restored, x_original)


@pytest.mark.parametrize("name", ["lagged-cg", "superlu"])
def test_linearised_response_matches_a_difference_of_solves(name):
    """dx along v from the exact linearisation against a central difference of two full solves."""
    g, T, problem = _variable_case()
    op = problem.operator
    v = np.cos(2 * np.pi * g.cell_mesh()[0]) * np.sin(np.pi * g.cell_mesh()[1])
    solver = make_stokes_solver(name, problem)
    x, dsolve = solver.linearised(T, lambda f: op.rhs(f, RA))
    dx = dsolve(v)
    h = 1e-4
    fresh = make_stokes_solver(name, problem, "always")
    up = fresh.solve(T + h * v, op.rhs(T + h * v, RA))[0]
    down = fresh.solve(T - h * v, op.rhs(T - h * v, RA))[0]
    np.testing.assert_allclose(x, fresh.solve(T, op.rhs(T, RA))[0], rtol=1e-9,
                               atol=1e-12 * np.abs(x).max())
    assert np.abs(dx - (up - down) / (2 * h)).max() < 1e-5 * np.abs(dx).max()


def test_every_config_choice_names_a_registered_solver():
    import dataclasses
    from convsim.config import Numerics
    choices = {f.name: f for f in dataclasses.fields(Numerics)}["stokes_solver"].metadata["choices"]
    assert set(choices) <= {"auto", *SOLVERS}


def test_a_restored_solver_makes_the_same_refactor_decisions_bit_for_bit():
    """state() / restore() carry the factor and the refactor rule's counts: a solver rebuilt
    from the state of another, mid-way through a drifting sequence, repeats its answers and
    refactors bit for bit (what a restart needs)."""
    if "cholmod" not in available_factorizers():
        pytest.fail("cholmod back end missing: install the test extras")
    g = Grid(16, 16)
    law = ViscosityLaw(name="frank-kamenetskii", thermal_contrast=1e4)
    problem = _problem(g, law)
    X, Z = g.cell_mesh()

    def temperature(k):
        return 1.0 - Z + 0.1 * np.cos(np.pi * X) * np.sin(np.pi * Z) * (1.0 + 0.002 * k)

    running = make_stokes_solver("lagged-cg", problem)
    restored, refactors = None, 0
    for k in range(30):
        T = temperature(k)
        x, rep = running.solve(T, problem.operator.rhs(T, RA))
        if k == 16:
            restored = make_stokes_solver("lagged-cg", problem)
            restored.restore(running.state())
            assert running.state()["factor_stale_iterations"] > 0     # mid-way: counts matter
        elif restored is not None:
            y, rep_restored = restored.solve(T, problem.operator.rhs(T, RA))
            assert np.array_equal(x, y)
            assert (rep.refactored, rep.iterations) == (rep_restored.refactored,
                                                        rep_restored.iterations)
            refactors += rep.refactored
    assert refactors >= 1          # the amortised rule renewed the factor after the restore
