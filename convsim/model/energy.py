"""Temperature equation: conservative finite volume on the cells.

    dT/dt = -div(u T) + lap T + H                                              (1)

(nondimensional: time in d^2/kappa, temperature in units of the contrast).
Advection is explicit, with face fluxes from a limited upwind-biased (TVD)
reconstruction or first-order upwind (``convsim.model.kernels``, compiled, and its
bit-identical whole-array twin ``convsim.model.array_kernels``); diffusion is
implicit, with the five-point Laplacian and ghost cells for the boundary
conditions; H is a uniform internal heat source.

Boundary conditions on z = 0 and z = 1 are a fixed temperature (ghost cell
T_g = 2 T_b - T_1) or a fixed upward heat flux q = -dT/dz.  Side walls are
insulating (mirror ghosts) or periodic.

The implicit solve (a I - dt K) T = r, with K the discrete Laplacian, is done by
a cosine (insulating sides) or Fourier (periodic) transform in x and a
precomputed eigendecomposition of the tridiagonal z operator: exact for any dt,
with no factorisation to redo when dt changes.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft

from convsim.model import array_kernels
from convsim.model.choices import THERMAL_CONDITIONS
from convsim.model.grid import Grid

__all__ = ["ThermalBoundaries", "conductive_coefficients", "conductive_profile",
           "pad_temperature", "advection", "DiffusionSolver",
           "boundary_heat_flux", "AdvectionKernels", "THERMAL_CONDITIONS", "LIMITERS"]

LIMITERS = tuple(array_kernels.LIMITER_CODES)


@dataclass(frozen=True)
class ThermalBoundaries:
    """Thermal conditions at z = 1 (top) and z = 0 (bottom).

    ``top_heat``, ``bottom_heat``: 'temperature' (value = T) or 'flux' (value = the
    upward heat flux -dT/dz); the same words as the config's [boundaries] keys and
    the onset solver's ``Layer``.
    """

    top_heat: str = "temperature"
    top_value: float = 0.0
    bottom_heat: str = "temperature"
    bottom_value: float = 1.0

    def __post_init__(self):
        for kind in (self.top_heat, self.bottom_heat):
            if kind not in THERMAL_CONDITIONS:
                raise ValueError(f"thermal condition {kind!r}: expected one of {THERMAL_CONDITIONS}")


def conductive_coefficients(top_heat: str, top_value: float, bottom_heat: str,
                            bottom_value: float, heating: float) -> tuple[float, float]:
    """(T0, s) of the steady conductive profile T(z) = T0 + s z - H z^2 / 2.

    It solves T'' = -H on 0 <= z <= 1 with each wall at a fixed temperature
    (value = T) or a fixed upward heat flux (value = q = -dT/dz); at least one wall
    must fix the temperature.  Both fixed: T(0) = Tb, T(1) = Tt.  Flux at the top:
    T(0) = Tb, -T'(1) = q.  Flux at the bottom: -T'(0) = q, T(1) = Tt.
    """
    H = heating
    if bottom_heat == "temperature" and top_heat == "temperature":
        return bottom_value, top_value - bottom_value + 0.5 * H
    if bottom_heat == "temperature":
        return bottom_value, H - top_value
    slope = -bottom_value
    return top_value - slope + 0.5 * H, slope


def conductive_profile(z: np.ndarray, bc: ThermalBoundaries, heating: float) -> np.ndarray:
    """The steady conductive temperature T(z) = T0 + s z - H z^2 / 2 at heights z
    (see ``conductive_coefficients``), in units of the temperature contrast."""
    t0, slope = conductive_coefficients(bc.top_heat, bc.top_value, bc.bottom_heat,
                                        bc.bottom_value, heating)
    z = np.asarray(z, dtype=float)
    return t0 + slope * z - 0.5 * heating * z * z


def pad_temperature(grid: Grid, T: np.ndarray, bc: ThermalBoundaries) -> np.ndarray:
    """T with two ghost layers on every side, shape (nz + 4, nx + 4).

    Sides: mirror (insulating) or wrap (periodic).  Bottom and top: odd reflection
    about the wall temperature (fixed T) or even reflection plus the imposed
    gradient (fixed flux).  Corners are filled after the sides.
    """
    nz, nx = T.shape
    p = np.empty((nz + 4, nx + 4))
    p[2:-2, 2:-2] = T
    dz = grid.dz
    for (g_near, g_far, c_near, c_far, kind, value, sign) in (
            (1, 0, 2, 3, bc.bottom_heat, bc.bottom_value, +1.0),
            (nz + 2, nz + 3, nz + 1, nz, bc.top_heat, bc.top_value, -1.0)):
        if kind == "temperature":
            p[g_near, 2:-2] = 2.0 * value - p[c_near, 2:-2]
            p[g_far, 2:-2] = 2.0 * value - p[c_far, 2:-2]
        else:  # T(-z) = T(z) + 2 q z at the bottom, mirrored at the top
            p[g_near, 2:-2] = p[c_near, 2:-2] + sign * value * dz
            p[g_far, 2:-2] = p[c_far, 2:-2] + sign * 3.0 * value * dz
    if grid.periodic:
        p[:, :2] = p[:, nx:nx + 2]
        p[:, -2:] = p[:, 2:4]
    else:
        p[:, 1], p[:, 0] = p[:, 2], p[:, 3]
        p[:, -2], p[:, -1] = p[:, -3], p[:, -4]
    return p


def compiled_advection_kernel():
    """The compiled TVD loop (imports numba on first use, then the thread limit is applied)."""
    from convsim.model import kernels
    from convsim.threads import reapply_limit
    reapply_limit()
    return kernels.advective_tendency


class AdvectionKernels:
    """Which implementation of the TVD loop a run calls: whole-array first, compiled later.

    The two give the same bits.  Importing numba and loading the compiled cache costs
    about ``START_UP_SECONDS`` once; the array version costs about
    ``EXTRA_SECONDS_PER_CELL`` more per cell and call (measured on a 2-core machine,
    8 x 8 to 256 x 256: 30 to 60 ns).  So a run calls the array version until that extra
    has added up to the start-up cost, then switches (the rent-or-buy rule: never more
    than twice the cost of the better choice made in hindsight).  Grids of more than
    ``ARRAY_MAX_CELLS`` cells start compiled: they are run for thousands of steps, where the
    start-up is small, and the array version's extra cost per cell grows there (cache).
    Short and small runs never load the compiler; long ones switch within a second.
    """

    START_UP_SECONDS = 0.7
    EXTRA_SECONDS_PER_CELL = 4e-8
    ARRAY_MAX_CELLS = 64 * 64

    def __init__(self, cells: int):
        self.array_calls_left = (0 if cells > self.ARRAY_MAX_CELLS else
                                 int(self.START_UP_SECONDS / (self.EXTRA_SECONDS_PER_CELL * cells)))
        self._compiled = None

    def pick(self):
        """The kernel for this call: (padded, u, w, dx, dz, code, out) -> out."""
        if self.array_calls_left > 0:
            self.array_calls_left -= 1
            return array_kernels.advective_tendency
        if self._compiled is None:
            self._compiled = compiled_advection_kernel()
        return self._compiled


def advection(grid: Grid, T: np.ndarray, u: np.ndarray, w: np.ndarray, bc: ThermalBoundaries,
              limiter: str = "van-leer", kernel=None) -> np.ndarray:
    """Advective tendency -div(u T) per cell, shape (nz, nx).

    Parameters
    ----------
    T : (nz, nx) cell temperatures.
    u, w : face velocities, (nz, nx + 1) and (nz + 1, nx) (see ``stokes.face_velocities``).
    limiter : one of LIMITERS; 'upwind' gives the first-order scheme.
    kernel : the loop to call (``AdvectionKernels.pick()``); default the compiled one.
    """
    out = np.empty(grid.cell_shape)
    kernel = compiled_advection_kernel() if kernel is None else kernel
    return kernel(pad_temperature(grid, T, bc), u, w, grid.dx, grid.dz,
                  array_kernels.LIMITER_CODES[limiter], out)


def boundary_heat_flux(grid: Grid, T: np.ndarray, bc: ThermalBoundaries) -> tuple[np.ndarray, np.ndarray]:
    """Upward conductive heat flux -dT/dz through the bottom and top faces, each (nx,).

    These are the fluxes the finite-volume scheme itself uses, so they close the
    heat budget exactly.
    """
    if bc.bottom_heat == "temperature":
        bottom = -(T[0] - bc.bottom_value) / (0.5 * grid.dz)
    else:
        bottom = np.full(grid.nx, bc.bottom_value)
    if bc.top_heat == "temperature":
        top = -(bc.top_value - T[-1]) / (0.5 * grid.dz)
    else:
        top = np.full(grid.nx, bc.top_value)
    return bottom, top


class DiffusionSolver:
    """The discrete Laplacian K T + g with its boundary terms, and fast solves of (a - dt K).

    K acts on cell temperatures (nz, nx); g holds the inhomogeneous boundary terms
    (wall temperatures or fluxes), so that lap T = K T + g.
    """

    def __init__(self, grid: Grid, bc: ThermalBoundaries):
        self.grid, self.bc = grid, bc
        nz, dz = grid.nz, grid.dz
        kz = (np.diag(np.full(nz - 1, 1.0), -1) + np.diag(np.full(nz - 1, 1.0), 1)
              - 2.0 * np.eye(nz)) / dz ** 2
        g = np.zeros(nz)
        if bc.bottom_heat == "temperature":
            kz[0, 0] = -3.0 / dz ** 2
            g[0] = 2.0 * bc.bottom_value / dz ** 2
        else:
            kz[0, 0] = -1.0 / dz ** 2
            g[0] = bc.bottom_value / dz
        if bc.top_heat == "temperature":
            kz[-1, -1] = -3.0 / dz ** 2
            g[-1] = 2.0 * bc.top_value / dz ** 2
        else:
            kz[-1, -1] = -1.0 / dz ** 2
            g[-1] = -bc.top_value / dz
        self._kz = kz
        self.boundary_term = np.repeat(g[:, None], grid.nx, axis=1)
        self._mu, self._q = np.linalg.eigh(kz)
        m = np.arange(grid.nx // 2 + 1 if grid.periodic else grid.nx)
        if grid.periodic:
            self._lam_x = -(4.0 / grid.dx ** 2) * np.sin(np.pi * m / grid.nx) ** 2
        else:
            self._lam_x = -(4.0 / grid.dx ** 2) * np.sin(np.pi * m / (2 * grid.nx)) ** 2

    def apply(self, T: np.ndarray) -> np.ndarray:
        """lap T = K T + g, shape (nz, nx)."""
        dx2 = self.grid.dx ** 2
        if self.grid.periodic:
            xx = (np.roll(T, 1, axis=1) - 2.0 * T + np.roll(T, -1, axis=1)) / dx2
        else:
            ext = np.concatenate([T[:, :1], T, T[:, -1:]], axis=1)
            xx = (ext[:, 2:] - 2.0 * T + ext[:, :-2]) / dx2
        return xx + self._kz @ T + self.boundary_term

    def solve(self, a: float, dt: float, rhs: np.ndarray) -> np.ndarray:
        """Solve (a I - dt K) T = rhs for T, shape (nz, nx); a > 0, dt >= 0."""
        if self.grid.periodic:
            rh = sfft.rfft(rhs, axis=1)
        else:
            rh = sfft.dct(rhs, type=2, axis=1, norm="ortho")
        modal = self._q.T @ rh
        modal /= a - dt * (self._mu[:, None] + self._lam_x[None, :])
        rh = self._q @ modal
        if self.grid.periodic:
            return sfft.irfft(rh, n=self.grid.nx, axis=1)
        return sfft.idct(rh, type=2, axis=1, norm="ortho")


def diffusion_matrix(grid: Grid, bc: ThermalBoundaries):
    """Sparse K with lap T = K T + g on the raveled (nz, nx) cell array (row-major, x fastest)."""
    import scipy.sparse as sp
    nx = grid.nx
    kx = sp.diags([np.ones(nx - 1), -2.0 * np.ones(nx), np.ones(nx - 1)], [-1, 0, 1], format="lil")
    if grid.periodic:
        kx[0, nx - 1] = kx[nx - 1, 0] = 1.0
    else:
        kx[0, 0] = kx[nx - 1, nx - 1] = -1.0
    kx = sp.csr_matrix(kx) / grid.dx ** 2
    kz = sp.csr_matrix(DiffusionSolver(grid, bc)._kz)
    return (sp.kron(sp.identity(grid.nz), kx) + sp.kron(kz, sp.identity(nx))).tocsc()


def upwind_matrix(grid: Grid, u: np.ndarray, w: np.ndarray):
    """Sparse C with C T = div(u T) by first-order upwind fluxes, for frozen face velocities.

    The flux through a face is u+ T_upwind with u+ = max(u, 0) from the left or
    lower cell and min(u, 0) from the right or upper one; walls carry no flux.
    """
    import scipy.sparse as sp
    nz, nx = grid.cell_shape
    idx = np.arange(nz * nx).reshape(nz, nx)
    rows, cols, vals = [], [], []

    def add(r, c, v):
        rows.append(r.ravel())
        cols.append(c.ravel())
        vals.append(v.ravel())

    # x faces: face i between cells i-1 and i (periodic: face 0 joins nx-1 and 0)
    faces = np.arange(nx) if grid.periodic else np.arange(1, nx)
    left, right = idx[:, (faces - 1) % nx], idx[:, faces]
    up, um = np.maximum(u[:, faces], 0.0) / grid.dx, np.minimum(u[:, faces], 0.0) / grid.dx
    add(left, left, up), add(left, right, um), add(right, left, -up), add(right, right, -um)
    below, above = idx[:-1, :], idx[1:, :]
    wp, wm = np.maximum(w[1:-1], 0.0) / grid.dz, np.minimum(w[1:-1], 0.0) / grid.dz
    add(below, below, wp), add(below, above, wm), add(above, below, -wp), add(above, above, -wm)
    n = nz * nx
    return sp.csc_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                         shape=(n, n))
