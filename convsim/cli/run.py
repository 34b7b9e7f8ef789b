"""``convsim run``: a config to steady state, an end time or a step limit (progress bar:
``convsim.run.progress``); the restart command after an interrupt or a divergence."""

from __future__ import annotations

import json
import sys

from convsim.cli.common import command, emit_json


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


#: Exit status of ``convsim run`` for the statuses that are not a normal end (0).
EXIT_FOR_STATUS = {"diverged": 3, "interrupted": 130}


def _positive_int(text: str) -> int:
    """argparse type: a whole number >= 1 (argparse turns the error into exit status 2)."""
    import argparse
    try:
        value = int(text)
    except ValueError:
        value = 0
    if value < 1:
        raise argparse.ArgumentTypeError(f"{text!r}: expected a whole number >= 1")
    return value


@command("run", "run a config: a convecting box to steady state or an end time")
def _add_run(p):
    p.add_argument("config", nargs="?", help="TOML config file (with --restart: default the "
                   "config stored in the run file)")
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
    p.add_argument("--threads", type=_positive_int, metavar="N",
                   help="threads for the numerics (default: $CONVSIM_THREADS or 1)")
    p.set_defaults(handler=_run)


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
        if lid.get("switches"):
            times = ", ".join(_g(t, 4) for t in lid.get("breaking_times", [])[:8])
            when = f" at t = {times}" if times else ""
            lines.append(f"  lid breaks {lid.get('breaking_events')} time(s){when}; "
                         f"{lid['switches']} switch(es), open {_g(lid['open_fraction'], 3)} of "
                         f"the time")
    return lines


def _run(args):
    from pathlib import Path
    from convsim import api
    overrides = list(args.set)
    if args.start_from:
        overrides += ["start.kind=\"snapshot\"", f"start.file={json.dumps(args.start_from)}"]
    if args.config is None and not args.restart:
        from convsim.errors import ConfigError
        raise ConfigError("config: missing; give a TOML config file, or --restart RUN.h5 to "
                          "continue a run with the config it holds")
    if args.config is None:
        cfg = _restart_config(args.restart, overrides, args.grid)
    else:
        cfg = load_run_config(args.config, overrides, args.grid)
    from convsim.run.layer import resolve
    cfg = resolve(cfg)          # [body] sets Ra (or refuses a mismatch) before any comparison
    output = None
    if args.restart:
        _check_restart_config(args.restart, cfg)
    else:
        output = Path(args.out) / (Path(args.config).stem + ".h5")
    from convsim.run.progress import ProgressDisplay
    result = api.run(cfg, output, overwrite=args.overwrite, restart=args.restart,
                     observers=[ProgressDisplay(cfg)], threads=args.threads)
    summary = result.summary()
    if args.json:
        emit_json(summary)
    else:
        print(f"{result.status}: {result.message}")
        print(f"  Nu top {result.nusselt_top:.6f}  Nu bottom {result.nusselt_bottom:.6f}  "
              f"vrms {result.vrms:.6f}")
        ra = result.rayleigh_numbers
        print(f"  Ra at the top {ra['top']:.6g}  bottom {ra['bottom']:.6g}  "
              f"interior {ra['interior']:.6g}")
        print(f"  grid {result.grid.nx}x{result.grid.nz}  steps {result.steps}  "
              f"time {result.time:.6g}  wall {result.wall_seconds:.2f} s")
        for line in physical_lines(result.physical):
            print("  " + line)
        for line in statistics_lines(summary):
            print(f"  {line}")
        print(f"  run file {result.output}")
    if result.status == "diverged":
        print(f"convsim: run diverged: {result.message}; the last good state is in "
              f"{result.output}", file=sys.stderr)
    if result.status in ("diverged", "interrupted") and result.output:
        import shlex
        print(f"convsim: continue it with: convsim run --restart {shlex.quote(result.output)}"
              + (" (it continues bit for bit, so it may diverge again; a new run started "
                 "with --from it may change [numerics], e.g. --set numerics.cfl=0.2)"
                 if result.status == "diverged" else ""),
              file=sys.stderr)
    return EXIT_FOR_STATUS.get(result.status, 0)


def physical_lines(physical) -> list:
    """The answers in physical units as text lines (empty without a [body] table)."""
    if not physical:
        return []
    rows = [(name.replace("_", " "), entry) for name, entry in physical.items()]
    return [("physical    " if i == 0 else " " * 12) + ", ".join(
        f"{name} {entry['value']:.4g} {entry['units']}" for name, entry in rows[i:i + 3])
        for i in range(0, len(rows), 3)]


def _restart_config(path, overrides, grid):
    """The config stored in a run file, with --set overrides (for ``run --restart`` alone)."""
    from convsim.config import apply_overrides, parse_config
    from convsim.errors import ConfigError
    from convsim.files.stored_config import stored_config
    if grid:
        raise ConfigError(f"--grid {grid!r}: a restart continues on the run's own grid")
    data = stored_config(path, "give the run's config file too, or start a new run")
    return parse_config(apply_overrides(data, overrides), source=f"{path} (its config)")


def _check_restart_config(path, cfg):
    """A restart may change only [stop] and [output]: anything else would not continue the run."""
    from convsim.api import check_restart_config
    check_restart_config(path, cfg)
