"""The time-step size: the Courant limit and the flow's own time scale.

One rule, ``StepSizeRule.choose``, gives the step dt_n of the IMEX update from the
state at t_n.  It is the smallest of

1. the Courant limit ``cfl / (max|u|/dx + max|w|/dz)`` (stability of the explicit
   advection);
2. ``max_dt``;
3. a growth of at most ``GROWTH_LIMIT`` over the previous step (variable-step
   SBDF2 stays zero-stable for step ratios below 1 + sqrt(2));
4. the time-scale limit ``time_scale_fraction * tau`` with

       tau = min(tau_A, 1 / pi^2),   tau_A = dt_{n-1} ||A^n||_2 / ||A^n - A^{n-1}||_2,

   tau_A the time scale on which the explicit (advective) tendency A = -div(u T)
   changes, and 1/pi^2 (d^2/kappa) the conductive time of the layer's gravest mode,
   on which conductive transients and slowly growing or decaying modes evolve.
   SBDF2 extrapolates A linearly, (1 + w) A^n - w A^{n-1}; the relative error of that
   extrapolation is about (dt / tau_A)^2, and the growth rate s of a linear mode
   (A ~ e^{s t}, tau_A = 1/|s|) comes out with a relative error of the same order.
   The default fraction 0.04 keeps growth rates within 0.3 % of the eigen-solver's
   (measured: DEVELOPERS.md, "Time-step control").  Near a steady state A stops
   changing, tau_A grows without bound, and a vigorous flow keeps its Courant step.
   The limit applies from the second step on (it needs A^{n-1}).

The rule reads only the state (the current and previous tendencies and the previous
step), so a restarted run picks the same steps bit for bit.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["StepSizeRule", "GROWTH_LIMIT", "courant_limit", "time_scale", "CONDUCTIVE_TIME"]

GROWTH_LIMIT = 1.25
#: d^2/(pi^2 kappa): the conductive time scale of the layer's gravest mode.
CONDUCTIVE_TIME = 1.0 / math.pi**2
#: rms of an advective tendency at round-off level (temperature contrast per d^2/kappa): a
#: layer at rest.  Its noise changes by its own size from step to step, which would read as
#: tau ~ dt and shrink dt geometrically to zero (seen: a subcritical run at Ra = 100).
AT_REST = 1.0e-12


def courant_limit(u: np.ndarray, w: np.ndarray, dx: float, dz: float, cfl: float) -> float:
    """cfl / (max|u|/dx + max|w|/dz); inf for a fluid at rest.

    Parameters
    ----------
    u, w : ndarray
        Face velocities (kappa/d).
    dx : float
        Cell width (d).
    dz : float or ndarray of shape (nz,)
        Cell height, or the height of each cell row (a stretched grid): then |w| on a
        horizontal face counts against the thinner of the two cells it joins.
    cfl : float
        Courant number.
    """
    if np.ndim(dz) == 0:
        rate = float(np.abs(u).max()) / dx + float(np.abs(w).max()) / dz
    else:
        h = np.asarray(dz, dtype=float)
        face = np.concatenate([h[:1], np.minimum(h[1:], h[:-1]), h[-1:]])
        rate = float(np.abs(u).max()) / dx + float((np.abs(w) / face[:, None]).max())
    return math.inf if rate == 0.0 else cfl / rate


def time_scale(advection_now: np.ndarray, advection_before: np.ndarray, dt_before: float) -> float:
    """tau = dt_{n-1} ||A^n|| / ||A^n - A^{n-1}|| (2-norms over the cells; d^2/kappa).

    inf when A did not change (steady), or is round-off (rms below ``AT_REST``: at rest).
    """
    change = float(np.linalg.norm(advection_now - advection_before))
    if change == 0.0 or not math.isfinite(change):
        return math.inf
    if float(np.sqrt(np.mean(np.square(advection_now)))) <= AT_REST:
        return math.inf
    return dt_before * float(np.linalg.norm(advection_now)) / change


@dataclass(frozen=True)
class StepSizeRule:
    """How the time step is chosen (plain numbers; see the module docstring).

    Parameters
    ----------
    cfl : float
        Courant number.
    max_dt : float
        Largest step (d^2/kappa).
    time_scale_fraction : float
        dt <= this fraction of the flow's time scale tau; 0 switches the limit off.
    growth_limit : float
        dt_n <= growth_limit dt_{n-1}.
    """

    cfl: float = 0.4
    max_dt: float = 1.0e-2
    time_scale_fraction: float = 0.04
    growth_limit: float = GROWTH_LIMIT

    def courant_dt(self, u: np.ndarray, w: np.ndarray, dx: float, dz) -> float:
        """The Courant limit, capped by max_dt."""
        return min(self.max_dt, courant_limit(u, w, dx, dz, self.cfl))

    def choose(self, u, w, dx: float, dz, advection_now=None, advection_before=None,
               dt_before: float = 0.0) -> float:
        """dt_n from the velocities and tendencies at t_n and t_{n-1} (see the module docstring).

        Parameters
        ----------
        u, w : ndarray
            Face velocities of the state at t_n.
        dx, dz : cell width and height (``courant_limit``: dz may be the row heights)
        advection_now, advection_before : ndarray or None
            A^n and A^{n-1} (cells); without A^{n-1} (first step) no time-scale limit.
        dt_before : float
            dt_{n-1}; 0 on the first step.
        """
        dt = self.courant_dt(u, w, dx, dz)
        if dt_before > 0.0:
            dt = min(dt, self.growth_limit * dt_before)
            if self.time_scale_fraction > 0.0 and advection_before is not None:
                tau = min(time_scale(advection_now, advection_before, dt_before),
                          CONDUCTIVE_TIME)
                dt = min(dt, self.time_scale_fraction * tau)
        return dt
