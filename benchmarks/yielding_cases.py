"""Time the viscoplastic cases of Tosi et al. (2015) from their configs and print each goal of
issue 11 "met" or "NOT met".

Usage (from the repository root; timings under /work/bin/cpu-slot --exclusive, or alone):

    python3 benchmarks/yielding_cases.py [--grid 64] [--study] [--no-sequencing]
    python3 benchmarks/yielding_cases.py --case4 N [--start RUNFILE] [--end-time T] [--out F]

Goals (issue 11 and its session-3 brief):
- each steady case (configs/benchmark_viscoplastic_case2.toml and case3) at 64 x 64 in under a
  minute on this machine (the configs' own route: grid sequencing from 32 cells included);
- with ``--no-sequencing``: the same without grid sequencing (``start.coarse_grid = 0``, the
  one-cell start and the Newton finish alone), also under a minute;
- ``--case4 N``: the periodic case 4 measured: at least three whole periods after the spin-up,
  the period's 95 % interval under 1 % of the period, and the crossing and autocorrelation
  estimates of the period within 1 % of each other; the single-run regime label says
  ``episodic`` (the lid breaks and re-forms in the averaging window).

Prints per steady case the wall time, the steps, the nonlinear Stokes iterations per time step
and the cost over case 1 (the same layer without yielding), Nu, vrms, the surface mobility
(surface rms velocity / rms velocity), the extreme viscosities.  ``--study`` adds 16 and 32
cells and the observed order of Nu and vrms (common practice: p = log((f3 - f2) / (f2 - f1)) /
log 2).  No published values are compared (none recalled reliably).  A benchmark, not a test.

The wall time of a steady case includes its grid-sequencing run on 32 cells; the nonlinear
iterations per step are those of the 64 x 64 steps.  ``--case4`` prints the period and the time
means of Nu, vrms, surface and interior vrms, mobility, extreme viscosities and yielded area
over whole periods with 95 % intervals (``studies.viscoplastic.periodic_statistics``), the
single periods, the lid history (breaking events, regime word) and the ms per step;
``--start`` begins from the last snapshot of another run file interpolated to N x N cells
(``start.kind = "snapshot"``), ``--out`` writes the run file.
"""

import argparse
import math
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

CASES = (("case1", "benchmark_viscoplastic_case1.toml"),
         ("case2", "benchmark_viscoplastic_case2.toml"),
         ("case3", "benchmark_viscoplastic_case3.toml"))
GOAL_SECONDS = 60.0
PERIOD_PRECISION = 0.01      # 95 % interval of the period / period, and crossing vs autocorr.


def _word(ok: bool) -> str:
    return "met" if ok else "NOT met"


class _Count:
    """Observer: nonlinear Stokes iterations of every step."""

    def __init__(self):
        self.iterations = []

    def on_step(self, report, state=None):
        self.iterations.append(getattr(report, "nonlinear_iterations", 0))

    def __getattr__(self, name):          # every other observer hook: nothing to do
        if name.startswith("on_"):
            return lambda *a, **k: None
        raise AttributeError(name)


def _run(config: str, n: int, sets=(), output=None):
    from convsim.api import run
    from convsim.config import load_config
    cfg = load_config(ROOT / "configs" / config, list(sets)).replace(domain__nx=n, domain__nz=n)
    count = _Count()
    t0 = time.perf_counter()
    result = run(cfg, output, overwrite=True, observers=[count])
    return result, time.perf_counter() - t0, count.iterations


def _order(values):
    f1, f2, f3 = values[-1], values[-2], values[-3]
    if (f3 - f2) * (f2 - f1) <= 0 or f2 == f1:
        return math.nan
    return math.log(abs((f3 - f2) / (f2 - f1))) / math.log(2.0)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--grid", type=int, default=64)
    parser.add_argument("--study", action="store_true")
    parser.add_argument("--no-sequencing", action="store_true",
                        help="also run cases 2 and 3 without grid sequencing")
    parser.add_argument("--case4", type=int, default=0, metavar="N",
                        help="run the periodic case 4 on N x N cells instead")
    parser.add_argument("--start", default="", help="case 4: start from this run file")
    parser.add_argument("--end-time", type=float, default=0.0, help="case 4: end time")
    parser.add_argument("--out", default=None, help="case 4: run file to write")
    args = parser.parse_args()
    from convsim.model.linsolve import limit_blas_threads
    limit_blas_threads(1)
    if args.case4:
        return periodic_case(args.case4, args.start, args.end_time, args.out)
    grids = sorted({16, 32, args.grid}) if args.study else [args.grid]
    routes = [("", ())] + ([(" no sequencing", ("start.coarse_grid=0",))]
                           if args.no_sequencing else [])
    base_seconds = {}
    for name, config in CASES:
        for label, sets in (routes if name != "case1" else routes[:1]):
            rows = [steady_case(name + label, config, n, sets, base_seconds) for n in grids]
            if len(rows) >= 3:
                print(f"{name}{label} observed order: Nu {_order([r[0] for r in rows]):.2f}, "
                      f"vrms {_order([r[1] for r in rows]):.2f}")


