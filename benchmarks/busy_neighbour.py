"""A run beside one busy process against the same run on an otherwise idle machine.

    python3 benchmarks/busy_neighbour.py [--grid 128] [--steps 2000]

Runs ``convsim run`` (constant viscosity, free-slip, the case 1a set-up on an n x n grid,
``--steps`` steps, no steady stop) as a fresh process, first alone, then beside one process
that keeps one core busy (numpy matrix products in a loop, as a user's notebook or another
run would), and prints both wall times and their ratio.  Goal (issue "Speed where users
wait"): within 1.15 x, printed as met or not.  convsim's own default is one thread in every
pool (convsim/threads.py); ``--threads 2`` shows what threaded pools do beside a co-load.
Run it on an otherwise idle machine: the idle figure is the reference.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
GOAL = 1.15
BUSY = ("import numpy as np\n"
        "a = np.random.default_rng(0).random((400, 400))\n"
        "while True:\n"
        "    a = a @ a\n"
        "    a /= np.abs(a).max()\n")


def timed(n: int, steps: int, threads: int) -> float:
    config = ROOT / "convsim" / "studies" / "cases" / "benchmark_case_1a.toml"
    with tempfile.TemporaryDirectory() as out:
        cmd = [sys.executable, "-m", "convsim.cli", "run", str(config), "--grid", f"{n}x{n}",
               "--out", out, "--threads", str(threads), "--set", "stop.steady=false",
               "--set", f"stop.max_steps={steps}"]
        t0 = time.perf_counter()
        subprocess.run(cmd, check=True, capture_output=True, cwd=ROOT)
        return time.perf_counter() - t0


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--grid", type=int, default=128)
    parser.add_argument("--steps", type=int, default=2000)
    parser.add_argument("--threads", type=int, default=1)
    args = parser.parse_args()
    idle = timed(args.grid, args.steps, args.threads)
    # the neighbour's numpy runs single-threaded: it stands for one busy core
    env = {"OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1", "PATH": "/usr/bin:/bin"}
    neighbour = subprocess.Popen([sys.executable, "-c", BUSY], env=env)
    try:
        time.sleep(1.0)
        busy = timed(args.grid, args.steps, args.threads)
    finally:
        neighbour.kill()
        neighbour.wait()
    ratio = busy / idle
    print(f"{args.grid} x {args.grid}, {args.steps} steps, {args.threads} thread(s): idle "
          f"{idle:.2f} s, beside one busy process {busy:.2f} s, ratio {ratio:.2f}   goal <= "
          f"{GOAL}: {'met' if ratio <= GOAL else 'NOT met'}")


if __name__ == "__main__":
    main()
