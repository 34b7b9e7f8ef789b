"""Geometry of the staggered grid; no physics.

Cells (i, j), i = 0..nx-1 across and j = 0..nz-1 up, hold temperature and
viscosity at their centres (x_i + dx/2, z_j + dz/2).  The streamfunction lives
on the cell corners (nodes) (x_i, z_j), i = 0..nx, j = 0..nz.  Velocities live on
the faces: u on the vertical faces (x_i, z_j + dz/2), w on the horizontal faces
(x_i + dx/2, z_j).  Arrays are indexed [j, i] (z first), so that ``array[j]`` is
one horizontal row and figures need no transpose.

Lengths are in units of the layer depth.

Wall refinement (``wall_refinement = beta > 0``): the rows are no longer equally
high.  The corner heights are a tanh image of equally spaced s_j = j / nz,

    z_j = z(s_j),   z(s) = (1 + tanh(beta (2 s - 1)) / tanh(beta)) / 2,        (1)

so cells are thin at both walls and wide in the interior (height ratio middle /
wall about cosh^2(beta); beta -> 0 is the uniform grid).  Cell centres sit half
way between their corners.  A stretched grid has per-row spacings instead of one
``dz``: ``dz_cell[j]`` (height of cell row j, nz values) and ``dz_node[j]`` (the
control height of corner row j: the distance between the cell centres below and
above it, the wall itself at the two ends; nz + 1 values).  ``dz`` exists only on
a uniform grid, so that code that has not been generalised fails loudly.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

__all__ = ["Grid"]


@dataclass(frozen=True)
class Grid:
    """An nx x nz cell grid on 0 <= x <= aspect, 0 <= z <= 1, uniform unless refined
    towards the top and bottom walls (module docstring, equation 1).

    Parameters
    ----------
    nx, nz : int
        Number of cells across and through the depth (>= 4 each).
    aspect : float
        Width of the box in layer depths.
    periodic : bool
        Whether x = 0 and x = aspect are identified.
    wall_refinement : float
        beta >= 0 of the tanh map (1); 0 (default) is the uniform grid.
    """

    nx: int
    nz: int
    aspect: float = 1.0
    periodic: bool = False
    wall_refinement: float = 0.0

    def __post_init__(self):
        if not (self.wall_refinement >= 0.0 and np.isfinite(self.wall_refinement)):
            raise ValueError(f"wall_refinement = {self.wall_refinement!r}: expected a finite "
                             "number >= 0")

    @property
    def stretched(self) -> bool:
        """Whether the rows have unequal heights (wall_refinement > 0)."""
        return self.wall_refinement > 0.0

    @property
    def dx(self) -> float:
        return self.aspect / self.nx

    @property
    def dz(self) -> float:
        """The one row height of a uniform grid (a stretched grid has ``dz_cell``, ``dz_node``)."""
        if self.stretched:
            raise ValueError("a stretched grid has no single dz: use dz_cell or dz_node")
        return 1.0 / self.nz

    @cached_property
    def dz_cell(self) -> np.ndarray:
        """Height of each cell row, shape (nz,)."""
        if not self.stretched:
            return np.full(self.nz, 1.0 / self.nz)
        return np.diff(self.z_node)

    @cached_property
    def dz_node(self) -> np.ndarray:
        """Control height of each corner row, shape (nz + 1,): the distance between the
        cell centres below and above (from the wall to the first centre at the ends)."""
        h = self.dz_cell
        return 0.5 * (np.concatenate([[0.0], h]) + np.concatenate([h, [0.0]]))

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
        """Cell-centre z coordinates, shape (nz,): half way between the corners."""
        if self.stretched:
            return 0.5 * (self.z_node[1:] + self.z_node[:-1])
        return (np.arange(self.nz) + 0.5) * self.dz

    @cached_property
    def x_node(self) -> np.ndarray:
        """Corner x coordinates, shape (nx + 1,)."""
        return np.arange(self.nx + 1) * self.dx

    @cached_property
    def z_node(self) -> np.ndarray:
        """Corner z coordinates, shape (nz + 1,) (equation 1 on a stretched grid)."""
        if self.stretched:
            beta = self.wall_refinement
            s = np.arange(self.nz + 1) / self.nz
            z = 0.5 * (1.0 + np.tanh(beta * (2.0 * s - 1.0)) / np.tanh(beta))
            z[0], z[-1] = 0.0, 1.0
            return z
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

    @property
    def dz_step(self):
        """The cell height the Courant limit reads: dz, or the row heights ``dz_cell``."""
        return self.dz_cell if self.stretched else self.dz

    def integral(self, field: np.ndarray) -> float:
        """Integral of a cell field (nz, nx) over the box: sum of values times cell areas."""
        if self.stretched:
            return float(field.sum(axis=1) @ self.dz_cell * self.dx)
        return float(field.sum() * self.dx * self.dz)

    def row_to_node_weights(self) -> np.ndarray:
        """The vertical part of ``cell_to_node`` without wall values as a (nz + 1, nz)
        matrix: corner row j from the cell rows j - 1 and j (linear in z), the wall rows
        extrapolated from the two nearest."""
        h, d = self.dz_cell, self.dz_node
        m = np.zeros((self.nz + 1, self.nz))
        j = np.arange(1, self.nz)
        m[j, j - 1], m[j, j] = h[j] / (2.0 * d[j]), h[j - 1] / (2.0 * d[j])
        below, above = 0.5 * h[0] / d[1], 0.5 * h[-1] / d[-2]
        m[0, 0], m[0, 1] = 1.0 + below, -below
        m[-1, -1], m[-1, -2] = 1.0 + above, -above
        return m

    def cell_to_node(self, field: np.ndarray, bottom: np.ndarray | None = None,
                     top: np.ndarray | None = None) -> np.ndarray:
        """Average a cell field onto the corners, shape (nz + 1, nx + 1).

        Side corners mirror the cells (insulating walls) or wrap (periodic).  At the
        top and bottom rows the given boundary values (shape (nx + 1,) or scalar) are
        used; without them the nearest cells are extrapolated linearly.  On a stretched
        grid the rows are interpolated linearly in z (the nearer centre weighs more).
        """
        if self.periodic:
            ext = np.concatenate([field[:, -1:], field, field[:, :1]], axis=1)
        else:
            ext = np.concatenate([field[:, :1], field, field[:, -1:]], axis=1)
        across = 0.5 * (ext[:, 1:] + ext[:, :-1])           # (nz, nx + 1)
        out = np.empty(self.node_shape)
        if self.stretched:
            h, d = self.dz_cell, self.dz_node
            out[1:-1] = (h[1:, None] * across[:-1] + h[:-1, None] * across[1:]) / (2.0 * d[1:-1, None])
            below, above = 0.5 * h[0] / d[1], 0.5 * h[-1] / d[-2]
            out[0] = (across[0] + below * (across[0] - across[1])) if bottom is None else bottom
            out[-1] = (across[-1] + above * (across[-1] - across[-2])) if top is None else top
            return out
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
    return interpolate_points(x, z, field, grid.x_cell, grid.z_cell, grid.aspect)


def interpolate_points(x: np.ndarray, z: np.ndarray, field: np.ndarray, x_to: np.ndarray,
                       z_to: np.ndarray, aspect: float) -> np.ndarray:
    """``interpolate_cells`` onto the centres x_to (nx,), z_to (nz,) of a box of width
    ``aspect`` (any spacing), shape (nz, nx).

    Bilinear on the rectangle of source centres around each target point,
    f = (1 - s)(1 - t) f00 + s (1 - t) f01 + (1 - s) t f10 + s t f11 with s, t the
    fractions of the way in x and z; targets beyond the outermost centres are moved onto
    them first (what scipy's RegularGridInterpolator gives there after the same clip; numpy
    here, because importing scipy.interpolate costs ~0.2 s of every sequenced run).
    """
    xs = np.asarray(x, dtype=float) * (aspect / (x[-1] + 0.5 * (x[1] - x[0])))
    zs = np.asarray(z, dtype=float)
    iz, t = _bracket(zs, np.clip(np.asarray(z_to, dtype=float), zs[0], zs[-1]))
    ix, s = _bracket(xs, np.clip(np.asarray(x_to, dtype=float), xs[0], xs[-1]))
    f = np.asarray(field, dtype=float)
    below = f[iz][:, ix] * (1.0 - s) + f[iz][:, ix + 1] * s
    above = f[iz + 1][:, ix] * (1.0 - s) + f[iz + 1][:, ix + 1] * s
    return below * (1.0 - t)[:, None] + above * t[:, None]


def _bracket(centres: np.ndarray, points: np.ndarray):
    """For points within [centres[0], centres[-1]]: the index i of the interval
    [centres[i], centres[i + 1]] holding each, and the fraction of the way along it."""
    i = np.clip(np.searchsorted(centres, points, side="right") - 1, 0, len(centres) - 2)
    return i, (points - centres[i]) / (centres[i + 1] - centres[i])
