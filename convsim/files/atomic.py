"""Atomic file writes: write beside the target under a temporary name, then rename over it.

``os.replace`` is atomic on POSIX file systems, so a reader (or a crash) sees the
old file or the new one, never a half-written one.  Every writer of whole files in
convsim (tables, JSON reports, figures, the XDMF sidecar, a new run file) goes
through ``atomic_path``.
"""

from __future__ import annotations

import os
from contextlib import contextmanager
from pathlib import Path

__all__ = ["atomic_path", "atomic_write_text", "atomic_write_bytes"]


@contextmanager
def atomic_path(path: str | Path, suffix: str = ""):
    """Yield a temporary path beside ``path``; on normal exit rename it over ``path``.

    On an exception the temporary file is removed and ``path`` is left as it was.
    ``suffix`` is kept at the end of the temporary name (for writers that read the
    format from it).  The parent folder is created if missing.

    Examples
    --------
    >>> with atomic_path(out / "table.csv") as tmp:      # doctest: +SKIP
    ...     write_csv(tmp)
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f"{path.name}.part{os.getpid()}{suffix}")
    try:
        yield tmp
        os.replace(tmp, path)
    except BaseException:
        try:
            tmp.unlink(missing_ok=True)
        except OSError:
            pass
        raise


def atomic_write_text(path: str | Path, text: str) -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically; returns the path."""
    with atomic_path(path) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return Path(path)


def atomic_write_bytes(path: str | Path, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically; returns the path."""
    with atomic_path(path) as tmp:
        tmp.write_bytes(data)
    return Path(path)
