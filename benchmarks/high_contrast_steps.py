"""Steps per second of a developed high-contrast flow, by flow-solve tolerance.

    python3 benchmarks/high_contrast_steps.py [--grids 256,512] [--steps 40] [--tolerances 1e-10,1e-8,1e-6]

A Frank-Kamenetskii layer (viscosity contrast 1e5, Ra = 100 at the cold top, so 1e7 at the
hot bottom) is developed on a 64 x 64 grid from the one-cell start to t = 0.05 (as in
benchmarks/stokes_policies.py), interpolated to each grid and stepped 10 times to settle.
From that one state, ``--steps`` steps are run with each ``numerics.stokes_tolerance``
(relative residual of the flow solve; the lagged-factor CG starts from psi extrapolated in
time).  Printed per tolerance: steps per second, mean CG iterations and refactorisations per
step, and how far Nu (top) and vrms after the last step are from those of the tightest
tolerance (the accuracy the speed costs).

Goals (issue "Speed where users wait"), printed as met or not at the fastest tolerance whose
Nu and vrms stay within 1e-6 of the tightest: 30 steps/s at 256 x 256, 8 at 512 x 512.
"""

from __future__ import annotations

import argparse
import time

from convsim.config import Config
from convsim.model.grid import interpolate_cells
from convsim.model.linsolve import limit_blas_threads
from convsim.run.controller import build_model

from stokes_policies import developed_temperature

GOALS = {256: 30.0, 512: 8.0}
ACCURACY = 1e-6


def model_at(n: int, contrast: float, tolerance: float, flow_error: float = 1e-15):
    cfg = Config().replace(domain__nx=n, domain__nz=n, physics__rayleigh=100.0,
                           viscosity__law="frank-kamenetskii", viscosity__thermal_contrast=contrast,
                           numerics__stokes_tolerance=tolerance,
                           numerics__flow_error_tolerance=flow_error)
    return build_model(cfg)


def settled_state(model, coarse):
    """The developed coarse temperature on the model's grid, stepped 10 times."""
    grid0, T0 = coarse
    state = model.initial_state(interpolate_cells(grid0.x_cell, grid0.z_cell, T0, model.grid))
    for _ in range(10):
        state, _ = model.step(state)
    return state


def timed_steps(model, state, steps: int):
    """(steps per second, CG iterations per step, refactors per step, last report)."""
    iterations = refactors = 0
    t0 = time.perf_counter()
    for _ in range(steps):
        state, report = model.step(state)
        iterations += report.stokes_iterations
        refactors += bool(report.refactored)
    seconds = time.perf_counter() - t0
    return steps / seconds, iterations / steps, refactors / steps, report


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--grids", default="256,512")
    parser.add_argument("--steps", type=int, default=40)
    parser.add_argument("--contrast", type=float, default=1e5)
    parser.add_argument("--tolerances", default="1e-10,1e-8,1e-6")
    args = parser.parse_args()
    limit_blas_threads(1)
    coarse = developed_temperature(args.contrast)
    tolerances = sorted((float(v) for v in args.tolerances.split(",")))
    for n in (int(v) for v in args.grids.split(",")):
        print(f"grid {n} x {n}, contrast {args.contrast:g}, {args.steps} steps from one settled state")
        print(f"{'tolerance':>10} {'steps/s':>8} {'CG it./step':>12} {'refactor/step':>14} "
              f"{'Nu change':>10} {'vrms change':>12}")
        reference, best = None, None
        start = settled_state(model_at(n, args.contrast, tolerances[0]), coarse)
        for tolerance in tolerances:
            rate, iterations, refactors, report = timed_steps(
                model_at(n, args.contrast, tolerance), start, args.steps)
            reference = reference or report
            d_nu = abs(report.nusselt_top / reference.nusselt_top - 1.0)
            d_vrms = abs(report.vrms / reference.vrms - 1.0)
            print(f"{tolerance:10.0e} {rate:8.2f} {iterations:12.2f} {refactors:14.2f} "
                  f"{d_nu:10.1e} {d_vrms:12.1e}", flush=True)
            if max(d_nu, d_vrms) <= ACCURACY:
                best = max(best or 0.0, rate)
        goal = GOALS.get(n)
        if goal:
            verdict = "met" if best and best >= goal else "NOT met"
            print(f"goal {goal:g} steps/s at {n} x {n} (within {ACCURACY:g} of the tightest "
                  f"tolerance): {best:.2f} steps/s, {verdict}")


if __name__ == "__main__":
    main()
