"""``convsim bench``: the published steady cases on several grids, convergence, report."""

from __future__ import annotations

import sys

from convsim.cli.common import command, emit_json


@command("bench", "run the published steady benchmark cases on several grids and write a report")
def _add_bench(p):
    p.add_argument("cases", nargs="*", metavar="CASE",
                   help="cases to run (default: all known: 1a 1b 1c 2a)")
    p.add_argument("--grids", default=None, metavar="N,N,N",
                   help="cell counts n of the n x n grids (default 32,64,128; the periodic "
                        "case vp4 24,32,48; three or more give an observed order and an "
                        "extrapolated value)")
    p.add_argument("--out", default="bench", metavar="DIR",
                   help="report folder (default: bench)")
    p.add_argument("--jobs", type=int, default=None, metavar="N",
                   help="runs side by side (default: the number of CPUs)")
    p.add_argument("--set", action="append", default=[], metavar="SECTION.KEY=VALUE",
                   help="override a config value in every case (repeatable)")
    p.add_argument("--overwrite", action="store_true", help="replace existing report files")
    p.add_argument("--json", action="store_true",
                   help="print the result as one JSON object on stdout (no table)")
    p.epilog = ("exit status: 0 when every case passes our acceptance (see the report), "
                "1 when a check fails, 2 on bad input")
    p.set_defaults(handler=_run_bench)


def _run_bench(args) -> int:
    """Exit status 0 when every case passes our acceptance, 1 when a check fails."""
    import shlex
    from convsim.studies import bench
    from convsim.studies import bench_report
    from convsim.errors import ConfigError
    cases = bench.parse_cases(args.cases)
    grids = None if args.grids is None else bench.parse_grids(args.grids)
    if args.jobs is not None and args.jobs < 1:
        raise ConfigError(f"--jobs {args.jobs}: must be at least 1")
    bench_report.check_outputs(args.out, args.overwrite)      # before hours of runs, not after

    def progress(row, done, total):
        print(f"[{done}/{total}] case {row.case} grid {row.grid}: {row.status}, Nu "
              f"{row.nusselt_top:.6g}, vrms {row.vrms:.6g}, {row.steps} steps, "
              f"{row.wall_seconds:.1f} s", file=sys.stderr, flush=True)

    command = "convsim bench " + " ".join(shlex.quote(a) for a in _bench_argv(args))
    result = bench.run_bench(cases, grids, args.jobs, tuple(args.set), progress, command)
    data = bench_report.jsonable(result.as_dict())
    paths = bench_report.write_report(data, args.out, overwrite=args.overwrite)
    if args.json:
        emit_json(data)
    else:
        print(bench_report.terminal_table(data))
        print(f"report: {paths[0]}")
    return 0 if result.passed else 1


def _bench_argv(args) -> list:
    argv = (list(args.cases) + (["--grids", args.grids] if args.grids is not None else [])
            + ["--out", args.out])
    if args.jobs is not None:
        argv += ["--jobs", str(args.jobs)]
    for item in args.set:
        argv += ["--set", item]
    return argv + (["--overwrite"] if args.overwrite else []) + (["--json"] if args.json else [])
