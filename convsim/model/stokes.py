"""Stokes flow at infinite Prandtl number in streamfunction form.

With u = d(psi)/dz and w = -d(psi)/dx (so the velocity is divergence-free by
construction), taking the curl of the Stokes equations

    -grad p + div(eta (grad u + grad u^T)) + Ra T z_hat = 0

removes the pressure and leaves one fourth-order equation for psi,

    (d_zz - d_xx)[eta (psi_zz - psi_xx)] + 4 d_xz[eta psi_xz] = Ra dT/dx,      (1)

which for constant viscosity is the biharmonic equation lap^2 psi = Ra dT/dx.

Discretisation (see ``convsim.model.grid``): psi on the cell corners (nodes), eta at
both the nodes and the cell centres.  With the node operator
L psi = (psi_zz - psi_xx) (three-point stencils) and the cell operator
B psi = psi_xz (the four corners of a cell), equation (1) becomes

    A psi = (L^T diag(w eta_node) L + 4 B^T diag(eta_cell) B) psi = Ra (dT/dx)_node

which is the quadrature of the viscous dissipation integral: A is symmetric
positive definite.  Walls are impermeable (psi = 0).  Free-slip walls have zero
shear stress, eta (psi_zz - psi_xx) = 0, so only interior nodes carry a row of L.
No-slip walls have psi_z = 0; the mirror ghost psi(-dz) = psi(dz) gives
psi_zz = 2 psi_1 / dz^2 on the wall, and those wall rows enter with half weight
w = 1/2 (which keeps A symmetric).  Periodic sides wrap the x index.

On a grid refined towards the walls (``Grid.stretched``; cell heights h_j =
``dz_cell[j]``, corner control heights d_j = ``dz_node[j]``) L uses the three-point
stencil of unequal spacings,

    psi_zz(node j) = [(psi_{j+1} - psi_j) / h_j - (psi_j - psi_{j-1}) / h_{j-1}] / d_j,

B divides by dx h_j, and the quadrature weights are the control areas: the L row of
node row j weighs d_j (no-slip wall rows h_0 / 2, psi_zz = 2 psi_1 / h_0^2 there), the
B row of cell row j weighs h_j, both in units of the mean row height 1 / nz (so a
uniform grid has the weights above).  A stays symmetric positive definite, and
W_node^-1 A is the second-order operator of (1) (L^T W L = W D_zz D_zz in z).  The
right-hand side is the control-area mean of Ra dT/dx times the node weight.

For constant viscosity and free-slip top and bottom, A equals the square of the
five-point Laplacian exactly, so a sine/Fourier transform solves it with no
factorisation (``TransformSolver``; uniform grids only).  Otherwise the matrix is factorised (see
``convsim.model.linsolve``) and its values are refilled from eta through a fixed map
(``StokesOperator.matrix_from_weights``), keeping the sparsity pattern.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft
import scipy.sparse as sp

from convsim.model.choices import FLOW_CONDITIONS
from convsim.model.grid import Grid

__all__ = ["StokesOperator", "TransformSolver", "buoyancy_rhs", "face_velocities",
           "node_velocities"]


@dataclass(frozen=True)
class _Rows:
    """Rows of a difference operator as padded (row, column, value) arrays."""

    cols: np.ndarray   # (nrows, width) unknown index or -1, int32
    vals: np.ndarray   # (nrows, width)

    def __post_init__(self):
        object.__setattr__(self, "cols", np.asarray(self.cols, dtype=np.int32))

    def matrix(self, n_unknowns: int) -> sp.csr_matrix:
        rows = np.repeat(np.arange(self.cols.shape[0]), self.cols.shape[1])
        c = self.cols.ravel()
        keep = c >= 0
        return sp.csr_matrix((self.vals.ravel()[keep], (rows[keep], c[keep])),
                             shape=(self.cols.shape[0], n_unknowns))


_CHUNK_ROWS = 16384      # rows of L or B placed into A's pattern at a time


def _row_pairs(cols, vals, first_row, n, pattern):
    """(position in A's pattern, weight row, value) of every pair of entries in some rows.

    Row k with entries (a_i, v_i) contributes v_i v_j to A[a_i, a_j], scaled later by the
    weight of row k (the value map's column ``first_row + k``).
    """
    nr, width = cols.shape
    a = np.repeat(cols, width, axis=1)
    b = np.tile(cols, (1, width))
    v = np.repeat(vals, width, axis=1) * np.tile(vals, (1, width))
    r = np.repeat(np.arange(first_row, first_row + nr, dtype=np.int64), width * width)
    keep = ((a >= 0) & (b >= 0) & (v != 0)).ravel()
    key = a.ravel()[keep].astype(np.int64) * n + b.ravel()[keep]
    return np.searchsorted(pattern, key), r[keep], v.ravel()[keep]


class StokesOperator:
    """Assembly of the streamfunction matrix A(eta) on a grid, for given boundaries.

    Parameters
    ----------
    grid : Grid
    top, bottom : {"free-slip", "no-slip"}
        Mechanical condition on z = 1 and z = 0.

    Attributes
    ----------
    n_unknowns : int
        Number of free streamfunction nodes.
    node_index : ndarray of int, shape (nz + 1, nx + 1)
        Unknown number of each node, -1 where psi = 0 is imposed.
    """

    def __init__(self, grid: Grid, top: str = "free-slip", bottom: str = "free-slip"):
        for name, value in (("top", top), ("bottom", bottom)):
            if value not in FLOW_CONDITIONS:
                raise ValueError(f"{name} = {value!r}: expected one of {FLOW_CONDITIONS}")
        self.grid, self.top, self.bottom = grid, top, bottom
        nx, nz = grid.nx, grid.nz
        ncols = nx if grid.periodic else nx - 1
        self._i0 = 0 if grid.periodic else 1
        index = -np.ones(grid.node_shape, dtype=np.int64)
        index[1:nz, self._i0:self._i0 + ncols] = np.arange((nz - 1) * ncols).reshape(nz - 1, ncols)
        if grid.periodic:
            index[:, nx] = index[:, 0]
        self.node_index = index
        self.n_unknowns = (nz - 1) * ncols
        self._build_rows()
        self._build_value_map()

    # -- assembly ---------------------------------------------------------------------------
    def _node(self, j, i):
        """Unknown index of node (j, i) with periodic wrap; -1 on a wall."""
        g = self.grid
        if g.periodic:
            i = np.mod(i, g.nx)
        ok = (i >= 0) & (i <= g.nx) & (j >= 0) & (j <= g.nz)
        out = -np.ones(np.broadcast(j, i).shape, dtype=np.int64)
        jj, ii = np.broadcast_arrays(j, i)
        out[ok] = self.node_index[jj[ok], ii[ok]]
        return out

    def _build_rows(self):
        g = self.grid
        if g.stretched:
            self._build_stretched_rows()
            return
        dx2, dz2 = g.dx ** 2, g.dz ** 2
        # rows of L: interior nodes, then no-slip wall nodes
        jj, ii = np.nonzero(self.node_index >= 0)
        if g.periodic:
            keep = ii < g.nx
            jj, ii = jj[keep], ii[keep]
        order = np.argsort(self.node_index[jj, ii])
        jj, ii = jj[order], ii[order]
        c = self._node
        cols = np.stack([c(jj, ii), c(jj - 1, ii), c(jj + 1, ii), c(jj, ii - 1), c(jj, ii + 1)], 1)
        vals = np.tile([-2.0 / dz2 + 2.0 / dx2, 1.0 / dz2, 1.0 / dz2, -1.0 / dx2, -1.0 / dx2],
                       (len(jj), 1))
        weights = [np.ones(len(jj))]
        row_j, row_i = [jj], [ii]
        wall_i = np.arange(g.nx) if g.periodic else np.arange(1, g.nx)
        for wall, j_wall, j_in in (("bottom", 0, 1), ("top", g.nz, g.nz - 1)):
            if getattr(self, wall) != "no-slip":
                continue
            wc = np.full((len(wall_i), 5), -1, dtype=np.int64)
            wc[:, 0] = c(np.full_like(wall_i, j_in), wall_i)
            wv = np.zeros((len(wall_i), 5))
            wv[:, 0] = 2.0 / dz2
            cols = np.vstack([cols, wc])
            vals = np.vstack([vals, wv])
            weights.append(np.full(len(wall_i), 0.5))
            row_j.append(np.full_like(wall_i, j_wall))
            row_i.append(wall_i)
        vals = np.where(cols >= 0, vals, 0.0)
        self._L = _Rows(cols, vals)
        self._L_weight = np.concatenate(weights)
        self._L_node = (np.concatenate(row_j), np.concatenate(row_i))
        # rows of B: every cell, psi_xz from its four corners
        cj, ci = np.meshgrid(np.arange(g.nz), np.arange(g.nx), indexing="ij")
        cj, ci = cj.ravel(), ci.ravel()
        bcols = np.stack([c(cj, ci), c(cj, ci + 1), c(cj + 1, ci), c(cj + 1, ci + 1)], 1)
        s = 1.0 / (g.dx * g.dz)
        bvals = np.where(bcols >= 0, np.array([s, -s, -s, s]), 0.0)
        self._B = _Rows(bcols, bvals)
        self._B_weight = None

    def _row_nodes(self):
        """(j, i) of the interior unknown nodes in unknown order (one per periodic column)."""
        g = self.grid
        jj, ii = np.nonzero(self.node_index >= 0)
        if g.periodic:
            keep = ii < g.nx
            jj, ii = jj[keep], ii[keep]
        order = np.argsort(self.node_index[jj, ii])
        return jj[order], ii[order]

    def _build_stretched_rows(self):
        """L and B rows and their control-area weights on a stretched grid (module doc)."""
        g = self.grid
        h, d, dx2 = g.dz_cell, g.dz_node, g.dx ** 2
        jj, ii = self._row_nodes()
        c = self._node
        cols = np.stack([c(jj, ii), c(jj - 1, ii), c(jj + 1, ii), c(jj, ii - 1), c(jj, ii + 1)], 1)
        below, above = 1.0 / (d[jj] * h[jj - 1]), 1.0 / (d[jj] * h[jj])
        vals = np.stack([-below - above + 2.0 / dx2, below, above,
                         np.full(len(jj), -1.0 / dx2), np.full(len(jj), -1.0 / dx2)], 1)
        weights = [d[jj] * g.nz]
        row_j, row_i = [jj], [ii]
        wall_i = np.arange(g.nx) if g.periodic else np.arange(1, g.nx)
        for wall, j_wall, j_in, h_wall in (("bottom", 0, 1, h[0]), ("top", g.nz, g.nz - 1, h[-1])):
            if getattr(self, wall) != "no-slip":
                continue
            wc = np.full((len(wall_i), 5), -1, dtype=np.int64)
            wc[:, 0] = c(np.full_like(wall_i, j_in), wall_i)
            wv = np.zeros((len(wall_i), 5))
            wv[:, 0] = 2.0 / h_wall ** 2
            cols, vals = np.vstack([cols, wc]), np.vstack([vals, wv])
            weights.append(np.full(len(wall_i), 0.5 * h_wall * g.nz))
            row_j.append(np.full_like(wall_i, j_wall))
            row_i.append(wall_i)
        self._L = _Rows(cols, np.where(cols >= 0, vals, 0.0))
        self._L_weight = np.concatenate(weights)
        self._L_node = (np.concatenate(row_j), np.concatenate(row_i))
        cj, ci = np.meshgrid(np.arange(g.nz), np.arange(g.nx), indexing="ij")
        cj, ci = cj.ravel(), ci.ravel()
        bcols = np.stack([c(cj, ci), c(cj, ci + 1), c(cj + 1, ci), c(cj + 1, ci + 1)], 1)
        s = (1.0 / (g.dx * h[cj]))[:, None] * np.array([1.0, -1.0, -1.0, 1.0])
        self._B = _Rows(bcols, np.where(bcols >= 0, s, 0.0))
        self._B_weight = h[cj] * g.nz

    def _build_value_map(self):
        """A sparse map M with A.data = M @ [w eta_L ; 4 eta_cell], and A's fixed pattern.

        A = sum over rows k of L and B of weight_k * (row_k^T row_k): each pair of
        entries (a, va), (b, vb) of a row adds va vb weight_k to A[a, b].  The pattern
        of A comes from the sparse product of the row patterns; the pairs are then
        placed into it in chunks of rows, so the temporaries stay small (at 512 x 512 the
        one-shot version peaked near 1 GiB while the result needs about 100 MiB).
        """
        n = self.n_unknowns
        pattern = self._pattern()
        parts = []
        offset = 0
        for rows in (self._L, self._B):
            for start in range(0, rows.cols.shape[0], _CHUNK_ROWS):
                cols = rows.cols[start:start + _CHUNK_ROWS]
                vals = rows.vals[start:start + _CHUNK_ROWS]
                parts.append(_row_pairs(cols, vals, offset + start, n, pattern))
            offset += rows.cols.shape[0]
        self._n_weights = offset
        position = np.concatenate([p[0] for p in parts])
        weight_row = np.concatenate([p[1] for p in parts])
        value = np.concatenate([p[2] for p in parts])
        del parts
        self.value_map = sp.csr_matrix((value, (position, weight_row)),
                                       shape=(len(pattern), offset))
        # CSR structure of A (pattern sorted by row then column)
        self._indptr = np.searchsorted(pattern // n, np.arange(n + 1)).astype(np.int32)
        self._indices = (pattern % n).astype(np.int32)

    def _pattern(self) -> np.ndarray:
        """Sorted keys a n + b of the nonzero entries of A = L^T W L + B^T W B."""
        n = self.n_unknowns
        total = None
        for rows in (self._L, self._B):
            shape_only = _Rows(rows.cols, (rows.vals != 0).astype(float)).matrix(n)
            product = (shape_only.T @ shape_only).tocoo()
            total = product if total is None else (total + product).tocoo()
        return np.sort(total.row.astype(np.int64) * n + total.col)

    def strain_parts(self, solution: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The two rows of A's dissipation quadrature applied to an unknown vector.

        Returns ``(L x)`` on the nodes, shape (nz + 1, nx + 1): psi_zz - psi_xx = 2 e_xz
        where A has a row (interior and no-slip wall nodes), 0 on free-slip walls (no shear
        stress there); and ``(B x)`` at the cell centres, shape (nz, nx): psi_xz = e_xx.
        """
        g = self.grid
        if not hasattr(self, "_strain_matrices"):
            self._strain_matrices = (self._L.matrix(self.n_unknowns),
                                     self._B.matrix(self.n_unknowns))
        L, B = self._strain_matrices
        shear = np.zeros(g.node_shape)
        shear[self._L_node] = L @ solution
        if g.periodic:
            shear[:, g.nx] = shear[:, 0]
        return shear, (B @ solution).reshape(g.cell_shape)

    def viscosity_weights(self, eta_node: np.ndarray, eta_cell: np.ndarray) -> np.ndarray:
        """The weights [w eta at the L rows ; 4 eta_cell] that the value map multiplies."""
        jn, in_ = self._L_node
        cells = 4.0 * eta_cell.ravel()
        if self._B_weight is not None:
            cells = cells * self._B_weight
        return np.concatenate([self._L_weight * eta_node[jn, in_], cells])

    def matrix(self, eta_node: np.ndarray, eta_cell: np.ndarray) -> sp.csr_matrix:
        """The symmetric positive definite matrix A(eta), shape (n_unknowns, n_unknowns).

        Parameters
        ----------
        eta_node : ndarray, shape (nz + 1, nx + 1)
            Viscosity at the corners.
        eta_cell : ndarray, shape (nz, nx)
            Viscosity at the cell centres.
        """
        return self.matrix_from_weights(self.viscosity_weights(eta_node, eta_cell))

    def matrix_from_weights(self, weights: np.ndarray) -> sp.csr_matrix:
        """A from viscosity weights (``viscosity_weights``).

        A is linear in the weights, so this also gives dA for a change of the weights.
        Every A shares the operator's index arrays (sorted, no duplicates; so the
        factoriser recognises the pattern without comparing it): change only ``A.data``
        in place, never ``A.indices`` or ``A.indptr``.
        """
        n = self.n_unknowns
        return sp.csr_matrix((self.value_map @ weights, self._indices, self._indptr),
                             shape=(n, n))

    # -- vectors ----------------------------------------------------------------------------
    def rhs(self, temperature: np.ndarray, rayleigh: float) -> np.ndarray:
        """Right-hand side Ra (dT/dx) at the unknown nodes, shape (n_unknowns,) (times the
        node's control height in units of 1 / nz on a stretched grid)."""
        return self.forcing(buoyancy_rhs(self.grid, temperature, rayleigh))

    def forcing(self, f: np.ndarray) -> np.ndarray:
        """The right-hand side of A psi = f for node values f (nz + 1, nx + 1) of the
        forcing: f at the unknowns, times the control height of the node row in units
        of 1 / nz on a stretched grid (module docstring)."""
        if self.grid.stretched:
            f = f * (self.grid.dz_node * self.grid.nz)[:, None]
        return self.from_nodes(f)

    def to_nodes(self, solution: np.ndarray) -> np.ndarray:
        """Scatter an unknown vector onto the full node array (zeros on walls)."""
        psi = np.zeros(self.grid.node_shape)
        mask = self.node_index >= 0
        psi[mask] = solution[self.node_index[mask]]
        return psi

    def from_nodes(self, psi: np.ndarray) -> np.ndarray:
        """Gather the unknowns from a full node array."""
        out = np.empty(self.n_unknowns)
        mask = self.node_index >= 0
        out[self.node_index[mask]] = psi[mask]
        return out


def buoyancy_rhs(grid: Grid, temperature: np.ndarray, rayleigh: float) -> np.ndarray:
    """Ra dT/dx on the nodes, shape (nz + 1, nx + 1), from cell temperatures (nz, nx).

    dT/dx at a node is the mean of the x-differences of the two cell rows that meet
    there (weighted by the halves of their heights inside the node's control height on a
    stretched grid); zero on the walls (where psi is imposed anyway).
    """
    g = grid
    if g.periodic:
        diff = (temperature - np.roll(temperature, 1, axis=1)) / g.dx   # at x_i, i = 0..nx-1
        diff = np.concatenate([diff, diff[:, :1]], axis=1)
    else:
        diff = np.zeros((g.nz, g.nx + 1))
        diff[:, 1:-1] = (temperature[:, 1:] - temperature[:, :-1]) / g.dx
    out = np.zeros(g.node_shape)
    if g.stretched:
        h, d = g.dz_cell, g.dz_node
        out[1:-1] = (h[1:, None] * diff[1:] + h[:-1, None] * diff[:-1]) / (2.0 * d[1:-1, None])
    else:
        out[1:-1] = 0.5 * (diff[1:] + diff[:-1])
    return rayleigh * out


def face_velocities(grid: Grid, psi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Face velocities from the node streamfunction.

    u = d(psi)/dz on the vertical faces, shape (nz, nx + 1);
    w = -d(psi)/dx on the horizontal faces, shape (nz + 1, nx).
    The discrete divergence of (u, w) in every cell is zero to round-off.
    """
    if grid.stretched:
        u = (psi[1:, :] - psi[:-1, :]) / grid.dz_cell[:, None]
    else:
        u = (psi[1:, :] - psi[:-1, :]) / grid.dz
    w = -(psi[:, 1:] - psi[:, :-1]) / grid.dx
    return u, w


def node_velocities(grid: Grid, psi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Velocity (u, w) at the cell centres, each (nz, nx), averaged from the faces."""
    u, w = face_velocities(grid, psi)
    return 0.5 * (u[:, 1:] + u[:, :-1]), 0.5 * (w[1:] + w[:-1])


class TransformSolver:
    """Exact fast solver of A psi = f for constant viscosity and free-slip top and bottom.

    Then A = eta (D_xx + D_zz)^2 with the five-point Laplacian on psi = 0 walls, which
    the type-I sine transform (walls) or the Fourier transform (periodic x)
    diagonalises: psi_hat = f_hat / (eta (lambda_x + lambda_z)^2).  No factorisation.
    """

    def __init__(self, operator: StokesOperator, viscosity: float = 1.0):
        g = operator.grid
        if operator.top != "free-slip" or operator.bottom != "free-slip":
            raise ValueError("the transform solver needs free-slip top and bottom")
        if g.stretched:
            raise ValueError("the transform solver needs a uniform grid (no wall refinement)")
        self.operator = operator
        self.viscosity = float(viscosity)
        mz = np.arange(1, g.nz)
        lam_z = -(4.0 / g.dz ** 2) * np.sin(np.pi * mz / (2 * g.nz)) ** 2
        if g.periodic:
            mx = np.arange(g.nx // 2 + 1)
            lam_x = -(4.0 / g.dx ** 2) * np.sin(np.pi * mx / g.nx) ** 2
        else:
            mx = np.arange(1, g.nx)
            lam_x = -(4.0 / g.dx ** 2) * np.sin(np.pi * mx / (2 * g.nx)) ** 2
        self._denominator = self.viscosity * (lam_z[:, None] + lam_x[None, :]) ** 2
        self._shape = (g.nz - 1, g.nx if g.periodic else g.nx - 1)

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        f = rhs.reshape(self._shape)
        if self.operator.grid.periodic:
            fh = sfft.dst(sfft.rfft(f, axis=1), type=1, axis=0)
            return sfft.irfft(sfft.idst(fh / self._denominator, type=1, axis=0),
                              n=self._shape[1], axis=1).ravel()
        fh = sfft.dstn(f, type=1)
        return sfft.idstn(fh / self._denominator, type=1).ravel()
