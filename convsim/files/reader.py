"""Reading a run file back: metadata, the series, the fields of one snapshot or of all.

The layout is declared in :mod:`convsim.files.runfile` (the writer's module); this module
only reads. A file that is missing, empty or not a run file gives one ``SnapshotError``
line naming it.
"""

from __future__ import annotations

from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from convsim.errors import SnapshotError
from convsim.files.runfile import FIELDS, SERIES, open_run_file, stored_fields
from convsim.files.statistics_group import read_statistics

__all__ = ["RunFile", "read_run", "read_series", "iter_fields", "reading_run_file"]


@contextmanager
def reading_run_file(path):
    """``open_run_file`` for a reader: a missing file, or one that is not a run file (an HDF5
    error, a missing variable), gives one ``SnapshotError`` line naming it."""
    path = Path(path)
    if not path.is_file():
        raise SnapshotError(f"run file {str(path)!r}: not found")
    try:
        with open_run_file(path) as f:
            yield f
    except SnapshotError:          # the reader's own message (an OSError too): as it is
        raise
    except (OSError, KeyError) as exc:
        raise SnapshotError(f"run file {str(path)!r}: not a readable convsim run file "
                            f"({exc})") from None


@dataclass
class RunFile:
    """What a run file holds, read into memory (fields of one snapshot only)."""

    path: Path
    attrs: dict
    x: np.ndarray
    z: np.ndarray
    x_node: np.ndarray
    z_node: np.ndarray
    times: np.ndarray
    steps: np.ndarray
    snapshot: int
    fields: dict
    series: dict
    restart: dict
    statistics: dict = field(default_factory=dict)   # see read_statistics; {} while running

    @property
    def config_text(self) -> str:
        return self.attrs.get("config", "")

    @property
    def advected(self) -> list[str]:
        """Names of the run's advected fields (the temperature in files before the attribute)."""
        return str(self.attrs.get("advected_fields", "temperature")).split()


def read_run(path: str | Path, snapshot: int = -1, *, restart: bool = False) -> RunFile:
    """Read a run file: metadata, the series, and the fields of one snapshot (default the last)."""
    path = Path(path)
    with reading_run_file(path) as f:
        times = f["time"][:]
        if len(times) == 0:
            raise SnapshotError(f"run file {str(path)!r}: holds no snapshot yet")
        count = len(times)
        index = snapshot if snapshot >= 0 else count + snapshot
        if not 0 <= index < count:
            raise SnapshotError(f"snapshot = {snapshot}: out of range, the file holds "
                                f"{count} (0 to {count - 1})")
        fields = {name: f[name][index] for name in stored_fields(f)}
        state = {}
        if restart and "restart" in f:
            g = f["restart"]
            state = {k: g[k][()] for k in g}      # [()]: arrays and scalars alike
            state.update({k: g.attrs[k] for k in g.attrs})
        attrs = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in f.attrs.items()}
        return RunFile(path=path, attrs=attrs, x=f["x"][:], z=f["z"][:], x_node=f["x_node"][:],
                       z_node=f["z_node"][:], times=times, steps=f["step"][:], snapshot=index,
                       fields=fields, series=_series(f), restart=state,
                       statistics=read_statistics(f))


def iter_fields(path: str | Path, names=None):
    """Yield ``(index, time, {name: array})`` for every snapshot, the file opened once.

    For animations and sweeps over snapshots: reads only the named fields (default: all the
    file holds), not the series.
    """
    path = Path(path)
    unknown = [n for n in names or () if n not in FIELDS]
    if unknown:
        raise SnapshotError(f"fields {unknown}: unknown; allowed: {', '.join(FIELDS)}")
    with reading_run_file(path) as f:
        times = f["time"][:]
        chosen = stored_fields(f) if names is None else list(names)
        for index, when in enumerate(times):
            yield index, float(when), {name: f[name][index] for name in chosen}


def _series(f) -> dict:
    """Every series column an open run file holds, whole."""
    return {name: f[name][:] for name in SERIES if name in f}


def read_series(path: str | Path) -> dict:
    """The diagnostic time series of a run file, ``{column: array}`` (no snapshot fields)."""
    with reading_run_file(path) as f:
        return _series(f)
