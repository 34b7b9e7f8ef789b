"""Steps per second of a developed high-contrast flow, by flow-solve tolerance.

    python3 benchmarks/high_contrast_steps.py [--grids 256,512] [--steps 40]
        [--targets 1e-10:0,1e-6:0,1e-6:1e-6,1e-6:1e-5]

A Frank-Kamenetskii layer (viscosity contrast 1e5, Ra = 100 at the cold top, so 1e7 at the
hot bottom) is developed on a 64 x 64 grid from the one-cell start to t = 0.05 (as in
benchmarks/stokes_policies.py), interpolated to each grid and stepped 10 times to settle.
From that one state, ``--steps`` steps are run with each pair of targets
``numerics.stokes_tolerance:numerics.flow_error_tolerance`` (relative residual of the flow
solve : CG's estimated relative error in the dissipation norm, 0 = off; the lagged-factor CG
starts from psi extrapolated in time; 1e-6:1e-5 is what a time-following run does by
default).  Printed per pair: steps per second, mean CG iterations and refactorisations per
step after three untimed steps (a new model's first factor is start-up; one CG iteration
costs one triangular solve of the factor, timed and printed beside), and how far Nu (top) and vrms after the last step are from those of the first pair
(the accuracy the speed costs).

Goals (issue "Speed where users wait"), printed as met or not at the fastest pair whose
Nu and vrms stay within 1e-6 of the first: 30 steps/s at 256 x 256, 8 at 512 x 512.
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


def solve_seconds(model, state, repeats: int = 5) -> float:
    """Seconds of one triangular solve pair with the model's current factor (best of repeats)."""
    solve = model.flow_solver._lagged.factorizer.solve
    b = model.stokes.from_nodes(state.psi)
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        solve(b)
        best = min(best, time.perf_counter() - t0)
    return best


WARM_UP = 3


def timed_steps(model, state, steps: int):
    """(steps per second, CG iterations per step, refactors per step, last report) of ``steps``
    steps after ``WARM_UP`` untimed ones (the first factor of a new model is a start-up cost;
    a long run factors again only when CG says so)."""
    for _ in range(WARM_UP):
        state, _ = model.step(state)
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
    parser.add_argument("--targets", default="1e-10:0,1e-6:0,1e-6:1e-6,1e-6:1e-5")
    args = parser.parse_args()
    limit_blas_threads(1)
    coarse = developed_temperature(args.contrast)
    targets = [tuple(float(v) for v in pair.split(":")) for pair in args.targets.split(",")]
    for n in (int(v) for v in args.grids.split(",")):
        print(f"grid {n} x {n}, contrast {args.contrast:g}, {args.steps} steps from one settled state")
        print(f"{'residual':>9} {'flow err.':>9} {'steps/s':>8} {'CG it./step':>12} "
              f"{'refactor/step':>14} {'Nu change':>10} {'vrms change':>12}")
        reference, best, one_solve = None, None, None
        start = settled_state(model_at(n, args.contrast, targets[0][0]), coarse)
        for tolerance, flow_error in targets:
            model = model_at(n, args.contrast, tolerance, flow_error or 1e-15)
            rate, iterations, refactors, report = timed_steps(model, start, args.steps)
            one_solve = one_solve or solve_seconds(model, start)
            reference = reference or report
            d_nu = abs(report.nusselt_top / reference.nusselt_top - 1.0)
            d_vrms = abs(report.vrms / reference.vrms - 1.0)
            print(f"{tolerance:9.0e} {flow_error:9.0e} {rate:8.2f} {iterations:12.2f} "
                  f"{refactors:14.2f} {d_nu:10.1e} {d_vrms:12.1e}", flush=True)
            if max(d_nu, d_vrms) <= ACCURACY:
                best = max(best or 0.0, rate)
        print(f"one triangular solve of the factor: {one_solve * 1e3:.1f} ms "
              f"(one solve per step and nothing else: {1.0 / one_solve:.1f} steps/s)")
        goal = GOALS.get(n)
        if goal:
            verdict = "met" if best and best >= goal else "NOT met"
            print(f"goal {goal:g} steps/s at {n} x {n} (within {ACCURACY:g} of the first "
                  f"pair): {best:.2f} steps/s, {verdict}")


if __name__ == "__main__":
    main()
