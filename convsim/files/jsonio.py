"""One JSON form for every output: strict JSON, numpy values as plain numbers, NaN as null.

JSON (RFC 8259) has no NaN or infinity; Python's ``json`` would write the
non-standard tokens ``NaN`` and ``Infinity`` that other readers reject.  Here every
non-finite number becomes ``null`` (a missing value), numpy scalars and arrays
become plain numbers and lists, tuples become lists, bytes become text and paths
strings.  ``--json`` output, reports, sweep records and ``info`` all use it.
"""

from __future__ import annotations

import json
import math
from pathlib import Path, PurePath

from convsim.files.atomic import atomic_write_text

__all__ = ["plain", "dumps", "write_json"]


def plain(value):
    """``value`` as plain JSON-ready Python data (NaN and infinities as None)."""
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, bytes):
        return value.decode()
    if isinstance(value, PurePath):
        return str(value)
    if hasattr(value, "tolist") and hasattr(value, "dtype"):      # numpy scalar or array
        return plain(value.tolist())
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    return value


def dumps(value, indent: int | None = 2) -> str:
    """Strict JSON text of ``plain(value)``, ending in a newline."""
    return json.dumps(plain(value), indent=indent, allow_nan=False) + "\n"


def write_json(path: str | Path, value, indent: int | None = 2) -> Path:
    """Write ``value`` as strict JSON to ``path``, atomically; returns the path."""
    return atomic_write_text(path, dumps(value, indent))
