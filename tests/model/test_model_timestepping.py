"""The IMEX step (convsim.model.timestepping): SBDF2 coefficients against the textbook BDF2,
and a diffusing field against its analytic decay."""

import numpy as np
import pytest

from convsim.model.energy import ThermalBoundaries
from convsim.model.fields import dye_field
from convsim.model.grid import Grid
from convsim.model.timestepping import Model, imex_coefficients


def test_sbdf2_with_equal_steps_is_the_textbook_bdf2():
    """Equal steps: (3/2 f^{n+1} - 2 f^n + 1/2 f^{n-1}) / dt = 2 N^n - N^{n-1} + L f^{n+1}
    (Ascher, Ruuth & Wetton 1995, SIAM J. Numer. Anal. 32, the SBDF scheme; quoted from memory)."""
    c = imex_coefficients("sbdf2", 0.1, 0.1, True)
    assert c[:5] == pytest.approx((1.5, 2.0, 0.5, 2.0, 1.0), abs=1e-15)
    for r in (0.3, 1.0, 1.25):
        c = imex_coefficients("sbdf2", r, 1.0, True)
        assert abs(c.a0 - c.a1 + c.a2) < 1e-15 and abs(c.b1 - c.b2 - 1.0) < 1e-15
    assert imex_coefficients("sbdf2", 0.1, 0.0, False)[:5] == (1.0, 1.0, 0.0, 1.0, 0.0)
    assert imex_coefficients("euler", 0.1, 0.1, True)[:5] == (1.0, 1.0, 0.0, 1.0, 0.0)


def test_a_diffusing_field_decays_at_the_analytic_rate():
    """No flow (uniform temperature), a field f = cos(pi x) with diffusivity kappa between
    insulating walls: df/dt = kappa lap f gives f(t) = exp(-kappa pi^2 t) cos(pi x)
    (separation of variables); SBDF2 with dt = 1e-3 is second order in time."""
    kappa, g = 0.5, Grid(32, 8)
    start = lambda grid: np.cos(np.pi * grid.cell_mesh()[0])   # noqa: E731
    m = Model(g, 1.0, ThermalBoundaries("temperature", 0.0, "temperature", 0.0), max_dt=1e-3,
              fields=(dye_field(kappa, start),))
    state = m.initial_state(np.zeros(g.cell_shape))
    for _ in range(200):
        state, _ = m.step(state)
    assert np.abs(state.psi).max() == 0.0
    # the discrete eigenvalue of the cosine mode (lam = -(2/dx sin(pi dx/2))^2) in time; the
    # first step (IMEX Euler) leaves its local error (kappa lam dt)^2 / 2 ~ 3e-6
    lam = (2.0 / g.dx * np.sin(np.pi * g.dx / 2.0)) ** 2
    exact = np.exp(-kappa * lam * state.time) * start(g)
    np.testing.assert_allclose(state.fields["dye"], exact, atol=1e-5)
    continuum = np.exp(-kappa * np.pi ** 2 * state.time) * start(g)
    np.testing.assert_allclose(state.fields["dye"], continuum, atol=2e-3)


def test_the_flow_solve_starts_from_psi_extrapolated_in_time():
    """psi(t) = a + b t + c t^2 is continued exactly by the quadratic extrapolation through three
    unequal steps (Lagrange interpolation is exact on polynomials of its degree); with two
    states the linear one continues a + b t exactly; with no flow history the guess is psi^n."""
    from convsim.model.state import ModelState
    from convsim.model.timestepping import flow_guess
    rng = np.random.default_rng(2)
    a, b, c = (rng.standard_normal((5, 6)) for _ in range(3))
    t_first, t_old, t_now, dt = 0.27, 0.30, 0.32, 0.015

    def psi(t, curved=True):
        return a + b * t + (c * t * t if curved else 0.0)

    state = ModelState(time=t_now, step=3, fields={}, psi=psi(t_now), previous_dt=t_now - t_old,
                       previous_psi=psi(t_old), earlier_psi=psi(t_first),
                       earlier_dt=t_old - t_first)
    np.testing.assert_allclose(flow_guess(state, dt), psi(t_now + dt), atol=1e-12)
    line = psi(t_now) + dt / (t_now - t_old) * (psi(t_now) - psi(t_old))   # order 1 asked for
    np.testing.assert_allclose(flow_guess(state, dt, order=1), line, atol=1e-13)
    two = ModelState(time=t_now, step=2, fields={}, psi=psi(t_now, False),
                     previous_dt=t_now - t_old, previous_psi=psi(t_old, False))
    np.testing.assert_allclose(flow_guess(two, dt), psi(t_now + dt, False), atol=1e-13)
    fresh = ModelState(time=t_now, step=0, fields={}, psi=a)
    assert flow_guess(fresh, dt) is a


def test_a_time_dependent_run_solves_the_flow_to_the_looser_automatic_tolerance():
    """stokes_tolerance = 0 (automatic): 1e-10 for a run that stops at steady state, 1e-6 for one
    that follows the flow in time, which also stops each solve at an estimated flow error of
    1e-5 in the dissipation norm (flow_error_tolerance = 0: automatic).  Every step meets one of
    its targets, with fewer CG iterations than at 1e-10 (36 against 81), and 15 steps give the
    same Nu and vrms as at 1e-10 to 1e-7 (measured: 6e-11 and 4.9e-9; the solve error stays orders below
    the discretisation error, ~1e-2 on this grid: common practice)."""
    from convsim.config import Config
    from convsim.run.build import build_model, flow_error_tolerance, stokes_tolerance
    base = Config().replace(domain__nx=24, domain__nz=24, physics__rayleigh=1e3,
                            viscosity__law="frank-kamenetskii", viscosity__thermal_contrast=1e4,
                            start__kind="one-cell")
    assert stokes_tolerance(base) == 1e-10 and flow_error_tolerance(base) == 0.0
    timed = base.replace(stop__steady=False)
    assert stokes_tolerance(timed) == 1e-6 and flow_error_tolerance(timed) == 1e-5
    results = {}
    tight_cfg = timed.replace(numerics__stokes_tolerance=1e-10,
                              numerics__flow_error_tolerance=1e-15)
    for name, cfg in (("loose", timed), ("tight", tight_cfg)):
        model = build_model(cfg)
        X, Z = model.grid.cell_mesh()
        state = model.initial_state(1.0 - Z + 0.05 * np.cos(np.pi * X) * np.sin(np.pi * Z))
        iterations = 0
        for _ in range(15):
            state, report = model.step(state)
            assert (report.stokes_residual <= stokes_tolerance(cfg)
                    or 0.0 < report.stokes_flow_error <= flow_error_tolerance(cfg))
            iterations += report.stokes_iterations
        results[name] = report, iterations
    (loose, loose_iterations), (tight, tight_iterations) = results["loose"], results["tight"]
    assert loose_iterations < tight_iterations      # the looser target is what is solved to
    assert loose.nusselt_top == pytest.approx(tight.nusselt_top, rel=1e-7)
    assert loose.vrms == pytest.approx(tight.vrms, rel=1e-7)
