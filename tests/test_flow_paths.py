"""Flow paths against outside truths: rms velocities, no-slip walls, periodic sides, viscosity
laws in runs, the Newton solver's linearised flow, the continuation of case 1c.

References outside the project:
[MODE] psi = A sin(k x) sin(pi z) (u = dpsi/dz, w = -dpsi/dx): the box mean of u^2 + w^2 is
       A^2 (pi^2 + k^2) / 4, so vrms = (A/2) sqrt(pi^2 + k^2).  Adding B sin(k x) z^2 (1 - z)
       (which has psi_zz != 0 at the top, unlike the free-slip mode) makes the top-wall
       velocity u = -(A pi + B) sin(k x), whose rms over whole periods is
       |A pi + B| / sqrt(2) (calculus).
[C61]  Chandrasekhar, S. (1961), Hydrodynamic and Hydromagnetic Stability, Oxford, ch. II:
       rigid-rigid layer heated from below, Ra_c = 1707.76 at k_c = 3.117 (quoted from
       memory).  A reflecting box of width pi / k_c admits k_c itself.
[SO]   A second-order scheme: the error falls about four times when the cell size halves,
       and (4 f_h - f_2h) / 3 removes the leading term (common practice).
[SYM]  Mirror symmetry: the equations are invariant under x -> -x (with u -> -u), and a
       reflecting side wall is a mirror plane; a periodic box of width 2L whose start is
       symmetric about x = 0 and x = L stays so, and each half is the reflecting box of
       width L (exact, so equal to round-off).
[FD]   A central finite difference (f(x + h v) - f(x - h v)) / 2h approximates the
       directional derivative to O(h^2) (common practice).
"""

import math

import numpy as np
import pytest

from convsim import api
from convsim.analysis.onset_runs import run_bracket
from convsim.config import Config
from convsim.model.diagnostics import rms_velocity, surface_rms_velocity
from convsim.model.energy import ThermalBoundaries
from convsim.model.grid import Grid
from convsim.model.rheology import ViscosityLaw
from convsim.model.timestepping import Model

RA_RIGID, K_RIGID = 1707.76, 3.117          # [C61], quoted from memory


# -- rms velocities of a single Stokes mode --------------------------------------------------
@pytest.mark.parametrize("periodic", [False, True])
def test_vrms_and_surface_vrms_of_a_single_mode(periodic):
    """[MODE], [SO]: on non-square cells (aspect 1.5, nx != nz), both converge to the analytic
    values at second order."""
    A, B, aspect = 3.0, 4.0, 1.5
    k = (2.0 if periodic else 1.0) * math.pi / aspect
    exact_vrms = 0.5 * A * math.sqrt(math.pi ** 2 + k ** 2)
    exact_surface = abs(A * math.pi + B) / math.sqrt(2.0)
    errors = []
    for nz in (12, 24, 48):
        g = Grid(2 * nz, nz, aspect, periodic=periodic)
        XN, ZN = g.node_mesh()
        psi = A * np.sin(k * XN) * np.sin(np.pi * ZN)
        sheared = psi + B * np.sin(k * XN) * ZN ** 2 * (1.0 - ZN)
        errors.append((abs(rms_velocity(g, psi) / exact_vrms - 1.0),
                       abs(surface_rms_velocity(g, sheared) / exact_surface - 1.0)))
    errors = np.array(errors)
    assert np.all(errors[-1] < 2e-3), errors
    orders = np.log2(errors[:-1] / errors[1:])
    assert np.all(orders > 1.8), orders


# -- the Newton solver's linearised flow ---------------------------------------------------------
@pytest.mark.parametrize("walls", ["no-slip", "free-slip"])
def test_linearised_flow_equals_a_finite_difference_of_the_flow(walls):
    """[FD]: d psi / dT along v from Model.linearised_flow against the central difference of
    two full Stokes solves, with temperature-dependent viscosity (contrast 100), no-slip or
    free-slip top and bottom."""
    g = Grid(12, 10, 1.2)
    law = ViscosityLaw("frank-kamenetskii", thermal_contrast=100.0, depth_contrast=3.0)
    m = Model(g, 1.0e4, ThermalBoundaries(), law, top_flow=walls, bottom_flow=walls,
              stokes_solver="superlu")
    X, Z = g.cell_mesh()
    T = 1.0 - Z + 0.2 * np.cos(np.pi * X / 1.2) * np.sin(np.pi * Z)
    v = np.random.default_rng(3).normal(size=g.cell_shape)
    psi, derivative = m.linearised_flow(T)
    np.testing.assert_allclose(psi, m.solve_flow(T)[0], rtol=1e-9, atol=1e-9 * np.abs(psi).max())
    h = 1e-4
    fd = (m.solve_flow(T + h * v)[0] - m.solve_flow(T - h * v)[0]) / (2 * h)
    exact = derivative(v)
    assert np.abs(exact - fd).max() < 1e-5 * np.abs(fd).max()


# -- no-slip convection in runs ------------------------------------------------------------------
def test_rigid_rigid_onset_from_runs_matches_chandrasekhar():
    """[C61], [SO]: growth rates of runs with no-slip top and bottom in a box of width
    pi / k_c, at 0.95 and 1.1 Ra_c, on 24 x 24 and 12 x 12 cells: the extrapolated zero
    crossing lies within 0.3 % of 1707.76 and the error falls at second order; the rates
    follow the eigen-solver's."""
    cfg = Config().replace(domain__aspect=math.pi / K_RIGID, boundaries__top_flow="no-slip",
                           boundaries__bottom_flow="no-slip")
    b = run_bracket(cfg, factors=(0.95, 1.1), grid=(24, 24), richardson=True, jobs=2)
    assert b.eigen_critical_rayleigh == pytest.approx(RA_RIGID, rel=2e-4)
    assert all(s == "end-time" for s in b.run_status)
    fine = b.critical_rayleigh / RA_RIGID - 1.0
    coarse = b.coarse.critical_rayleigh / RA_RIGID - 1.0
    assert abs(fine) < 0.02 and 3.0 < coarse / fine < 5.0
    assert abs(b.extrapolated_rayleigh / RA_RIGID - 1.0) < 3e-3
    scale = K_RIGID ** 2 + math.pi ** 2
    assert np.max(np.abs(b.rates - b.theory_rates)) < 0.02 * scale


