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
