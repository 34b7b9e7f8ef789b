"""A grid refined towards the top and bottom walls (``domain.wall_refinement``).

Each check names what it is checked against: the tanh map written out by hand, a
manufactured solution (Roache 2002), the eigenvalues of d^2/dz^2 (separation of
variables), the divergence theorem, the kernels' naive twins, and case 2b of
Blankenbach et al. (1989).
"""

import numpy as np
import pytest

import naive
from convsim.model import kernels
from convsim.model.energy import (DiffusionSolver, ThermalBoundaries, advection,
                                  boundary_heat_flux, diffusion_matrix, upwind_matrix)
from convsim.model.grid import Grid
from convsim.model.linsolve import solve_spd
from convsim.model.stokes import StokesOperator, face_velocities
from test_stokes import _manufactured

BETA = 2.0


def test_corners_follow_the_tanh_map_and_default_is_uniform():
    """Corner heights z_j = (1 + tanh(beta (2 j / nz - 1)) / tanh(beta)) / 2 (the map of the
    Grid docstring, evaluated here by hand for nz = 4, beta = 1: tanh(-1)/tanh(1) = -1 and
    tanh(-1/2)/tanh(1) = -0.60583...)."""
    g = Grid(4, 4, wall_refinement=1.0)
    r = np.tanh(0.5) / np.tanh(1.0)
    np.testing.assert_allclose(g.z_node, [0.0, (1 - r) / 2, 0.5, (1 + r) / 2, 1.0], atol=1e-15)
    np.testing.assert_allclose(g.z_cell, 0.5 * (g.z_node[1:] + g.z_node[:-1]), atol=1e-15)
    assert g.dz_cell.sum() == pytest.approx(1.0) and g.dz_node.sum() == pytest.approx(1.0)
    assert g.dz_cell[0] < g.dz_cell[1]                     # thin at the wall
    uniform = Grid(4, 4)
    assert not uniform.stretched and uniform.dz == 0.25
    with pytest.raises(ValueError, match="no single dz"):
        g.dz


@pytest.mark.parametrize("bc", ["free-slip", "no-slip"])
def test_stokes_manufactured_solution_on_a_stretched_grid_is_second_order(bc):
    """The manufactured psi, eta of tests/test_stokes.py (Roache 2002) on beta = 2 grids
    (cells 3.3 times thinner at the walls than in the middle): observed order about 2."""
    psi_f, eta_f, rhs_f = _manufactured(bc)
    errors = []
    for n in (16, 32, 64):
        g = Grid(n, n, wall_refinement=BETA)
        op = StokesOperator(g, bc, bc)
        XN, ZN = g.node_mesh()
        XC, ZC = g.cell_mesh()
        A = op.matrix(eta_f(XN, ZN), eta_f(XC, ZC))
        assert abs(A - A.T).max() < 1e-9 * abs(A).max()
        psi = op.to_nodes(solve_spd(A, op.forcing(rhs_f(XN, ZN))))
        exact = psi_f(XN, ZN)
        errors.append(np.abs(psi - exact).max() / np.abs(exact).max())
    orders = np.log2(np.array(errors[:-1]) / np.array(errors[1:]))
    assert errors[-1] < 5e-3, errors
    assert np.all(np.abs(orders - 2.0) < 0.25), orders


def test_face_velocities_on_a_stretched_grid_are_divergence_free():
    """u = dpsi/dz with each row's own height: the discrete divergence of every cell,
    (u_E - u_W) / dx + (w_N - w_S) / h_j, is round-off (the streamfunction identity)."""
    g = Grid(12, 10, 1.4, wall_refinement=BETA)
    psi = np.random.default_rng(3).normal(size=g.node_shape)
    u, w = face_velocities(g, psi)
    div = (u[:, 1:] - u[:, :-1]) / g.dx + (w[1:] - w[:-1]) / g.dz_cell[:, None]
    assert np.abs(div).max() < 1e-10 * np.abs(u).max() / g.dz_cell.min()


@pytest.mark.parametrize("kinds", [("temperature", "temperature"), ("flux", "temperature")])
def test_stretched_diffusion_eigenvalue_converges_to_the_analytic_one(kinds):
    """The slowest decay rate of d^2/dz^2 on 0 < z < 1: pi^2 with T = 0 on both walls,
    (pi / 2)^2 with zero flux at the bottom (separation of variables).  Second order."""
    exact = np.pi ** 2 if kinds[0] == "temperature" else (np.pi / 2) ** 2
    errors = []
    for n in (16, 32, 64):
        d = DiffusionSolver(Grid(4, n, wall_refinement=BETA),
                            ThermalBoundaries(kinds[1], 0.0, kinds[0], 0.0))
        errors.append(abs(-d._mu.max() - exact) / exact)
    orders = np.log2(np.array(errors[:-1]) / np.array(errors[1:]))
    assert errors[-1] < 2e-3 and np.all(orders > 1.8), (errors, orders)


