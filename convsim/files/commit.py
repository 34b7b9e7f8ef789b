"""Crash-safe updates of a run file: copy, change the copy, rename it over the original.

A run file is never changed in place.  Every update (a snapshot, the final
status) copies the file to ``RUN.h5.part``, changes the copy with h5py and then
renames it over ``RUN.h5`` (``os.replace``, atomic on POSIX file systems).  So:

- a reader opening ``RUN.h5`` gets either the file before the update or the
  file after it, never a mixture; a reader holding the file open keeps the
  version it opened (the old inode) and never blocks the writer, which locks
  nothing a reader holds;
- a process killed at any moment (SIGKILL) leaves the last committed file
  intact (and perhaps a stale ``RUN.h5.part``, replaced by the next update);
- a full disk fails the copy or the change of the copy, never the committed
  file: :class:`convsim.errors.DiskFullError` names what was kept.

A power cut is not covered: nothing is synced to the device (that would cost a
disk flush per snapshot).

Fault injection (tests): every write point calls :func:`fault_point` with its
name (``WRITE_POINTS``).  ``fault_hook`` (a callable taking the name) or the
environment variable ``CONVSIM_FAULT`` = ``POINT#N=ACTION[,...]`` (the N-th time
POINT is reached, counted from 1; ACTION one of ``kill``, ``enospc``,
``sigterm``, ``sigint``) make a chosen point fail.
"""

from __future__ import annotations

import errno
import os
import shutil
import signal
from pathlib import Path

import h5py

from convsim.errors import DiskFullError, SnapshotError

__all__ = ["WRITE_POINTS", "FAULT_ACTIONS", "fault_hook", "fault_point", "commit", "free_bytes",
           "check_space", "is_disk_full", "format_bytes"]

#: Where an update can fail, in order: a new file written as RUN.h5.part (``create``; it
#: becomes RUN.h5 with the first snapshot's commit); at every commit the free-space check, the copy of the committed file, the
#: open of the copy, fields appended, series appended, restart state replaced, attributes
#: set, the copy closed, its rename over the committed file; the XDMF sidecar (``xdmf``).
WRITE_POINTS = ("create", "space", "copy", "open", "fields", "series", "restart", "attrs", "close",
                "replace", "xdmf")
FAULT_ACTIONS = ("kill", "enospc", "sigterm", "sigint")
FAULT_ENV = "CONVSIM_FAULT"
#: Free space kept in reserve beyond what an update needs (HDF5 metadata, the file system).
SPACE_MARGIN = 1 << 20

fault_hook = None
_counts: dict = {}


def _env_faults() -> dict:
    plan = {}
    for item in filter(None, os.environ.get(FAULT_ENV, "").split(",")):
        where, _, action = item.partition("=")
        point, _, nth = where.partition("#")
        plan[(point.strip(), int(nth or 1))] = action.strip()
    return plan


def fault_point(name: str) -> None:
    """Run the fault-injection hook at write point ``name`` (does nothing unless asked)."""
    if fault_hook is not None:
        fault_hook(name)
    if FAULT_ENV not in os.environ:
        return
    _counts[name] = _counts.get(name, 0) + 1
    action = _env_faults().get((name, _counts[name]))
    if action is not None:
        inject(action, name)


def inject(action: str, name: str = "") -> None:
    """Do one fault action now: kill this process, raise ENOSPC, or send SIGTERM / SIGINT."""
    if action == "kill":
        os.kill(os.getpid(), signal.SIGKILL)
    elif action == "enospc":
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC) + f" (injected at {name})")
    elif action in ("sigterm", "sigint"):
        os.kill(os.getpid(), signal.SIGTERM if action == "sigterm" else signal.SIGINT)
    else:
        raise ValueError(f"fault action {action!r}: expected one of {', '.join(FAULT_ACTIONS)}")


def free_bytes(folder: str | Path) -> int:
    """Bytes free for an unprivileged writer in ``folder`` (statvfs)."""
    return shutil.disk_usage(folder).free


def format_bytes(n: float) -> str:
    """``1.5 GB`` and the like (powers of 1000)."""
    for unit in ("B", "kB", "MB", "GB", "TB"):
        if abs(n) < 1000 or unit == "TB":
            return f"{n:.3g} {unit}"
        n /= 1000.0
    return f"{n:.3g} TB"


def is_disk_full(exc: BaseException, folder: str | Path | None = None) -> bool:
    """True when ``exc`` is (or, for HDF5's wrapped errors, looks like) a full disk or quota."""
    if isinstance(exc, DiskFullError):
        return True
    if isinstance(exc, OSError) and exc.errno in (errno.ENOSPC, errno.EDQUOT):
        return True
    text = str(exc)
    if "No space left" in text or "errno = 28" in text or "Disk quota" in text:
        return True
    try:
        return folder is not None and free_bytes(folder) < SPACE_MARGIN
    except OSError:
        return False


def check_space(path: Path, need: int) -> None:
    """Raise ``DiskFullError`` unless ``path``'s folder has ``need`` bytes free and a margin."""
    fault_point("space")
    free = free_bytes(path.parent)
    if free < need + SPACE_MARGIN:
        raise DiskFullError(f"run file {str(path)!r}: the disk is full ({format_bytes(free)} "
                            f"free, the next write needs {format_bytes(need + SPACE_MARGIN)})")


def _discard(part: Path) -> None:
    try:
        part.unlink(missing_ok=True)
    except OSError:
        pass


def commit(path: Path, update, extra_bytes: int = 0, fresh: bool = False):
    """Apply ``update(h5py.File)`` to a copy of ``path`` and rename the copy over it.

    ``fresh``: the copy ``RUN.h5.part`` is a new file already (no copy made).  Returns what
    ``update`` returns.  On any failure the committed file is untouched and the copy removed;
    a full disk raises ``DiskFullError``, other I/O failures ``SnapshotError``.
    """
    path = Path(path)
    part = path.with_name(path.name + ".part")
    try:
        check_space(path, (0 if fresh else path.stat().st_size) + extra_bytes)
        fault_point("copy")
        if not fresh:
            shutil.copyfile(path, part)
        fault_point("open")
        with h5py.File(part, "a", locking=False) as f:
            result = update(f)
            fault_point("close")
        fault_point("replace")
        os.replace(part, path)
        return result
    except DiskFullError:
        _discard(part)
        raise
    except OSError as exc:
        _discard(part)
        why = " ".join(str(exc.strerror or exc).split())       # HDF5's messages span lines
        if is_disk_full(exc, path.parent):
            raise DiskFullError(f"run file {str(path)!r}: the disk is full ({why})") from None
        raise SnapshotError(f"run file {str(path)!r}: cannot be written ({why})") from None
    except BaseException:
        _discard(part)
        raise
