"""Heat paths against outside truths: fixed-flux walls, internal heating, the heat budget.

References outside the project:
[CP]  Steady conduction with uniform heating H in a layer 0 <= z <= 1: T'' = -H, so
      T(z) = a + b z - H z^2 / 2, with a, b from the wall conditions (fixed T, or fixed
      upward flux q = -T'); the upward heat flow through the top exceeds that through the
      bottom by H per unit width (integrate T'' = -H over the depth).  Textbook calculus.
[SO]  A second-order scheme: the error falls about four times when the cell size halves
      (common practice).
[BDF] Variable-step second-order backward differentiation with step ratio r = dt_n/dt_{n-1}:
      (1+2r)/(1+r) y^{n+1} - (1+r) y^n + r^2/(1+r) y^{n-1} = dt_n f^{n+1} (textbook form,
      e.g. Hairer, Norsett and Wanner, Solving ODEs I, quoted from memory); applied to the
      heat content Q = sum T dx dz of a conservative scheme, f is the net heat flow in.
"""

import numpy as np
import pytest

from convsim import api
from convsim.config import Config
from convsim.model.diagnostics import corner_gradients, nusselt_numbers, wall_temperatures
from convsim.model.energy import ThermalBoundaries, pad_temperature
from convsim.model.grid import Grid
from convsim.model.timestepping import Model


def conductive(z, bottom, top, H):
    """[CP] T(z) = a + b z - H z^2/2; bottom/top = ('temperature'|'flux', value)."""
    if bottom[0] == "temperature" and top[0] == "temperature":
        a = bottom[1]
        b = top[1] - a + H / 2.0
    elif bottom[0] == "flux":                 # -T'(0) = q  ->  b = -q; T(1) = top value
        b = -bottom[1]
        a = top[1] - b + H / 2.0
    else:                                     # -T'(1) = q  ->  b - H = -q; T(0) = bottom value
        a = bottom[1]
        b = H - top[1]
    return a + b * z - H * z * z / 2.0, -b, -(b - H)      # profile, bottom flux, top flux


# -- pure diagnostics on exact profiles --------------------------------------------------------
def test_wall_temperature_at_flux_walls_is_exact_for_a_quadratic_profile():
    """A quadratic through the two wall cells with the imposed slope is exact for [CP]."""
    g = Grid(5, 10)
    X, Z = g.cell_mesh()
    a, b, H = 0.7, 0.4, 3.0
    T = a + b * Z - H * Z * Z / 2.0
    bc = ThermalBoundaries("flux", -(b - H), "flux", -b)
    bottom, top = wall_temperatures(g, T, bc)
    np.testing.assert_allclose(bottom, a, atol=1e-12)
    np.testing.assert_allclose(top, a + b - H / 2.0, atol=1e-12)


def test_corner_gradients_are_exact_for_a_wall_flux_with_zero_slope_at_the_side():
    """q1..q4 extrapolate the wall flux to the side walls, where an insulating side forces
    zero slope: a flux quadratic in x with zero slope at the side is recovered exactly
    (calculus).  Fields are built so that the scheme's own wall flux (T_1 - T_w)/(dz/2) is
    f(x) = c + d (x - x_side)^2 at the top and bottom."""
    g = Grid(10, 8, 1.4)
    bc = ThermalBoundaries("temperature", 0.0, "temperature", 1.0)
    x = g.x_cell
    for side, index in ((0.0, (0, 3)), (g.aspect, (1, 2))):     # q1, q4 at x = 0; q2, q3 at x = A
        c_top, c_bottom, d = 2.5, 1.7, 0.8
        T = np.full(g.cell_shape, 0.5)
        T[-1] = 0.0 + 0.5 * g.dz * (c_top + d * (x - side) ** 2)           # top: (T_N - 0)/(dz/2)
        T[0] = 1.0 - 0.5 * g.dz * (c_bottom - d * (x - side) ** 2)        # bottom: (1 - T_1)/(dz/2)
        q = corner_gradients(g, T, bc)
        assert q[index[0]] == pytest.approx(c_top, rel=1e-12)
        assert q[index[1]] == pytest.approx(c_bottom, rel=1e-12)


