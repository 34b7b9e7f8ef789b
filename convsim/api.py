"""Python entry points for notebooks and scripts: ``load_config``, ``run`` and ``open_run``.

This is an edge module: it wires the config, the start file, the simulation and
the run-file writer together.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from convsim.config import Config, load_config
from convsim.errors import ConfigError
from convsim.model.grid import Grid, interpolate_cells
from convsim.run.build import build_model
from convsim.run.controller import ResumePoint, RunResult, Simulation
from convsim.run.layer import resolve
from convsim.files.runfile import RunFileObserver, RunFileWriter, read_run
from convsim.files.xdmf import write_xdmf
from convsim.threads import limit_threads
from convsim.views import open_run

__all__ = ["load_config", "run", "open_run", "start_temperature"]


def start_temperature(config: Config, grid: Grid) -> np.ndarray | None:
    """The initial temperature read from ``start.file`` (interpolated to ``grid``), or None."""
    if config.start.kind != "snapshot":
        return None
    try:
        source = read_run(config.start.file)
    except Exception as exc:
        raise ConfigError(f"start.file = {config.start.file!r}: {exc}") from None
    return interpolate_cells(source.x, source.z, source.fields["temperature"], grid)


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
        Run file to write (HDF5).  None keeps everything in memory.
    overwrite : bool
        Replace an existing output file.
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
    resume = None
    if restart is not None:
        saved = read_run(restart, restart=True)
        if not saved.restart:
            raise ConfigError(f"--restart {str(restart)!r}: the file holds no restart state")
        resume = ResumePoint(saved.restart)
        observers.insert(0, RunFileObserver(RunFileWriter(restart, append=True)))
        output = restart
    elif output is not None:
        observers.insert(0, RunFileObserver(RunFileWriter(output, overwrite=overwrite)))
    model = build_model(config, grid)
    sim = Simulation(config, model, start_temperature(config, model.grid), observers)
    result = sim.run(resume)
    result.output = None if output is None else str(output)
    if scales is not None:
        from convsim.units import physical_quantities
        result.scales = scales
        result.physical = physical_quantities(result.summary(), scales, config.boundaries)
    if output is not None:
        write_xdmf(output, overwrite=True)      # the sidecar belongs to its run file
    return result
