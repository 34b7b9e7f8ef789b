"""Command line: ``convsim <command> ...``.  The only module that prints and exits.

Every ``ConvsimError`` becomes one line on stderr and exit status 2.
"""

from __future__ import annotations

import argparse
import json
import logging
import os
import sys

from convsim import __version__
from convsim.errors import ConvsimError

COMMANDS = {}


def command(name, help):
    """Register ``func(subparsers) -> None`` that adds one subcommand (its handler in defaults)."""
    def wrap(func):
        COMMANDS[name] = (help, func)
        return func
    return wrap


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2, as for every other bad input
        self.exit(2, f"convsim: error: {message}\n")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="convsim", description="2D infinite-Prandtl convection simulator")
    parser.add_argument("--version", action="version", version=f"convsim {__version__}")
    parser.add_argument("-v", "--verbose", action="store_true", help="log progress details")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    for name, (help_text, add) in COMMANDS.items():
        add(sub.add_parser(name, help=help_text, description=help_text))
    return parser


def emit_json(obj) -> None:
    """Print one JSON object on stdout."""
    print(json.dumps(obj, indent=2, sort_keys=False, default=float))


# -- run --------------------------------------------------------------------------------------
def _parse_grid(text: str) -> tuple[int, int]:
    from convsim.errors import ConfigError
    try:
        nx, nz = (int(v) for v in text.lower().split("x"))
    except ValueError:
        raise ConfigError(f"--grid {text!r}: expected NXxNZ, e.g. 64x64") from None
    return nx, nz


def load_run_config(path, overrides=(), grid=None):
    """The config of a command: file, then --set overrides, then --grid."""
    from convsim.config import load_config
    items = list(overrides)
    if grid:
        nx, nz = _parse_grid(grid)
        items += [f"domain.nx={nx}", f"domain.nz={nz}"]
    return load_config(path, items)


class ProgressBar:
    """Observer that shows time, step, Nu and vrms on stderr (only on a terminal)."""

    def __init__(self, config):
        from tqdm import tqdm
        total = config.stop.max_steps if config.stop.end_time == 0 else None
        self.bar = tqdm(total=total, unit="step", disable=None, leave=False, mininterval=0.5,
                        dynamic_ncols=True, file=sys.stderr)

    def on_start(self, simulation, resumed):
        pass

    def on_step(self, report):
        self.bar.update(1)
        if report.step % 25 == 0:
            self.bar.set_postfix_str(f"t={report.time:.4g} Nu={report.nusselt_top:.5g} "
                                     f"vrms={report.vrms:.5g}", refresh=False)

    def on_snapshot(self, snap):
        pass

    def on_finish(self, result):
        self.bar.close()


EXIT_FOR_STATUS = {"steady": 0, "mean-precision": 0, "end-time": 0, "step-limit": 0, "diverged": 3,
                   "interrupted": 130}


@command("run", "run a config: a convecting box to steady state or an end time")
def _add_run(p):
    p.add_argument("config", help="TOML config file")
    p.add_argument("--out", default="runs", help="output folder (default: runs)")
    p.add_argument("--grid", help="grid NXxNZ, overriding domain.nx and domain.nz")
    p.add_argument("--set", action="append", default=[], metavar="SECTION.KEY=VALUE",
                   help="override a config value (repeatable)")
    p.add_argument("--from", dest="start_from", metavar="RUN.h5",
                   help="start from the last snapshot of another run (interpolated)")
    p.add_argument("--restart", metavar="RUN.h5",
                   help="continue this run file from its last snapshot, bit for bit")
    p.add_argument("--overwrite", action="store_true", help="replace an existing run file")
    p.add_argument("--json", action="store_true", help="print the summary as JSON on stdout")
    p.set_defaults(handler=_run)


