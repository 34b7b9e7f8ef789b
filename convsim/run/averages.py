"""Time means of a run: what each step records, and what the run reports at its end.

Each step offers one row to a bounded ``SeriesBuffer`` (``convsim.run.statistics``):
the time, the scalar ``QUANTITIES`` and the horizontally averaged temperature
and viscosity profiles.  From the buffer:

- the spin-up ends at the latest MSER truncation of Nu top, Nu bottom and vrms,
  and the series counts as settled when those and the heat content (mean
  temperature) pass the drift test (``statistics.spin_up_time``; the heat content
  weighed against the requested precision, below); every quantity is averaged from that time on
  (``from_time``), its time mean weighted by the step lengths and its 95 %
  half-width ``ci95`` from the integrated autocorrelation time;
- ``settled`` says how the run ended: ``steady`` (the steady-state rule fired:
  the final state is the answer, ci95 = 0), ``statistically-steady`` (spin-up
  over, no drift in Nu, vrms and the heat content, the Nu intervals reliable:
  the window spans at least ``statistics.MIN_TAUS`` autocorrelation times, and
  the heat balance below holds within the intervals), or ``unfinished``;
- the heat balance of the means: with fixed wall temperatures (contrast dT = 1
  nondimensional), the time mean of the energy equation over the window gives

      <Nu_top> - <Nu_bottom> - H / dT = -(E(t_1) - E(t_0)) / ((t_1 - t_0) A dT)

  (E the heat content, A the box width): the difference of the means minus H
  is the (vanishing) rate of heat storage, so at statistical steady state
  <Nu_top> = <Nu_bottom> + H, within their intervals.

The interval of a wall's Nu through the heat balance (``balanced_walls``): the two walls
see the same heat flow but not alike.  Below a stagnant lid the top Nu is the conduction
through the lid, which filters the convection: smooth, with an autocorrelation time tens of
times the bottom's (measured, 64 x 32 cells, aspect 2, contrast 1e5, Ra_bottom 1e7: 0.02
against 0.001, DEVELOPERS.md "Time-dependent stagnant lid"), so its own interval needs a
window tens of times longer to be reliable.  At statistical steady state the heat content
is bounded, so the long-run means obey mu_top = mu_bottom + H / dT exactly, and for the
window means

    |<Nu_top> - mu_top| <= |<Nu_top> - <Nu_bottom> - H / dT| + |<Nu_bottom> - mu_bottom|

(triangle inequality): with probability at least 95 % the top mean lies within
|gap| + ci95_bottom of its long-run value (and the same with the walls exchanged).  Each
wall's interval comes from the better resolved of the two series, the one with the shorter
autocorrelation time (more independent samples in the window): its own, or the other's
through the balance (``Estimate.interval`` = "heat-balance").  Choosing by tau, not by the
width, matters: on a window of a few tau the autocorrelation time of a slow series is
underestimated (AR(1) with tau 399 over 2000 samples: median estimate 124, now and then
low enough to pass as reliable) and its own interval too narrow (it covered the true mean
in 70 % of 400 seeds), while the bound through the fast wall covered it in 98 %
(tests/test_statistics.py).  The heat balance then holds by construction;
the precision rule, asking the half-width |gap| + ci95 to be small, bounds the gap itself.

The drift of the heat content weighed against the precision (``storage_allowance``).  The
heat content creeps for a long time after Nu and vrms have settled (64 x 32 cells, aspect 2,
contrast 1e5, Ra_bottom 1e7: the mean temperature rose 0.3 % over t 0.68..1.2 while the
bottom Nu fluctuated by 2.6 %), and Geweke's test, which asks for no drift at all, then calls
the run unsettled however long it runs.  What a creep of the heat content does to the Nu
means is the storage term of the balance above: with the mean temperature <T> changing at
rate r (E = A <T>),

    <Nu_top> - <Nu_bottom> - H / dT = -r / dT,

so a creep at |r| <= s p Nu_min dT moves the gap between the wall means by at most s p
relative, p = ``stop.mean_precision``, Nu_min the smaller |time mean| of the two walls over
the record's second half, s = ``DRIFT_SHARE`` = 1/2: the storage may take half of the
requested half-width, the other half is left to the sampling error.  The heat-content
column then passes the drift test while its creep cannot be told from one of that rate
(``statistics.spin_up_time(drift_rates=)``, eq. 2a there) and takes no part in the MSER cut;
Nu and vrms keep the strict test.  Without a requested precision (p = 0) or without a
fixed wall contrast (a fixed-flux wall: no Nu scale of the storage) the allowance is 0 and
the test is Geweke's, as before.  The precision rule's own half-width through the balance
(|gap| + ci95) still counts the gap the creep makes.

The mean-precision stop rule (``precision_met``) asks for a statistically
steady series and both Nu means known to a relative half-width of ``stop.mean_precision``; the
rule (``run.stops.MeanPrecision``) asks every 100 steps, so that it costs
nothing per step and a restart takes the same decisions.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from convsim.model import diagnostics as diag
from convsim.model import lid
from convsim.run import statistics as st

__all__ = ["RunAverages", "QUANTITIES", "SETTLED_WORDS", "step_quantities", "balanced_walls",
           "run_statistics", "lid_report", "heat_balance", "finish_statistics", "wall_contrast",
           "storage_allowance", "DRIFT_SHARE"]

#: scalar quantities averaged over time, with their long names (units: see README)
QUANTITIES = {
    "nusselt_top": "Nusselt number at the top",
    "nusselt_bottom": "Nusselt number at the bottom",
    "vrms": "rms velocity of the layer, kappa/d",
    "surface_vrms": "rms horizontal velocity at the surface, kappa/d",
    "mean_temperature": "mean temperature of the layer (its heat content), dT",
    "interior_temperature": "interior temperature T_i, dT",
    "lid_thickness": "lid thickness (velocity tangent), d",
}
SPIN_UP_COLUMNS = ("nusselt_top", "nusselt_bottom", "vrms", "mean_temperature")
WALLS = ("nusselt_top", "nusselt_bottom")
SETTLED_WORDS = ("steady", "statistically-steady", "unfinished")
DRIFT_SHARE = 0.5    # share of the requested half-width the heat-content creep may take
CAPACITY = 2048


def row_heights(grid):
    """The row heights of a stretched grid, None for equal rows (the lid means weigh rows)."""
    return grid.dz_cell if grid.stretched else None


def step_quantities(grid, temperature, psi, eta_cells, report) -> dict:
    """The scalar QUANTITIES and the two profiles of one state (pure function)."""
    u_profile = lid.horizontal_velocity_profile(grid, psi)
    z = grid.z_cell
    thickness = lid.lid_thickness(z, u_profile)
    t_profile = diag.horizontal_mean(temperature)
    return dict(nusselt_top=report.nusselt_top, nusselt_bottom=report.nusselt_bottom,
                vrms=report.vrms, surface_vrms=report.surface_vrms,
                mean_temperature=report.mean_temperature,
                interior_temperature=lid.interior_temperature(z, t_profile, thickness,
                                                              row_heights(grid)),
                lid_thickness=thickness, temperature_profile=t_profile,
                viscosity_profile=diag.horizontal_mean(eta_cells))


def balanced_walls(est: dict, heating: float, contrast: float) -> dict:
    """The estimates with a wall's Nu interval replaced by the heat-balance one, |gap| + the
    other wall's ci95, where the other wall's series is the better resolved: reliable, and
    its own is not or has the longer autocorrelation time (module docstring).

    ``est``: {quantity: ``statistics.Estimate``} over one window; heating H and wall contrast
    dT (NaN or 0: fixed flux, no balance: ``est`` returned as it is).
    """
    if not (math.isfinite(contrast) and contrast != 0.0 and all(w in est for w in WALLS)):
        return est
    top, bottom = est["nusselt_top"], est["nusselt_bottom"]
    gap = abs(top.mean - bottom.mean - heating / contrast)
    out = dict(est)
    for name, other in (("nusselt_top", bottom), ("nusselt_bottom", top)):
        own = est[name]
        if other.reliable and (not own.reliable or other.tau_time < own.tau_time) \
                and math.isfinite(gap):
            out[name] = replace(own, ci95=gap + other.ci95, reliable=True,
                                interval="heat-balance")
    return out


def storage_allowance(nu_top, nu_bottom, precision: float, contrast: float) -> float:
    """The rate |d<T>/dt| of the mean temperature (dT per d^2/kappa) that the drift test lets
    pass: DRIFT_SHARE p Nu_min dT (module docstring), Nu_min the smaller |mean| of the two
    wall series over their second half; 0 without a precision or a fixed wall contrast."""
    if not (precision > 0.0 and math.isfinite(contrast) and contrast != 0.0):
        return 0.0
    half = len(nu_top) // 2
    nu_min = min(abs(float(np.mean(nu_top[half:]))), abs(float(np.mean(nu_bottom[half:]))))
    return DRIFT_SHARE * precision * nu_min * abs(contrast) if math.isfinite(nu_min) else 0.0


class RunAverages:
    """Records a run's quantities every step and turns them into time means.

    Parameters
    ----------
    nz : int
        Cells through the depth (length of the profiles).
    heating, contrast : float
        Internal heating H and wall temperature contrast dT (NaN: fixed flux, no balance
        of the means), for the heat balance of the means.
    precision : float
        The requested relative half-width of the Nu means (``stop.mean_precision``; 0: none),
        against which the drift of the heat content is weighed (module docstring).
    """

    def __init__(self, nz: int, heating: float = 0.0, contrast: float = 1.0,
                 capacity: int = CAPACITY, precision: float = 0.0):
        self.nz = int(nz)
        self.heating, self.contrast = float(heating), float(contrast)
        self.precision = float(precision)
        self.names = tuple(QUANTITIES)
        self.buffer = st.SeriesBuffer(1 + len(self.names) + 2 * self.nz, capacity)

    # -- recording -------------------------------------------------------------------------------
    def record(self, time: float, quantities) -> None:
        """Offer one step; ``quantities()`` (see ``step_quantities``) is called only when the
        thinned buffer keeps the row."""
        if not self.buffer.wants_next():
            self.buffer.skip()
            return
        q = quantities()
        row = np.concatenate([[time], [q[n] for n in self.names],
                              q["temperature_profile"], q["viscosity_profile"]])
        self.buffer.add(row)

    def clear(self) -> None:
        """Forget everything (a new continuation stage starts)."""
        self.buffer.clear()

    def restart_state(self) -> dict:
        """Plain data for the restart group (arrays and numbers)."""
        s = self.buffer.state()
        return dict(averages_rows=s["rows"], averages_stride=s["stride"],
                    averages_count=s["count"], averages_capacity=s["capacity"])

    def restore(self, saved: dict) -> None:
        if "averages_rows" not in saved:
            return                 # a file from before the averages: start afresh
        rows = np.asarray(saved["averages_rows"], float).reshape(-1, self.buffer.rows.shape[1])
        self.buffer = st.SeriesBuffer.from_state(dict(
            rows=rows, stride=saved["averages_stride"], count=saved["averages_count"],
            capacity=saved["averages_capacity"]))

    # -- reading ---------------------------------------------------------------------------------
    def _columns(self):
        rows = self.buffer.rows
        t = rows[:, 0]
        k = 1 + len(self.names)
        scalars = {n: rows[:, 1 + i] for i, n in enumerate(self.names)}
        return t, scalars, rows[:, k:k + self.nz], rows[:, k + self.nz:]

    def spin_up(self) -> tuple[float, bool]:
        """(from_time, settled) of the recorded series (module doc)."""
        t, scalars, _, _ = self._columns()
        if t.size < 4 * st.MSER_BATCH:
            return (float(t[0]) if t.size else math.nan), False
        y = np.column_stack([scalars[n] for n in SPIN_UP_COLUMNS])
        allowed = storage_allowance(scalars["nusselt_top"], scalars["nusselt_bottom"],
                                    self.precision, self.contrast)
        rates = [allowed if n == "mean_temperature" else 0.0 for n in SPIN_UP_COLUMNS]
        return st.spin_up_time(t, y, drift_rates=rates)

    def estimates(self) -> tuple[dict, bool]:
        """({quantity: Estimate}, settled) from the end of the spin-up; the wall Nu intervals
        through the heat balance where their own are not reliable (``balanced_walls``)."""
        t, scalars, _, _ = self._columns()
        from_time, settled = self.spin_up()
        if not np.isfinite(from_time):
            return {}, False
        est = {n: st.estimate(t, scalars[n], from_time) for n in self.names}
        return balanced_walls(est, self.heating, self.contrast), settled

    def statistically_steady(self, est: dict, settled: bool) -> bool:
        """Spin-up over, no drift, Nu intervals reliable, heat balance within them (module doc)."""
        if not settled or not est:
            return False
        if not all(est[n].reliable for n in ("nusselt_top", "nusselt_bottom")):
            return False
        if not math.isfinite(self.contrast):
            return True
        stats = {n: e.to_dict() for n, e in est.items()}
        return heat_balance(stats, self.heating, self.contrast)["agree"]

    def precision_met(self, precision: float) -> bool:
        """The mean-precision stop rule (module doc)."""
        if precision <= 0.0:
            return False
        est, settled = self.estimates()
        if not self.statistically_steady(est, settled):
            return False
        return all(est[n].relative_ci95 <= precision for n in ("nusselt_top", "nusselt_bottom"))

    def lid_history(self, from_time: float,
                    thresholds: lid.RegimeThresholds = lid.RegimeThresholds()) -> lid.LidHistory:
        """The lid decision of the mobility series M = surface vrms / vrms, counted over
        t >= from_time (``convsim.model.lid.lid_history``; the recorded rows, thinned as the
        buffer is; the rows before from_time set the decision the window opens with)."""
        t, scalars, _, _ = self._columns()
        vrms = scalars["vrms"]
        with np.errstate(divide="ignore", invalid="ignore"):
            m = np.where(vrms > 0, scalars["surface_vrms"] / vrms, np.nan)
        return lid.lid_history(t, m, thresholds, start=from_time)

    def profile_means(self, from_time: float) -> dict:
        """Time means and half-widths of the two profiles over t >= from_time."""
        t, _, tp, ep = self._columns()
        keep = t >= from_time
        out = {}
        for name, data in (("temperature_profile", tp), ("viscosity_profile", ep)):
            if keep.sum() < 2:
                out[name] = dict(mean=data[keep].mean(axis=0) if keep.any() else
                                 np.full(self.nz, np.nan), ci95=np.full(self.nz, np.inf))
                continue
            est = [st.estimate(t[keep], data[keep, j], from_time) for j in range(self.nz)]
            out[name] = dict(mean=np.array([e.mean for e in est]),
                             ci95=np.array([e.ci95 for e in est]))
        return out


def _fixed(value: float, time: float) -> dict:
    return dict(mean=float(value), ci95=0.0, from_time=float(time))


def run_statistics(averages: RunAverages, status: str, final: dict, time: float) -> tuple[dict, str]:
    """(statistics, settled) of a finished run.

    ``final`` holds the QUANTITIES and profiles of the last state
    (``step_quantities``).  A steady run reports its final state (ci95 = 0);
    any other run the time means after its spin-up (module doc).
    """
    if status == "steady" or averages.buffer.size < 2:
        stats = {n: _fixed(final[n], time) for n in QUANTITIES}
        for name in ("temperature_profile", "viscosity_profile"):
            stats[name] = dict(mean=np.asarray(final[name], float).tolist(),
                               ci95=[0.0] * averages.nz, from_time=float(time))
        return stats, ("steady" if status == "steady" else "unfinished")
    est, settled = averages.estimates()
    stats = {n: e.to_dict() for n, e in est.items()}
    from_time = next(iter(est.values())).from_time
    for name, value in averages.profile_means(from_time).items():
        stats[name] = dict(mean=value["mean"].tolist(), ci95=value["ci95"].tolist(),
                           from_time=from_time)
    steady = averages.statistically_steady(est, settled)
    return stats, ("statistically-steady" if steady else "unfinished")


def heat_balance(stats: dict, heating: float, contrast: float, tolerance: float = 1e-9) -> dict:
    """<Nu_top> - <Nu_bottom> - H / dT with its 95 % half-width (module doc).

    ``agree`` when |gap| <= ci95 + tolerance max(|<Nu_top>|, 1) (the tolerance serves
    steady runs, whose intervals are 0: pass their steady tolerance).
    """
    top, bottom = stats["nusselt_top"], stats["nusselt_bottom"]
    gap = top["mean"] - bottom["mean"] - (heating / contrast if contrast else math.nan)
    half = math.hypot(top["ci95"], bottom["ci95"])
    slack = tolerance * max(abs(top["mean"]), 1.0)
    return dict(gap=float(gap), ci95=float(half), agree=bool(abs(gap) <= half + slack))


def lid_report(stats: dict, law, grid, psi, law_contrast: float,
               thresholds: lid.RegimeThresholds = lid.RegimeThresholds(),
               history: lid.LidHistory = lid.LidHistory()) -> dict:
    """The stagnant-lid diagnostics of a run from its means (and its last flow field), with
    the lid history of its mobility series (breaking events, switches: episodic)."""
    z = grid.z_cell
    t_i = stats["interior_temperature"]["mean"]
    thickness = stats["lid_thickness"]["mean"]
    mobility = lid.surface_mobility(stats["surface_vrms"]["mean"], stats["vrms"]["mean"])
    cells, ups = lid.convection_cells(grid, psi)
    word = lid.regime(mobility, law_contrast, stats["nusselt_top"]["mean"], thresholds,
                      history.switches)[0]
    eta = np.asarray(stats["viscosity_profile"]["mean"], float)
    return dict(regime=str(word), mobility=mobility, **history.to_dict(),
                lid_thickness=thickness,
                interior_temperature=t_i,
                rheological_temperature_scale=lid.rheological_temperature_scale(
                    law, t_i, 0.5) if np.isfinite(t_i) else math.nan,
                lid_viscosity_contrast=lid.lid_viscosity_contrast(z, eta, thickness,
                                                                  row_heights(grid)),
                viscosity_contrast=law_contrast, cells=cells, upwellings=ups.tolist(),
                regime_rule=thresholds.text())


def _law_contrast(model, temperature: np.ndarray) -> float:
    th = model.thermal
    if th.top_heat == "temperature" and th.bottom_heat == "temperature":
        lo, hi = sorted((th.top_value, th.bottom_value))
    else:
        lo, hi = float(temperature.min()), float(temperature.max())
    return lid.law_viscosity_contrast(model.law, lo, hi)


def wall_contrast(model) -> float:
    """Bottom minus top wall temperature; NaN with a fixed-flux wall (the contrast varies)."""
    th = model.thermal
    if th.top_heat == "temperature" and th.bottom_heat == "temperature":
        return th.bottom_value - th.top_value
    return math.nan


def finish_statistics(result, averages: RunAverages, model, state, steady_tolerance: float):
    """Fill a ``RunResult``'s statistics, settled word, lid diagnostics and heat balance
    (``steady_tolerance``: the heat-balance slack of a steady run)."""
    from types import SimpleNamespace
    report = SimpleNamespace(nusselt_top=result.nusselt_top, nusselt_bottom=result.nusselt_bottom,
                             vrms=result.vrms, surface_vrms=result.surface_vrms,
                             mean_temperature=result.mean_temperature)
    final = step_quantities(model.grid, state.temperature, state.psi, result.viscosity, report)
    result.statistics, result.settled = run_statistics(averages, result.status, final,
                                                       state.time)
    history = lid.LidHistory()
    if result.status != "steady" and averages.buffer.size >= 2:     # a series to judge
        history = averages.lid_history(result.statistics["nusselt_top"]["from_time"])
    result.lid = lid_report(result.statistics, model.law, model.grid, state.psi,
                            _law_contrast(model, state.temperature), history=history)
    tolerance = steady_tolerance if result.status == "steady" else 1e-9
    result.heat_balance = heat_balance(result.statistics, model.internal_heating,
                                       wall_contrast(model), tolerance)
    return result
