"""``convsim scenario``: a commented starting config for a typical question or a published case."""

from __future__ import annotations

from convsim.cli.common import command


@command("scenario", "write a commented starting config: a rocky mantle, an ice shell (invented "
                     "bodies, with their properties and Ra) or a published case")
def _add_scenario(p):
    from convsim.studies.scenarios import scenario_names
    p.add_argument("name", nargs="?", metavar="SCENARIO",
                   help=f"one of {', '.join(scenario_names())}")
    p.add_argument("--out", metavar="FILE", help="write the config here (default: print it)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing file")
    p.add_argument("--list", action="store_true", help="list the scenarios and their questions")
    p.set_defaults(handler=_run_scenario)


def _run_scenario(args) -> int:
    from convsim.errors import ConfigError
    from convsim.studies.scenarios import SCENARIOS, scenario_names, scenario_toml
    if args.list or args.name is None:
        if args.name is None and not args.list:
            raise ConfigError(f"SCENARIO: missing; one of {', '.join(scenario_names())}")
        for name in scenario_names():
            what = SCENARIOS[name].question if name in SCENARIOS else "published benchmark case"
            print(f"{name:<14s} {what}")
        return 0
    text = scenario_toml(args.name)
    if args.out is None:
        print(text, end="")
        return 0
    from pathlib import Path
    from convsim.files.runfile import check_writable
    from convsim.files.atomic import atomic_write_text
    check_writable(Path(args.out), args.overwrite, other="")
    atomic_write_text(Path(args.out), text)
    print(args.out)
    return 0
