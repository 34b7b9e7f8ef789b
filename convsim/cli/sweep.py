"""``convsim sweep`` and ``convsim fit``: parameter studies, scaling laws, lid regimes."""

from __future__ import annotations

import math
import signal
import sys

from convsim.cli.common import command, emit_json


@command("sweep", "run a parameter sweep on local cores or a Dask cluster; one table of results")
def _add_sweep(p):
    p.add_argument("sweep", help="sweep file (TOML): base config, [[axis]] tables, optional "
                   "[fixed] and [continuation]; see convsim.studies.sweep")
    p.add_argument("--out", help="sweep folder (default: sweeps/<sweep file name>); a rerun "
                   "into it skips the finished cases")
    p.add_argument("--jobs", type=int, help="processes of the local pool (default: all cores)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on this dask.distributed scheduler, e.g. tcp://host:8786")
    p.add_argument("--overwrite", action="store_true",
                   help="run again the cases the folder holds for another config")
    p.add_argument("--json", action="store_true", help="print the summary as JSON on stdout")
    p.set_defaults(handler=_run_sweep)


def _terminate(signum, frame):
    raise KeyboardInterrupt


def _run_sweep(args) -> int:
    from pathlib import Path
    from tqdm import tqdm
    from convsim.errors import ConfigError
    from convsim.studies.sweep import expand_cases, load_sweep, run_sweep
    if args.scheduler and args.jobs is not None:
        raise ConfigError("--jobs: applies to the local pool; with --scheduler the cluster's "
                          "workers set the parallelism")
    spec = load_sweep(args.sweep)
    out = Path(args.out) if args.out else Path("sweeps") / Path(args.sweep).stem
    bar = tqdm(total=len(expand_cases(spec)), unit="case", file=sys.stderr, disable=None,
               dynamic_ncols=True)

    def progress(event):
        bar.update(1)
        bar.set_postfix_str(f"{event.case_id}: {'done before' if event.skipped else event.status}",
                            refresh=False)

    previous = signal.signal(signal.SIGTERM, _terminate)   # SIGTERM ends a sweep like Ctrl-C
    try:
        outcome = run_sweep(spec, out, jobs=args.jobs, scheduler=args.scheduler,
                            progress=progress, overwrite=args.overwrite)
    finally:
        signal.signal(signal.SIGTERM, previous)
        bar.close()
    summary = outcome.summary()
    if args.json:
        summary["cases_table"] = [
            {k: r.get(k) for k in ("case_id", "status", "rayleigh", "nusselt_top", "vrms",
                                   "surface_vrms", "steps", "wall_seconds", "error")}
            for r in outcome.records]
        emit_json(summary)
    else:
        statuses = ", ".join(f"{n} {s}" for s, n in summary["statuses"].items())
        where = (f"{outcome.backend} back end, {outcome.workers} workers, "
                 f"{outcome.wall_seconds:.1f} s" if outcome.executed else "nothing to run")
        print(f"{summary['cases']} cases ({statuses}): {outcome.executed} run, "
              f"{outcome.skipped} done before; {where}")
        for r in outcome.records:
            if r["status"] == "failed":
                print(f"  failed {r['case_id']}: {r['error']}")
        print(f"  table {outcome.table_csv}")
        print(f"        {outcome.table_h5}")
    if outcome.failed:
        print(f"convsim: {outcome.failed} case(s) failed; their errors are in the table; a rerun "
              f"tries them again", file=sys.stderr)
        return 1
    return 0


@command("fit", "fit scaling laws y = a x^beta to a sweep table and classify the lid regimes")
def _add_fit(p):
    p.add_argument("table", help="sweep table (table.csv or table.h5)")
    p.add_argument("--x", default="rayleigh", help="column of x (default: rayleigh)")
    p.add_argument("--y", default="nusselt_top,vrms",
                   help="column(s) of y, comma-separated (default: nusselt_top,vrms)")
    p.add_argument("--status", default="all",
                   help="statuses of the rows to fit, comma-separated, or 'all' (default: all)")
    p.add_argument("--settled", default="steady,statistically-steady",
                   help="settled words of the rows to fit, comma-separated, or 'all' "
                        "(default: steady,statistically-steady)")
    p.add_argument("--group", metavar="COLUMN", help="fit separately for each value of COLUMN")
    p.add_argument("--confidence", type=float, default=0.95,
                   help="confidence of the intervals (default: 0.95)")
    p.add_argument("--mobile-ratio", type=float, default=0.6,
                   help="mobility M = v_surface/v_rms at or above which a lid is mobile "
                        "(default: 0.6)")
    p.add_argument("--stagnant-ratio", type=float, default=0.1,
                   help="mobility below which a lid is a stagnant lid, given the contrast "
                        "(default: 0.1)")
    p.add_argument("--stagnant-contrast", type=float, default=1.0e3,
                   help="viscosity contrast a stagnant lid needs at least (default: 1e3)")
    p.add_argument("--conductive-nusselt", type=float, default=1.01,
                   help="Nusselt number below which a case counts as conductive (default: 1.01)")
    p.add_argument("--interior-column", default="vrms",
                   help="the velocity M divides by: vrms (whole layer, Tackley 2000; default) "
                        "or interior_vrms (the band 0.2 <= z <= 0.8)")
    p.add_argument("--contrast-column", default="viscosity_contrast",
                   help="viscosity_contrast (of the law, default) or viscosity_contrast_field")
    p.add_argument("--out", help="folder of fit.json, regimes.csv and the figures "
                   "(default: <table folder>/fit)")
    p.add_argument("--overwrite", action="store_true", help="replace existing outputs")
    p.add_argument("--json", action="store_true", help="print the report as JSON on stdout")
    p.set_defaults(handler=_run_fit)


