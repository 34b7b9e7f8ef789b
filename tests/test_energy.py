"""Temperature equation: kernel against its naive twin, diffusion solves, conservation, TVD bounds."""

import numpy as np
import pytest

from convsim.model import array_kernels, kernels
from convsim.model.energy import (AdvectionKernels, DiffusionSolver, ThermalBoundaries, advection,
                                  diffusion_matrix, pad_temperature, upwind_matrix)
from convsim.model.grid import Grid
from convsim.model.rheology import ViscosityLaw
from convsim.model.stokes import face_velocities
from convsim.model.timestepping import Model

import naive


def _random_flow(g, rng):
    """Face velocities of a random streamfunction that vanishes on the walls (or wraps)."""
    psi = rng.normal(size=g.node_shape)
    psi[0] = psi[-1] = 0.0
    if g.periodic:
        psi[:, -1] = psi[:, 0]
    else:
        psi[:, 0] = psi[:, -1] = 0.0
    return face_velocities(g, psi)


@pytest.mark.parametrize("limiter", list(kernels.LIMITER_CODES))
@pytest.mark.parametrize("periodic", [False, True])
def test_advection_kernel_matches_naive_twin(limiter, periodic):
    rng = np.random.default_rng(4)
    g = Grid(9, 7, 1.3, periodic=periodic)
    T = rng.uniform(size=g.cell_shape)
    u, w = _random_flow(g, rng)
    for bc in (ThermalBoundaries("temperature", 0.2, "flux", 1.5),
               ThermalBoundaries("flux", -0.7, "temperature", 0.9)):
        fast = advection(g, T, u, w, bc, limiter)
        padded = naive.pad(T, g.dz, (bc.bottom_heat, bc.bottom_value), (bc.top_heat, bc.top_value),
                           periodic)           # the twin pads by itself, from the wall conditions
        slow = naive.advective_tendency(padded, u, w, g.dx, g.dz, limiter)
        np.testing.assert_allclose(fast, slow, rtol=1e-12, atol=1e-12)
        whole_array = advection(g, T, u, w, bc, limiter, array_kernels.advective_tendency)
        np.testing.assert_allclose(whole_array, slow, rtol=1e-12, atol=1e-12)
        np.testing.assert_allclose(pad_temperature(g, T, bc), padded, rtol=1e-13, atol=1e-13)


@pytest.mark.parametrize("limiter", list(kernels.LIMITER_CODES))
def test_whole_array_and_compiled_kernels_give_the_same_bits(limiter):
    """The run switches from one to the other mid-run, so they must agree exactly, not to a
    tolerance: same arithmetic in the same order (including faces where down = up)."""
    rng = np.random.default_rng(7)
    padded = rng.uniform(size=(21, 17))
    padded[6] = padded[7]                       # flat rows: r undefined
    padded[:, 9] = padded[:, 10]
    u, w = rng.standard_normal((17, 14)), rng.standard_normal((18, 13))
    code = kernels.LIMITER_CODES[limiter]
    compiled = kernels.advective_tendency(padded, u, w, 0.07, 0.05, code, np.empty((17, 13)))
    whole = array_kernels.advective_tendency(padded, u, w, 0.07, 0.05, code, np.empty((17, 13)))
    assert np.array_equal(compiled, whole)


def test_a_run_calls_the_array_kernel_first_then_the_compiled_one():
    """Rent or buy: array calls until their extra cost would have paid the compiler's start-up."""
    small, medium = AdvectionKernels(8 * 8), AdvectionKernels(64 * 64)
    expected_small = int(AdvectionKernels.START_UP_SECONDS
                         / (AdvectionKernels.EXTRA_SECONDS_PER_CELL * 64))
    assert small.array_calls_left == expected_small > 100_000
    assert 0 < medium.array_calls_left < 10_000
    picks = [medium.pick() for _ in range(medium.array_calls_left + 2)]
    assert picks[0] is array_kernels.advective_tendency
    assert picks[-1] is kernels.advective_tendency and picks[-2] is kernels.advective_tendency
    assert AdvectionKernels(65 * 64).pick() is kernels.advective_tendency   # large: compiled


def test_upwind_matrix_equals_first_order_kernel():
    rng = np.random.default_rng(5)
    for periodic in (False, True):
        g = Grid(8, 6, 1.0, periodic=periodic)
        u, w = _random_flow(g, rng)
        T = rng.uniform(size=g.cell_shape)
        bc = ThermalBoundaries()
        np.testing.assert_allclose(-(upwind_matrix(g, u, w) @ T.ravel()).reshape(g.cell_shape),
                                   advection(g, T, u, w, bc, "upwind"), atol=1e-11)


@pytest.mark.parametrize("periodic", [False, True])
@pytest.mark.parametrize("kinds", [("temperature", "temperature"), ("flux", "temperature"),
                                   ("temperature", "flux")])
def test_transform_diffusion_solve_equals_sparse_solve(periodic, kinds):
    g = Grid(10, 8, 1.7, periodic=periodic)
    bc = ThermalBoundaries(kinds[0], 0.3, kinds[1], 1.2)
    d = DiffusionSolver(g, bc)
    K = diffusion_matrix(g, bc)
    T = np.random.default_rng(6).uniform(size=g.cell_shape)
    np.testing.assert_allclose(d.apply(T), (K @ T.ravel()).reshape(g.cell_shape) + d.boundary_term,
                               atol=1e-9)
    rhs = np.random.default_rng(7).normal(size=g.cell_shape)
    a, dt = 1.5, 3e-3
    direct = np.linalg.solve(a * np.eye(K.shape[0]) - dt * K.toarray(), rhs.ravel())
    np.testing.assert_allclose(d.solve(a, dt, rhs).ravel(), direct, rtol=1e-10, atol=1e-12)