def _run(args):
    from pathlib import Path
    from convsim import api
    overrides = list(args.set)
    if args.start_from:
        overrides += ["start.kind=\"snapshot\"", f"start.file={json.dumps(args.start_from)}"]
    cfg = load_run_config(args.config, overrides, args.grid)
    output = None
    if args.restart:
        _check_restart_config(args.restart, cfg)
    else:
        output = Path(args.out) / (Path(args.config).stem + ".h5")
    bar = ProgressBar(cfg)
    result = api.run(cfg, output, overwrite=args.overwrite, restart=args.restart, observers=[bar])
    summary = result.summary()
    if args.json:
        emit_json(summary)
    else:
        print(f"{result.status}: {result.message}")
        print(f"  Nu top {result.nusselt_top:.6f}  Nu bottom {result.nusselt_bottom:.6f}  "
              f"vrms {result.vrms:.6f}")
        print(f"  grid {result.grid.nx}x{result.grid.nz}  steps {result.steps}  "
              f"time {result.time:.6g}  wall {result.wall_seconds:.2f} s")
        for line in statistics_lines(summary):
            print(f"  {line}")
        print(f"  run file {result.output}")
    if result.status == "diverged":
        print(f"convsim: run diverged: {result.message}; the last good state is in "
              f"{result.output}", file=sys.stderr)
    return EXIT_FOR_STATUS[result.status]


_STAT_LABELS = (("nusselt_top", "Nu top"), ("nusselt_bottom", "Nu bottom"), ("vrms", "vrms"),
                ("surface_vrms", "surface vrms"), ("interior_temperature", "interior T"),
                ("lid_thickness", "lid thickness"))


def _g(value, digits: int = 5) -> str:
    """A number to ``digits`` significant digits; None (NaN or inf in JSON) as 'n/a'."""
    return "n/a" if value is None else f"{value:.{digits}g}"


def statistics_lines(summary: dict) -> list[str]:
    """The time means, the settled word and the lid diagnostics of a summary, as text lines."""
    stats, lid = summary.get("statistics") or {}, summary.get("lid") or {}
    if not stats:
        return []
    first = next(iter(stats.values()))
    lines = [f"{summary.get('settled')}: means from t = {_g(first['from_time'], 6)} "
             f"(+- 95 % half-width)"]
    parts = [f"{label} {_g(stats[k]['mean'])} +- {_g(stats[k]['ci95'], 2)}"
             for k, label in _STAT_LABELS if k in stats]
    lines += ["  " + "  ".join(parts[:3]), "  " + "  ".join(parts[3:])]
    hb = summary.get("heat_balance") or {}
    if hb.get("gap") is not None:
        lines.append(f"  Nu top - Nu bottom - H = {_g(hb['gap'], 3)} +- {_g(hb['ci95'], 2)} "
                     f"({'agree' if hb['agree'] else 'do not agree'} within the intervals)")
    if lid:
        ups = ", ".join(_g(x, 3) for x in lid.get("upwellings", []))
        lines.append(f"regime {lid['regime']}: mobility {_g(lid['mobility'], 3)}, viscosity "
                     f"contrast {_g(lid['viscosity_contrast'], 3)} (across the lid "
                     f"{_g(lid['lid_viscosity_contrast'], 3)}), dT_rh "
                     f"{_g(lid['rheological_temperature_scale'], 3)}, {lid['cells']} cell(s), "
                     f"upwellings at x = {ups or 'none'}")
    return lines


def _check_restart_config(path, cfg):
    """A restart may change only [stop] and [output]: anything else would not continue the run."""
    import tomllib
    from convsim.config import to_dict
    from convsim.errors import ConfigError
    from convsim.files.runfile import read_run
    saved = tomllib.loads(read_run(path).config_text)
    new = to_dict(cfg)
    for table in saved:
        if table in ("stop", "output", "title"):
            continue
        if saved[table] != new.get(table):
            keys = [k for k in saved[table] if saved[table][k] != new.get(table, {}).get(k)]
            raise ConfigError(f"--restart {path!r}: [{table}] differs from the run's own config "
                              f"({', '.join(keys)}); only [stop] and [output] may change")
# --- convsim rayleigh: numbers and scales of a layer from its physical properties -----------

_RAYLEIGH_FLAGS = (  # (units.Scales field, option, meaning, SI units, example); no pint at parse
    ("depth", "--depth", "layer depth d", "m", "2900 km"),
    ("temperature_contrast", "--temperature-contrast", "temperature difference dT", "K",
     "2500 K"),
    ("surface_temperature", "--surface-temperature", "top temperature (default 0)", "K",
     "300 K"),
    ("gravity", "--gravity", "gravity g", "m s^-2", "9.8 m/s^2"),
    ("density", "--density", "density rho", "kg m^-3", "4000 kg/m^3"),
    ("expansivity", "--expansivity", "thermal expansivity alpha", "K^-1", "3e-5 1/K"),
    ("diffusivity", "--diffusivity", "thermal diffusivity kappa", "m^2 s^-1", "1e-6 m^2/s"),
    ("conductivity", "--conductivity", "thermal conductivity k", "W m^-1 K^-1", "4 W/m/K"),
    ("reference_viscosity", "--viscosity", "reference viscosity eta_ref", "Pa s", "1e21 Pa s"),
    ("heat_production", "--heat-production", "heat production per unit mass (default 0)",
     "W kg^-1", "5e-12 W/kg"),
)

