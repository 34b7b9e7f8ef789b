"""Time the steady viscoplastic cases of Tosi et al. (2015) from their configs, with their cost
over the temperature-only case, and a grid-convergence study.

Usage (from the repository root; under the CPU lock so that the timings mean something):

    flock /tmp/convsim-cpu.lock python3 benchmarks/yielding_cases.py [--grid 64] [--study]

Goal (issue 11): each steady benchmark case (configs/benchmark_viscoplastic_case2.toml and
case3) at 64 x 64 in under a minute on this machine.  Prints per case the wall time, the steps,
the nonlinear Stokes iterations per time step and the cost over case 1 (the same layer without
yielding, configs/benchmark_viscoplastic_case1.toml), Nu, vrms, the surface mobility
(surface rms velocity / rms velocity), the extreme viscosities.  ``--study`` adds 16, 32 and
(with --grid 64) 64 cells and the observed order of Nu and vrms (common practice:
p = log((f3 - f2) / (f2 - f1)) / log 2).  No published values are compared (none recalled
reliably).  A benchmark, not a test: it prints figures and marks the goal met or not.

The wall time of a case includes its grid-sequencing run on 32 cells (``start.coarse_grid``);
the nonlinear iterations per step are those of the 64 x 64 steps.

``--case4 N`` instead runs the periodic case 4 (configs/benchmark_viscoplastic_case4.toml) on
N x N cells to its end time and prints its period (upward crossings of the mean Nu after the
first 30 % of the run, ``studies.viscoplastic.oscillation_period``), the time means of Nu,
vrms and surface vrms over its last whole periods, and the run's own time statistics
(spin-up, mean, 95 % interval: ``RunResult.summary()['statistics']``).
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


def _run(config: str, n: int):
    from convsim.api import run
    from convsim.config import load_config
    cfg = load_config(ROOT / "configs" / config).replace(domain__nx=n, domain__nz=n)
    count = _Count()
    t0 = time.perf_counter()
    try:
        result = run(cfg, observers=[count])
    except TypeError:                      # a front door without observers
        result = run(cfg)
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
    parser.add_argument("--case4", type=int, default=0, metavar="N",
                        help="run the periodic case 4 on N x N cells instead")
    args = parser.parse_args()
    from convsim.model.linsolve import limit_blas_threads
    limit_blas_threads(1)
    if args.case4:
        return periodic_case(args.case4)
    grids = sorted({16, 32, args.grid}) if args.study else [args.grid]
    base_seconds = {}
    for name, config in CASES:
        rows = []
        for n in grids:
            result, seconds, its = _run(config, n)
            eta = np.asarray(result.viscosity)
            per_step = float(np.mean(its)) if its else float("nan")
            if name == "case1":
                base_seconds[n] = seconds
            cost = seconds / base_seconds[n] if n in base_seconds else float("nan")
            goal = ""
            if name != "case1" and n == 64:
                goal = "  goal < 60 s: " + ("met" if seconds < GOAL_SECONDS else "NOT met")
            print(f"{name} {n:>3}x{n:<3} {result.status:<8} steps {result.steps:>5}  "
                  f"{seconds:7.1f} s  x{cost:5.1f} over case 1  nonlinear its/step "
                  f"{per_step:5.2f}  Nu {result.nusselt_top:.5f}  vrms {result.vrms:.4f}  "
                  f"mobility {result.surface_vrms / result.vrms:.4f}  eta "
                  f"[{eta.min():.3g}, {eta.max():.3g}]{goal}", flush=True)
            rows.append((result.nusselt_top, result.vrms))
        if len(rows) >= 3:
            print(f"{name} observed order: Nu {_order([r[0] for r in rows]):.2f}, "
                  f"vrms {_order([r[1] for r in rows]):.2f}")


def periodic_case(n: int):
    """Case 4 on n x n cells: period, means over whole periods, the run's time statistics."""
    from convsim.studies.viscoplastic import crossing_times, oscillation_period, periodic_means
    t0 = time.perf_counter()
    result, seconds, its = _run("benchmark_viscoplastic_case4.toml", n)
    s = result.series
    t = np.asarray(s["series_time"])
    names = ("nusselt_top", "vrms", "surface_vrms")
    period, periods = oscillation_period(t, s["nusselt_top"], skip=0.3)
    means = periodic_means(t, {q: s[q] for q in names}, period, periods)
    print(f"case4 {n:>3}x{n:<3} {result.status} steps {result.steps} to t = {result.time:.4g}  "
          f"{time.perf_counter() - t0:.1f} s  nonlinear its/step {np.mean(its):.2f}")
    spacing = np.diff(crossing_times(t, s["nusselt_top"], skip=0.3))
    print(f"case4 period {period:.5g} (mean of {periods} periods after the first 30 % of the "
          "run; upward crossings of the mean Nu; single periods "
          + ", ".join(f"{p:.4g}" for p in spacing) + ")")
    print("case4 means over those whole periods: "
          + ", ".join(f"{q} {means[q]:.5g}" for q in names))
    stats = result.summary().get("statistics", {})
    for q in names:
        st = stats.get(q) or {}
        print(f"case4 time statistics {q}: mean {st.get('mean', float('nan')):.5g} "
              f"+- {st.get('ci95', float('nan')):.2g} (95 %) from t = "
              f"{st.get('from_time', float('nan')):.4g}, reliable {st.get('reliable')}")


if __name__ == "__main__":
    main()
