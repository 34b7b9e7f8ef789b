"""What every command module shares: the command registry and the JSON printer."""

from __future__ import annotations


COMMANDS = {}


def command(name, help):
    """Register ``func(subparsers) -> None`` that adds one subcommand (its handler in defaults)."""
    def wrap(func):
        COMMANDS[name] = (help, func)
        return func
    return wrap


def emit_json(obj) -> None:
    """Print one JSON object on stdout (strict JSON: NaN as null, ``convsim.files.jsonio``)."""
    from convsim.files.jsonio import dumps
    print(dumps(obj), end="")