def test_diffusion_of_a_cosine_mode_decays_at_the_analytic_rate():
    """dT/dt = lap T with T = cos(pi x) sin(pi z) decays as exp(-2 pi^2 t) (separation of variables)."""
    g = Grid(64, 64)
    bc = ThermalBoundaries("temperature", 0.0, "temperature", 0.0)
    d = DiffusionSolver(g, bc)
    X, Z = g.cell_mesh()
    T = np.cos(np.pi * X) * np.sin(np.pi * Z)
    dt, steps = 1e-4, 200
    T1 = T.copy()
    for _ in range(steps):                      # implicit Euler, error O(dt)
        T1 = d.solve(1.0, dt, T1 + dt * d.boundary_term)
    expected = np.exp(-2 * np.pi ** 2 * dt * steps)
    assert abs(T1[32, 10] / T[32, 10] - expected) < 2e-3


def _model(bc, heating=0.0, n=16):
    return Model(Grid(n, n), 2.0e4, bc, ViscosityLaw(), heating, time_scheme="sbdf2")


def test_insulated_box_keeps_its_heat_content_to_round_off():
    bc = ThermalBoundaries("flux", 0.0, "flux", 0.0)
    m = _model(bc)
    X, Z = m.grid.cell_mesh()
    T0 = 1.0 - Z + 0.1 * np.cos(np.pi * X) * np.sin(np.pi * Z)   # unstable: it overturns
    state = m.initial_state(T0)
    fastest = 0.0
    for _ in range(200):
        state, report = m.step(state)
        fastest = max(fastest, report.vrms)
    assert fastest > 10.0                                   # it really convects
    assert abs(state.temperature.sum() - T0.sum()) < 1e-11 * T0.size


def test_reported_energy_residual_is_round_off_with_flux_walls_and_heating():
    """The step report's own residual (the independent budget from the fields alone is in
    tests/test_heat_paths.py)."""
    bc = ThermalBoundaries("temperature", 0.0, "flux", 1.0)
    m = _model(bc, heating=3.0)
    X, Z = m.grid.cell_mesh()
    state = m.initial_state(1.0 - Z + 0.05 * np.cos(np.pi * X) * np.sin(np.pi * Z))
    worst = 0.0
    for _ in range(100):
        state, report = m.step(state)
        worst = max(worst, abs(report.energy_residual))
    assert worst < 1e-10


def test_tvd_front_in_a_rotating_flow_stays_within_its_bounds():
    """A sharp square of T = 1 in T = 0, carried by a prescribed vortex (psi = A sin(pi x) sin(pi z)),
    advanced by the explicit limited upwind step and the implicit diffusion step of IMEX Euler,
    never leaves [0, 1] (the TVD property of the limited fluxes, Harten 1983, and the maximum
    principle of implicit diffusion)."""
    g = Grid(48, 48)
    bc = ThermalBoundaries("temperature", 0.0, "temperature", 0.0)
    d = DiffusionSolver(g, bc)
    XN, ZN = g.node_mesh()
    psi = 2.0e3 * np.sin(np.pi * XN) * np.sin(np.pi * ZN)
    u, w = face_velocities(g, psi)
    X, Z = g.cell_mesh()
    T = ((np.abs(X - 0.5) < 0.15) & (np.abs(Z - 0.7) < 0.12)).astype(float)
    rate = np.abs(u).max() / g.dx + np.abs(w).max() / g.dz
    dt = 0.45 / rate
    for limiter in ("van-leer", "minmod", "superbee", "mc", "koren"):
        Tl = T.copy()
        for _ in range(300):
            Tl = d.solve(1.0, dt, Tl + dt * advection(g, Tl, u, w, bc, limiter) + dt * d.boundary_term)
            assert Tl.min() >= -1e-12 and Tl.max() <= 1.0 + 1e-12, limiter
        assert Tl.max() > 0.3          # the front has moved, not simply diffused away


def _smooth_advection_errors(limiter, sizes=(64, 128, 256)):
    """Max error of -d(U T)/dx for T = sin(2 pi x), U = 1, periodic, on the cells where T is
    monotone over the stencil (|cos 2 pi x| > 0.5): exact tendency -2 pi cos(2 pi x)."""
    errors = []
    for n in sizes:
        g = Grid(n, 4, 1.0, periodic=True)
        X, _ = g.cell_mesh()
        u, w = np.ones((g.nz, g.nx + 1)), np.zeros((g.nz + 1, g.nx))
        T = np.sin(2.0 * np.pi * X)
        err = advection(g, T, u, w, ThermalBoundaries(), limiter) + 2.0 * np.pi * np.cos(2.0 * np.pi * X)
        errors.append(np.abs(err[np.abs(np.cos(2.0 * np.pi * X)) > 0.5]).max())
    return np.array(errors)


@pytest.mark.parametrize("limiter, order", [("unlimited", 3.0), ("koren", 3.0), ("van-leer", 2.0)])
def test_smooth_advection_converges_at_the_order_of_its_interpolation(limiter, order):
    """The kappa = 1/3 interpolation is third order on smooth data, and Koren's limiter keeps it
    where the field is monotone; van Leer's is second order there (phi'(1) = 1/2, not 1/3).
    Source: the kappa-scheme truncation error (van Leer 1985; Hundsdorfer & Verwer 2003, ch. III,
    from memory)."""
    e = _smooth_advection_errors(limiter)
    observed = np.log2(e[:-1] / e[1:])
    assert np.all(np.abs(observed - order) < 0.25), observed
