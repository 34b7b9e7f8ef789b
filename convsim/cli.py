"""Command line: ``convsim <command> ...``.  The only module that prints and exits.

Every ``ConvsimError`` becomes one line on stderr and exit status 2.
"""

from __future__ import annotations

import argparse
import json
import logging
import sys

from . import __version__
from .errors import ConvsimError

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


# ---- convsim onset ---------------------------------------------------------------------

def _parse_wavenumbers(text: str):
    """'a:b:n' (n evenly spaced values from a to b) or 'k1,k2,...'; positive numbers."""
    from .errors import ConfigError
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
    from .stability import analyse_onset
    b, v = cfg.boundaries, cfg.viscosity
    return analyse_onset(
        cfg.physics.rayleigh, aspect=cfg.domain.aspect, sides=b.sides,
        top_flow=b.top_flow, bottom_flow=b.bottom_flow, top_heat=b.top_heat,
        top_value=b.top_value, bottom_heat=b.bottom_heat, bottom_value=b.bottom_value,
        internal_heating=cfg.physics.internal_heating, viscosity=v.law,
        viscosity_parameters=dict(
            thermal_contrast=v.thermal_contrast, depth_contrast=v.depth_contrast,
            activation_energy=v.activation_energy, activation_volume=v.activation_volume,
            temperature_offset=v.temperature_offset, minimum=v.minimum, maximum=v.maximum),
        wavenumbers=wavenumbers, points=points)


def _onset_run_bracket(args, cfg, result):
    """Hook for a later ``--runs`` option: bracket the onset with short simulator runs.

    Not implemented: it needs ``convsim.simulation``.  It will return a mapping added to
    the JSON under "runs" (None: nothing to add).
    """
    return None


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

    from .config import load_config
    from .errors import ConfigError, OutputExistsError

    cfg = load_config(args.config)
    wavenumbers = None if args.wavenumbers is None else _parse_wavenumbers(args.wavenumbers)
    if args.points is not None and not 8 <= args.points <= 512:
        raise ConfigError(f"--points {args.points}: expected a whole number, 8 <= points <= 512")
    out = None
    if args.out is not None:
        out = Path(args.out)
        if out.exists() and not out.is_dir():
            raise ConfigError(f"--out {str(out)!r}: exists and is not a directory")
        targets = [out / "onset.json", out / "onset_neutral_curve.png"]
        existing = [str(t) for t in targets if t.exists()]
        if existing and not args.overwrite:
            raise OutputExistsError(f"{existing[0]}: exists; pass --overwrite to replace it")
    result = _onset_from_config(cfg, wavenumbers, args.points)
    payload = result.to_dict()
    runs = _onset_run_bracket(args, cfg, result)        # --runs hook (not yet available)
    if runs is not None:
        payload["runs"] = runs
    if out is not None:
        from .figures_onset import plot_neutral_curve
        out.mkdir(parents=True, exist_ok=True)
        (out / "onset.json").write_text(json.dumps(payload, indent=2) + "\n", encoding="utf-8")
        plot_neutral_curve(result, out / "onset_neutral_curve.png")
    if args.json:
        emit_json(payload)
    else:
        print(_onset_table(result))
        if out is not None:
            print(f"wrote {out / 'onset.json'} and {out / 'onset_neutral_curve.png'}")
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
    # a later --runs option (run-based bracketing) plugs in through _onset_run_bracket
    p.set_defaults(handler=_run_onset)


# ---- end of convsim onset ----------------------------------------------------------------


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


if __name__ == "__main__":
    sys.exit(main())
