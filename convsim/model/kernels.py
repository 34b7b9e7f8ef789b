"""Compiled per-cell loops (numba).  Imports numpy, numba and the limiter codes only.

The kernels trust their inputs: shapes and codes are checked by the callers in
``convsim.model.energy``.  Each kernel has a whole-array twin in
``convsim.model.array_kernels`` (the same bits) and a slow, plain-Python twin in tests/naive.py.
"""

import numpy as np
from numba import njit

from convsim.model.array_kernels import LIMITER_CODES  # noqa: F401 - one table for both


@njit(cache=True, inline="always")
def _limiter(r, code):
    """Flux limiter phi(r) of the TVD family; phi = 0 is first-order upwind.

    The face value is up + phi(r) (down - up) / 2 with r = (up - up2) / (down - up).
    phi = (2 + r) / 3 is the kappa = 1/3 upwind-biased interpolation (third order on
    smooth fields; 'unlimited', not TVD: ``_face_value`` evaluates it without r); Koren's
    limiter is that line bounded by 0, 2 r and 2 (Koren 1993; Hundsdorfer & Verwer 2003,
    ch. III; from memory).
    """
    if code == 0:
        return 0.0
    if code == 1:
        return max(0.0, min(1.0, r))
    if code == 2:
        return (r + abs(r)) / (1.0 + abs(r))
    if code == 3:
        return max(0.0, max(min(2.0 * r, 1.0), min(r, 2.0)))
    if code == 5:
        return max(0.0, min(min(2.0 * r, (2.0 + r) / 3.0), 2.0))
    return max(0.0, min(min(2.0 * r, 0.5 * (1.0 + r)), 2.0))


@njit(cache=True, inline="always")
def _face_value(up2, up, down, code):
    """Limited upwind-biased face value from the two upwind cells and the downwind one."""
    if code == 6:       # unlimited kappa = 1/3: also where down = up (r undefined)
        return up + ((up - up2) + 2.0 * (down - up)) / 6.0
    delta = down - up
    if delta == 0.0:
        return up
    r = (up - up2) / delta
    return up + 0.5 * _limiter(r, code) * delta


@njit(cache=True)
def advective_tendency(padded, u, w, dx, dz, code, out):
    """out = -div(u T) per cell, conservative finite volume with a TVD flux limiter.

    Parameters
    ----------
    padded : (nz + 4, nx + 4) temperature with two ghost layers on every side.
    u : (nz, nx + 1) velocity on the vertical faces.
    w : (nz + 1, nx) velocity on the horizontal faces.
    dx, dz : cell sizes.
    code : limiter code (see LIMITER_CODES).
    out : (nz, nx) result, overwritten.
    """
    nz, nx = out.shape
    fx = np.empty((nz, nx + 1))
    fz = np.empty((nz + 1, nx))
    for j in range(nz):
        jp = j + 2
        for i in range(nx + 1):
            ip = i + 2          # face i sits between padded cells ip - 1 and ip
            vel = u[j, i]
            if vel >= 0.0:
                tf = _face_value(padded[jp, ip - 2], padded[jp, ip - 1], padded[jp, ip], code)
            else:
                tf = _face_value(padded[jp, ip + 1], padded[jp, ip], padded[jp, ip - 1], code)
            fx[j, i] = vel * tf
    for j in range(nz + 1):
        jp = j + 2
        for i in range(nx):
            ip = i + 2
            vel = w[j, i]
            if vel >= 0.0:
                tf = _face_value(padded[jp - 2, ip], padded[jp - 1, ip], padded[jp, ip], code)
            else:
                tf = _face_value(padded[jp + 1, ip], padded[jp, ip], padded[jp - 1, ip], code)
            fz[j, i] = vel * tf
    for j in range(nz):
        for i in range(nx):
            out[j, i] = -(fx[j, i + 1] - fx[j, i]) / dx - (fz[j + 1, i] - fz[j, i]) / dz
    return out
