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
import os
import time
from dataclasses import dataclass, field

import numpy as np

from convsim.config import Config
from convsim.errors import ConfigError
from convsim.analysis.growth_rates import RateFit, critical_from_rates, fit_growth_rate
from convsim.pool import process_pool
from convsim.model.rheology import ViscosityLaw

__all__ = ["RateFit", "RunBracket", "DEFAULT_FACTORS", "fit_growth_rate",
           "critical_from_rates", "bracket_configs", "default_grid", "onset_from_config",
           "run_bracket"]

log = logging.getLogger(__name__)

#: Rayleigh numbers of the bracket, as multiples of the eigen-solver's box Ra_c.
DEFAULT_FACTORS = (0.8, 0.9, 1.0, 1.1, 1.25)


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
    is set well above end_time / max_dt.  ``rayleigh_values`` are taken with the law's
    reference viscosity (as the eigen-solver's).
    """
    from convsim.run import layer
    nx, nz = grid
    steps = int(math.ceil(end_time / max_dt)) * 4 + 1000
    config = layer.resolve(config).replace(body=None)
    return [config.replace(domain__nx=nx, domain__nz=nz, physics__rayleigh=float(ra),
                           physics__rayleigh_reference="top",
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


def _run_all(configs, jobs: int) -> list[dict]:
    if jobs <= 1 or len(configs) == 1:
        return [_run_one(c) for c in configs]
    # fork where there is one: a spawned worker would re-run the caller's main script
    with process_pool(min(jobs, len(configs)), start="fork-if-available") as pool:
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
    ``analyse_onset`` (which never sees a Config).  Rayleigh numbers in and out are
    taken with the law's reference viscosity (the cold top); a [body] table is applied
    first (``convsim.run.layer.resolve``).
    """
    from convsim.analysis.stability import analyse_onset
    from convsim.run import layer
    config = layer.resolve(config)
    b, v = config.boundaries, config.viscosity
    return analyse_onset(
        layer.internal_rayleigh(config), aspect=config.domain.aspect, sides=b.sides,
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
    if onset is None:
        onset = onset_from_config(config)
    plan = _plan_bracket(config, onset, factors, grid, amplitude, end_time, max_dt,
                         growth_limit, richardson, jobs)
    configs = []
    for g in plan.grids:
        configs += bracket_configs(config, plan.rayleigh, plan.mode, grid=g, amplitude=amplitude,
                                   end_time=plan.end_time, max_dt=plan.max_dt)
    t0 = time.perf_counter()
    outputs = _run_all(configs, plan.jobs)
    wall = time.perf_counter() - t0
    log.info("onset runs: %d runs in %.2f s on %d workers", len(configs), wall, plan.jobs)
    theory = _theory_rates(onset, plan)
    common = dict(theory_rates=theory[0], theory_curve=theory[1], wall_seconds=wall,
                  max_dt=float(min(plan.max_dt, config.numerics.max_dt)))
    m = len(plan.rayleigh)
    coarse = _assemble(plan, outputs[m:], plan.grids[1], common) if richardson else None
    return _assemble(plan, outputs[:m], plan.grids[0], common, coarse)


@dataclass(frozen=True)
class _BracketPlan:
    """The checked settings of a run bracket."""

    box_rayleigh: float
    mode: int
    wavenumber: float
    rayleigh: np.ndarray
    grids: list
    amplitude: float
    growth_limit: float
    rate_scale: float
    end_time: float
    max_dt: float
    jobs: int


def _plan_bracket(config, onset, factors, grid, amplitude, end_time, max_dt, growth_limit,
                  richardson, jobs) -> _BracketPlan:
    """Check the settings of ``run_bracket`` and fill in the defaults."""
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
    nx, nz = (int(g) for g in (default_grid(config.domain.aspect) if grid is None else grid))
    if not (4 <= nx <= 4096 and 4 <= nz <= 4096):
        raise ConfigError(f"grid = {grid!r}: expected (nx, nz) with 4 <= nx, nz <= 4096")
    if jobs is None:
        jobs = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") \
            else (os.cpu_count() or 1)
    if isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1:
        raise ConfigError(f"jobs = {jobs!r}: expected a whole number >= 1")
    grids = [(nx, nz)]
    if richardson:
        if nx % 2 or nz % 2 or nz < 16:
            raise ConfigError(f"grid = {nx}x{nz}: Richardson extrapolation needs even nx and "
                              "nz, nz >= 16 (the coarse grid halves both)")
        grids.append((nx // 2, nz // 2))
    return _BracketPlan(box_ra, int(mode), float(k), np.array(sorted(box_ra * f for f in factors)),
                        grids, float(amplitude), float(growth_limit), rate_scale, float(end_time),
                        float(max_dt), jobs)


def _theory_rates(onset, plan: _BracketPlan):
    """The eigen-solver's growth rate at each Ra of the plan, and a curve over the range."""
    from convsim.analysis.stability import StabilityProblem
    problem = StabilityProblem(onset.layer, onset.points)

    def theory(ra):
        return float(np.max(problem.growth_rates(float(ra), plan.wavenumber).real))
    lo, hi = plan.rayleigh[0], plan.rayleigh[-1]
    pad = 0.05 * (hi - lo)
    curve_ra = np.linspace(lo - pad, hi + pad, 41)
    return (np.array([theory(ra) for ra in plan.rayleigh]),
            (curve_ra, np.array([theory(ra) for ra in curve_ra])))


def _assemble(plan: _BracketPlan, chunk, grid, common: dict, coarse=None) -> RunBracket:
    """The bracket of one grid from its runs' outputs (``coarse``: for the extrapolation)."""
    fits = tuple(fit_growth_rate(o["time"], o["vrms"], growth_limit=plan.growth_limit,
                                 rate_scale=plan.rate_scale) for o in chunk)
    for f, o, ra in zip(fits, chunk, plan.rayleigh):
        if o["status"] != "end-time":
            log.warning("onset run at Ra = %.6g ended '%s': %s", ra, o["status"], o["message"])
        if f.status != "ok":
            log.warning("onset run at Ra = %.6g: rate fit '%s' (%d samples in the linear phase)",
                        ra, f.status, f.samples)
    rates = np.array([f.rate for f in fits])
    ra_c, method = critical_from_rates(plan.rayleigh, rates)
    box_ra = plan.box_rayleigh
    extra = {}
    if coarse is not None:
        ra_x = (4.0 * ra_c - coarse.critical_rayleigh) / 3.0
        extra = dict(coarse=coarse, extrapolated_rayleigh=ra_x,
                     extrapolated_difference=ra_x / box_ra - 1.0)
    return RunBracket(rayleigh=plan.rayleigh, rates=rates,
                      stderr=np.array([f.stderr for f in fits]), fits=fits,
                      run_status=tuple(o["status"] for o in chunk), critical_rayleigh=ra_c,
                      method=method, eigen_critical_rayleigh=box_ra,
                      relative_difference=ra_c / box_ra - 1.0, mode=plan.mode,
                      wavenumber=plan.wavenumber, grid=grid, amplitude=plan.amplitude,
                      end_time=plan.end_time, **common, **extra)