@pytest.mark.parametrize("kinds", [("temperature", "temperature"), ("flux", "temperature"),
                                   ("temperature", "flux")])
def test_stretched_transform_solve_equals_sparse_solve(kinds):
    """The transform + eigen solve of (a - dt K) against a dense solve of the sparse K."""
    g = Grid(10, 8, 1.7, wall_refinement=BETA)
    bc = ThermalBoundaries(kinds[0], 0.3, kinds[1], 1.2)
    d = DiffusionSolver(g, bc)
    K = diffusion_matrix(g, bc)
    T = np.random.default_rng(6).uniform(size=g.cell_shape)
    np.testing.assert_allclose(d.apply(T), (K @ T.ravel()).reshape(g.cell_shape) + d.boundary_term,
                               atol=1e-8)
    rhs = np.random.default_rng(7).normal(size=g.cell_shape)
    direct = np.linalg.solve(1.5 * np.eye(K.shape[0]) - 3e-3 * K.toarray(), rhs.ravel())
    np.testing.assert_allclose(d.solve(1.5, 3e-3, rhs).ravel(), direct, rtol=1e-10, atol=1e-12)


def _random_flow(g, rng):
    """Face velocities of a random streamfunction that vanishes on every wall."""
    psi = rng.normal(size=g.node_shape)
    psi[0] = psi[-1] = 0.0
    psi[:, 0] = psi[:, -1] = 0.0
    return face_velocities(g, psi)


def test_heat_changes_only_by_the_wall_fluxes_on_a_stretched_grid():
    """Divergence theorem: the integral of -div(u T) over the box is 0 (no flow through
    the walls), the integral of lap T the bottom inflow minus the top outflow, for any T
    and any divergence-free flow; cells weigh their own areas dx h_j."""
    g = Grid(9, 11, 1.3, wall_refinement=BETA)
    rng = np.random.default_rng(8)
    T = rng.uniform(size=g.cell_shape)
    u, w = _random_flow(g, rng)
    bc = ThermalBoundaries("temperature", 0.2, "flux", 1.5)
    for limiter in ("van-leer", "upwind"):
        scale = np.abs(advection(g, T, u, w, bc, limiter)).max()
        assert abs(g.integral(advection(g, T, u, w, bc, limiter))) < 1e-12 * scale
    d = DiffusionSolver(g, bc)
    bottom, top = boundary_heat_flux(g, T, bc)
    assert g.integral(d.apply(T)) == pytest.approx(g.dx * (bottom.sum() - top.sum()), rel=1e-10)


def test_stretched_advection_kernel_matches_naive_twin_and_upwind_matrix():
    """The compiled kernel with per-row heights against tests/naive.py (fixed-temperature
    walls, whose ghosts are the same in index space), and the sparse first-order matrix
    of the Newton preconditioner against the kernel's upwind choice."""
    g = Grid(9, 7, 1.3, wall_refinement=BETA)
    rng = np.random.default_rng(4)
    T = rng.uniform(size=g.cell_shape)
    u, w = _random_flow(g, rng)
    bc = ThermalBoundaries("temperature", 0.2, "temperature", 0.9)
    padded = naive.pad(T, 1.0, ("temperature", 0.9), ("temperature", 0.2), False)
    for limiter in kernels.LIMITER_CODES:
        slow = naive.advective_tendency(padded, u, w, g.dx, g.dz_cell, limiter)
        np.testing.assert_allclose(advection(g, T, u, w, bc, limiter), slow, rtol=1e-12,
                                   atol=1e-12)
    np.testing.assert_allclose(-(upwind_matrix(g, u, w) @ T.ravel()).reshape(g.cell_shape),
                               advection(g, T, u, w, bc, "upwind"), atol=1e-10)


def test_cell_to_node_is_exact_for_a_linear_field():
    """Linear interpolation in z between the centres (and linear extrapolation to the
    walls) reproduces T = a + b z exactly at the corners (a hand property of the rule)."""
    g = Grid(6, 9, wall_refinement=BETA)
    T = np.repeat((0.3 + 1.7 * g.z_cell)[:, None], g.nx, axis=1)
    nodes = g.cell_to_node(T)
    np.testing.assert_allclose(nodes, np.repeat((0.3 + 1.7 * g.z_node)[:, None], g.nx + 1, 1),
                               atol=1e-13)


