"""Growth rates from a run's rms velocity, and where the rates of several runs cross zero.

In the linear phase of a run started from a small perturbation, every
perturbation field, the rms velocity included, is a sum of modes c_j exp(s_j t);
once the faster-decaying modes have died away, ln vrms(t) = const + s_1 t, so s_1
is the least-squares slope of ln vrms against t over the linear phase
(``fit_growth_rate``).  The critical Rayleigh number of a set of runs is where
s_1(Ra) crosses zero (``critical_from_rates``).  Used by ``convsim.analysis.onset_runs``.
Times are in d^2/kappa, rates in kappa/d^2.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

__all__ = ["RateFit", "fit_growth_rate", "critical_from_rates"]


# --------------------------------------------------------------------------------------
# Fitting a growth rate
# --------------------------------------------------------------------------------------

@dataclass(frozen=True)
class RateFit:
    """The growth rate of one run, fitted over its linear phase.

    Attributes
    ----------
    rate : float
        s in ln vrms = c + s t, in kappa/d^2 (nan when no window was found).
    stderr : float
        Standard error of the slope from the fit residuals.
    t_start, t_end : float
        The fitting window (d^2/kappa).
    samples : int
        Series points inside the window.
    status : str
        'ok'; 'short' (fewer than ``min_samples`` points in the window: the rate is
        a rough one); 'no-data' (no usable points).
    """

    rate: float
    stderr: float
    t_start: float
    t_end: float
    samples: int
    status: str


def _usable_samples(t, vrms) -> tuple[np.ndarray, np.ndarray]:
    """Finite samples with vrms > 0 at strictly increasing times, without slivers (a last
    step cut to the end time: a gap under 1e-3 of the median)."""
    t = np.asarray(t, dtype=float)
    v = np.asarray(vrms, dtype=float)
    ok = np.isfinite(t) & np.isfinite(v) & (v > 0.0)
    t, v = t[ok], v[ok]
    if t.size:
        later_than_all = np.concatenate([[True], t[1:] > np.maximum.accumulate(t)[:-1]])
        t, v = t[later_than_all], v[later_than_all]
    if t.size > 2:
        gaps = np.diff(t)
        wide = np.concatenate([[True], gaps >= 1e-3 * np.median(gaps)])
        t, v = t[wide], v[wide]
    return t, v


def fit_growth_rate(t, vrms, *, growth_limit: float = 1.0e3, rate_scale: float = 1.0,
                    settle_tolerance: float = 1.0e-3, min_samples: int = 10) -> RateFit:
    """Exponential growth (or decay) rate of the rms velocity over its linear phase.

    Fits ln vrms(t) = c + s t by least squares.  The window

    - ends before nonlinear saturation: at the last sample with
      vrms <= growth_limit * vrms[0] (the perturbation has grown by at most that
      factor, so it stays small when the run starts from a small one);
    - starts once the initial transient has died away: at the first sample after
      which the local log-slope d ln vrms / dt stays within
      settle_tolerance * rate_scale of the slope over the later half of the window.

    Parameters
    ----------
    t, vrms : array_like, shape (m,)
        The run's time series (d^2/kappa; kappa/d).
    growth_limit : float
        Largest growth of vrms over its first value still taken as linear (> 1).
    rate_scale : float
        The natural rate of the problem (kappa/d^2), e.g. the diffusive decay rate
        k^2 + pi^2 of the mode; the settling tolerance is relative to it.
    settle_tolerance : float
        Relative tolerance of the settled log-slope.
    min_samples : int
        Fewer points in the window give status 'short'.

    Returns
    -------
    RateFit
    """
    t, v = _usable_samples(t, vrms)
    if t.size < 3:
        return RateFit(math.nan, math.nan, math.nan, math.nan, int(t.size), "no-data")
    above = np.nonzero(v > growth_limit * v[0])[0]
    end = int(above[0]) if above.size else t.size          # exclusive
    t, lv = t[:end], np.log(v[:end])
    if t.size < 3:
        return RateFit(math.nan, math.nan, math.nan, math.nan, int(t.size), "no-data")
    slope = np.diff(lv) / np.diff(t)          # slope i joins samples i and i + 1
    later = t >= t[0] + 0.5 * (t[-1] - t[0])
    reference = np.polyfit(t[later], lv[later], 1)[0] if later.sum() >= 2 else slope[-1]
    bad = np.nonzero(np.abs(slope - reference) > settle_tolerance * rate_scale)[0]
    start = min(int(bad[-1]) + 1 if bad.size else 0, t.size - 2)
    tw, lw = t[start:], lv[start:]
    n = tw.size
    coef, res, *_ = np.polyfit(tw, lw, 1, full=True)
    rate = float(coef[0])
    if n > 2:
        sxx = float(np.sum((tw - tw.mean()) ** 2))
        resid = float(res[0]) if np.size(res) else 0.0
        stderr = math.sqrt(max(resid, 0.0) / (n - 2) / sxx) if sxx > 0 else math.nan
    else:
        stderr = math.nan
    status = "ok" if n >= min_samples else "short"
    return RateFit(rate, stderr, float(tw[0]), float(tw[-1]), int(n), status)


# --------------------------------------------------------------------------------------
# Where the rate crosses zero
# --------------------------------------------------------------------------------------

def critical_from_rates(rayleigh, rates) -> tuple[float, str]:
    """The Rayleigh number where the growth rate s(Ra) crosses zero.

    A least-squares polynomial s(Ra) of degree min(2, m - 1) through the m points;
    its root inside the bracketing pair of points (the first sign change from
    decay to growth), found by Brent's method.  Without a sign change the
    straight-line fit through all points is extrapolated.

    Parameters
    ----------
    rayleigh, rates : array_like, shape (m,), m >= 2
        Ra and s (finite values only are used).

    Returns
    -------
    (float, str)
        Ra where s = 0 (nan if none), and how it was found: 'bracketed',
        'extrapolated' or 'none'.
    """
    ra = np.asarray(rayleigh, dtype=float)
    s = np.asarray(rates, dtype=float)
    ok = np.isfinite(ra) & np.isfinite(s)
    ra, s = ra[ok], s[ok]
    order = np.argsort(ra)
    ra, s = ra[order], s[order]
    if ra.size < 2:
        return math.nan, "none"
    scale = float(np.mean(ra))
    x = ra / scale
    poly = np.polynomial.Polynomial.fit(x, s, min(2, ra.size - 1))
    change = np.nonzero((s[:-1] < 0.0) & (s[1:] >= 0.0))[0]
    if change.size:
        i = int(change[0])
        a, b = x[i], x[i + 1]
        if poly(a) < 0.0 <= poly(b):
            return float(brentq(poly, a, b, xtol=1e-14) * scale), "bracketed"
        # the smooth fit disagrees in sign: interpolate the bracketing pair linearly
        return float((a - s[i] * (b - a) / (s[i + 1] - s[i])) * scale), "bracketed"
    line = np.polynomial.Polynomial.fit(x, s, 1).convert()
    c0, c1 = line.coef if line.coef.size == 2 else (line.coef[0], 0.0)
    if c1 <= 0.0:
        return math.nan, "none"
    return float(-c0 / c1 * scale), "extrapolated"
