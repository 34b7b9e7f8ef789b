"""Command line: ``convsim <command> ...``.  The only module that prints and exits.

Every ``ConvsimError`` becomes one line on stderr and exit status 2.
"""

from __future__ import annotations

import argparse
import logging
import os
import sys

from convsim import __version__
from convsim.errors import ConvsimError, DiskFullError
from convsim.cli.common import COMMANDS
# the command groups register themselves, in the order `convsim --help` lists them
from convsim.cli import run, rayleigh, sweep, onset, files, bench  # noqa: F401,E402
from convsim.cli import scenario, compare  # noqa: F401,E402


#: Exit status on a full disk (or quota); 2 is bad input, ``run.EXIT_FOR_STATUS`` the rest.
EXIT_DISK_FULL = 4


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2, as for every other bad input
        self.exit(2, f"convsim: error: {message}\n")


def build_parser(argv=None) -> argparse.ArgumentParser:
    """The parser; given the arguments, only the command they name gets its options (the
    others are listed for ``--help`` and an unknown name; argparse reads only the named
    command's options), which saves building about 120 options at every start."""
    named = _command_named(sys.argv[1:] if argv is None else argv)
    parser = _Parser(prog="convsim", description="2D infinite-Prandtl convection simulator")
    parser.add_argument("--version", action="version", version=f"convsim {__version__}")
    parser.add_argument("-v", "--verbose", action="store_true", help="log progress details")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    for name, (help_text, add) in COMMANDS.items():
        command_parser = sub.add_parser(name, help=help_text, description=help_text)
        if named is not None and name != named:
            continue
        command_parser.add_argument("-v", "--verbose", action="store_true",  # after it, too
                                    default=argparse.SUPPRESS, help="log progress details")
        add(command_parser)
    return parser


def _command_named(argv) -> str | None:
    """The command the arguments name (the first one not an option), if it is one."""
    first = next((a for a in argv if not a.startswith("-")), None)
    return first if first in COMMANDS else None


def main(argv=None) -> int:
    parser = build_parser(argv)
    args = parser.parse_args(argv)
    logging.basicConfig(level=logging.INFO if args.verbose else logging.WARNING,
                        format="%(levelname)s %(name)s: %(message)s")
    try:
        return int(args.handler(args) or 0)
    except DiskFullError as exc:     # the run file keeps every snapshot completed before
        print(f"convsim: error: {exc}", file=sys.stderr)
        return EXIT_DISK_FULL
    except ConvsimError as exc:
        print(f"convsim: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("convsim: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:          # output piped into `head` and the like
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
