"""The per-cell loops of ``convsim.model.kernels`` as whole-array numpy operations.

Imports numpy only.  Same arithmetic, in the same order, as the compiled kernels, so the
two give the same bits (tests/test_energy.py checks it); this one needs no compiler start-
up (about 0.7 s of a run's start: importing numba and loading its compiled cache), the
compiled one is several times faster per call on large grids.  ``convsim.model.energy``
picks one by grid size.
"""

import numpy as np

LIMITER_CODES = {"upwind": 0, "minmod": 1, "van-leer": 2, "superbee": 3, "mc": 4, "koren": 5,
                 "unlimited": 6}


def limiter(r: np.ndarray, code: int) -> np.ndarray:
    """Flux limiter phi(r) elementwise; the formulas of ``kernels._limiter`` (sources there)."""
    if code == 0:
        return np.zeros_like(r)
    if code == 1:
        return np.maximum(0.0, np.minimum(1.0, r))
    if code == 2:
        return (r + np.abs(r)) / (1.0 + np.abs(r))
    if code == 3:
        return np.maximum(0.0, np.maximum(np.minimum(2.0 * r, 1.0), np.minimum(r, 2.0)))
    if code == 5:
        return np.maximum(0.0, np.minimum(np.minimum(2.0 * r, (2.0 + r) / 3.0), 2.0))
    return np.maximum(0.0, np.minimum(np.minimum(2.0 * r, 0.5 * (1.0 + r)), 2.0))


def face_value(up2: np.ndarray, up: np.ndarray, down: np.ndarray, code: int) -> np.ndarray:
    """Limited upwind-biased face values: up + phi(r) (down - up) / 2, r = (up - up2) / (down - up).

    Where down = up the face takes the upwind value (r is undefined there).
    """
    if code == 6:       # unlimited kappa = 1/3
        return up + ((up - up2) + 2.0 * (down - up)) / 6.0
    delta = down - up
    flat = delta == 0.0
    r = (up - up2) / np.where(flat, 1.0, delta)
    return np.where(flat, up, up + 0.5 * limiter(r, code) * delta)


def _upwind_flux(velocity, behind2, behind, ahead, ahead2, code):
    """velocity x face value, the upwind side chosen by the sign of the velocity.

    For a face between cells ``behind`` and ``ahead`` (``behind2`` beyond ``behind``,
    ``ahead2`` beyond ``ahead``).
    """
    forward = velocity >= 0.0
    up2 = np.where(forward, behind2, ahead2)
    up = np.where(forward, behind, ahead)
    down = np.where(forward, ahead, behind)
    return velocity * face_value(up2, up, down, code)


def advective_tendency(padded, u, w, dx, dz, code, out):
    """out = -div(u T) per cell, conservative finite volume with a TVD flux limiter.

    Arguments as ``kernels.advective_tendency``: ``padded`` (nz + 4, nx + 4) with two ghost
    layers, ``u`` (nz, nx + 1), ``w`` (nz + 1, nx), cell sizes, limiter code, ``out`` (nz, nx).
    """
    nz, nx = out.shape
    rows = padded[2:nz + 2]
    fx = _upwind_flux(u, rows[:, 0:nx + 1], rows[:, 1:nx + 2], rows[:, 2:nx + 3],
                      rows[:, 3:nx + 4], code)
    cols = padded[:, 2:nx + 2]
    fz = _upwind_flux(w, cols[0:nz + 1], cols[1:nz + 2], cols[2:nz + 3], cols[3:nz + 4], code)
    out[...] = -(fx[:, 1:] - fx[:, :-1]) / dx - (fz[1:] - fz[:-1]) / dz
    return out
