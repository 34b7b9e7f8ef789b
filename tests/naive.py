"""Slow, obviously correct twins of the compiled kernels (for tests only)."""

import numpy as np


def limiter(r, name):
    if name == "upwind":
        return 0.0
    if name == "minmod":
        return max(0.0, min(1.0, r))
    if name == "van-leer":
        return (r + abs(r)) / (1.0 + abs(r))
    if name == "superbee":
        return max(0.0, min(2.0 * r, 1.0), min(r, 2.0))
    if name == "koren":     # Koren (1993); 2 x psi of Hundsdorfer & Verwer (2003) ch. III, from memory
        return max(0.0, min(2.0 * r, (2.0 + r) / 3.0, 2.0))
    if name == "mc":
        return max(0.0, min(2.0 * r, 0.5 * (1.0 + r), 2.0))
    raise ValueError(name)


def face_value(up2, up, down, name):
    if name == "unlimited":                   # kappa = 1/3: (1 - k)/4 upwind + (1 + k)/4 downwind
        return up + (1.0 - 1.0 / 3.0) / 4.0 * (up - up2) + (1.0 + 1.0 / 3.0) / 4.0 * (down - up)
    if down == up:
        return up
    r = (up - up2) / (down - up)
    return up + 0.5 * limiter(r, name) * (down - up)


def advective_tendency(padded, u, w, dx, dz, name):
    """-div(u T) from limited upwind face values; padded has two ghost layers; dz a number
    or the height of each cell row."""
    nz, nx = padded.shape[0] - 4, padded.shape[1] - 4
    heights = np.broadcast_to(np.asarray(dz, dtype=float), (nz,))
    P = lambda j, i: padded[j + 2, i + 2]          # noqa: E731 - cell (j, i), ghosts at -1, -2
    out = np.zeros((nz, nx))
    for j in range(nz):
        for i in range(nx):
            def flux_x(f):                           # face f between cells f-1 and f
                v = u[j, f]
                t = (face_value(P(j, f - 2), P(j, f - 1), P(j, f), name) if v >= 0
                     else face_value(P(j, f + 1), P(j, f), P(j, f - 1), name))
                return v * t

            def flux_z(f):
                v = w[f, i]
                t = (face_value(P(f - 2, i), P(f - 1, i), P(f, i), name) if v >= 0
                     else face_value(P(f + 1, i), P(f, i), P(f - 1, i), name))
                return v * t
            out[j, i] = -(flux_x(i + 1) - flux_x(i)) / dx - (flux_z(j + 1) - flux_z(j)) / heights[j]
    return out


def pad(T, dz, bottom, top, periodic):
    """T (nz, nx) with two ghost layers on every side, written cell by cell from the wall
    conditions alone (independent of convsim's padding).

    bottom, top: ('temperature', T_wall) -> the ghost at distance d beyond the wall is the odd
    reflection 2 T_wall - T(mirror cell); ('flux', q) with q = -dT/dz upward -> the even
    reflection plus the imposed gradient, T(ghost) = T(mirror cell) + q * (distance between
    the two centres) at the bottom and - q * (that distance) at the top.  Sides: mirror
    (insulating, T(-x) = T(x)) or wrap (periodic).
    """
    nz, nx = len(T), len(T[0])
    out = np.zeros((nz + 4, nx + 4))
    for j in range(-2, nz + 2):
        for i in range(-2, nx + 2):
            if periodic:
                ii = i % nx
            else:
                ii = -1 - i if i < 0 else (2 * nx - 1 - i if i >= nx else i)
            if 0 <= j < nz:
                value = T[j][ii]
            elif j < 0:                       # below the bottom wall; mirror cell -1 - j
                m = -1 - j
                kind, wall = bottom
                gap = (m - j) * dz                # centre of the mirror cell to the ghost
                value = 2 * wall - T[m][ii] if kind == "temperature" else T[m][ii] + wall * gap
            else:                             # above the top wall; mirror cell 2 nz - 1 - j
                m = 2 * nz - 1 - j
                kind, wall = top
                gap = (j - m) * dz
                value = 2 * wall - T[m][ii] if kind == "temperature" else T[m][ii] - wall * gap
            out[j + 2, i + 2] = value
    return out
