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
