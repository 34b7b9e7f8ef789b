"""Peak resident memory of a whole run, by grid.

    python3 benchmarks/memory.py [--grids 256,512] [--steps 200]

Runs ``convsim run`` as a fresh process (Frank-Kamenetskii viscosity contrast 1e5, Ra 100 at
the cold top, one-cell start, ``--steps`` steps, one snapshot at the end) and prints the peak
resident set size of that process (``resource.getrusage(RUSAGE_CHILDREN)``, interpreter and
libraries included).  Goal (issue "Speed where users wait"): under 600 MiB at 512 x 512,
printed as met or not.  The series is streamed to the run file, so a longer run should not
need more memory: compare two step counts with ``--steps``.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
GOAL_MIB = 600.0
CONFIG = """
[domain]
nx = {n}
nz = {n}
[physics]
rayleigh = 100.0
[viscosity]
law = "frank-kamenetskii"
thermal_contrast = 1e5
[start]
kind = "one-cell"
[stop]
steady = false
max_steps = {steps}
"""


def peak_mib(n: int, steps: int) -> float:
    """Peak RSS (MiB) of one run in a child process (run alone: children's maxima accumulate)."""
    script = ("import resource, subprocess, sys\n"
              "subprocess.run(sys.argv[1:], check=True, capture_output=True)\n"
              "print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024)\n")
    with tempfile.TemporaryDirectory() as out:
        path = Path(out) / "memory.toml"
        path.write_text(CONFIG.format(n=n, steps=steps))
        cmd = [sys.executable, "-c", script, sys.executable, "-m", "convsim.cli", "run",
               str(path), "--out", out]
        done = subprocess.run(cmd, check=True, capture_output=True, text=True, cwd=ROOT)
        return float(done.stdout.strip())


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--grids", default="256,512")
    parser.add_argument("--steps", type=int, default=200)
    args = parser.parse_args()
    for n in (int(v) for v in args.grids.split(",")):
        peak = peak_mib(n, args.steps)
        goal = f"   goal < {GOAL_MIB:.0f} MiB: {'met' if peak < GOAL_MIB else 'NOT met'}" \
            if n == 512 else ""
        print(f"{n:>4} x {n:<4} {args.steps} steps: peak RSS {peak:7.1f} MiB{goal}", flush=True)


if __name__ == "__main__":
    main()
