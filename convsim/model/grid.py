"""Geometry of the staggered grid; no physics.

Cells (i, j), i = 0..nx-1 across and j = 0..nz-1 up, hold temperature and
viscosity at their centres (x_i + dx/2, z_j + dz/2).  The streamfunction lives
on the cell corners (nodes) (x_i, z_j), i = 0..nx, j = 0..nz.  Velocities live on
the faces: u on the vertical faces (x_i, z_j + dz/2), w on the horizontal faces
(x_i + dx/2, z_j).  Arrays are indexed [j, i] (z first), so that ``array[j]`` is
one horizontal row and figures need no transpose.

Lengths are in units of the layer depth.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

__all__ = ["Grid"]


@dataclass(frozen=True)
class Grid:
    """A uniform nx x nz cell grid on 0 <= x <= aspect, 0 <= z <= 1.

    Parameters
    ----------
    nx, nz : int
        Number of cells across and through the depth (>= 4 each).
    aspect : float
        Width of the box in layer depths.
    periodic : bool
        Whether x = 0 and x = aspect are identified.
    """

    nx: int
    nz: int
    aspect: float = 1.0
    periodic: bool = False

    @property
    def dx(self) -> float:
        return self.aspect / self.nx

    @property
    def dz(self) -> float:
        return 1.0 / self.nz

    @property
    def cell_shape(self) -> tuple[int, int]:
        """Shape (nz, nx) of a cell-centred field."""
        return (self.nz, self.nx)

    @property
    def node_shape(self) -> tuple[int, int]:
        """Shape (nz + 1, nx + 1) of a corner field."""
        return (self.nz + 1, self.nx + 1)

    @cached_property
    def x_cell(self) -> np.ndarray:
        """Cell-centre x coordinates, shape (nx,)."""
        return (np.arange(self.nx) + 0.5) * self.dx

    @cached_property
    def z_cell(self) -> np.ndarray:
        """Cell-centre z coordinates, shape (nz,)."""
        return (np.arange(self.nz) + 0.5) * self.dz

    @cached_property
    def x_node(self) -> np.ndarray:
        """Corner x coordinates, shape (nx + 1,)."""
        return np.arange(self.nx + 1) * self.dx

    @cached_property
    def z_node(self) -> np.ndarray:
        """Corner z coordinates, shape (nz + 1,)."""
        return np.arange(self.nz + 1) * self.dz

    def cell_mesh(self) -> tuple[np.ndarray, np.ndarray]:
        """(X, Z) of the cell centres, each of shape (nz, nx)."""
        return np.meshgrid(self.x_cell, self.z_cell)

    def node_mesh(self) -> tuple[np.ndarray, np.ndarray]:
        """(X, Z) of the corners, each of shape (nz + 1, nx + 1)."""
        return np.meshgrid(self.x_node, self.z_node)

    @property
    def area(self) -> float:
        return self.aspect * 1.0

    def cell_to_node(self, field: np.ndarray, bottom: np.ndarray | None = None,
                     top: np.ndarray | None = None) -> np.ndarray:
        """Average a cell field onto the corners, shape (nz + 1, nx + 1).

        Side corners mirror the cells (insulating walls) or wrap (periodic).  At the
        top and bottom rows the given boundary values (shape (nx + 1,) or scalar) are
        used; without them the nearest cells are extrapolated linearly.
        """
        if self.periodic:
            ext = np.concatenate([field[:, -1:], field, field[:, :1]], axis=1)
        else:
            ext = np.concatenate([field[:, :1], field, field[:, -1:]], axis=1)
        across = 0.5 * (ext[:, 1:] + ext[:, :-1])           # (nz, nx + 1)
        out = np.empty(self.node_shape)
        out[1:-1] = 0.5 * (across[1:] + across[:-1])
        out[0] = (1.5 * across[0] - 0.5 * across[1]) if bottom is None else bottom
        out[-1] = (1.5 * across[-1] - 0.5 * across[-2]) if top is None else top
        return out


def interpolate_cells(x: np.ndarray, z: np.ndarray, field: np.ndarray, grid: Grid) -> np.ndarray:
    """Interpolate a cell field given on centres (x, z) onto the cell centres of ``grid``.

    Bilinear inside, nearest value beyond the outermost centres (within half a
    cell of the walls).  The source box may have another aspect ratio; it is
    stretched to this one.
    """
    from scipy.interpolate import RegularGridInterpolator

    xs = np.asarray(x) * (grid.aspect / (x[-1] + 0.5 * (x[1] - x[0])))
    zs = np.asarray(z)
    interp = RegularGridInterpolator((zs, xs), field, bounds_error=False, fill_value=None)
    Z, X = np.meshgrid(np.clip(grid.z_cell, zs[0], zs[-1]), np.clip(grid.x_cell, xs[0], xs[-1]),
                       indexing="ij")
    return interp(np.stack([Z.ravel(), X.ravel()], axis=1)).reshape(grid.cell_shape)