@pytest.mark.parametrize("kind", ["temperature", "flux"])
def test_ghost_cells_continue_a_linear_profile(kind):
    """Two ghost layers at each wall: the linear T(z) = 0.8 - 0.6 z continued exactly (both
    the odd reflection about a wall temperature and the even one plus the imposed gradient
    must reproduce a straight line); sides mirror (reflecting) or wrap (periodic)."""
    for periodic in (False, True):
        g = Grid(6, 5, periodic=periodic)
        X, Z = g.cell_mesh()
        slope = -0.6
        amp = 0.01 if kind == "flux" else 0.0     # a fixed-T wall allows no variation along it
        T = 0.8 + slope * Z + amp * np.cos(2 * np.pi * X / g.aspect)
        value = {"temperature": (0.8 + slope, 0.8), "flux": (-slope, -slope)}[kind]
        bc = ThermalBoundaries(kind, value[0], kind, value[1])
        p = pad_temperature(g, T, bc)
        assert p.shape == (g.nz + 4, g.nx + 4)
        np.testing.assert_array_equal(p[2:-2, 2:-2], T)
        zg = (np.array([-2, -1, g.nz, g.nz + 1]) + 0.5) * g.dz
        expect = 0.8 + slope * zg[:, None] + amp * np.cos(2 * np.pi * g.x_cell / g.aspect)[None, :]
        np.testing.assert_allclose(p[[0, 1, -2, -1], 2:-2], expect, atol=1e-13)
        inner = p[:, 2:-2]
        if periodic:
            np.testing.assert_array_equal(p[:, :2], inner[:, -2:])
            np.testing.assert_array_equal(p[:, -2:], inner[:, :2])
        else:
            np.testing.assert_array_equal(p[:, :2], inner[:, 1::-1])
            np.testing.assert_array_equal(p[:, -2:], inner[:, :-3:-1])


# -- conductive runs against [CP] --------------------------------------------------------------
CASES = {
    "heated, both walls fixed T": (("temperature", 1.0), ("temperature", 0.0), 1.0),
    "flux bottom, heated": (("flux", 1.5), ("temperature", 0.0), 2.0),
    "flux top, heated": (("temperature", 1.0), ("flux", 2.5), 1.0),
}


def _conductive_run(bottom, top, H, nz):
    cfg = Config().replace(
        domain__nx=4, domain__nz=nz, physics__rayleigh=10.0, physics__internal_heating=H,
        boundaries__bottom_heat=bottom[0], boundaries__bottom_value=bottom[1],
        boundaries__top_heat=top[0], boundaries__top_value=top[1],
        start__perturbation="none", stop__steady_tolerance=1e-10, stop__max_steps=3000)
    result = api.run(cfg)
    assert result.status == "steady", result.message
    return result


@pytest.mark.parametrize("name", list(CASES))
def test_conductive_run_reaches_the_analytic_profile_and_heat_flows(name):
    """[CP], [SO]: the steady run's profile, wall temperatures, wall heat flows and Nusselt
    numbers against the analytic conduction solution, converging at second order."""
    bottom, top, H = CASES[name]
    errors = []
    for nz in (8, 16):
        r = _conductive_run(bottom, top, H, nz)
        z = r.grid.z_cell
        exact, q_bottom, q_top = conductive(z, bottom, top, H)
        T0, _, _ = conductive(np.array([0.0, 1.0]), bottom, top, H)
        contrast = T0[0] - T0[1]
        assert np.ptp(r.temperature, axis=1).max() < 1e-12       # no flow: layered
        profile_error = np.abs(r.temperature.mean(axis=1) - exact).max()
        nu_error = max(abs(r.nusselt_top - q_top / contrast),
                       abs(r.nusselt_bottom - q_bottom / contrast))
        errors.append((profile_error, nu_error))
        # heat flows of the run: Nu times its own wall contrast
        bc = ThermalBoundaries(top[0], top[1], bottom[0], bottom[1])
        tb, tt = wall_temperatures(r.grid, r.temperature, bc)
        run_contrast = float(tb.mean() - tt.mean())
        flow_top, flow_bottom = r.nusselt_top * run_contrast, r.nusselt_bottom * run_contrast
        assert flow_top - flow_bottom == pytest.approx(H, abs=1e-8)      # [CP] steady identity
        if bottom[0] == "flux":
            assert flow_bottom == pytest.approx(bottom[1], rel=1e-12)
        if top[0] == "flux":
            assert flow_top == pytest.approx(top[1], rel=1e-12)
    (p8, n8), (p16, n16) = errors
    assert p16 < 2e-3 and p16 < p8 / 3.5                      # [SO]
    assert n16 < 2e-3 and (n16 < n8 / 3.5 or n8 < 1e-9)