def test_diagnostics_on_a_stretched_grid():
    """Against hand formulas: conduction T = 1 - z has Nu = 1 at both walls (exact for the
    wall flux of a linear profile); the area mean of T = z^2 over cells is the midpoint rule,
    1/3 - sum(h_j^3) / 12 exactly; psi = sin(pi x) sin(pi z) has vrms = pi / sqrt(2)
    (u = pi sin(pi x) cos(pi z), w = -pi cos(pi x) sin(pi z)), second order."""
    from convsim.model import diagnostics as diag
    bc = ThermalBoundaries()
    errors = []
    for n in (16, 32, 64):
        g = Grid(n, n, wall_refinement=BETA)
        X, Z = g.cell_mesh()
        top, bottom = diag.nusselt_numbers(g, 1.0 - Z, bc)
        assert top == pytest.approx(1.0, abs=1e-12) and bottom == pytest.approx(1.0, abs=1e-12)
        midpoint = 1.0 / 3.0 - np.sum(g.dz_cell ** 3) / 12.0
        assert diag.mean_temperature(g, Z ** 2) == pytest.approx(midpoint, abs=1e-14)
        XN, ZN = g.node_mesh()
        vrms = diag.rms_velocity(g, np.sin(np.pi * XN) * np.sin(np.pi * ZN))
        errors.append(abs(vrms / (np.pi / np.sqrt(2.0)) - 1.0))
    orders = np.log2(np.array(errors[:-1]) / np.array(errors[1:]))
    assert errors[-1] < 1e-3 and np.all(orders > 1.8), (errors, orders)


def test_lid_band_means_weigh_the_rows_by_their_heights():
    """T(z) = z^2 on a beta = 2 grid: the row average of z^2 over a row [a, b] is
    (a^2 + a b + b^2) / 3, so the height-weighted mean over whole rows equals the exact
    integral of z^2 over those rows divided by their extent (calculus); a plain mean of the
    rows (the uniform-grid rule) is off by far more."""
    from convsim.model import lid
    from convsim.run.averages import row_heights
    g = Grid(8, 24, 1.0, wall_refinement=2.0)
    a, b = g.z_node[:-1], g.z_node[1:]
    profile = (a * a + a * b + b * b) / 3.0
    rows = (g.z_cell >= lid.INTERIOR_BAND[0]) & (g.z_cell <= lid.INTERIOR_BAND[1])
    lo, hi = a[rows][0], b[rows][-1]
    exact = (hi ** 3 - lo ** 3) / 3.0 / (hi - lo)
    weighted = lid.interior_temperature(g.z_cell, profile, 0.0, row_heights(g))
    assert weighted == pytest.approx(exact, rel=1e-12)
    assert abs(lid.interior_temperature(g.z_cell, profile, 0.0) / exact - 1.0) > 1e-3
    eta = np.exp(-g.z_cell)
    contrast = lid.lid_viscosity_contrast(g.z_cell, eta, 0.0, row_heights(g))
    assert contrast == pytest.approx(eta[-1] / np.average(eta[rows], weights=g.dz_cell[rows]))
    assert row_heights(Grid(8, 24)) is None


def test_info_states_the_thinnest_and_thickest_rows(tmp_path):
    """A run on a beta = 2 grid: `info` gives the row heights of the tanh map (the first
    test's formula) and says the rows are refined; a uniform run's rows are all 1/nz."""
    from convsim import api
    from convsim.config import Config
    from convsim.files.info import describe_run, format_info
    heights = {}
    for beta in (0.0, 2.0):
        cfg = Config().replace(domain__nx=8, domain__nz=10, domain__wall_refinement=beta,
                               stop__max_steps=2, stop__steady=False)
        path = tmp_path / f"beta{beta}.h5"
        api.run(cfg, path)
        info = describe_run(path)
        heights[beta] = (info["grid"]["dz_min"], info["grid"]["dz_max"], format_info(info))
    rows = np.diff(Grid(8, 10, 1.0, wall_refinement=2.0).z_node)
    assert heights[2.0][:2] == pytest.approx((rows.min(), rows.max()), rel=1e-12)
    assert "refined towards the walls" in heights[2.0][2]
    assert heights[0.0][:2] == pytest.approx((0.1, 0.1), rel=1e-12)
    assert "refined" not in heights[0.0][2]