# -- periodic sides -----------------------------------------------------------------------------
@pytest.mark.parametrize("law", ["constant", "frank-kamenetskii"])
def test_periodic_box_of_twice_the_width_is_the_reflecting_box_mirrored(law):
    """[SYM]: the same start (cos(pi x / L) sin(pi z)) in a reflecting box of width L and a
    periodic box of width 2L; after 60 steps of real convection the periodic state is the
    reflecting one and its mirror image, to round-off."""
    common = dict(physics__rayleigh=2e4, viscosity__law=law, viscosity__thermal_contrast=10.0,
                  start__amplitude=0.05, stop__steady=False, stop__max_steps=60)
    mirror = api.run(Config().replace(domain__nx=12, domain__nz=12, domain__aspect=1.0, **common))
    wide = api.run(Config().replace(domain__nx=24, domain__nz=12, domain__aspect=2.0,
                                    boundaries__sides="periodic", **common))
    assert mirror.steps == wide.steps == 60
    assert mirror.vrms > 5.0
    T = mirror.temperature
    np.testing.assert_allclose(wide.temperature[:, :12], T, atol=1e-9)
    np.testing.assert_allclose(wide.temperature[:, 12:], T[:, ::-1], atol=1e-9)
    np.testing.assert_allclose(wide.psi[:, :13], mirror.psi, atol=1e-9 * np.abs(mirror.psi).max())
    np.testing.assert_allclose(wide.psi[:, 12:], -mirror.psi[:, ::-1],
                               atol=1e-9 * np.abs(mirror.psi).max())
    assert wide.time == pytest.approx(mirror.time, rel=1e-12)
    for name in ("nusselt_top", "nusselt_bottom", "vrms", "surface_vrms"):
        assert getattr(wide, name) == pytest.approx(getattr(mirror, name), rel=1e-9), name


# -- viscosity laws, depth dependence and cut-offs in runs ----------------------------------------
LAWS = {
    "frank-kamenetskii with depth": (
        dict(viscosity__law="frank-kamenetskii", viscosity__thermal_contrast=10.0,
             viscosity__depth_contrast=3.0),
        lambda T, z: np.exp(-math.log(10.0) * T + math.log(3.0) * (1.0 - z))),
    "arrhenius with depth": (
        dict(viscosity__law="arrhenius", viscosity__activation_energy=3.0,
             viscosity__activation_volume=1.0, viscosity__temperature_offset=1.0),
        lambda T, z: np.exp((3.0 + 1.0 * (1.0 - z)) / (T + 1.0) - 3.0)),
    "cut off above and below": (          # eta from 1 (T = 0) to 0.01 (T = 1), clipped to 0.5, 0.05
        dict(viscosity__law="frank-kamenetskii", viscosity__thermal_contrast=100.0,
             viscosity__minimum=0.05, viscosity__maximum=0.5),
        lambda T, z: np.clip(np.exp(-math.log(100.0) * T), 0.05, 0.5)),
}


@pytest.mark.parametrize("name", list(LAWS))
def test_viscosity_law_in_runs(name):
    """Runs with the law: the viscosity field of the run is the law's formula (module
    docstring of convsim.model.rheology, written out here), and the growth rates of runs
    at 0.9 and 1.5 times the box's critical Ra follow the linear-stability eigen-solver
    (which sees only the conductive viscosity profile) within 2 % of the mode's rate scale,
    their zero crossing within 1 %."""
    overrides, formula = LAWS[name]
    cfg = Config().replace(**overrides)
    b = run_bracket(cfg, factors=(0.9, 1.5), grid=(16, 16), jobs=2)
    assert all(s == "end-time" for s in b.run_status)
    scale = b.wavenumber ** 2 + math.pi ** 2
    assert np.max(np.abs(b.rates - b.theory_rates)) < 0.02 * scale
    assert abs(b.relative_difference) < 0.01
    run = api.run(cfg.replace(domain__nx=12, domain__nz=12, physics__rayleigh=2e4,
                              start__amplitude=0.1, stop__steady=False, stop__max_steps=30))
    X, Z = run.grid.cell_mesh()
    np.testing.assert_allclose(run.viscosity, formula(run.temperature, Z), rtol=1e-12)


# -- continuation (case 1c's stages) --------------------------------------------------------------
def test_continuation_reaches_the_state_of_a_direct_run():
    """Where a direct start and the continuation both reach the one-cell state (Ra = 1e5 on
    16 x 16 cells), the continuation through a converged Ra = 1e4 stage ends in the same
    steady state: the stages change the path, not the answer."""
    base = Config().replace(domain__nx=16, domain__nz=16, physics__rayleigh=1e5,
                            stop__max_steps=5000)
    direct = api.run(base)
    staged = api.run(base.replace(start__continuation=(1e4,)))
    assert direct.status == staged.status == "steady"
    assert set(staged.series["rayleigh"]) == {1e4, 1e5}
    assert staged.nusselt_top == pytest.approx(direct.nusselt_top, rel=1e-6)
    assert staged.vrms == pytest.approx(direct.vrms, rel=1e-6)
    np.testing.assert_allclose(staged.temperature, direct.temperature, atol=1e-5)