_RAYLEIGH_CAUTION = ("research estimate: Ra grows as d^3 / eta and the inputs, the viscosity "
                     "above all, are uncertain by orders of magnitude; so are these numbers")


@command("rayleigh", "Rayleigh numbers and scales of a layer from its physical properties")
def _add_rayleigh(p):
    p.add_argument("config", nargs="?", help="TOML config; its [body] table gives the properties "
                   "(command-line values win)")
    for name, flag, meaning, si, example in _RAYLEIGH_FLAGS:
        p.add_argument(flag, dest=f"body_{name}", metavar="VALUE",
                       help=f"{meaning}: a number in {si} or with units, e.g. '{example}'")
    p.add_argument("--boundaries", metavar="FLOW",
                   help="mechanical conditions: free-slip, no-slip (both sides) or TOP,BOTTOM "
                        "such as 'free-slip,no-slip'; default: the config's, else free-slip")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(handler=_run_rayleigh)


def _rayleigh_boundaries(text, cfg):
    from convsim.errors import ConfigError
    from convsim.units import FLOW_CONDITIONS
    if text is None:
        if cfg is None:
            return "free-slip", "free-slip"
        return cfg.boundaries.top_flow, cfg.boundaries.bottom_flow
    parts = [part.strip() for part in text.split(",")]
    if len(parts) == 1:
        parts = parts * 2
    if len(parts) != 2 or not all(part in FLOW_CONDITIONS for part in parts):
        raise ConfigError(f"--boundaries = {text!r}: expected free-slip, no-slip or TOP,BOTTOM "
                          f"with each one of {', '.join(FLOW_CONDITIONS)}")
    return parts[0], parts[1]


