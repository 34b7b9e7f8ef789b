"""The config a run file stores (TOML text in the file), read back as a dict.

A restart needs it twice: ``run --restart FILE`` alone rebuilds the run from it, and a restart
with a config file checks that only ``[stop]`` and ``[output]`` differ from it. One reader, so
the two refuse a missing or broken stored config with the same words.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

from convsim.errors import ConfigError
from convsim.files.reader import read_run

__all__ = ["stored_config"]


def stored_config(path: str | Path, when_missing: str) -> dict:
    """The parsed ``[table] -> {key: value}`` config stored in run file ``path``.

    Raises :class:`ConfigError` (one line, naming the file) when the file holds no stored config
    (``when_missing`` says what to do instead) or when the stored text is not valid TOML.
    """
    text = read_run(path).config_text
    if not text.strip():
        raise ConfigError(f"--restart {str(path)!r}: the file holds no stored config; {when_missing}")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"--restart {str(path)!r}: the stored config is not valid TOML "
                          f"({exc}); the file cannot be continued") from None
