"""Run-based check of the onset: bracket the critical Rayleigh number with short simulator runs.

What a modeller would do with the simulator itself.  Start from the conductive
state plus a small perturbation of the box's critical mode n,

    T(x, z, 0) = T0(z) + A cos(k_n x) sin(pi z),

at several Rayleigh numbers around the eigen-solver's box value, run each to a
fixed end time, and measure the growth rate s of the perturbation.  In the
linear phase every perturbation field, the rms velocity included, is a sum of
modes c_j exp(s_j t); once the faster-decaying modes have died away,

    ln vrms(t) = const + s_1 t,

so s_1 is the least-squares slope of ln vrms against t over the linear phase
(``fit_growth_rate``).  The critical Rayleigh number of the *simulator* is where
s_1(Ra) crosses zero (``critical_from_rates``).  It differs from the
eigen-solver's by the simulator's discretisation error (second order in the
cell size and, through the semi-implicit time step, in dt); running the same
bracket on a grid with half the cells in each direction gives a Richardson
estimate of that error and an extrapolated value.

Times are in d^2/kappa, rates in kappa/d^2.  This module prints nothing; the
command line (``convsim onset --runs``) and the figure module present the result.
"""

from __future__ import annotations

import logging
import math
import multiprocessing
import os
import time
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import brentq

from convsim.config import Config
from convsim.errors import ConfigError
from convsim.model.rheology import ViscosityLaw

__all__ = ["RateFit", "RunBracket", "DEFAULT_FACTORS", "fit_growth_rate",
           "critical_from_rates", "bracket_configs", "default_grid", "onset_from_config",
           "run_bracket"]

log = logging.getLogger(__name__)

#: Rayleigh numbers of the bracket, as multiples of the eigen-solver's box Ra_c.
DEFAULT_FACTORS = (0.8, 0.9, 1.0, 1.1, 1.25)


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
    t = np.asarray(t, dtype=float)
    v = np.asarray(vrms, dtype=float)
    ok = np.isfinite(t) & np.isfinite(v) & (v > 0.0)
    t, v = t[ok], v[ok]
    if t.size:                                # strictly increasing times only
        later_than_all = np.concatenate([[True], t[1:] > np.maximum.accumulate(t)[:-1]])
        t, v = t[later_than_all], v[later_than_all]
    if t.size > 2:                            # drop slivers (a last step cut to the end time)
        gaps = np.diff(t)
        wide = np.concatenate([[True], gaps >= 1e-3 * np.median(gaps)])
        t, v = t[wide], v[wide]
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


# --------------------------------------------------------------------------------------
# The runs
# --------------------------------------------------------------------------------------

def default_grid(aspect: float, nz: int = 24) -> tuple[int, int]:
    """A coarse grid of near-square cells for the bracket runs: (nx, nz), nx = nz aspect rounded
    to an even number >= 8 (even, so that a Richardson pair can halve it)."""
    return max(8, 2 * int(round(0.5 * nz * aspect))), nz


def bracket_configs(config: Config, rayleigh_values, mode: int, *, grid: tuple[int, int],
                    amplitude: float, end_time: float, max_dt: float) -> list[Config]:
    """One config per Rayleigh number: conductive start plus mode ``mode``, fixed end time.

    Everything but the start, the stop rule, the grid, the time-step cap and Ra is
    the given config's (boundaries, heating, viscosity, numerics).  The step limit
    is set well above end_time / max_dt.
    """
    nx, nz = grid
    steps = int(math.ceil(end_time / max_dt)) * 4 + 1000
    return [config.replace(domain__nx=nx, domain__nz=nz, physics__rayleigh=float(ra),
                           start__kind="conductive", start__perturbation="mode",
                           start__amplitude=amplitude, start__mode=int(mode),
                           start__continuation=(), stop__steady=False, stop__end_time=end_time,
                           stop__max_steps=min(steps, 10**9 - 1),
                           numerics__max_dt=min(max_dt, config.numerics.max_dt))
            for ra in rayleigh_values]


def _run_one(cfg: Config) -> dict:
    """Worker: run one config in memory; return only what the fit needs (picklable)."""
    from convsim.api import run
    result = run(cfg)
    return dict(status=result.status, message=result.message, steps=result.steps,
                wall_seconds=result.wall_seconds, time=np.asarray(result.series["series_time"]),
                vrms=np.asarray(result.series["vrms"]))