def steady_case(name: str, config: str, n: int, sets, base_seconds: dict):
    """One steady case on n x n cells: one line with the goal where it applies."""
    result, seconds, its = _run(config, n, sets)
    eta = np.asarray(result.viscosity)
    per_step = float(np.mean(its)) if its else float("nan")
    if name == "case1":
        base_seconds[n] = seconds
    cost = seconds / base_seconds[n] if n in base_seconds else float("nan")
    goal = ""
    if name != "case1" and n == 64:
        goal = f"  goal < 60 s at 64 x 64: {_word(seconds < GOAL_SECONDS)}"
    print(f"{name} {n:>3}x{n:<3} {result.status:<8} steps {result.steps:>5}  "
          f"{seconds:7.1f} s  x{cost:5.1f} over case 1  nonlinear its/step "
          f"{per_step:5.2f}  Nu {result.nusselt_top:.5f}  vrms {result.vrms:.4f}  "
          f"mobility {result.surface_vrms / result.vrms:.4f}  eta "
          f"[{eta.min():.3g}, {eta.max():.3g}]{goal}", flush=True)
    return result.nusselt_top, result.vrms


def periodic_case(n: int, start: str = "", end_time: float = 0.0, out=None):
    """Case 4 on n x n cells: period, whole-period means with 95 % intervals, lid history."""
    from convsim.studies.viscoplastic import PERIODIC_SERIES, periodic_statistics
    sets = ["start.kind=snapshot", f"start.file={start}"] if start else []
    sets += [f"stop.end_time={end_time}"] if end_time else []
    result, seconds, its = _run("benchmark_viscoplastic_case4.toml", n, sets, out)
    s = result.series
    stats = periodic_statistics(s["series_time"], {q: s[q] for q in PERIODIC_SERIES})
    print(f"case4 {n:>3}x{n:<3} {result.status} steps {result.steps} to t = {result.time:.4g}  "
          f"{seconds:.1f} s ({1000 * seconds / max(result.steps, 1):.1f} ms/step)  nonlinear "
          f"its/step {np.mean(its):.2f}" + (f"  from {start}" if start else ""))
    print(f"case4 period {stats.period:.5g} +- {stats.period_ci95:.2g} (95 %) over "
          f"{stats.periods} whole periods from t = {stats.from_time:.4g} (upward crossings of "
          f"the mean Nu); autocorrelation {stats.autocorrelation_period:.5g}; single periods "
          + ", ".join(f"{p:.5g}" for p in stats.single_periods))
    for q in PERIODIC_SERIES:
        print(f"case4 mean over whole periods {q}: {stats.means[q]:.6g} +- "
              f"{stats.ci95[q]:.2g} (95 %)")
    lid = result.lid
    times = lid.get("breaking_times") or []
    print(f"case4 lid: regime {lid.get('regime')}, switches {lid.get('switches')}, "
          f"{len(times)} breaking events in the averaging window"
          + (f" (t = {', '.join(f'{x:.4g}' for x in times[:8])}"
             + (", ..." if len(times) > 8 else "") + ")" if times else ""))
    p = stats.period
    auto_gap = abs(stats.autocorrelation_period - p) / p if p == p else math.nan
    print(f"goal at least 3 whole periods: {_word(stats.periods >= 3)}")
    print(f"goal period 95 % interval < {PERIOD_PRECISION:.0%} of the period: "
          f"{_word(stats.period_ci95 < PERIOD_PRECISION * p)}")
    print(f"goal crossing and autocorrelation periods within {PERIOD_PRECISION:.0%}: "
          f"{_word(auto_gap < PERIOD_PRECISION)}")
    print(f"goal single-run label 'episodic': {_word(lid.get('regime') == 'episodic')}")


if __name__ == "__main__":
    main()
