"""Python entry points for notebooks and scripts: ``load_config``, ``run`` and ``open_run``.

This is an edge module: it wires the config, the start file, the simulation and
the run-file writer together.
"""

from __future__ import annotations

import logging
from pathlib import Path

import numpy as np

from convsim.config import Config, load_config
from convsim.errors import ConfigError
from convsim.model.grid import Grid, interpolate_cells
from convsim.run.build import build_model
from convsim.run.controller import ResumePoint, RunResult, Simulation
from convsim.run.layer import resolve
from convsim.files.runfile import RunFileObserver, RunFileWriter, check_writable
from convsim.files.reader import read_run, read_series
from convsim.files.xdmf import sidecar_path, write_xdmf
from convsim.allocator import release_freed_memory
from convsim.threads import limit_threads

__all__ = ["load_config", "run", "open_run", "start_temperature", "check_restart_config"]

log = logging.getLogger(__name__)


def open_run(path: str | Path, *, physical: bool = True):
    """A run file as an ``xarray.Dataset`` (``convsim.views.open_run``; xarray and the
    unit library are imported on first use, not at start-up)."""
    from convsim.views import open_run as open_view
    return open_view(path, physical=physical)


def start_temperature(config: Config, grid: Grid) -> np.ndarray | None:
    """The initial temperature read from ``start.file`` (interpolated to ``grid``), or None."""
    if config.start.kind != "snapshot":
        return None
    try:
        source = read_run(config.start.file)
    except Exception as exc:
        raise ConfigError(f"start.file = {config.start.file!r}: {exc}") from None
    return interpolate_cells(source.x, source.z, source.fields["temperature"], grid)


def check_restart_config(path: str | Path, config: Config) -> None:
    """A restart may change only [stop] and [output]: refuse a file whose stored config is
    missing or unreadable, or differs elsewhere (it would not continue the same run)."""
    from convsim.config import to_dict
    from convsim.files.stored_config import stored_config
    saved = stored_config(path, "the restart cannot be checked against the run; start a new run "
                                "instead")
    new = to_dict(config)
    for table in saved:
        if table in ("stop", "output", "title"):
            continue
        if not isinstance(saved[table], dict) or saved[table] != new.get(table):
            keys = ([k for k in saved[table] if saved[table][k] != new.get(table, {}).get(k)]
                    if isinstance(saved[table], dict) else [table])
            raise ConfigError(f"--restart {str(path)!r}: [{table}] differs from the run's own "
                              f"config ({', '.join(keys)}); only [stop] and [output] may change")


def _open_output(config: Config, output, restart, overwrite: bool):
    """The run-file writer (None without output), the restart point (None for a new run) and
    the output path: a restart appends to its own file after checking its stored config."""
    if restart is not None:
        check_restart_config(restart, config)
        saved = read_run(restart, restart=True)
        if not saved.restart:
            raise ConfigError(f"--restart {str(restart)!r}: the file holds no restart state")
        return RunFileWriter(restart, append=True), ResumePoint(saved.restart), restart
    if output is None:
        return None, None, None
    writer = RunFileWriter(output, overwrite=overwrite)
    check_writable(sidecar_path(output), overwrite)
    return writer, None, output


def _check_resources(config: Config, grid: Grid | None, output: Path | None) -> None:
    """Refuse a grid the machine's memory cannot hold; warn when the disk may fill up."""
    from convsim.files.commit import format_bytes, free_bytes
    from convsim.files.runfile import RECORD_BYTES, snapshot_bytes
    from convsim.run.resources import check_memory, run_file_estimate, snapshot_count
    nx, nz = (config.domain.nx, config.domain.nz) if grid is None else (grid.nx, grid.nz)
    warning = check_memory(nx, nz, config.viscosity.law == "constant")
    if warning:
        log.warning("%s", warning)
    if output is None:
        return
    size = run_file_estimate(config, snapshot_bytes(nx, nz), RECORD_BYTES)
    try:
        free = free_bytes(output.parent)
    except OSError:
        return
    if 2 * size > free:
        log.warning("the run file may grow to %s (up to %d snapshots of %s) and each snapshot "
                    "briefly needs its size again; the disk has %s free", format_bytes(size),
                    snapshot_count(config), format_bytes(snapshot_bytes(nx, nz)),
                    format_bytes(free))


def run(config: Config | str | Path, output: str | Path | None = None, *,
        overwrite: bool = False, restart: str | Path | None = None, observers=(),
        grid: Grid | None = None, progress: bool = False, threads: int | None = None
        ) -> RunResult:
    """Run a config to its stop rule.

    Parameters
    ----------
    config : Config or path
        A config, or the path of a TOML config file (read with ``load_config``).
    output : path, optional
        Run file to write (HDF5), with its XDMF sidecar.  The series rows are streamed to it
        (memory does not grow with the steps) and the result's ``series`` is read back from
        it (after a restart: every row of the file).  None keeps everything in memory.
    overwrite : bool
        Replace an existing output file and sidecar.
    restart : path, optional
        Continue the run recorded in this file from its last snapshot, appending to it.
    observers : extra ``simulation.Observer`` objects (a progress bar, say).
    grid : Grid, optional
        Override the config's grid (convergence studies).
    progress : bool
        Show a progress bar (a widget in Jupyter, a line on a terminal; see
        ``convsim.run.progress``).
    threads : int, optional
        Threads for the numerics (BLAS, numba); default $CONVSIM_THREADS or 1
        (see ``convsim.threads``).

    Returns
    -------
    RunResult
        With ``physical`` (answers in mW m^-2, cm yr^-1, K, Myr) and ``scales`` when the
        config has a [body] table; ``result.to_xarray()`` gives an ``xarray.Dataset``.
    """
    limit_threads(threads)
    if not isinstance(config, Config):
        config = load_config(config)
    scales = None
    if config.body is not None:      # check the physical properties (units, dimensions) up front
        from convsim.units import scales_from_body
        scales = scales_from_body(config.body)
    config = resolve(config)             # Ra and an Arrhenius law from [body], or a refusal
    observers = list(observers)
    if progress:
        from convsim.run.progress import ProgressDisplay
        observers.append(ProgressDisplay(config, always=True))
    writer, resume, output = _open_output(config, output, restart, overwrite)
    _check_resources(config, grid, None if output is None else Path(output))
    if output is not None:
        observers.insert(0, RunFileObserver(writer))
    model = build_model(config, grid)
    release_freed_memory()           # the operator build's temporaries, before the factor
    sim = Simulation(config, model, start_temperature(config, model.grid), observers,
                     keep_series=output is None)
    result = sim.run(resume)
    result.output = None if output is None else str(output)
    if output is not None:       # the rows were streamed to the file, not kept: read them back
        result.series = read_series(output)
    if scales is not None:
        from convsim.physical import physical_quantities
        result.scales = scales
        result.physical = physical_quantities(result.summary(), scales, config.boundaries)
    if output is not None:
        write_xdmf(output, overwrite=True)      # the sidecar belongs to its run file (checked)
    return result
