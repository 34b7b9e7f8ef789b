"""Time accuracy of Model.step with steps that change from one step to the next.

References outside the project:
[MMS] Method of manufactured solutions (Roache, 2002, Verification and Validation in
      Computational Science and Engineering): choose T(x, z, t), add the source that makes
      it an exact solution, measure the error.  Here T = (1 - z) + g(t) cos(pi x) sin(pi z)
      with g(t) = 1 + sin(omega t).  The mode is an exact eigenvector of the discrete
      Laplacian with these walls (sampled at the cell centres, odd about fixed-T walls, even
      about insulating sides) with eigenvalue
      lambda_h = -(4/dx^2) sin^2(pi dx/2) - (4/dz^2) sin^2(pi dz/2) (common practice), so
      with the source g'(t) - lambda_h g(t) the space-discrete solution is exact and the
      error left is the time stepper's alone.
[ORD] SBDF2 is second order in time for smoothly varying steps, IMEX Euler first order
      (Ascher, Ruuth and Wetton, 1995, SIAM J. Numer. Anal. 32, 797-823, quoted from
      memory): halving every step divides the error by about 4 and 2.
The source enters as part of the explicit term through a test-only subclass: no hook
in the stepper's hot path.
"""

import numpy as np
import pytest

from convsim.model.energy import ThermalBoundaries
from convsim.model.grid import Grid
from convsim.model.timestepping import Model

OMEGA = 20.0
# step-to-step ratios between 0.8 and 1.25 (the stepper's growth limit)
PATTERN = (1.0, 0.8, 1.0, 0.85, 1.05, 0.9, 1.1)


class ForcedModel(Model):
    """Model plus a known source s(x, z, t) in the explicit part of the step."""

    def __init__(self, *args, source, **kwargs):
        super().__init__(*args, **kwargs)
        self.source, self.now = source, 0.0

    def step(self, state, dt_limit=None):
        self.now = state.time
        return super().step(state, dt_limit)

    def _explicit_term_of(self, f, values, u, w):      # the step's per-field explicit term
        out = super()._explicit_term_of(f, values, u, w)
        return out + self.source(self.now) if f.name == "temperature" else out


def _final_error(scheme, base_dt, steps, n=8):
    g = Grid(n, n)
    X, Z = g.cell_mesh()
    mode = np.cos(np.pi * X) * np.sin(np.pi * Z)
    lam = (-(4 / g.dx ** 2) * np.sin(np.pi * g.dx / 2) ** 2
           - (4 / g.dz ** 2) * np.sin(np.pi * g.dz / 2) ** 2)
    amp = lambda t: 1.0 + np.sin(OMEGA * t)                          # noqa: E731
    source = lambda t: mode * (OMEGA * np.cos(OMEGA * t) - lam * amp(t))   # noqa: E731
    m = ForcedModel(g, 0.0, ThermalBoundaries(), time_scheme=scheme, max_dt=1.0, source=source,
                    time_scale_fraction=0.0)          # the test sets every step itself
    state = m.initial_state((1.0 - Z) + mode * amp(0.0))
    dts = []
    for k in range(steps):
        state, report = m.step(state, base_dt * PATTERN[k % len(PATTERN)])
        dts.append(report.dt)
    ratios = np.array(dts[1:]) / np.array(dts[:-1])
    assert ratios.min() < 0.85 and ratios.max() > 1.2          # the steps really vary
    exact = (1.0 - Z) + mode * amp(state.time)
    return np.abs(state.temperature - exact).max(), state.time


@pytest.mark.parametrize("scheme, order", [("sbdf2", 2.0), ("euler", 1.0)])
def test_order_in_time_with_variable_steps(scheme, order):
    """[MMS], [ORD]: to t ~ 0.54 with 56, 112 and 224 varying steps."""
    runs = [_final_error(scheme, 0.01 / 2 ** i, 56 * 2 ** i) for i in range(3)]
    errors = np.array([e for e, _ in runs])
    assert all(t == pytest.approx(runs[0][1], rel=1e-12) for _, t in runs)   # same end time
    observed = np.log2(errors[:-1] / errors[1:])
    assert np.all(np.abs(observed - order) < 0.2), observed
    if scheme == "sbdf2":
        assert errors[-1] < 1e-2


# ---- time means of a real run when every step is halved ------------------------------------

def _window_mean(t, y, a, b):
    """Trapezoidal mean of y over [a, b], the ends linearly interpolated (numpy only)."""
    keep = (t > a) & (t < b)
    tt = np.concatenate([[a], t[keep], [b]])
    yy = np.concatenate([[np.interp(a, t, y)], y[keep], [np.interp(b, t, y)]])
    return np.trapezoid(yy, tt) / (b - a)


def _transient_means(step_scale):
    """Nu and vrms averaged over t in [0.1, 1.5] of a run at 2 Ra_c (free-free box of aspect
    sqrt 2, 24 x 16) growing from a 1e-5 mode to its steady cell: a time-dependent run whose
    means depend on how well the steps resolve the growth.  Every step limit (Courant number,
    max_dt, time-scale fraction) times step_scale."""
    from convsim.api import run
    from convsim.config import Config
    n = Config().numerics
    cfg = Config().replace(
        domain__aspect=np.sqrt(2.0), domain__nx=24, domain__nz=16,
        physics__rayleigh=2.0 * 27.0 * np.pi**4 / 4.0, start__amplitude=1e-5,
        stop__steady=False, stop__end_time=1.5, numerics__cfl=n.cfl * step_scale,
        numerics__max_dt=n.max_dt * step_scale,
        numerics__time_scale_fraction=n.time_scale_fraction * step_scale)
    s = run(cfg).series
    return np.array([_window_mean(s["series_time"], s[q], 0.1, 1.5)
                     for q in ("nusselt_top", "vrms")])


def test_time_means_do_not_change_when_every_step_is_halved():
    """Issue 10 item 7: at the default step settings, time means change by less than 0.5 %
    (the issue's accuracy figure for transients) when every step is halved.  For a
    second-order integrator [ORD] the change on halving is 3/4 of the default's own
    temporal error.  Measured: Nu 0.14 %, vrms 0.32 %; with the time-scale limit off
    (Courant and max_dt only) 0.73 % and 1.8 %.  Ra_c = 27 pi^4 / 4 (free-free walls,
    Rayleigh 1916 / Chandrasekhar 1961)."""
    default, halved = _transient_means(1.0), _transient_means(0.5)
    assert np.all(np.abs(default / halved - 1.0) < 0.005), default / halved - 1.0
    assert halved[0] > 1.3          # the window holds the growth and the convecting state
