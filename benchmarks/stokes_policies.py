"""Stokes solve policies on a developed high-contrast flow: where the time of a step goes.

    python3 benchmarks/stokes_policies.py [--grids 128,256] [--steps 30] [--contrast 1e5]

A Frank-Kamenetskii layer (viscosity contrast 1e5, Ra = 100 at the cold top, so 1e7 at the
hot bottom) is developed on a 64 x 64 grid from the one-cell start to t = 0.05, interpolated
to each grid, stepped 10 times to settle the interpolation, and then ``--steps`` consecutive
steps are recorded.  The sequence of Stokes matrices A(eta(T_k)) and right-hand sides is
then solved by each policy, one after the other, timed on the same sequence:

- ``refactor``:  a fresh factor every step (the direct-solver baseline);
- ``lagged-6``:  the previous factor preconditions CG; refactor when CG needs > 6 iterations
  (convsim 0.1's rule);
- ``amortised``: the previous factor preconditions CG (up to 30 iterations); refactor when the
  CG iterations spent since the last factor, counted in units of one preconditioned
  iteration, exceed the cost of one refactor measured in the same units (a ski-rental rule;
  deterministic given the counts);
- ``floor-6``:   as lagged-6, but CG stops at max(1e-10, 2 x the relative residual that the
  fresh direct solve reached): at high contrast the factor itself loses digits, and a CG
  target below that floor only burns iterations;
- ``extr-RTOL``: as lagged-6 (to RTOL), CG started from the linear extrapolation in time
  2 x_k - x_(k-1) of the last two solutions instead of the last one;
- ``amg``:       CG preconditioned by a smoothed-aggregation algebraic multigrid (pyamg),
  hierarchy rebuilt every step (``amg-reuse``: rebuilt only when CG needs > 30 iterations).

Every policy aims at the relative residual 1e-10 (at contrast 1e5 even a fresh factor with
three refinement steps stops near 2.5e-9: the floor); ``--rtols 1e-8,1e-6`` adds lagged-6 runs
to looser targets, to see what a time-dependent run would gain.  Printed: ms per solve (mean), of which
factor or set-up, CG iterations per solve, the residual reached, and the ratio to one
triangular solve with a fresh factor (the floor of any factor-based policy).
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from convsim.config import Config
from convsim.model.grid import Grid, interpolate_cells
from convsim.model.linsolve import _pcg, limit_blas_threads, make_factorizer
from convsim.run.controller import build_model, initial_temperature

RTOL = 1e-10


def developed_temperature(contrast: float) -> tuple[Grid, np.ndarray]:
    """A developed high-contrast flow on a 64 x 64 grid (one-cell start, t = 0.05)."""
    cfg = Config().replace(domain__nx=64, domain__nz=64, physics__rayleigh=100.0,
                           viscosity__law="frank-kamenetskii",
                           viscosity__thermal_contrast=contrast, start__kind="one-cell")
    model = build_model(cfg)
    state = model.initial_state(initial_temperature(model.grid, model.thermal, 0.0, cfg.start,
                                                    cfg.physics.rayleigh))
    while state.time < 0.05:
        state, _ = model.step(state)
    return model.grid, state.temperature


def record_sequence(n: int, contrast: float, steps: int, coarse):
    """(matrices, right-hand sides) of ``steps`` consecutive steps on an n x n grid."""
    cfg = Config().replace(domain__nx=n, domain__nz=n, physics__rayleigh=100.0,
                           viscosity__law="frank-kamenetskii",
                           viscosity__thermal_contrast=contrast)
    model = build_model(cfg)
    grid0, T0 = coarse
    state = model.initial_state(interpolate_cells(grid0.x_cell, grid0.z_cell, T0, model.grid))
    for _ in range(10):
        state, _ = model.step(state)
    op, mats, rhss = model.stokes, [], []
    for _ in range(steps):
        state, _ = model.step(state)
        eta_n, eta_c = model.viscosities(state.temperature)
        mats.append(op.matrix_from_weights(op.viscosity_weights(eta_n, eta_c)).tocsr())
        rhss.append(op.rhs(state.temperature, model.rayleigh))
    return mats, rhss


def pcg(A, b, precondition, x0, max_iterations, rtol=RTOL):
    """Preconditioned CG to rtol (convsim's own); returns (x, iterations, converged)."""
    run = _pcg(A, b, precondition, x0, rtol, max_iterations)
    return run.x, run.iterations, run.converged


def factor_policy(mats, rhss, limit, amortised=False, floor=False, rtol=RTOL, extrapolate=False):
    """Lagged factor + CG; refactor by an iteration limit or by the amortised cost rule.
    With ``floor``, CG stops at max(RTOL, 2 x the residual the fresh direct solve reached).
    With ``extrapolate``, CG starts from 2 x_k - x_(k-1) (linear in time, equal steps)."""
    f = make_factorizer("cholmod")
    setup = iters = 0.0
    spent, x, factored = 0.0, None, False
    previous = None
    refactor_units = None
    target = rtol
    for A, b in zip(mats, rhss):
        ok = False
        if factored:
            guess = x if not (extrapolate and previous is not None) else 2.0 * x - previous
            previous = x
            x, k, ok = pcg(A, b, f.solve, guess, limit, target)
            iters += k
            spent += k
        if not ok:
            t0 = time.perf_counter()
            f.factor(A)
            setup += time.perf_counter() - t0
            x = f.solve(b)
            factored, spent = True, 0.0
            if floor:
                target = max(rtol, 2.0 * np.linalg.norm(b - A @ x) / np.linalg.norm(b))
            if amortised and refactor_units is None:
                refactor_units = _refactor_in_iterations(f, A, b)
        elif amortised and spent > refactor_units:
            t0 = time.perf_counter()
            f.factor(A)
            setup += time.perf_counter() - t0
            spent = 0.0
        yield x, setup, iters
        setup = iters = 0.0


def _refactor_in_iterations(f, A, b) -> float:
    """Cost of one refactor in units of one preconditioned CG iteration (measured once)."""
    t0 = time.perf_counter()
    f.factor(A)
    t_factor = time.perf_counter() - t0
    t0 = time.perf_counter()
    for _ in range(5):
        f.solve(b)
        A @ b
    t_iter = (time.perf_counter() - t0) / 5
    return t_factor / t_iter


def refactor_policy(mats, rhss):
    f = make_factorizer("cholmod")
    for A, b in zip(mats, rhss):
        t0 = time.perf_counter()
        f.factor(A)
        setup = time.perf_counter() - t0
        yield f.solve(b), setup, 0


def amg_policy(mats, rhss, reuse):
    import pyamg
    ml, x = None, None
    for A, b in zip(mats, rhss):
        setup, ok, k = 0.0, False, 0
        if ml is not None and reuse:
            x, k, ok = pcg(A, b, lambda r: ml.solve(r, tol=1e-30, maxiter=1, cycle="V"), x, 30)
        if not ok:
            t0 = time.perf_counter()
            ml = pyamg.smoothed_aggregation_solver(A.tocsr(), symmetry="symmetric", max_coarse=500)
            setup = time.perf_counter() - t0
            x, k2, ok = pcg(A, b, lambda r: ml.solve(r, tol=1e-30, maxiter=1, cycle="V"), x, 400)
            k += k2
        yield x, setup, k


def _have_pyamg() -> bool:
    try:
        import pyamg  # noqa: F401  (optional: pip install pyamg)
    except ImportError:
        print("pyamg is not installed: the amg policies are left out (pip install pyamg)")
        return False
    return True


def measure(name, solutions, mats, rhss):
    t0 = time.perf_counter()
    setup = iters = 0.0
    worst = 0.0
    for (x, s, k), A, b in zip(solutions, mats, rhss):
        setup += s
        iters += k
        worst = max(worst, np.linalg.norm(b - A @ x) / np.linalg.norm(b))
    n = len(mats)
    return name, 1e3 * (time.perf_counter() - t0) / n, 1e3 * setup / n, iters / n, worst


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--grids", default="128,256")
    parser.add_argument("--steps", type=int, default=30)
    parser.add_argument("--contrast", type=float, default=1e5)
    parser.add_argument("--skip-amg", action="store_true")
    parser.add_argument("--rtols", default="",
                        help="also run lagged-6 to these looser CG targets, e.g. 1e-8,1e-6 "
                             "(what a time-dependent run could accept; the table's residual "
                             "column shows what was reached)")
    args = parser.parse_args()
    limit_blas_threads(1)
    coarse = developed_temperature(args.contrast)
    for n in (int(v) for v in args.grids.split(",")):
        mats, rhss = record_sequence(n, args.contrast, args.steps, coarse)
        f = make_factorizer("cholmod")
        f.factor(mats[0])
        t0 = time.perf_counter()
        for _ in range(10):
            f.solve(rhss[0])
        tri = 1e3 * (time.perf_counter() - t0) / 10
        print(f"grid {n} x {n}, contrast {args.contrast:g}: one solve with a fresh factor "
              f"{tri:.2f} ms")
        print(f"{'policy':>10} {'ms/solve':>9} {'setup':>8} {'CG it.':>7} {'residual':>9} "
              f"{'x floor':>8}")
        runs = [("refactor", refactor_policy(mats, rhss)),
                ("lagged-6", factor_policy(mats, rhss, 6)),
                ("amortised", factor_policy(mats, rhss, 30, amortised=True)),
                ("floor-6", factor_policy(mats, rhss, 6, floor=True))]
        runs += [(f"lag-{float(r):.0e}", factor_policy(mats, rhss, 6, rtol=float(r)))
                 for r in filter(None, args.rtols.split(","))]
        runs += [(f"extr-{float(r):.0e}", factor_policy(mats, rhss, 6, rtol=float(r),
                                                         extrapolate=True))
                 for r in ["1e-10"] + list(filter(None, args.rtols.split(",")))]
        if not args.skip_amg and _have_pyamg():
            runs += [("amg", amg_policy(mats, rhss, False)), ("amg-reuse", amg_policy(mats, rhss, True))]
        for name, gen in runs:
            _, ms, setup, iters, worst = measure(name, gen, mats, rhss)
            print(f"{name:>10} {ms:9.2f} {setup:8.2f} {iters:7.1f} {worst:9.1e} {ms / tri:8.1f}")


if __name__ == "__main__":
    main()