def _run_rayleigh(args) -> int:
    from convsim import units
    from convsim.config import load_config

    cfg = load_config(args.config) if args.config else None
    body = cfg.body if cfg is not None else None
    given, origin = {}, {}
    for name, flag, *_ in _RAYLEIGH_FLAGS:
        text = getattr(args, f"body_{name}")
        if text is not None:
            given[name] = units.parse_property(name, text, key=flag)
            origin[name] = "command line"
    scales = units.scales_from_body(body, given,
                                    options={name: flag for name, flag, *_ in _RAYLEIGH_FLAGS})
    for prop in units.PROPERTIES:
        if prop.name not in origin:
            from_body = body is not None and getattr(body, prop.body_key, 0.0) != 0.0
            origin[prop.name] = "config" if from_body else "default"
    top, bottom = _rayleigh_boundaries(args.boundaries, cfg)
    ra, h_nd, ra_h = (scales.rayleigh(), scales.internal_heating_number(),
                      scales.internal_heating_rayleigh())
    ra_c = units.critical_rayleigh_for(top, bottom)
    notes = []
    if h_nd > 0.0 or (cfg is not None and cfg.physics.internal_heating != 0.0):
        notes.append("Ra_c is for heating from below; internal heating moves the onset")
    if cfg is not None and "flux" in (cfg.boundaries.top_heat, cfg.boundaries.bottom_heat):
        notes.append("Ra_c assumes fixed temperatures; the config fixes a heat flux")
    onset = {"top_flow": top, "bottom_flow": bottom, "critical_rayleigh": ra_c,
             "ratio": ra / ra_c, "above_onset": ra > ra_c,
             "source": "linear stability of the conductive state (convsim onset for the "
                       "config's own heating and rheology); fixed temperatures, heated from "
                       "below, constant viscosity", "notes": notes}
    result = {
        "rayleigh": ra, "internal_heating_number": h_nd, "internal_heating_rayleigh": ra_h,
        "properties": {p.name: {"value": getattr(scales, p.name), "units": p.units,
                                "from": origin[p.name]} for p in units.PROPERTIES},
        "scales": {"length_km": scales.length_to_km(1.0),
                   "time_myr": scales.time_to_myr(1.0), "time_s": scales.time_scale,
                   "velocity_cm_per_yr": scales.velocity_to_cm_per_yr(1.0),
                   "velocity_m_per_s": scales.velocity_scale,
                   "heat_flux_mw_m2": scales.heat_flux_to_mw_m2(1.0),
                   "temperature_contrast_k": scales.temperature_contrast,
                   "surface_temperature_k": scales.surface_temperature,
                   "viscosity_pa_s": scales.reference_viscosity},
        "onset": onset, "caution": _RAYLEIGH_CAUTION,
    }
    if args.json:
        emit_json(result)
        return 0
    sc = result["scales"]
    lines = ["properties (SI):"]
    for p in units.PROPERTIES:
        lines.append(f"  {p.name:<22s} {getattr(scales, p.name):<12.6g} {p.units:<12s} "
                     f"({origin[p.name]})")
    lines += [
        f"Ra   = {ra:<11.4g} rho g alpha dT d^3 / (kappa eta_ref)",
        f"H_nd = {h_nd:<11.4g} rho H d^2 / (k dT)",
        f"Ra_H = {ra_h:<11.4g} rho g alpha (rho H) d^5 / (k kappa eta_ref) = Ra H_nd",
        "scales:",
        f"  length       {sc['length_km']:<11.4g} km      d",
        f"  time         {sc['time_myr']:<11.4g} Myr     d^2 / kappa",
        f"  velocity     {sc['velocity_cm_per_yr']:<11.4g} cm/yr   kappa / d",
        f"  heat flux    {sc['heat_flux_mw_m2']:<11.4g} mW/m^2  k dT / d (times Nu or q)",
        f"  temperature  T_dim = {scales.surface_temperature:.6g} K + "
        f"{scales.temperature_contrast:.6g} K x T",
        f"onset: Ra_c = {ra_c:.6g} for {top} top, {bottom} bottom ({onset['source']})",
        f"  Ra / Ra_c = {ra / ra_c:.4g}: " + ("above onset, convecting" if ra > ra_c
                                              else "below onset, conduction only"),
    ]
    lines += [f"  note: {note}" for note in notes]
    lines.append(f"caution: {_RAYLEIGH_CAUTION}")
    print("\n".join(lines))
    return 0


# --- convsim sweep / fit: parameter studies, scaling laws, regimes --------------------------


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

    try:
        outcome = run_sweep(spec, out, jobs=args.jobs, scheduler=args.scheduler,
                            progress=progress, overwrite=args.overwrite)
    finally:
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
    p.add_argument("--status", default="steady",
                   help="statuses of the rows to fit, comma-separated, or 'all' (default: steady)")
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


