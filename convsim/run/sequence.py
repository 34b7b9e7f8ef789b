"""Grid sequencing: start a fine grid from the steady state of the same config on a coarse one.

A steady state on n cells through the depth is close to the steady state on 2n cells (the
scheme is second order), so Newton's method on the fine grid converges from it in a few
iterations, while the transient that leads from a guess to the steady state is run where
steps are cheap (fewer cells, and a time step twice as long).  Measured on case 2 of the
viscoplastic benchmark (Tosi et al. 2015), 64 x 64 from 32 x 32: 9 Newton iterations, 11 s.

Where several steady states exist (case 2 has a stable one and an unstable one), the fine
grid's Newton iteration lands on the one the coarse run found: the coarse grid must be fine
enough to have the same one (16 cells were not, for case 2).  ``start.coarse_grid`` is a
config key, so the choice is written in the config.

A time-dependent flow has no steady state to hand on.  A run that asks for time means
(``stop.mean_precision`` > 0) keeps that stop rule on the coarse grid, so the coarse run
ends either steady or statistically steady with its own mean known to the same precision
(``run.averages``: spin-up over, no drift, the interval reliable, the heat balance held);
its last state, a state of the statistically steady flow, is interpolated to the fine
grid.  The fine run then spins up only from the coarse flow to its own (boundary layers
sharpening, the interior temperature moving by the difference between the grids), which
its spin-up detector cuts off, instead of from a conductive start: measured on a
stagnant lid, DEVELOPERS.md "Time-dependent stagnant lid".  Each coarse level sequences
from the next in the same way, halving the grid, down to ``start.coarse_grid``.
"""

from __future__ import annotations

import logging
import math

import numpy as np

from convsim.config import Config
from convsim.model.grid import Grid, interpolate_cells

__all__ = ["coarse_config", "coarse_temperature", "usable_start"]

log = logging.getLogger(__name__)


def coarse_config(config: Config, grid: Grid) -> Config | None:
    """The config of the coarse run for ``grid``, or None when sequencing does not apply."""
    n = config.start.coarse_grid
    if n == 0 or config.start.kind == "snapshot" or config.start.continuation or grid.nz <= n:
        return None
    n = max(n, (grid.nz + 1) // 2)          # halve at most: 128 from 64, which sequences from 32
    nx = max(4, round(grid.nx * n / grid.nz))
    # a steady start needs the steady rule; a statistical run keeps its own (stop.steady =
    # false also keeps its looser automatic flow-solve tolerance, run.build.stokes_tolerance)
    steady = config.stop.steady or config.stop.mean_precision == 0.0
    return config.replace(domain__nx=nx, domain__nz=n, stop__steady=steady)


#: Below this rms velocity (kappa / d) a coarse state is the conductive one (no flow).
NO_FLOW_VRMS = 1e-6


def usable_start(status: str, settled: str, vrms: float = math.inf) -> bool:
    """Whether a coarse run that ended with ``status``, ``settled`` word and rms velocity
    ``vrms`` hands on its state: steady, or statistically steady at the mean-precision stop
    (module docstring), and flowing.  The conductive state is a steady state too, which a
    Newton finish started early (``stop.newton_threshold`` = 1e3) reaches from a perturbation
    that has not grown yet (measured: case 1a at 32 x 32, Newton at step 50: Nu 1.000000000,
    vrms < 1e-7, where 64 x 64 from the same start reaches the one-cell flow); the fine grid
    then keeps its own start, which may grow into convection."""
    if not vrms > NO_FLOW_VRMS:
        return False
    return status == "steady" or (status == "mean-precision"
                                  and settled == "statistically-steady")


def coarse_temperature(config: Config, grid: Grid) -> np.ndarray | None:
    """The final temperature of the coarse run, steady or statistically steady, interpolated
    to ``grid`` (None: not used, or the coarse run ended otherwise, then the config's own
    start is used)."""
    coarse = coarse_config(config, grid)
    if coarse is None:
        return None
    from convsim.run.controller import Simulation
    result = Simulation.from_config(coarse).run()
    if not usable_start(result.status, result.settled, result.vrms):
        log.warning("grid sequencing: the %d x %d run ended %s (%s, vrms %.3g) after %d steps, "
                    "t = %.4g; starting from the config's own start instead", coarse.domain.nx,
                    coarse.domain.nz, result.status, result.settled, result.vrms, result.steps,
                    result.time)
        return None
    log.info("grid sequencing: %s on %d x %d (Nu %.6g) after %d steps, t = %.4g; "
             "interpolated to %d x %d", result.settled, coarse.domain.nx, coarse.domain.nz,
             result.nusselt_top, result.steps, result.time, grid.nx, grid.nz)
    source = Grid(coarse.domain.nx, coarse.domain.nz, coarse.domain.aspect,
                  periodic=grid.periodic, wall_refinement=coarse.domain.wall_refinement)
    return interpolate_cells(source.x_cell, source.z_cell, result.temperature, grid)
