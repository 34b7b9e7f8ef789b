"""Speed of the onset analysis, and of the run-based bracket.

Goals: the full analysis (``analyse_onset`` with 100 curve points, the layer's minimum,
the box minimum and the resolution check) in under 2 s per case on one core; the
run-based bracket (``onset_runs.run_bracket``: five simulator runs around the box Ra_c,
side by side on the local cores, default settings) in under a minute.

    python3 benchmarks/onset_speed.py [--repeat R] [--jobs N] [--convergence]

Prints one line per eigen-solver case (best-of-R wall time, collocation degree, Ra_c,
k_c), then one line per bracket case (wall time of the five runs including the worker
start-up, grid, run-based Ra_c and its difference from the eigen-solver's).
``--convergence`` adds the run-based Ra_c of the free-free sqrt(2) box on five grids
and the Richardson value of the 34x24 / 17x12 pair: the simulator's discretisation
error.  Reference: Chandrasekhar (1961), Hydrodynamic and Hydromagnetic Stability,
ch. II, free-free Ra_c = 27 pi^4 / 4 at k_c = pi / sqrt(2), which is the box's own
value for aspect sqrt(2); rigid-rigid 1707.762 at k_c = 3.117.
"""

import argparse
import math
import os
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from convsim.config import Config  # noqa: E402
from convsim.analysis.onset_runs import run_bracket  # noqa: E402
from convsim.analysis.stability import analyse_onset  # noqa: E402

CASES = {
    "free-free, constant": dict(),
    "rigid-rigid, constant": dict(top_flow="no-slip", bottom_flow="no-slip"),
    "rigid top, heated within, insulating bottom": dict(
        top_flow="no-slip", bottom_heat="flux", bottom_value=0.0, internal_heating=1.0),
    "free-free, Frank-Kamenetskii 1e6": dict(
        viscosity="frank-kamenetskii", viscosity_parameters={"thermal_contrast": 1e6}),
    "rigid-rigid, Frank-Kamenetskii 1e30 (N=72)": dict(
        top_flow="no-slip", bottom_flow="no-slip", viscosity="frank-kamenetskii",
        viscosity_parameters={"thermal_contrast": 1e30}),
    "free-free, Arrhenius E=20 V=5": dict(
        viscosity="arrhenius",
        viscosity_parameters={"activation_energy": 20.0, "activation_volume": 5.0}),
    "free-free, Frank-Kamenetskii 1e6, minimum 1e-3": dict(
        viscosity="frank-kamenetskii",
        viscosity_parameters={"thermal_contrast": 1e6, "minimum": 1e-3}),
}


BRACKET_CASES = {
    "free-free, aspect sqrt(2) (transform Stokes)": dict(
        aspect=math.sqrt(2.0), flows=("free-slip", "free-slip")),
    "rigid-rigid, aspect 2, mode 2 (sparse Stokes)": dict(
        aspect=2.0, flows=("no-slip", "no-slip")),
}


def bracket_case(aspect, flows, **kwargs):
    top, bottom = flows
    cfg = Config().replace(domain__aspect=aspect, boundaries__top_flow=top,
                           boundaries__bottom_flow=bottom)
    onset = analyse_onset(aspect=aspect, top_flow=top, bottom_flow=bottom)
    t0 = time.perf_counter()
    bracket = run_bracket(cfg, onset, **kwargs)
    return bracket, time.perf_counter() - t0


def run_brackets(jobs, convergence):
    print(f"run-based bracket, five runs 0.8..1.25 x box Ra_c, {jobs} workers; goal < 60 s")
    worst = 0.0
    for name, case in BRACKET_CASES.items():
        b, wall = bracket_case(**case, jobs=jobs)
        worst = max(worst, wall)
        steps = b.end_time / b.max_dt
        print(f"  {name:<48s} {wall:7.2f} s  grid {b.grid[0]}x{b.grid[1]}  ~{steps:.0f} steps"
              f"  Ra_c runs {b.critical_rayleigh:.6g}  eigen {b.eigen_critical_rayleigh:.6g}"
              f"  ({100.0 * b.relative_difference:+.3f} %)")
    print(f"slowest bracket {worst:.2f} s: {'meets' if worst < 60.0 else 'MISSES'} the 60 s goal")
    if not convergence:
        return
    ra_ff = 27.0 * math.pi**4 / 4.0
    print("discretisation error of the simulator's Ra_c, free-free sqrt(2) box "
          f"(exact {ra_ff:.6f})")
    for nz in (12, 16, 24, 32, 48):
        nx = 2 * round(0.5 * nz * math.sqrt(2.0))
        b, wall = bracket_case(**BRACKET_CASES["free-free, aspect sqrt(2) (transform Stokes)"],
                               jobs=jobs, grid=(nx, nz))
        print(f"  {nx:3d}x{nz:<3d} Ra_c {b.critical_rayleigh:10.4f}  "
              f"{100.0 * (b.critical_rayleigh / ra_ff - 1.0):+.4f} %  "
              f"rate at 1.25 Ra_c {100.0 * b.rate_differences[-1]:+.3f} %  ({wall:.1f} s)")
    b, wall = bracket_case(**BRACKET_CASES["free-free, aspect sqrt(2) (transform Stokes)"],
                           jobs=jobs, richardson=True)
    print(f"  Richardson 34x24 / 17x12: Ra_c {b.extrapolated_rayleigh:.4f}  "
          f"{100.0 * (b.extrapolated_rayleigh / ra_ff - 1.0):+.4f} %  ({wall:.1f} s, ten runs)")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--jobs", type=int, default=len(os.sched_getaffinity(0)))
    parser.add_argument("--convergence", action="store_true",
                        help="also the run-based Ra_c on five grids (discretisation error)")
    parser.add_argument("--skip-eigen", action="store_true", help="only the run-based part")
    args = parser.parse_args()
    if not args.skip_eigen:
        eigen_cases(args.repeat)
    run_brackets(args.jobs, args.convergence)


def eigen_cases(repeat):
    threads = os.environ.get("OMP_NUM_THREADS", "unset")
    print(f"onset analysis, 100 curve wavenumbers, best of {repeat} "
          f"(OMP_NUM_THREADS={threads}); goal < 2 s")
    worst = 0.0
    for name, kwargs in CASES.items():
        best = float("inf")
        for _ in range(repeat):
            t0 = time.perf_counter()
            result = analyse_onset(1e5, aspect=2.0, curve_points=100, **kwargs)
            best = min(best, time.perf_counter() - t0)
        worst = max(worst, best)
        print(f"  {name:<48s} {best:7.3f} s  N={result.points:<3d} "
              f"Ra_c={result.critical_rayleigh:.6g}  k_c={result.critical_wavenumber:.4f}")
    print(f"slowest case {worst:.3f} s: {'meets' if worst < 2.0 else 'MISSES'} the 2 s goal")


if __name__ == "__main__":
    main()