def _one_thread_per_worker() -> None:
    """Worker initializer: one BLAS thread each (the runs themselves are the parallelism)."""
    from convsim.model.linsolve import limit_blas_threads
    limit_blas_threads(1)


def _run_all(configs, jobs: int) -> list[dict]:
    if jobs <= 1 or len(configs) == 1:
        return [_run_one(c) for c in configs]
    # fork where there is one: a spawned worker would re-run the caller's main script
    methods = multiprocessing.get_all_start_methods()
    ctx = multiprocessing.get_context("fork" if "fork" in methods else "spawn")
    with ProcessPoolExecutor(max_workers=min(jobs, len(configs)), mp_context=ctx,
                             initializer=_one_thread_per_worker) as pool:
        return list(pool.map(_run_one, configs))


@dataclass(frozen=True)
class RunBracket:
    """The run-based onset check: growth rates at several Ra and where they cross zero.

    Attributes
    ----------
    rayleigh, rates, stderr : ndarray
        Ra of the runs, fitted growth rates s (kappa/d^2) and their standard errors.
    theory_rates : ndarray
        The eigen-solver's largest growth rate at each Ra, at the box wavenumber.
    fits : tuple of RateFit
    run_status : tuple of str
        The simulator's status of each run ('end-time' expected).
    critical_rayleigh : float
        Where the fitted rates cross zero (the simulator's critical Ra on ``grid``).
    method : str
        'bracketed' or 'extrapolated' (see ``critical_from_rates``), or 'none'.
    eigen_critical_rayleigh : float
        The eigen-solver's box critical Ra.
    relative_difference : float
        critical_rayleigh / eigen_critical_rayleigh - 1.
    mode, wavenumber : int, float
        The box mode n run and its wavenumber k_n.
    grid : (int, int)
        (nx, nz) of the runs.
    amplitude, end_time, max_dt : float
        Perturbation amplitude, run length and time-step cap.
    coarse : RunBracket or None
        The same bracket on (nx/2, nz/2), when Richardson extrapolation was asked for.
    extrapolated_rayleigh : float
        (4 Ra_h - Ra_2h) / 3 from the two grids (nan without ``coarse``).
    extrapolated_difference : float
        extrapolated_rayleigh / eigen_critical_rayleigh - 1.
    theory_curve : (ndarray, ndarray)
        (Ra, s) of the eigen-solver's growth rate over the plotted range.
    wall_seconds : float
        Wall time of all runs (both grids).
    """

    rayleigh: np.ndarray
    rates: np.ndarray
    stderr: np.ndarray
    theory_rates: np.ndarray
    fits: tuple
    run_status: tuple
    critical_rayleigh: float
    method: str
    eigen_critical_rayleigh: float
    relative_difference: float
    mode: int
    wavenumber: float
    grid: tuple
    amplitude: float
    end_time: float
    max_dt: float
    coarse: "RunBracket | None" = None
    extrapolated_rayleigh: float = math.nan
    extrapolated_difference: float = math.nan
    theory_curve: tuple = field(default=(np.zeros(0), np.zeros(0)), repr=False)
    wall_seconds: float = 0.0

    @property
    def rate_differences(self) -> np.ndarray:
        """rates / theory_rates - 1 at each Ra (relative difference from the eigen-solver)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.rates / self.theory_rates - 1.0

    def to_dict(self) -> dict:
        """Plain JSON-ready mapping; non-finite numbers become None."""
        def num(v):
            return float(v) if v is not None and math.isfinite(v) else None

        def arr(a):
            return [num(v) for v in np.asarray(a, float)]
        out = {
            "rayleigh": arr(self.rayleigh),
            "rates": arr(self.rates),
            "rate_stderr": arr(self.stderr),
            "theory_rates": arr(self.theory_rates),
            "critical_rayleigh": num(self.critical_rayleigh),
            "method": self.method,
            "eigen_critical_rayleigh": num(self.eigen_critical_rayleigh),
            "relative_difference": num(self.relative_difference),
            "mode": self.mode,
            "wavenumber": num(self.wavenumber),
            "grid": list(self.grid),
            "amplitude": self.amplitude,
            "end_time": self.end_time,
            "max_dt": self.max_dt,
            "fit_windows": [[num(f.t_start), num(f.t_end)] for f in self.fits],
            "fit_status": [f.status for f in self.fits],
            "run_status": list(self.run_status),
            "wall_seconds": self.wall_seconds,
        }
        if self.coarse is not None:
            out["coarse"] = {k: out_v for k, out_v in self.coarse.to_dict().items()
                             if k not in ("theory_rates", "eigen_critical_rayleigh", "mode",
                                          "wavenumber", "amplitude", "end_time", "max_dt")}
            out["extrapolated_rayleigh"] = num(self.extrapolated_rayleigh)
            out["extrapolated_difference"] = num(self.extrapolated_difference)
        return out


def _check_positive(key, value):
    if isinstance(value, bool) or not isinstance(value, (int, float)) \
            or not (math.isfinite(value) and value > 0.0):
        raise ConfigError(f"{key} = {value!r}: expected a finite number > 0")


def onset_from_config(config: Config, wavenumbers=None, points: int | None = None):
    """``stability.analyse_onset`` for the layer and box a config describes.

    Unpacks the config's aspect, sides, mechanical and thermal conditions, internal
    heating, viscosity law and Rayleigh number into the plain arguments of
    ``analyse_onset`` (which never sees a Config).
    """
    from convsim.analysis.stability import analyse_onset
    b, v = config.boundaries, config.viscosity
    return analyse_onset(
        config.physics.rayleigh, aspect=config.domain.aspect, sides=b.sides,
        top_flow=b.top_flow, bottom_flow=b.bottom_flow, top_heat=b.top_heat,
        top_value=b.top_value, bottom_heat=b.bottom_heat, bottom_value=b.bottom_value,
        internal_heating=config.physics.internal_heating, viscosity=v.law,
        viscosity_parameters=ViscosityLaw.from_table(v).parameters,
        wavenumbers=wavenumbers, points=points)


def run_bracket(config: Config, onset=None, *, factors=DEFAULT_FACTORS, grid=None,
                amplitude: float = 1.0e-5, end_time: float | None = None,
                max_dt: float | None = None, growth_limit: float = 1.0e3,
                richardson: bool = False, jobs: int | None = None) -> RunBracket:
    """Growth rates from simulator runs around the box's critical Ra, and their zero crossing.

    Parameters
    ----------
    config : Config
        The layer and box (boundaries, heating, viscosity, aspect); its start, stop,
        grid and Ra are replaced for the runs.
    onset : convsim.analysis.stability.OnsetResult, optional
        The eigen-solver's answer for this config (gives the box Ra_c, its mode n and
        the layer for the theoretical growth rates); default ``onset_from_config(config)``.
    factors : sequence of float
        Ra of the runs as multiples of the box Ra_c (at least two).
    grid : (int, int), optional
        (nx, nz) of the runs; default ``default_grid(aspect)`` (nz = 24).
    amplitude : float
        Perturbation amplitude A (temperature scale); small, so that the run stays
        linear for a growth of ``growth_limit``.
    end_time : float, optional
        Length of every run (d^2/kappa); default 10 / (k_n^2 + pi^2), about ten
        diffusion times of the mode.
    max_dt : float, optional
        Time-step cap; default 0.02 / (k_n^2 + pi^2), which keeps the time error of
        the rates near 1e-4 relative.
    growth_limit : float
        See ``fit_growth_rate``.
    richardson : bool
        Also run the bracket on (nx/2, nz/2) and extrapolate Ra_c, assuming second
        order in the cell size: Ra = (4 Ra_h - Ra_2h) / 3.
    jobs : int, optional
        Worker processes (default: the usable cores); 1 runs in this process.

    Returns
    -------
    RunBracket
    """
    from convsim.analysis.stability import StabilityProblem

    if onset is None:
        onset = onset_from_config(config)
    box_ra, mode, k = onset.box_critical_rayleigh, onset.box_mode, onset.box_wavenumber
    if mode is None or not math.isfinite(box_ra):
        raise ConfigError("onset: the eigen-solver finds no instability in this box, so there "
                          "is no critical Rayleigh number to bracket with runs")
    factors = tuple(float(f) for f in factors)
    if len(factors) < 2 or not all(math.isfinite(f) and f > 0.0 for f in factors):
        raise ConfigError(f"factors = {factors!r}: expected two or more numbers > 0")
    _check_positive("amplitude", amplitude)
    _check_positive("growth_limit", growth_limit)
    rate_scale = k * k + math.pi ** 2
    end_time = 10.0 / rate_scale if end_time is None else end_time
    max_dt = 0.02 / rate_scale if max_dt is None else max_dt
    _check_positive("end_time", end_time)
    _check_positive("max_dt", max_dt)
    if grid is None:
        grid = default_grid(config.domain.aspect)
    nx, nz = (int(g) for g in grid)
    if not (4 <= nx <= 4096 and 4 <= nz <= 4096):
        raise ConfigError(f"grid = {grid!r}: expected (nx, nz) with 4 <= nx, nz <= 4096")
    if jobs is None:
        jobs = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") \
            else (os.cpu_count() or 1)
    if isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1:
        raise ConfigError(f"jobs = {jobs!r}: expected a whole number >= 1")
    rayleigh = np.array(sorted(box_ra * f for f in factors))
    grids = [(nx, nz)]
    if richardson:
        if nx % 2 or nz % 2 or nz < 16:
            raise ConfigError(f"grid = {nx}x{nz}: Richardson extrapolation needs even nx and "
                              "nz, nz >= 16 (the coarse grid halves both)")
        grids.append((nx // 2, nz // 2))
    configs = []
    for g in grids:
        configs += bracket_configs(config, rayleigh, mode, grid=g, amplitude=amplitude,
                                   end_time=end_time, max_dt=max_dt)
    t0 = time.perf_counter()
    outputs = _run_all(configs, jobs)
    wall = time.perf_counter() - t0
    log.info("onset runs: %d runs in %.2f s on %d workers", len(configs), wall, jobs)

    problem = StabilityProblem(onset.layer, onset.points)

    def theory(ra):
        return float(np.max(problem.growth_rates(float(ra), k).real))
    theory_rates = np.array([theory(ra) for ra in rayleigh])
    lo, hi = rayleigh[0], rayleigh[-1]
    pad = 0.05 * (hi - lo)
    curve_ra = np.linspace(lo - pad, hi + pad, 41)
    curve = (curve_ra, np.array([theory(ra) for ra in curve_ra]))

    def assemble(chunk, g, coarse=None):
        fits = tuple(fit_growth_rate(o["time"], o["vrms"], growth_limit=growth_limit,
                                     rate_scale=rate_scale) for o in chunk)
        for f, o, ra in zip(fits, chunk, rayleigh):
            if o["status"] != "end-time":
                log.warning("onset run at Ra = %.6g ended '%s': %s", ra, o["status"],
                            o["message"])
            if f.status != "ok":
                log.warning("onset run at Ra = %.6g: rate fit '%s' (%d samples in the "
                            "linear phase)", ra, f.status, f.samples)
        rates = np.array([f.rate for f in fits])
        ra_c, method = critical_from_rates(rayleigh, rates)
        extra = {}
        if coarse is not None:
            ra_x = (4.0 * ra_c - coarse.critical_rayleigh) / 3.0
            extra = dict(coarse=coarse, extrapolated_rayleigh=ra_x,
                         extrapolated_difference=ra_x / box_ra - 1.0)
        return RunBracket(rayleigh=rayleigh, rates=rates,
                          stderr=np.array([f.stderr for f in fits]), theory_rates=theory_rates,
                          fits=fits, run_status=tuple(o["status"] for o in chunk),
                          critical_rayleigh=ra_c, method=method, eigen_critical_rayleigh=box_ra,
                          relative_difference=ra_c / box_ra - 1.0, mode=int(mode),
                          wavenumber=float(k), grid=g, amplitude=float(amplitude),
                          end_time=float(end_time), max_dt=float(min(max_dt,
                                                                      config.numerics.max_dt)),
                          theory_curve=curve, wall_seconds=wall, **extra)
    m = len(rayleigh)
    coarse = assemble(outputs[m:], grids[1]) if richardson else None
    return assemble(outputs[:m], grids[0], coarse)