def _run_fit(args) -> int:
    import csv
    import os
    from pathlib import Path
    from convsim.figures import sweep as figures_sweep
    from convsim.errors import OutputExistsError
    from convsim.analysis.fitting import RegimeThresholds, fit_report
    from convsim.studies.sweep_table import read_table
    table = read_table(args.table)
    ys = [y.strip() for y in args.y.split(",") if y.strip()]
    statuses = None if args.status.strip() == "all" else tuple(
        s.strip() for s in args.status.split(",") if s.strip())
    thresholds = RegimeThresholds(args.mobile_ratio, args.stagnant_ratio, args.stagnant_contrast,
                                  args.conductive_nusselt)
    report = fit_report(table, args.x, ys, statuses=statuses, group=args.group,
                        confidence=args.confidence, thresholds=thresholds,
                        interior=args.interior_column, contrast=args.contrast_column)
    out = Path(args.out) if args.out else Path(args.table).parent / "fit"
    figures = {y: out / f"{y}_against_{args.x}.png" for y in ys}
    paths = [out / "fit.json", out / "regimes.csv", out / "regime_map.png", *figures.values()]
    existing = [str(p) for p in paths if p.exists()]
    if existing and not args.overwrite:
        raise OutputExistsError(f"output {existing[0]!r}: exists; pass --overwrite to replace it "
                                f"or --out to choose another folder")
    out.mkdir(parents=True, exist_ok=True)
    labels = {"rayleigh": "Rayleigh number Ra", "nusselt_top": "Nusselt number Nu (top)",
              "nusselt_bottom": "Nusselt number Nu (bottom)", "vrms": "rms velocity",
              "surface_vrms": "surface rms velocity", "interior_vrms": "interior rms velocity"}
    sources = {1.0 / 3.0: "boundary-layer theory, slope 1/3 (Turcotte & Schubert ch. 6)",
               2.0 / 3.0: "boundary-layer theory, slope 2/3 (Turcotte & Schubert ch. 6)"}
    for y, path in figures.items():
        entries = [e for e in report["fits"] if e["y"] == y and "fit" in e]
        series = []
        for e in entries:
            from convsim.analysis.fitting import PowerLawFit
            f = e["fit"]
            fit = PowerLawFit(**{k: (tuple(tuple(r) for r in v) if k == "covariance" else
                                     tuple(v) if isinstance(v, list) else v)
                                 for k, v in f.items()})
            label = "" if e["group"] is None else f"{e['group']} = {e['group_value']}"
            series.append((label, e["x_values"], e["y_values"], fit))
        slope = entries[0]["reference_slope"] if entries else None
        figures_sweep.scaling_figure(path, series, x_label=labels.get(args.x, args.x),
                                     y_label=labels.get(y, y), reference_slope=slope,
                                     reference_label=sources.get(slope, ""))
    rows = report["regimes"]
    figures_sweep.regime_map_figure(
        out / "regime_map.png", [r["rayleigh"] for r in rows],
        [r["viscosity_contrast"] for r in rows], [r["regime"] for r in rows],
        thresholds_text=thresholds.text(),
        y_label=f"viscosity contrast ({args.contrast_column})")
    tmp = out / f"regimes.csv.tmp{os.getpid()}"
    with open(tmp, "w", newline="", encoding="utf-8") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(rows[0]) if rows else ["case_id"])
        writer.writeheader()
        writer.writerows(rows)
    os.replace(tmp, out / "regimes.csv")
    report["outputs"] = [str(p) for p in paths]
    tmp = out / f"fit.json.tmp{os.getpid()}"
    tmp.write_text(json.dumps(report, indent=1, default=float) + "\n", encoding="utf-8")
    os.replace(tmp, out / "fit.json")
    if args.json:
        emit_json(report)
        return 0
    for e in report["fits"]:
        where = "" if e["group"] is None else f" [{e['group']} = {e['group_value']}]"
        if "error" in e:
            print(f"{e['y']} against {e['x']}{where}: {e['error']}")
            continue
        f = e["fit"]
        lo, hi = f["exponent_interval"]
        alo, ahi = f["prefactor_interval"]
        ref = e["reference_slope"]
        print(f"{e['y']} = a {e['x']}^beta{where}: beta = {f['exponent']:.4f} "
              f"[{lo:.4f}, {hi:.4f}], a = {f['prefactor']:.4g} [{alo:.4g}, {ahi:.4g}] "
              f"({100 * f['confidence']:g}%, n = {f['n']})"
              + (f"; boundary-layer theory {ref:.4f}" if ref else ""))
    counts: dict = {}
    for r in rows:
        counts[r["regime"]] = counts.get(r["regime"], 0) + 1
    print("regimes: " + ", ".join(f"{n} {k}" for k, n in counts.items()))
    print(f"  outputs in {out}")
    return 0

# --- end of convsim sweep / fit -------------------------------------------------------------


# ---- convsim onset ---------------------------------------------------------------------

def _parse_wavenumbers(text: str):
    """'a:b:n' (n evenly spaced values from a to b) or 'k1,k2,...'; positive numbers."""
    from convsim.errors import ConfigError
    allowed = "expected a:b:n (n >= 2 values from a to b) or a comma list of numbers > 0"
    try:
        if ":" in text:
            a, b, n = text.split(":")
            a, b, n = float(a), float(b), int(n)
            if n < 2 or not (0.0 < a < b) or b == float("inf"):
                raise ValueError
            import numpy as np
            values = list(np.linspace(a, b, n))
        else:
            values = [float(v) for v in text.split(",") if v.strip()]
            if not values:
                raise ValueError
    except ValueError:
        raise ConfigError(f"--wavenumbers {text!r}: {allowed}") from None
    if not all(0.0 < v < float("inf") for v in values):
        raise ConfigError(f"--wavenumbers {text!r}: {allowed}")
    return values


def _onset_from_config(cfg, wavenumbers, points):
    """Unpack a Config into ``analyse_onset``'s plain arguments."""
    from convsim.analysis.onset_runs import onset_from_config
    return onset_from_config(cfg, wavenumbers, points)


