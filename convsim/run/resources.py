"""What a run will need before it starts: memory and disk space, against what the machine has.

Plain arithmetic over the config; no numerics run here.  The memory figure is
an upper estimate fitted to peak resident sizes measured on this project's
runs (the numbers beside the constants); the sparse Stokes factor of a
variable-viscosity run grows a little faster than the number of cells.
"""

from __future__ import annotations

import math
import os

from convsim.errors import ConfigError

__all__ = ["memory_estimate", "available_memory", "check_memory", "snapshot_count",
           "run_file_estimate", "BASE_MEMORY"]

#: Resident size of the interpreter with numpy, scipy, numba and h5py loaded.
BASE_MEMORY = 250e6
#: Bytes per cell: fields, spectra, sparse operators and work arrays.  Measured peak resident
#: size (ru_maxrss, 3 steps of case 1a): 386 MB at 256^2, 982 MB at 512^2, i.e. 3.0 kB per
#: cell over a base of ~190 MB; rounded up.
BYTES_PER_CELL = 3.2e3
#: Extra bytes per cell and per log2(cells) with a sparse factor (variable viscosity: the fill
#: of a nested-dissection Cholesky factor grows as n log n; common practice).  Case 2a at
#: 256^2 measured 466 MB (80 MB above 1a); 50 B per cell per log2 covers it.
BYTES_PER_CELL_FACTOR = 50.0


def memory_estimate(nx: int, nz: int, constant_viscosity: bool) -> float:
    """Upper estimate of a run's peak memory, bytes."""
    cells = float(nx) * float(nz)
    per_cell = BYTES_PER_CELL
    if not constant_viscosity:
        per_cell += BYTES_PER_CELL_FACTOR * math.log2(max(cells, 2.0))
    return BASE_MEMORY + per_cell * cells


def available_memory() -> float | None:
    """Memory this process can still use, bytes (MemAvailable, else physical memory)."""
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return float(line.split()[1]) * 1024.0
    except OSError:
        pass
    try:
        return float(os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE"))
    except (ValueError, OSError, AttributeError):
        return None


def _gb(n: float) -> str:
    return f"{n / 1e9:.3g} GB"


def check_memory(nx: int, nz: int, constant_viscosity: bool, available: float | None = None):
    """Refuse a grid whose estimated peak memory exceeds what the machine has.

    Returns a warning text when the estimate exceeds half of it (else None); raises
    ``ConfigError`` naming the grid, the need and the memory available when it exceeds all.
    """
    need = memory_estimate(nx, nz, constant_viscosity)
    have = available_memory() if available is None else available
    if have is None:
        return None
    if need > have:
        raise ConfigError(f"domain.nx x domain.nz = {nx} x {nz}: needs about {_gb(need)} of "
                          f"memory, the machine has {_gb(have)} available; choose a smaller grid")
    if need > 0.5 * have:
        return (f"domain.nx x domain.nz = {nx} x {nz} needs about {_gb(need)} of memory, more than "
                f"half of the {_gb(have)} available")
    return None


def snapshot_count(config) -> int:
    """Most snapshots a run can write (first and last included), from [stop] and [output]."""
    stop, out = config.stop, config.output
    count = math.inf
    if out.snapshot_steps:
        count = stop.max_steps / out.snapshot_steps
    if out.snapshot_interval > 0 and stop.end_time > 0:
        count = min(count, stop.end_time / out.snapshot_interval) if out.snapshot_steps \
            else stop.end_time / out.snapshot_interval
    if not out.snapshot_steps and out.snapshot_interval == 0:
        count = 0
    if math.isinf(count):              # by time, no end time: bounded by the step limit
        count = stop.max_steps
    return int(min(count, stop.max_steps)) + 2


def run_file_estimate(config, snapshot_bytes: int, record_bytes: int) -> float:
    """Largest size a run file can reach, bytes: every snapshot and every series record."""
    records = config.stop.max_steps / config.output.series_every
    return snapshot_count(config) * snapshot_bytes + records * record_bytes
