"""``convsim onset``: linear stability of the conductive state, and the run-based bracket."""

from __future__ import annotations

from convsim.cli.common import command, emit_json


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


def _onset_stated(cfg, result) -> dict:
    """The onset in the config's own terms: Ra_c at its rayleigh_reference, Ra at three states."""
    from convsim.run import layer
    cfg = layer.resolve(cfg)
    ref = layer.internal_rayleigh(cfg) / cfg.physics.rayleigh       # eta at the reference
    return {"rayleigh_reference": cfg.physics.rayleigh_reference,
            "critical_rayleigh": result.critical_rayleigh / ref,
            "box_critical_rayleigh": result.box_critical_rayleigh / ref,
            "rayleigh": cfg.physics.rayleigh, "rayleigh_numbers": layer.rayleigh_numbers(cfg),
            "above_onset": bool(result.supercriticality and result.supercriticality > 1.0)}


def _onset_stated_table(stated: dict) -> str:
    ra = stated["rayleigh_numbers"]
    where = stated["rayleigh_reference"]
    return "\n".join([
        f"(above: Ra with the law's unit viscosity; with the viscosity at the {where}:)",
        f"critical Rayleigh number (layer / box)  {stated['critical_rayleigh']:.6g} / "
        f"{stated['box_critical_rayleigh']:.6g}",
        f"Rayleigh number at top / bottom / interior  {ra['top']:.6g} / {ra['bottom']:.6g} / "
        f"{ra['interior']:.6g}",
        "the layer " + ("convects (above onset)" if stated["above_onset"]
                        else "does not convect (below onset)")])


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
        from convsim.files.runfile import check_output_folder
        check_output_folder(out)
    result = _onset_from_config(cfg, wavenumbers, args.points)
    payload = result.to_dict()
    stated = _onset_stated(cfg, result)
    payload["stated"] = stated
    runs = _onset_run_bracket(cfg, result, run_options)
    if runs is not None:
        payload["runs"] = runs.to_dict()
    if out is not None:
        from convsim.figures.onset import plot_growth_rates, plot_neutral_curve
        out.mkdir(parents=True, exist_ok=True)
        from convsim.files.jsonio import write_json
        write_json(out / "onset.json", payload)
        plot_neutral_curve(result, out / "onset_neutral_curve.png")
        if runs is not None:
            plot_growth_rates(runs, out / "onset_growth_rates.png")
    if args.json:
        emit_json(payload)
    else:
        print(_onset_table(result))
        print(_onset_stated_table(stated))
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