def _onset_run_options(args):
    """Checked ``run_bracket`` options of ``--runs`` (None without --runs)."""
    from convsim.errors import ConfigError
    if not args.runs:
        for flag, value in (("--jobs", args.jobs), ("--runs-grid", args.runs_grid),
                            ("--richardson", args.richardson or None)):
            if value is not None:
                raise ConfigError(f"{flag}: only with --runs")
        return None
    if args.jobs is not None and args.jobs < 1:
        raise ConfigError(f"--jobs {args.jobs}: expected a whole number >= 1")
    grid = None
    if args.runs_grid:
        allowed = "expected NXxNZ with 4 <= NX, NZ <= 4096, e.g. 34x24"
        try:
            grid = tuple(int(v) for v in args.runs_grid.lower().split("x"))
        except ValueError:
            raise ConfigError(f"--runs-grid {args.runs_grid!r}: {allowed}") from None
        if len(grid) != 2 or not all(4 <= g <= 4096 for g in grid):
            raise ConfigError(f"--runs-grid {args.runs_grid!r}: {allowed}")
    return dict(grid=grid, richardson=args.richardson, jobs=args.jobs)


def _onset_run_bracket(cfg, result, options):
    """``--runs``: bracket the onset with short simulator runs (None without --runs)."""
    if options is None:
        return None
    from convsim.analysis.onset_runs import run_bracket
    return run_bracket(cfg, result, **options)


def _onset_runs_table(b) -> str:
    nx, nz = b.grid
    grids = f"{nx}x{nz}" + ("" if b.coarse is None else f" and {b.coarse.grid[0]}x"
                                                          f"{b.coarse.grid[1]}")
    lines = [f"run-based check: {len(b.rayleigh)} runs per grid on {grids}, mode n = {b.mode}, "
             f"amplitude {b.amplitude:g}, t = 0..{b.end_time:.4g}, dt <= {b.max_dt:.3g}, "
             f"{b.wall_seconds:.1f} s",
             f"  {'Ra':>11}  {'rate (runs)':>12}  {'rate (eigen)':>12}  {'difference':>10}"]
    for ra, s, th, f in zip(b.rayleigh, b.rates, b.theory_rates, b.fits):
        diff = "-" if abs(th) < 1e-6 * max(1.0, abs(s)) else f"{100.0 * (s / th - 1.0):+.2f} %"
        flag = "" if f.status == "ok" else f"  ({f.status} fit)"
        lines.append(f"  {ra:11.6g}  {s:12.5g}  {th:12.5g}  {diff:>10}{flag}")
    lines.append(f"  critical Rayleigh number (runs, {nx}x{nz})  {b.critical_rayleigh:.6g}  "
                 f"({100.0 * b.relative_difference:+.3f} % from the eigen-solver's "
                 f"{b.eigen_critical_rayleigh:.6g}; {b.method})")
    if b.coarse is not None:
        lines.append(f"  critical Rayleigh number (runs, {b.coarse.grid[0]}x{b.coarse.grid[1]})"
                     f"  {b.coarse.critical_rayleigh:.6g} "
                     f"({100.0 * b.coarse.relative_difference:+.3f} %)")
        lines.append(f"  Richardson extrapolation (second order)  {b.extrapolated_rayleigh:.6g}"
                     f"  ({100.0 * b.extrapolated_difference:+.3f} %)")
    return "\n".join(lines)


def _onset_table(result) -> str:
    def fmt(value, spec=".6g"):
        return "-" if value is None else format(value, spec)
    rows = [
        ("critical Rayleigh number (layer), Ra_c", fmt(result.critical_rayleigh)),
        ("critical wavenumber (layer), k_c", fmt(result.critical_wavenumber)),
        ("critical Rayleigh number (box)", fmt(result.box_critical_rayleigh)),
        ("box mode n (wavenumber k_n)",
         f"{fmt(result.box_mode, 'd')} ({fmt(result.box_wavenumber)})"),
        ("Rayleigh number of the config, Ra", fmt(result.rayleigh)),
        ("supercriticality Ra / box Ra_c", fmt(result.supercriticality, ".4g")),
        ("collocation degree (relative check)",
         f"{result.points} ({fmt(result.resolution_error, '.1e')})"),
    ]
    width = max(len(name) for name, _ in rows)
    return "\n".join(f"{name:<{width}}  {value}" for name, value in rows)


