"""Stokes back ends: factorisation and solve times of the streamfunction matrix.

    python3 benchmarks/stokes_backends.py [--grids 64,128,256,512]

Prints, per node grid n x n and back end, the time to factorise (first and repeated, the
latter reusing the symbolic analysis where the back end can), the time of one solve, and for
constant viscosity with free-slip walls the fast transform solver (no factor at all).  The
matrix is the variable-viscosity operator (viscosity contrast 1e3) unless noted.
"""

import argparse
import time

import numpy as np

from convsim.model.grid import Grid
from convsim.model.linsolve import available_factorizers, make_factorizer
from convsim.model.rheology import ViscosityLaw
from convsim.model.stokes import StokesOperator, TransformSolver


def timed(func, repeat=3):
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = func()
        best = min(best, time.perf_counter() - t0)
    return best, out


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--grids", default="64,128,256,512")
    args = parser.parse_args()
    law = ViscosityLaw("frank-kamenetskii", thermal_contrast=1e3)
    print(f"{'grid':>6} {'back end':>10} {'assemble ms':>12} {'factor ms':>10} {'refactor ms':>12} "
          f"{'solve ms':>9} {'residual':>9}")
    for n in (int(v) for v in args.grids.split(",")):
        g = Grid(n, n)
        X, Z = g.cell_mesh()
        XN, ZN = g.node_mesh()
        T = 1 - Z + 0.1 * np.cos(np.pi * X) * np.sin(np.pi * Z)
        op = StokesOperator(g)
        t_asm, A = timed(lambda: op.matrix(law(g.cell_to_node(T, 1.0, 0.0), ZN), law(T, Z)))
        b = op.rhs(T, 1e4)
        for name in available_factorizers():
            if name == "superlu" and n > 256:
                print(f"{n:>6} {name:>10}  (skipped above 256: tens of seconds)")
                continue
            f = make_factorizer(name)
            t0 = time.perf_counter()
            f.factor(A)
            t_first = time.perf_counter() - t0
            t_re, _ = timed(lambda: f.factor(A), repeat=2)
            t_solve, x = timed(lambda: f.solve(b))
            res = np.linalg.norm(A @ x - b) / np.linalg.norm(b)
            print(f"{n:>6} {name:>10} {t_asm*1e3:12.1f} {t_first*1e3:10.1f} {t_re*1e3:12.1f} "
                  f"{t_solve*1e3:9.2f} {res:9.1e}")
        ts = TransformSolver(op)
        t_solve, _ = timed(lambda: ts.solve(b))
        print(f"{n:>6} {'transform':>10} {'-':>12} {'-':>10} {'-':>12} {t_solve*1e3:9.2f}   (constant viscosity)")


if __name__ == "__main__":
    main()
