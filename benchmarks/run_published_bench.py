"""Run the default published benchmark (cases 1a, 1b, 1c, 2a on 32, 64, 128) and print a summary.

Usage (from the repository root):

    python3 benchmarks/run_published_bench.py [--out DIR] [--grids 32,64,128] [--jobs N]

Writes the full report (report.md, rows.csv, bench.json, figures) into DIR (default
bench-published, replaced if present) and prints the table and the issue's goals:
extrapolated Nu and vrms within 0.1 % of Blankenbach et al. (1989), observed order of
Nu at least 1.8, the whole bench under 15 minutes.  A benchmark, not a test: it prints
figures and never fails on speed.
"""

import argparse
import math
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

GOAL_MINUTES = 15.0
GOAL_ERROR = 1e-3
GOAL_ORDER = 1.8


def main():
    from convsim.studies import bench
    from convsim.studies import bench_report
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", default="bench-published")
    parser.add_argument("--grids", default="32,64,128")
    parser.add_argument("--jobs", type=int, default=None)
    parser.add_argument("cases", nargs="*")
    args = parser.parse_args()
    t0 = time.perf_counter()
    result = bench.run_bench(args.cases, bench.parse_grids(args.grids), args.jobs,
                             progress=lambda row, done, total: print(
                                 f"[{done}/{total}] {row.case} {row.grid}: {row.status} "
                                 f"{row.wall_seconds:.1f} s", file=sys.stderr, flush=True),
                             command="python3 benchmarks/run_published_bench.py "
                                     + " ".join(sys.argv[1:]))
    data = bench_report.jsonable(result.as_dict())
    bench_report.write_report(data, args.out, overwrite=True)
    total = time.perf_counter() - t0
    print(bench_report.terminal_table(data))
    print()
    print("goals (issue 3):")
    for c in result.cases:
        err, order = c.extrapolated_error, c.observed_order
        for q in ("nusselt_top", "vrms"):
            e = err[q]
            ok = math.isfinite(e) and abs(e) <= GOAL_ERROR
            print(f"  {c.case} extrapolated {q:<8s} error {100 * e:+.4f}%  "
                  f"{'met' if ok else 'NOT met'} (goal 0.1%)")
        p = order["nusselt_top"]
        print(f"  {c.case} observed order of Nu {p:.3f}  "
              f"{'met' if math.isfinite(p) and p >= GOAL_ORDER else 'NOT met'} (goal 1.8)")
    print(f"  whole bench {total / 60:.2f} min ({result.jobs} jobs)  "
          f"{'met' if total / 60 <= GOAL_MINUTES else 'NOT met'} (goal 15 min)")
    print(f"report: {Path(args.out) / 'report.md'}")


if __name__ == "__main__":   # required: the bench spawns worker processes that import this file
    main()