def _run_onset(args) -> int:
    from pathlib import Path

    from convsim.config import load_config
    from convsim.errors import ConfigError, OutputExistsError

    cfg = load_config(args.config)
    wavenumbers = None if args.wavenumbers is None else _parse_wavenumbers(args.wavenumbers)
    run_options = _onset_run_options(args)
    if args.points is not None and not 8 <= args.points <= 512:
        raise ConfigError(f"--points {args.points}: expected a whole number, 8 <= points <= 512")
    out = None
    if args.out is not None:
        out = Path(args.out)
        if out.exists() and not out.is_dir():
            raise ConfigError(f"--out {str(out)!r}: exists and is not a directory")
        targets = [out / "onset.json", out / "onset_neutral_curve.png"]
        if args.runs:
            targets.append(out / "onset_growth_rates.png")
        existing = [str(t) for t in targets if t.exists()]
        if existing and not args.overwrite:
            raise OutputExistsError(f"{existing[0]}: exists; pass --overwrite to replace it")
    result = _onset_from_config(cfg, wavenumbers, args.points)
    payload = result.to_dict()
    runs = _onset_run_bracket(cfg, result, run_options)
    if runs is not None:
        payload["runs"] = runs.to_dict()
    if out is not None:
        from convsim.figures.onset import plot_growth_rates, plot_neutral_curve
        out.mkdir(parents=True, exist_ok=True)
        (out / "onset.json").write_text(json.dumps(payload, indent=2) + "\n", encoding="utf-8")
        plot_neutral_curve(result, out / "onset_neutral_curve.png")
        if runs is not None:
            plot_growth_rates(runs, out / "onset_growth_rates.png")
    if args.json:
        emit_json(payload)
    else:
        print(_onset_table(result))
        if runs is not None:
            print(_onset_runs_table(runs))
        if out is not None:
            print("wrote " + ", ".join(str(t) for t in targets))
    return 0


@command("onset", "linear stability of the conductive state: critical Rayleigh number of the "
                  "layer and of the box")
def _onset_command(p):
    p.add_argument("config", help="TOML config file")
    p.add_argument("--wavenumbers", metavar="A:B:N|K1,K2,...",
                   help="where to draw the neutral curve (default: 100 values around k_c)")
    p.add_argument("--points", type=int, default=None,
                   help="Chebyshev degree in z (default: from the viscosity contrast)")
    p.add_argument("--out", metavar="DIR", help="write onset.json and the neutral-curve figure")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.add_argument("--overwrite", action="store_true", help="replace existing output files")
    p.add_argument("--runs", action="store_true",
                   help="also bracket the onset with short simulator runs around the box Ra_c "
                        "(growth rate of a small perturbation against Ra)")
    p.add_argument("--jobs", type=int, default=None,
                   help="--runs: runs side by side (default: the usable cores)")
    p.add_argument("--runs-grid", metavar="NXxNZ",
                   help="--runs: grid of the runs (default: 24 cells deep, square cells)")
    p.add_argument("--richardson", action="store_true",
                   help="--runs: repeat on half the cells and extrapolate Ra_c (second order)")
    p.set_defaults(handler=_run_onset)


# ---- end of convsim onset ----------------------------------------------------------------


# --- convsim plot / animate / info / xdmf: figures and what a run file holds ----------------

@command("plot", "figures of a run file: fields, profiles, time series, a summary sheet")
def _add_plot(p):
    p.add_argument("run", help="run file (HDF5) written by convsim run")
    which = p.add_mutually_exclusive_group()
    which.add_argument("--snapshot", type=int, metavar="N",
                       help="snapshot index (negative: from the end); default the last")
    which.add_argument("--time", metavar="T", help="the snapshot nearest this time: a "
                       "nondimensional number, or with units (e.g. '5 Myr') for a run with [body]")
    p.add_argument("--out", metavar="DIR", help="output folder (default: beside the run file)")
    p.add_argument("--format", default="png,pdf,svg", metavar="LIST",
                   help="comma-separated formats among png, pdf, svg (default: all three)")
    p.add_argument("--arrows", action="store_true",
                   help="velocity arrows instead of streamlines over the temperature")
    p.add_argument("--units", default="auto", choices=("auto", "physical", "nondimensional"),
                   help="auto: physical units when the run's config has a [body] table")
    p.add_argument("--overwrite", action="store_true", help="replace existing figure files")
    p.set_defaults(handler=_run_plot)


