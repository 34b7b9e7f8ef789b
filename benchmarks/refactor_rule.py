"""The amortised refactor rule of the lagged-factor CG on a long time-dependent run.

    python3 benchmarks/refactor_rule.py [--grid 256x128] [--steps 1500] [--budgets 10,5,0]

Runs configs/stagnant_lid_time_dependent.toml (contrast 1e5, Ra 1e7 at the bottom, noise
start, no grid sequencing) on one grid for ``--steps`` steps with each refactor budget
(``convsim.model.linsolve.REFACTOR_IN_SOLVES``; 0 = the rule off, only the 6-iteration limit)
and prints, for the second half of the run (the flow developed), its wall time, CG iterations
per step and refactors; then each budget's time as a ratio to the rule off (measured in one
run).  Figures are quoted in DEVELOPERS.md ("Lagged factor").
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

from convsim.config import load_config
from convsim.model import linsolve
from convsim.run.build import build_model
from convsim.run.initial import initial_temperature
from convsim.threads import limit_threads

CONFIG = Path(__file__).resolve().parents[1] / "configs" / "stagnant_lid_time_dependent.toml"


def second_half(grid: str, steps: int, budget: int):
    """(seconds, CG iterations per step, refactors) of the second half of the run."""
    linsolve.REFACTOR_IN_SOLVES = budget if budget > 0 else 10 ** 9
    nx, nz = (int(v) for v in grid.split("x"))
    cfg = load_config(CONFIG).replace(domain__nx=nx, domain__nz=nz, start__coarse_grid=0)
    model = build_model(cfg)
    state = model.initial_state(initial_temperature(model.grid, model.thermal, 0.0, cfg.start,
                                                    cfg.physics.rayleigh))
    iterations = refactors = 0
    t0 = None
    for k in range(steps):
        if k == steps // 2:
            t0, iterations, refactors = time.perf_counter(), 0, 0
        state, report = model.step(state)
        iterations += report.stokes_iterations
        refactors += bool(report.refactored)
    timed = steps - steps // 2
    return time.perf_counter() - t0, iterations / timed, refactors


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--grid", default="256x128")
    parser.add_argument("--steps", type=int, default=1500)
    parser.add_argument("--budgets", default="0,10,5")
    args = parser.parse_args()
    limit_threads(1)
    print(f"{CONFIG.name} at {args.grid}, {args.steps} steps, the second half timed")
    print(f"{'budget':>7} {'seconds':>8} {'CG it./step':>12} {'refactors':>10} {'vs off':>7}")
    off = None
    for budget in (int(v) for v in args.budgets.split(",")):
        seconds, per_step, refactors = second_half(args.grid, args.steps, budget)
        off = seconds if budget == 0 else off
        ratio = f"{seconds / off:7.2f}" if off else "      -"
        print(f"{budget if budget else 'off':>7} {seconds:8.1f} {per_step:12.2f} {refactors:10d} "
              f"{ratio}", flush=True)


if __name__ == "__main__":
    main()
