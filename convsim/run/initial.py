"""The initial temperature of a run: conductive (plus a perturbation) or a one-cell guess.

A start from another run's snapshot is read at the edge (``convsim.api``) and
handed to the controller as an array.
"""

from __future__ import annotations

import numpy as np

from convsim.model.energy import ThermalBoundaries, conductive_profile
from convsim.model.grid import Grid

__all__ = ["initial_temperature", "one_cell_guess"]


def one_cell_guess(grid: Grid, T: np.ndarray, rayleigh: float) -> np.ndarray:
    """An isothermal core at the mean wall temperature with error-function boundary layers.

    The layer thickness is the boundary-layer-theory delta = (Ra / 1000)^(-1/3) / 2
    (common practice), plus 0.05 cos(pi x / aspect) sin(pi z) to pick one cell.
    ``T`` is the conductive start, whose top and bottom rows give the wall temperatures.
    """
    from scipy.special import erf
    X, Z = grid.cell_mesh()
    tb, tt = T[0].mean(), T[-1].mean()
    core = 0.5 * (tb + tt)
    delta = 0.5 * max(rayleigh / 1000.0, 1.0) ** (-1.0 / 3.0)
    T = (core + (tb - core) * (1.0 - erf(Z / delta)) + (tt - core) * (1.0 - erf((1.0 - Z) / delta)))
    return T + 0.05 * np.cos(np.pi * X / grid.aspect) * np.sin(np.pi * Z)


def initial_temperature(grid: Grid, thermal: ThermalBoundaries, heating: float, start,
                        rayleigh: float) -> np.ndarray:
    """Cell temperatures of a conductive or one-cell start, shape (nz, nx).

    ``start`` is the config's [start] table (read for kind, perturbation,
    amplitude, mode, seed).  The conductive profile T(z) = T0 + s z - H z^2 / 2
    is averaged over each cell exactly (T is quadratic in z: the cell mean is the
    centre value - H dz^2 / 24;
    the mean of z^2 over a cell is z_c^2 + dz^2 / 12).  The perturbation is A cos(k x) sin(pi z) with
    k = n pi / aspect (2 n pi / aspect with periodic sides), or seeded uniform
    noise in [-A, A] times sin(pi z).
    """
    X, Z = grid.cell_mesh()
    height = grid.dz_cell[:, None] if grid.stretched else grid.dz
    T = conductive_profile(Z, thermal, heating) - heating * height ** 2 / 24.0
    if start.kind == "one-cell":
        return one_cell_guess(grid, T, rayleigh)
    k = (2.0 if grid.periodic else 1.0) * start.mode * np.pi / grid.aspect
    if start.perturbation == "mode":
        T = T + start.amplitude * np.cos(k * X) * np.sin(np.pi * Z)
    elif start.perturbation == "noise":
        rng = np.random.default_rng(start.seed)
        T = T + start.amplitude * rng.uniform(-1.0, 1.0, grid.cell_shape) * np.sin(np.pi * Z)
    return T