def _run_plot(args) -> int:
    from convsim.figures.fields import plot_run
    paths = plot_run(args.run, snapshot=args.snapshot, time=args.time, out_dir=args.out,
                     formats=args.format, arrows=args.arrows, overwrite=args.overwrite,
                     units=args.units)
    for path in paths:
        print(path)
    return 0


@command("animate", "animation of the temperature field over the snapshots of a run file")
def _add_animate(p):
    p.add_argument("run", help="run file (HDF5) written by convsim run")
    p.add_argument("--out", metavar="FILE", help="output .mp4 (needs ffmpeg) or .gif; default "
                   "RUN_temperature.mp4 beside the run file, .gif when ffmpeg is missing")
    p.add_argument("--fps", type=int, default=10, help="frames (snapshots) per second (default 10)")
    p.add_argument("--units", default="auto", choices=("auto", "physical", "nondimensional"),
                   help="auto: physical units when the run's config has a [body] table")
    p.add_argument("--overwrite", action="store_true", help="replace an existing file")
    p.set_defaults(handler=_run_animate)


def _run_animate(args) -> int:
    from tqdm import tqdm
    from convsim.figures.animation import animate_run

    def progress(frames, total):
        return tqdm(frames, total=total, unit="frame", file=sys.stderr, leave=False,
                    disable=None)

    print(animate_run(args.run, args.out, fps=args.fps, overwrite=args.overwrite,
                      units=args.units, progress=progress))
    return 0


@command("info", "what a run file holds: config, grid, snapshot times, final diagnostics")
def _add_info(p):
    p.add_argument("run", help="run file (HDF5) written by convsim run")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(handler=_run_info)


def _run_info(args) -> int:
    from convsim.files.info import describe_run, format_info
    info = describe_run(args.run)
    if args.json:
        emit_json(info)
    else:
        print(format_info(info))
    return 0


@command("xdmf", "write the XDMF sidecar of a run file (for ParaView and VisIt)")
def _add_xdmf(p):
    p.add_argument("run", help="run file (HDF5) written by convsim run")
    p.add_argument("--overwrite", action="store_true", help="replace an existing sidecar")
    p.set_defaults(handler=_run_xdmf)


def _run_xdmf(args) -> int:
    from convsim.files.xdmf import write_xdmf
    print(write_xdmf(args.run, overwrite=args.overwrite))
    return 0
# --- end of plot / animate / info / xdmf ----------------------------------------------------
# --- convsim bench: published steady cases on a series of grids, convergence, report -----------
@command("bench", "run the published steady benchmark cases on several grids and write a report")
def _add_bench(p):
    p.add_argument("cases", nargs="*", metavar="CASE",
                   help="cases to run (default: all known: 1a 1b 1c 2a)")
    p.add_argument("--grids", default="32,64,128", metavar="N,N,N",
                   help="cell counts n of the n x n grids (default 32,64,128; three or more "
                        "give an observed order and an extrapolated value)")
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
    grids = bench.parse_grids(args.grids)
    if args.jobs is not None and args.jobs < 1:
        raise ConfigError(f"--jobs {args.jobs}: must be at least 1")
    bench_report.check_outputs(args.out, args.overwrite)      # before hours of runs, not after

    def progress(row, done, total):
        print(f"[{done}/{total}] case {row.case} grid {row.grid}: {row.status}, Nu "
              f"{row.nusselt:.6g}, vrms {row.vrms:.6g}, {row.steps} steps, "
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
    argv = list(args.cases) + ["--grids", args.grids, "--out", args.out]
    if args.jobs is not None:
        argv += ["--jobs", str(args.jobs)]
    for item in args.set:
        argv += ["--set", item]
    return argv + (["--overwrite"] if args.overwrite else []) + (["--json"] if args.json else [])
# --- end of convsim bench ------------------------------------------------------------------------


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    logging.basicConfig(level=logging.INFO if args.verbose else logging.WARNING,
                        format="%(levelname)s %(name)s: %(message)s")
    try:
        return int(args.handler(args) or 0)
    except ConvsimError as exc:
        print(f"convsim: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("convsim: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:          # output piped into `head` and the like
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0

