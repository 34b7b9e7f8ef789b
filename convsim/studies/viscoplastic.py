"""The viscoplastic benchmark cases of Tosi et al. (2015), Geochem. Geophys. Geosyst. 16,
2175-2196 (set-up quoted from memory): what the bench reports for them, and the period and
time means of the periodic case 4.

- ``lid_quantities``: per run, besides Nu and vrms, the surface rms velocity, the interior rms
  velocity, the mobility, the smallest and largest viscosity and the yielded area fraction.
  Interior rms velocity is our definition (no published one is recalled):
  sqrt(mean of u^2 + w^2 over the cells with 1/4 < z < 3/4), the middle half of the layer,
  away from both thermal boundary layers.
- ``oscillation_period``: the period of a periodic series from its upward crossings of its
  mean, and ``periodic_means``: time means over the whole periods of the end of a run.
- ``periodic_statistics`` (case 4, ``vp4``): after the spin-up (the first ``SPIN_UP_SHARE``
  of the run's time span, our choice), the upward crossings of the mean Nu split the series
  into whole periods P_1 .. P_n.  Period: their mean, with the 95 % interval
  t_{0.975, n-1} s(P_i) / sqrt(n) (Student t over the single periods, common practice).
  Time means of every series over the n periods (time-weighted), with the 95 % interval
  t_{0.975, n-1} s(m_i) / sqrt(n) of the single-period means m_i (batch means with one
  period per batch, common practice: a settled limit cycle gives ~0, a cycle still growing
  or drifting a wide one).  ``autocorrelation_period``, the first peak of the
  autocorrelation of Nu minus its mean, is an independent second estimate of the period.

No published value is compared (none recalled reliably): the grid-convergence study is the
evidence (``convsim bench vp2 vp3 --grids 32,48,64``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["CASES", "PERIODIC_CASES", "interior_rms_velocity", "lid_quantities",
           "LID_QUANTITIES", "lid_convergence", "crossing_times", "oscillation_period",
           "periodic_means", "PeriodicStatistics", "periodic_statistics",
           "autocorrelation_period", "periodic_lid_quantities", "SPIN_UP_SHARE",
           "PERIODIC_SERIES"]

#: bench name: (config file in convsim/studies/cases/, one line of set-up)
CASES = {
    "vp2": ("benchmark_viscoplastic_case2.toml",
            "mobile lid: eta = 2 (1/eta_lin + 1/eta_plast)^-1, eta_lin = exp(-ln(1e5) T), "
            "eta_plast = 1e-3 + 1 / sqrt(e_ij e_ij), Ra = 100 at the cold top (Tosi et al. 2015, "
            "case 2; set-up from memory; no published value compared)"),
    "vp3": ("benchmark_viscoplastic_case3.toml",
            "mobile lid, depth-dependent: as vp2 with eta_lin = exp(-ln(1e5) T + ln(10) (1 - z)) "
            "(Tosi et al. 2015, case 3; set-up from memory; no published value compared)"),
    "vp4": ("benchmark_viscoplastic_case4.toml",
            "periodic lid breaking: as vp3 with sigma_y = 4; judged by its period and the time "
            "means over whole periods with 95 % intervals (Tosi et al. 2015, case 4; set-up "
            "from memory; no published value compared)"),
}

#: the cases judged by a period and time means instead of a steady state
PERIODIC_CASES = ("vp4",)

#: what ``lid_quantities`` returns, with a label for the report
LID_QUANTITIES = {"surface_vrms": "surface vrms", "interior_vrms": "interior vrms",
                  "mobility": "mobility", "eta_min": "eta min", "eta_max": "eta max",
                  "yielded_fraction": "yielded area", "period": "period"}

INTERIOR_BAND = (0.25, 0.75)     # convsim.model.plates.INTERIOR_BAND (kept light to import)


def interior_rms_velocity(grid, psi: np.ndarray, band=INTERIOR_BAND) -> float:
    """``convsim.model.plates.interior_rms_velocity``: rms velocity of the cells with
    band[0] < z < band[1], in kappa/d (the ``interior_vrms`` diagnostic)."""
    from convsim.model.plates import interior_rms_velocity as rms
    return rms(grid, psi, band)


def lid_quantities(config, result) -> dict:
    """The lid numbers of a finished run (see the module docstring), as plain floats."""
    from convsim.model import plates
    from convsim.run.build import build_model
    model = build_model(config)
    T, psi = np.asarray(result.temperature), np.asarray(result.psi)
    eta = np.asarray(result.viscosity)
    rate = plates.strain_rate_field(model.stokes, psi)
    mask = plates.yielded_mask(model.law, T, model.grid.cell_mesh()[1], rate)
    return dict(surface_vrms=float(result.surface_vrms),
                interior_vrms=interior_rms_velocity(model.grid, psi),
                mobility=plates.mobility(float(result.surface_vrms), float(result.vrms)),
                eta_min=float(eta.min()), eta_max=float(eta.max()),
                yielded_fraction=plates.yielded_fraction(mask))


def lid_convergence(rows) -> dict:
    """{lid quantity: ``analysis.convergence`` estimate from the three finest rows} of steady
    bench rows that carry lid quantities (empty with fewer than three)."""
    from convsim.analysis import convergence as conv
    if len(rows) < 3 or not all(r.lid for r in rows):
        return {}
    return {q: conv.estimate_finest([r.h for r in rows], [r.lid[q] for r in rows])
            for q in rows[0].lid}


def crossing_times(times, values, skip: float = 0.0) -> np.ndarray:
    """Times of the upward crossings of a series' mean (linear interpolation), after ``skip``
    of its time span (the spin-up)."""
    t, f = np.asarray(times, float), np.asarray(values, float)
    keep = t >= t[0] + skip * (t[-1] - t[0])
    t, f = t[keep], f[keep]
    g = f - f.mean()
    up = np.nonzero((g[:-1] < 0.0) & (g[1:] >= 0.0))[0]
    return t[up] - g[up] * (t[up + 1] - t[up]) / (g[up + 1] - g[up])


def oscillation_period(times, values, skip: float = 0.0) -> tuple[float, int]:
    """Period of a periodic series and the number of whole periods it was measured over.

    The mean spacing of the upward crossings of the series' mean (``crossing_times``: first
    to last over their count - 1).  Returns (NaN, 0) with fewer than three crossings.
    """
    crossings = crossing_times(times, values, skip)
    if len(crossings) < 3:
        return math.nan, 0
    return float((crossings[-1] - crossings[0]) / (len(crossings) - 1)), len(crossings) - 1


def periodic_means(times, series: dict, period: float, periods: int) -> dict:
    """Time means of each series over its last ``periods`` whole periods (any window of whole
    periods gives the mean of a periodic signal): the series interpolated linearly in time
    (uneven steps) to 200 points per period, then averaged at the midpoints."""
    t = np.asarray(times, float)
    if not (math.isfinite(period) and periods > 0):
        return {name: math.nan for name in series}
    edges = np.linspace(t[-1] - periods * period, t[-1], 200 * periods + 1)
    mid = 0.5 * (edges[1:] + edges[:-1])
    return {name: float(np.mean(np.interp(mid, t, np.asarray(values, float))))
            for name, values in series.items()}


#: time series of a periodic run that ``periodic_lid_quantities`` averages (run-file names)
PERIODIC_SERIES = ("nusselt_top", "vrms", "surface_vrms", "interior_vrms", "mobility",
                   "viscosity_min", "viscosity_max", "yielded_fraction")
SPIN_UP_SHARE = 0.3      # the first 30 % of a periodic run's time span is its spin-up


@dataclass(frozen=True)
class PeriodicStatistics:
    """Period and whole-period time means of a periodic run (module doc).

    Attributes
    ----------
    period, period_ci95 : float
        Mean of the single periods and its 95 % half-width (NaN with fewer than 2 periods).
    periods : int
        Whole periods measured.
    single_periods : tuple of float
    autocorrelation_period : float
        First peak of the autocorrelation of the reference series (NaN if none).
    means, ci95 : dict
        Time mean over the whole periods and its 95 % half-width, per series.
    from_time : float
        Start of the first whole period.
    """

    period: float
    period_ci95: float
    periods: int
    single_periods: tuple
    autocorrelation_period: float
    means: dict
    ci95: dict
    from_time: float

    def to_dict(self) -> dict:
        return dict(period=self.period, period_ci95=self.period_ci95, periods=self.periods,
                    single_periods=list(self.single_periods),
                    autocorrelation_period=self.autocorrelation_period,
                    means=dict(self.means), ci95=dict(self.ci95), from_time=self.from_time)


def periodic_statistics(times, series: dict, reference: str = "nusselt_top",
                        skip: float = SPIN_UP_SHARE, samples: int = 200) -> PeriodicStatistics:
    """Period and whole-period means with 95 % intervals of a periodic run (module doc).

    Parameters
    ----------
    times : (n,) increasing times (uneven steps)
    series : {name: (n,) values}; ``reference`` among them sets the periods
    skip : share of the time span left out at the start (spin-up)
    samples : points per period of the linear interpolation that averages each period
    """
    from scipy.stats import t as student
    t = np.asarray(times, float)
    crossings = crossing_times(t, series[reference], skip)
    n = len(crossings) - 1
    auto = autocorrelation_period(t, series[reference], skip)
    if n < 2:
        nan = {name: math.nan for name in series}
        return PeriodicStatistics(math.nan, math.nan, max(n, 0), tuple(np.diff(crossings)),
                                  auto, nan, dict(nan), math.nan)
    single = np.diff(crossings)
    q = float(student.ppf(0.975, n - 1)) / math.sqrt(n)
    frac = (np.arange(samples) + 0.5) / samples
    mid = crossings[:-1, None] + frac[None, :] * single[:, None]        # (n, samples)
    means, ci95 = {}, {}
    for name, values in series.items():
        per_period = np.interp(mid, t, np.asarray(values, float)).mean(axis=1)
        means[name] = float(np.sum(per_period * single) / np.sum(single))
        ci95[name] = float(q * np.std(per_period, ddof=1))
    return PeriodicStatistics(float(single.mean()), float(q * np.std(single, ddof=1)), n,
                              tuple(float(p) for p in single), auto, means, ci95,
                              float(crossings[0]))


def autocorrelation_period(times, values, skip: float = SPIN_UP_SHARE) -> float:
    """Lag of the first peak of the autocorrelation of f - mean(f) after ``skip`` of the time
    span (f interpolated to even times at the median step; the sum over each lag divided by
    its number of pairs, so that a finite window does not pull the peak to shorter lags;
    the maximum of its first positive lobe after it has gone negative, within half the window,
    refined by a parabola through three samples).  NaN when there is no such lobe."""
    t, f = np.asarray(times, float), np.asarray(values, float)
    keep = t >= t[0] + skip * (t[-1] - t[0])
    t, f = t[keep], f[keep]
    if t.size < 8:
        return math.nan
    dt = float(np.median(np.diff(t)))
    even = np.arange(t[0], t[-1], dt)
    g = np.interp(even, t, f)
    g = g - g.mean()
    spectrum = np.fft.rfft(g, 2 * g.size)
    acf = np.fft.irfft(spectrum * np.conj(spectrum))[:g.size] / (g.size - np.arange(g.size))
    half = acf[:g.size // 2 + 1]
    below = np.flatnonzero(half < 0.0)
    if below.size == 0:
        return math.nan
    above = below[0] + np.flatnonzero(half[below[0]:] > 0.0)       # the first positive lobe
    if above.size == 0:
        return math.nan
    ends = above[0] + np.flatnonzero(half[above[0]:] < 0.0)
    lobe = half[above[0]:ends[0] if ends.size else half.size]
    k = above[0] + int(np.argmax(lobe))
    if k + 1 >= half.size:
        return math.nan
    a, b, c = acf[k - 1], acf[k], acf[k + 1]
    shift = 0.5 * (a - c) / (a - 2.0 * b + c) if a - 2.0 * b + c != 0.0 else 0.0
    return float((k + shift) * dt)


def periodic_lid_quantities(result, skip: float = SPIN_UP_SHARE) -> tuple[dict, dict]:
    """(lid, periodic) of a periodic run from its series: ``lid`` the whole-period means of
    the lid quantities (the keys of ``lid_quantities``) and the period; ``periodic`` the
    ``PeriodicStatistics`` as a dict (intervals, single periods, the means of Nu and vrms)."""
    s = result.series
    stats = periodic_statistics(s["series_time"], {q: s[q] for q in PERIODIC_SERIES if q in s},
                                skip=skip)
    m = stats.means
    lid = dict(surface_vrms=m.get("surface_vrms", math.nan),
               interior_vrms=m.get("interior_vrms", math.nan),
               mobility=m.get("mobility", math.nan), eta_min=m.get("viscosity_min", math.nan),
               eta_max=m.get("viscosity_max", math.nan),
               yielded_fraction=m.get("yielded_fraction", math.nan), period=stats.period)
    return lid, stats.to_dict()
