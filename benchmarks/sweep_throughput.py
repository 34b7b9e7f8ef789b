"""Sweep throughput: cases per hour on the local process pool and on a Dask LocalCluster,
and the per-case overhead of each path.  Prints figures; asserts nothing.

    python3 benchmarks/sweep_throughput.py [--cases 12] [--grid 16] [--steps 300] [--workers 2]

Every case is a constant-viscosity box run for a fixed number of steps (no steady
stop), so all cases cost about the same.  For each back end:

- cases per hour = cases / elapsed wall time * 3600;
- overhead per case = (workers * elapsed - sum of the cases' own wall time on their
  workers) / cases: everything that is not the case itself (process start, imports,
  numba cache load, pickling, scheduling, writing the records and the table, idle
  workers at the end).

The local pool starts its processes for every sweep; a Dask cluster is started
once and reused, so it is measured twice: cold (first sweep on fresh workers) and
warm (a second sweep on the same workers).  The overhead of a warm cluster per
case, over the time of a case, is the figure to hold against the goal (under 5 %
for cases of a minute).
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from convsim.studies.sweep import parse_sweep, run_sweep  # noqa: E402


def make_spec(cases: int, grid: int, steps: int, offset: float = 0.0):
    return parse_sweep({
        "base": str(ROOT / "configs" / "benchmark_case_1a.toml"),
        "fixed": {"domain": {"nx": grid, "nz": grid},
                  "stop": {"max_steps": steps, "steady": False}},
        "axis": [{"key": "physics.rayleigh", "start": 1.0e4 * (1.0 + offset), "stop": 1.0e5,
                  "count": cases, "spacing": "log"}],
    })


def measure(label, spec, out, workers, **kw):
    t0 = time.perf_counter()
    outcome = run_sweep(spec, out, **kw)
    elapsed = time.perf_counter() - t0
    n = len(outcome.records)
    busy = sum(r["case_seconds"] for r in outcome.records)
    bad = [r["case_id"] for r in outcome.records if r["status"] == "failed"]
    overhead = (workers * elapsed - busy) / n
    print(f"{label:<22s} {n:4d} cases  {elapsed:8.2f} s  {n / elapsed * 3600:9.0f} cases/h  "
          f"case {busy / n:6.3f} s  overhead/case {overhead:6.3f} s"
          + (f"  FAILED {bad}" if bad else ""), flush=True)
    return dict(elapsed=elapsed, busy=busy, n=n, overhead=overhead)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=12)
    ap.add_argument("--grid", type=int, default=16)
    ap.add_argument("--steps", type=int, default=300)
    ap.add_argument("--workers", type=int, default=2)
    args = ap.parse_args()
    import logging
    from distributed import LocalCluster
    logging.getLogger("distributed").setLevel(logging.CRITICAL)   # shutdown chatter
    print(f"{args.cases} cases of {args.grid}x{args.grid}, {args.steps} steps each; "
          f"{args.workers} workers; {os.cpu_count()} cores; load average "
          f"{os.getloadavg()[0]:.2f}", flush=True)
    with tempfile.TemporaryDirectory(prefix="sweep-bench-") as tmp:
        tmp = Path(tmp)
        spec = make_spec(args.cases, args.grid, args.steps)
        local = measure("local pool", spec, tmp / "local", args.workers, jobs=args.workers)
        t0 = time.perf_counter()
        with LocalCluster(n_workers=args.workers, processes=True, threads_per_worker=1,
                          dashboard_address=None) as cluster:
            print(f"{'LocalCluster start':<22s} {time.perf_counter() - t0:8.2f} s", flush=True)
            cold = measure("dask, cold workers", spec, tmp / "dask-cold", args.workers,
                           scheduler=cluster.scheduler_address)
            warm_spec = make_spec(args.cases, args.grid, args.steps, offset=1e-3)
            warm = measure("dask, warm workers", warm_spec, tmp / "dask-warm", args.workers,
                           scheduler=cluster.scheduler_address)
        case = warm["busy"] / warm["n"]
        print(f"dask cold vs local pool: {cold['elapsed'] / local['elapsed']:.3f} x the wall time")
        print(f"dask warm overhead per case {warm['overhead']:.3f} s = "
              f"{100 * warm['overhead'] / case:.1f} % of these {case:.2f}-s cases, "
              f"{100 * warm['overhead'] / 60.0:.2f} % of a 60-s case")
        print(f"local pool overhead per case {local['overhead']:.3f} s = "
              f"{100 * local['overhead'] / 60.0:.2f} % of a 60-s case")
    return 0


if __name__ == "__main__":
    sys.exit(main())