FIT_LABELS = {"rayleigh": "Rayleigh number Ra", "nusselt_top": "Nusselt number Nu (top)",
              "nusselt_bottom": "Nusselt number Nu (bottom)", "vrms": "rms velocity",
              "surface_vrms": "surface rms velocity", "interior_vrms": "interior rms velocity"}
SLOPE_SOURCES = {1.0 / 3.0: "boundary-layer theory, slope 1/3 (Turcotte & Schubert ch. 6)",
                 2.0 / 3.0: "boundary-layer theory, slope 2/3 (Turcotte & Schubert ch. 6)"}


def _run_fit(args) -> int:
    from pathlib import Path
    from convsim.errors import OutputExistsError
    from convsim.analysis.fitting import RegimeThresholds, fit_report
    from convsim.files.jsonio import write_json
    from convsim.studies.sweep_table import read_table
    from convsim.files.runfile import check_output_folder
    table = read_table(args.table)
    check_output_folder(Path(args.out) if args.out else Path(args.table).parent / "fit")
    ys = [y.strip() for y in args.y.split(",") if y.strip()]
    statuses = None if args.status.strip() == "all" else tuple(
        s.strip() for s in args.status.split(",") if s.strip())
    thresholds = RegimeThresholds(args.mobile_ratio, args.stagnant_ratio, args.stagnant_contrast,
                                  args.conductive_nusselt)
    settled = None if args.settled.strip() == "all" else tuple(
        s.strip() for s in args.settled.split(",") if s.strip())
    report = fit_report(table, args.x, ys, statuses=statuses, settled=settled, group=args.group,
                        confidence=args.confidence, thresholds=thresholds,
                        interior=args.interior_column, contrast=args.contrast_column)
    out = Path(args.out) if args.out else Path(args.table).parent / "fit"
    figures = {y: out / f"{y}_against_{args.x}.png" for y in ys}
    mapped = _contrast_map(report["regimes"])
    yielding = _yield_stresses_vary(report["regimes"])
    paths = [out / "fit.json", out / "regimes.csv", *([out / "regime_map.png"] if mapped else []),
             *([out / "regime_map_yield_stress.png"] if yielding else []), *figures.values()]
    existing = [str(p) for p in paths if p.exists()]
    if existing and not args.overwrite:
        raise OutputExistsError(f"output {existing[0]!r}: exists; pass --overwrite to replace it "
                                f"or --out to choose another folder")
    out.mkdir(parents=True, exist_ok=True)
    _draw_fits(report, figures, args.x)
    _draw_regimes(report["regimes"], out, thresholds, args.contrast_column)
    report["outputs"] = [str(p) for p in paths]
    write_json(out / "fit.json", report, indent=1)
    if args.json:
        emit_json(report)
    else:
        _print_fits(report, out)
    return 0


def _draw_fits(report: dict, figures: dict, x: str) -> None:
    """One scaling figure per fitted quantity y (its fits, one per group)."""
    from convsim.analysis.fitting import PowerLawFit
    from convsim.figures import sweep as figures_sweep
    for y, path in figures.items():
        entries = [e for e in report["fits"] if e["y"] == y and "fit" in e]
        series = []
        for e in entries:
            fit = PowerLawFit(**{k: (tuple(tuple(r) for r in v) if k == "covariance" else
                                     tuple(v) if isinstance(v, list) else v)
                                 for k, v in e["fit"].items()})
            label = ("" if e["group"] is None
                     else figures_sweep.group_label(e["group"], e["group_value"]))
            series.append((label, e["x_values"], e["y_values"], fit))
        slope = entries[0]["reference_slope"] if entries else None
        figures_sweep.scaling_figure(path, series, x_label=FIT_LABELS.get(x, x),
                                     y_label=FIT_LABELS.get(y, y), reference_slope=slope,
                                     reference_label=SLOPE_SOURCES.get(slope, ""),
                                     x_symbol=figures_sweep.SYMBOLS.get(x, x))


