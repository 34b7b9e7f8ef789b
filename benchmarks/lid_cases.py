"""Time and check the two lid-regime cases from their configs, and a grid-convergence study.

Usage (from the repository root; with nothing else heavy running, so the timings mean something):

    python3 benchmarks/lid_cases.py [--study] [--only 2b|lid] [--limiter unlimited]
                                    [--wall-refinement BETA]

Goals (issue 10): Blankenbach et al. (1989) case 2b (configs/benchmark_case_2b.toml) at
160 x 64 from its config in under 30 s, within 0.5 % of the published Nu = 6.9299 and
vrms = 171.755 (quoted from memory); the stagnant-lid case 1 of Tosi et al. (2015)
(configs/benchmark_viscoplastic_case1.toml) at 128 x 128 in under 60 s.  ``--study`` also
runs 2b on 80 x 32 and 320 x 128 and the lid case on 32 x 32 and 64 x 64 and prints the
convergence (observed order from the three grids, common practice:
p = log((f3 - f2) / (f2 - f1)) / log 2); the goals are judged at the goal grids.
``--wall-refinement`` replaces the configs' domain.wall_refinement (0: uniform rows).  A benchmark, not a test:
it prints figures and marks each goal met or not; it never fails on speed.
"""

import argparse
import math
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

PUBLISHED_2B = {"nusselt_top": 6.9299, "vrms": 171.755}   # Blankenbach et al. 1989, from memory


def _run(config: str, nx: int, nz: int, limiter: str | None = None,
         wall_refinement: float | None = None):
    from convsim.api import run
    from convsim.config import load_config
    cfg = load_config(ROOT / "configs" / config).replace(domain__nx=nx, domain__nz=nz)
    if limiter:
        cfg = cfg.replace(numerics__limiter=limiter)
    if wall_refinement is not None:
        cfg = cfg.replace(domain__wall_refinement=wall_refinement)
    t0 = time.perf_counter()
    result = run(cfg)
    return result, time.perf_counter() - t0


def _line(name, grid, result, seconds):
    return (f"{name:<6} {grid:>8}  beta {result.grid.wall_refinement:g}  "
            f"{result.status:<8} steps {result.steps:>5}  "
            f"Nu {result.nusselt_top:.6f}  vrms {result.vrms:.5f}  <T> "
            f"{result.mean_temperature:.6f}  {seconds:7.1f} s")


def _order(values):
    f1, f2, f3 = values[-1], values[-2], values[-3]          # finest last
    if (f3 - f2) * (f2 - f1) <= 0 or f2 == f1:
        return math.nan
    return math.log(abs((f3 - f2) / (f2 - f1))) / math.log(2.0)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--study", action="store_true", help="also coarser grids: convergence")
    parser.add_argument("--limiter", default=None,
                        help="advection limiter instead of the configs' (e.g. unlimited, koren)")
    parser.add_argument("--only", choices=("2b", "lid"), default=None, help="one case only")
    parser.add_argument("--wall-refinement", type=float, default=None,
                        help="domain.wall_refinement instead of the configs' (0: uniform rows)")
    args = parser.parse_args()
    from convsim.model.linsolve import limit_blas_threads
    limit_blas_threads(1)
    cases = [("2b", "benchmark_case_2b.toml", [(80, 32), (160, 64), (320, 128)], (160, 64), 30.0),
             ("lid", "benchmark_viscoplastic_case1.toml", [(32, 32), (64, 64), (128, 128)],
              (128, 128), 60.0)]
    goals = []
    for name, config, grids, goal_grid, limit in cases:
        if args.only and name != args.only:
            continue
        runs = grids if args.study else [goal_grid]
        results = []
        for nx, nz in runs:
            result, seconds = _run(config, nx, nz, args.limiter, args.wall_refinement)
            results.append(result)
            print(_line(name, f"{nx}x{nz}", result, seconds), flush=True)
            if (nx, nz) == goal_grid:
                goal_result, goal_seconds = result, seconds
        result = goal_result
        goals.append((f"{name} at {goal_grid[0]}x{goal_grid[1]} steady in under {limit:g} s "
                      f"({goal_seconds:.1f} s)", result.status == "steady" and goal_seconds < limit))
        if name == "2b":
            for q, pub in PUBLISHED_2B.items():
                err = getattr(result, q) / pub - 1.0
                goals.append((f"2b {q} at {goal_grid[0]}x{goal_grid[1]} within 0.5 % of {pub} "
                              f"({100 * err:+.3f} %)",
                              abs(err) <= 0.005))
        if len(results) >= 3:
            for q in ("nusselt_top", "vrms", "mean_temperature"):
                values = [getattr(r, q) for r in results]
                extra = (values[-1] - values[-2]) / 3.0        # Richardson, p = 2, ratio 2
                pub = PUBLISHED_2B.get(q) if name == "2b" else None
                print(f"       observed order of {q}: {_order(values):.3g}; Richardson (p = 2) "
                      f"from the two finest: {values[-1] + extra:.6g}"
                      + (f" ({100 * ((values[-1] + extra) / pub - 1):+.3f} %)" if pub else ""))
    for text, met in goals:
        print(f"{'MET    ' if met else 'NOT MET'}  {text}")


if __name__ == "__main__":
    main()