def test_a_subcritical_run_decays_to_the_conductive_state():
    """Ra = 100, below the free-free onset 657.5 (Chandrasekhar 1961, quoted from memory): the
    start's perturbation decays and the run settles on [CP] T = 1 - z, at rest (a layer at
    rest must not stall the time step)."""
    r = api.run(Config().replace(domain__nx=16, domain__nz=16, physics__rayleigh=100.0,
                                 stop__max_steps=3000))
    assert r.status == "steady", r.message
    assert r.vrms < 1e-8
    np.testing.assert_allclose(r.temperature, 1.0 - r.grid.cell_mesh()[1], atol=1e-6)


def test_convecting_run_with_heating_and_a_flux_wall_balances_its_heat_flows():
    """[CP] at a convecting steady state: top outflow = bottom inflow + H (per unit width),
    with the bottom inflow equal to the imposed flux; and the bottom is hotter than the top."""
    H, q = 2.0, 1.0
    cfg = Config().replace(
        domain__nx=16, domain__nz=16, physics__rayleigh=2e4, physics__internal_heating=H,
        boundaries__bottom_heat="flux", boundaries__bottom_value=q, stop__max_steps=4000)
    r = api.run(cfg)
    assert r.status == "steady", r.message
    assert r.vrms > 5.0                                         # it convects
    bc = ThermalBoundaries("temperature", 0.0, "flux", q)
    tb, tt = wall_temperatures(r.grid, r.temperature, bc)
    contrast = float(tb.mean() - tt.mean())
    assert contrast > 0
    assert r.nusselt_bottom * contrast == pytest.approx(q, rel=1e-10)
    assert r.nusselt_top * contrast == pytest.approx(q + H, rel=1e-5)
    assert (r.nusselt_top, r.nusselt_bottom) == pytest.approx(
        nusselt_numbers(r.grid, r.temperature, bc))


# -- the heat budget of single steps, from the fields alone ------------------------------------
def _heat_and_net_inflow(g, T, bc, H):
    """Q = sum T dx dz and the net heat flow in, with wall fluxes from the two-point
    difference between the wall cell and the wall (the finite-volume flux; [CP] at h -> 0)."""
    Q = T.sum() * g.dx * g.dz
    q_bottom = (bc.bottom_value if bc.bottom_heat == "flux"
                else 2.0 * (bc.bottom_value - T[0]) / g.dz)          # upward flux in at z = 0
    q_top = (bc.top_value if bc.top_heat == "flux"
             else 2.0 * (T[-1] - bc.top_value) / g.dz)               # upward flux out at z = 1
    return Q, float(np.sum(q_bottom * np.ones(g.nx)) * g.dx - np.sum(q_top * np.ones(g.nx)) * g.dx
                    + H * g.area)


@pytest.mark.parametrize("scheme", ["euler", "sbdf2"])
def test_heat_content_changes_by_the_wall_flows_and_heating(scheme):
    """[BDF]: step by step, the change of the heat content of the fields equals dt times the
    net heat flow in at the new time (wall fluxes from the fields, heating), with the textbook
    coefficients for the reported steps; the steps vary (Courant-limited, growing flow)."""
    bc = ThermalBoundaries("temperature", 0.0, "flux", 1.0)
    H = 3.0
    m = Model(Grid(16, 12, 1.3), 2.0e4, bc, internal_heating=H, time_scheme=scheme, max_dt=2e-3)
    X, Z = m.grid.cell_mesh()
    state = m.initial_state(1.0 - Z + 0.05 * np.cos(np.pi * X / 1.3) * np.sin(np.pi * Z))
    history = [(_heat_and_net_inflow(m.grid, state.temperature, bc, H), None)]
    for _ in range(80):
        state, report = m.step(state)
        history.append((_heat_and_net_inflow(m.grid, state.temperature, bc, H), report.dt))
    dts = np.array([dt for _, dt in history[1:]])
    assert dts.max() / dts.min() > 2.0 and report.vrms > 5.0          # variable steps, real flow
    worst = 0.0
    for n in range(1, len(history)):
        (Q1, inflow), dt = history[n]
        Q0 = history[n - 1][0][0]
        if scheme == "sbdf2" and n >= 2:
            r = dt / history[n - 1][1]
            Qm = history[n - 2][0][0]
            change = (1 + 2 * r) / (1 + r) * Q1 - (1 + r) * Q0 + r * r / (1 + r) * Qm
        else:                                   # IMEX Euler (also the first SBDF2 step)
            change = Q1 - Q0
        worst = max(worst, abs(change - dt * inflow) / (dt * (abs(inflow) + H * m.grid.area)))
    assert worst < 1e-9
