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