def _draw_regimes(rows: list, out, thresholds, contrast_column: str) -> None:
    """The regime map figure and ``regimes.csv``."""
    import csv
    from convsim.files.atomic import atomic_path
    from convsim.figures import sweep as figures_sweep
    if _contrast_map(rows):
        figures_sweep.regime_map_figure(
            out / "regime_map.png", [r["rayleigh_bottom"] for r in rows],
            [r["viscosity_contrast"] for r in rows], [r["regime"] for r in rows],
            thresholds_text=thresholds.text(), x_label="Rayleigh number at the bottom wall",
            y_label=f"viscosity contrast ({contrast_column})")
    if _yield_stresses_vary(rows):      # a yielding sweep: the yield stress / Ra diagram
        figures_sweep.regime_map_figure(
            out / "regime_map_yield_stress.png", [r["rayleigh"] for r in rows],
            [r["yield_stress"] for r in rows], [r["regime"] for r in rows],
            thresholds_text=thresholds.text(), x_label="Rayleigh number Ra (as stated)",
            y_label=r"yield stress $\sigma_y$ ($\eta_{ref}\,\kappa/d^2$)")
    with atomic_path(out / "regimes.csv") as tmp, open(tmp, "w", newline="", encoding="utf-8") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(rows[0]) if rows else ["case_id"])
        writer.writeheader()
        writer.writerows(rows)


def _contrast_map(rows: list) -> bool:
    """Whether to draw the viscosity-contrast / Ra map: not for an isoviscous sweep, nor for a
    yield-stress sweep at one contrast (its diagram is over the yield stress)."""
    from convsim.figures.sweep import varies
    contrasts = [r["viscosity_contrast"] for r in rows]
    if not varies(contrasts):
        return False
    return not (_yield_stresses_vary(rows) and len({c for c in contrasts if math.isfinite(c)}) == 1)


def _yield_stresses_vary(rows: list) -> bool:
    """Whether the cases span two or more positive yield stresses (a yielding sweep)."""
    values = {r.get("yield_stress") for r in rows}
    return len({v for v in values if v is not None and math.isfinite(v) and v > 0}) >= 2


def _print_fits(report: dict, out) -> None:
    for e in report["fits"]:
        where = "" if e["group"] is None else f" [{e['group']} = {e['group_value']}]"
        if "error" in e:
            print(f"{e['y']} against {e['x']}{where}: {e['error']}")
            continue
        f = e["fit"]
        lo, hi = f["exponent_interval"]
        alo, ahi = f["prefactor_interval"]
        ref = e["reference_slope"]
        intervals = (f"beta = {f['exponent']:.4f} [{lo:.4f}, {hi:.4f}], a = {f['prefactor']:.4g} "
                     f"[{alo:.4g}, {ahi:.4g}] ({100 * f['confidence']:g}%, n = {f['n']})"
                     if f["n"] > 2 and lo is not None and math.isfinite(lo) else
                     f"beta = {f['exponent']:.4f}, a = {f['prefactor']:.4g} (n = {f['n']}: a "
                     f"line through {f['n']} points, intervals are not available)")
        print(f"{e['y']} = a {e['x']}^beta{where}: {intervals}"
              + (f"; boundary-layer theory {ref:.4f}" if ref else ""))
    for x in report.get("excluded", []):
        print(f"excluded {x['case_id']}: {x['reason']}")
    lid = report.get("stagnant_lid") or {}
    if "fit" in lid:
        f = lid["fit"]
        lo, hi = f["exponent_interval"]
        print(f"stagnant lid: Nu theta^(4/3) = a Ra_i^beta: beta = {f['exponent']:.4f} "
              f"[{lo:.4f}, {hi:.4f}] (n = {f['n']}); theory {lid['equation']}, beta = 1/3 "
              f"{'inside' if lid['theory_within_interval'] else 'outside'} the interval "
              f"({lid['source']})")
    elif lid:
        print(f"stagnant lid: {lid.get('error')}")
    counts: dict = {}
    for r in report["regimes"]:
        counts[r["regime"]] = counts.get(r["regime"], 0) + 1
    print("regimes: " + ", ".join(f"{n} {k}" for k, n in counts.items()))
    outputs = [str(p) for p in report.get("outputs", ())]
    if any(p.endswith("regime_map_yield_stress.png") for p in outputs):
        print("  regime diagram over yield stress and Ra: regime_map_yield_stress.png")
    elif not any(p.endswith("regime_map.png") for p in outputs):
        print("  no regime map: every case is isoviscous (viscosity contrast 1)")
    print(f"  outputs in {out}")
