"""Discretised linear-stability operator of a conductive layer (behind ``convsim.analysis.stability``).

The equations (1), (2) and the conditions are stated in ``convsim.analysis.stability``.

Chebyshev collocation on the Gauss-Lobatto points of [0, 1]
(``points`` + 1 nodes).  Theta's boundary values are eliminated through its two
boundary conditions; (2) is collocated at the interior nodes.  The four
conditions on Phi replace the collocation rows of (1) at the two outermost
nodes at each end.  Eliminating Phi = k Ra L^{-1} Theta gives the standard
eigenproblem for the growth rates,

    s Theta = (A + Ra B) Theta,   A = D^2 - k^2,   B = -k^2 T0' L^{-1},

and, for steady neutral modes (s = 0), the eigenproblem
-A^{-1} B Theta = (1 / Ra) Theta, whose largest positive real eigenvalue gives
the neutral Rayleigh number Ra(k).  That assumes stationary onset (exchange of
stabilities), which holds when -T0' has one sign (heating from below); with
internal heating the growth-rate route (``method="growth"``) does not assume it.

Viscosity.  With g = ln eta0, L = eta0 Lt where
Lt = (D^2 + k^2) f + 2 g' f' + (g'' + g'^2) f - 4 k^2 (Phi'' + g' Phi'),
f = (D^2 + k^2) Phi; (1) is solved as Lt Phi = k Ra Theta / eta0, which stays well
scaled for viscosity contrasts up to 1e30 (the product form loses the low-viscosity
region to round-off).  Where eta0 has kinks (cut-offs, ``Layer.breaks``) the layer is
split into blocks, each with its own Chebyshev grid, joined by continuity of Phi,
Phi', Phi'' and of the z-derivative of the shear stress q = eta0 (Phi'' + k^2 Phi)
(from integrating (1) across the interface), and of Theta and Theta'.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import scipy.linalg as sla
from scipy.optimize import brentq, minimize_scalar

from convsim.errors import ConfigError
from convsim.model.choices import FLOW_CONDITIONS, THERMAL_CONDITIONS as HEAT_CONDITIONS
from convsim.model.energy import conductive_coefficients

__all__ = ["Layer", "StabilityProblem", "conductive_profile", "conductive_gradient",
           "chebyshev", "default_points", "RA_INFINITE", "FLOW_CONDITIONS",
           "HEAT_CONDITIONS"]

log = logging.getLogger("convsim.analysis.stability")


#: A neutral Rayleigh number above this is reported as infinite (no steady instability).
RA_INFINITE = 1.0e30


def _unit_viscosity(T, z):
    return np.ones(np.broadcast(T, z).shape)


# --------------------------------------------------------------------------------------
# The layer and its conductive state
# --------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Layer:
    """The horizontally infinite layer whose conductive state is analysed.

    Parameters
    ----------
    top_flow, bottom_flow : str
        'free-slip' or 'no-slip' at z = 1 and z = 0.
    top_heat, bottom_heat : str
        'temperature' (fixed T) or 'flux' (fixed upward flux -dT/dz) at z = 1, z = 0.
    top_value, bottom_value : float
        The fixed temperature or upward flux there (temperature scale, per depth).
    internal_heating : float
        H in dT/dt + u . grad T = lap T + H.
    viscosity : callable
        eta(T, z), dimensionless; evaluated on the conductive profile only.
    breaks : tuple of float
        Heights 0 < z < 1 where eta(T0(z), z) has a kink (a cut-off switching on); the
        collocation is split there.  Elsewhere eta must be smooth.
    """

    top_flow: str = "free-slip"
    bottom_flow: str = "free-slip"
    top_heat: str = "temperature"
    top_value: float = 0.0
    bottom_heat: str = "temperature"
    bottom_value: float = 1.0
    internal_heating: float = 0.0
    viscosity: Callable = field(default=None, compare=False)
    breaks: tuple = ()

    def __post_init__(self):
        for key, allowed in (("top_flow", FLOW_CONDITIONS), ("bottom_flow", FLOW_CONDITIONS),
                             ("top_heat", HEAT_CONDITIONS), ("bottom_heat", HEAT_CONDITIONS)):
            value = getattr(self, key)
            if value not in allowed:
                raise ConfigError(f"{key} = {value!r}: expected one of "
                                  + ", ".join(repr(a) for a in allowed))
        for key in ("top_value", "bottom_value", "internal_heating"):
            value = getattr(self, key)
            if not isinstance(value, (int, float)) or not math.isfinite(value):
                raise ConfigError(f"{key} = {value!r}: expected a finite number")
        if self.top_heat == "flux" and self.bottom_heat == "flux":
            raise ConfigError("top_heat = 'flux': with bottom_heat = 'flux' too the critical "
                              "wavenumber tends to 0 and the temperature level is undetermined; "
                              "allowed: at least one 'temperature'")
        if self.viscosity is None:
            object.__setattr__(self, "viscosity", _unit_viscosity)
        breaks = tuple(sorted(float(b) for b in self.breaks))
        if not all(math.isfinite(b) and 0.0 < b < 1.0 for b in breaks) \
                or any(hi - lo <= 0.0 for lo, hi in zip(breaks[:-1], breaks[1:])):
            raise ConfigError(f"breaks = {self.breaks!r}: expected distinct heights 0 < z < 1")
        object.__setattr__(self, "breaks", breaks)


def _profile_coefficients(layer: Layer) -> tuple[float, float]:
    """(a, b) of T0 = -H z^2/2 + a z + b (the model's one conductive profile)."""
    b, a = conductive_coefficients(layer.top_heat, layer.top_value, layer.bottom_heat,
                                   layer.bottom_value, layer.internal_heating)
    return a, b


def conductive_profile(layer: Layer, z: np.ndarray) -> np.ndarray:
    """Conductive temperature T0(z) = -H z^2/2 + a z + b, solving T0'' = -H with the layer's conditions.

    Parameters
    ----------
    layer : Layer
    z : ndarray
        Heights, 0 <= z <= 1 (layer depths).

    Returns
    -------
    ndarray
        T0 at z, in the temperature scale.
    """
    a, b = _profile_coefficients(layer)
    z = np.asarray(z, dtype=float)
    return -0.5 * layer.internal_heating * z**2 + a * z + b


def conductive_gradient(layer: Layer, z: np.ndarray) -> np.ndarray:
    """dT0/dz = -H z + a of the conductive profile (temperature scale per depth)."""
    a, _ = _profile_coefficients(layer)
    return -layer.internal_heating * np.asarray(z, dtype=float) + a


# --------------------------------------------------------------------------------------
# Chebyshev collocation
# --------------------------------------------------------------------------------------

def chebyshev(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Lobatto nodes on [0, 1] and the first-derivative matrix there.

    Parameters
    ----------
    n : int
        Polynomial degree; n + 1 nodes z_j = (1 + cos(pi j / n))/2, j = 0..n
        (z_0 = 1 is the top, z_n = 0 the bottom).

    Returns
    -------
    z : ndarray, shape (n + 1,)
    D : ndarray, shape (n + 1, n + 1)
        (D f)_i = f'(z_i) for the interpolating polynomial of f.
    """
    j = np.arange(n + 1)
    x = np.cos(np.pi * j / n)
    c = np.where((j == 0) | (j == n), 2.0, 1.0) * (-1.0) ** j
    dx = x[:, None] - x[None, :]
    D = np.outer(c, 1.0 / c) / (dx + np.eye(n + 1))
    D -= np.diag(D.sum(axis=1))
    return 0.5 * (1.0 + x), 2.0 * D


def default_points(layer: Layer) -> int:
    """Chebyshev degree enough for the layer: 32, plus 1 per 2 e-folds of viscosity contrast.

    Common practice rule of thumb, checked in the tests for Frank-Kamenetskii contrasts up
    to 1e30; ``analyse_onset`` reports the change of Ra_c at 1.5 times this degree.
    """
    z = np.linspace(0.0, 1.0, 257)
    eta = np.asarray(layer.viscosity(conductive_profile(layer, z), z), dtype=float) * np.ones_like(z)
    with np.errstate(divide="ignore", invalid="ignore"):
        g = np.log(eta)
    spread = float(np.ptp(g)) if np.all(np.isfinite(g)) else 0.0
    return int(min(256, 8 * math.ceil((32.0 + 0.5 * spread) / 8.0)))


def _collocation(layer: Layer, points: int):
    """Nodes z (top down) and the first-derivative matrix of the Chebyshev blocks, split
    where eta has a kink (``layer.breaks``); ``first``, ``last``: each block's top and
    bottom node."""
    edges = [1.0] + sorted(layer.breaks, reverse=True) + [0.0]
    blocks = []
    for top, bottom in zip(edges[:-1], edges[1:]):
        n_b = points if len(edges) == 2 else max(8, 8 * math.ceil(points * (top - bottom) / 8))
        z_b, d_b = chebyshev(n_b)
        blocks.append((bottom + (top - bottom) * z_b, d_b / (top - bottom), n_b))
    z = np.concatenate([b[0] for b in blocks])
    D1 = sla.block_diag(*[b[1] for b in blocks])
    first = np.cumsum([0] + [b[2] + 1 for b in blocks[:-1]])
    last = first + np.array([b[2] for b in blocks])
    return z, D1, first, last


def _phi_conditions(layer: Layer, derivatives, g1, first, last):
    """Rows of the flow equation replaced by conditions on Phi, two at each end of each block.

    Walls: Phi = 0 and the slip condition.  Interfaces (node a above, b below): Phi,
    Phi', Phi'' and q'/eta = g' (Phi'' + k^2 Phi) + Phi''' + k^2 Phi' continuous, where
    q = eta (Phi'' + k^2 Phi) is the shear stress (eta itself is continuous).  Returns
    the row indices and the coefficients of Phi and of k^2 Phi in each condition.
    """
    D1, D2, D3 = derivatives
    size = D1.shape[0]
    eye = np.eye(size)
    flow_row = {"free-slip": D2, "no-slip": D1}
    rows, bc0, bc2 = [], [], []

    def put(row, c0, c2=None):
        rows.append(row)
        bc0.append(c0)
        bc2.append(np.zeros(size) if c2 is None else c2)
    put(first[0], eye[first[0]])
    put(first[0] + 1, flow_row[layer.top_flow][first[0]])
    for a, b in zip(last[:-1], first[1:]):
        put(a - 1, eye[a] - eye[b])
        put(a, D1[a] - D1[b])
        put(b, D2[a] - D2[b])
        put(b + 1, g1[a] * D2[a] + D3[a] - g1[b] * D2[b] - D3[b],
            g1[a] * eye[a] + D1[a] - g1[b] * eye[b] - D1[b])
    put(last[-1] - 1, flow_row[layer.bottom_flow][last[-1]])
    put(last[-1], eye[last[-1]])
    return np.array(rows), np.array(bc0), np.array(bc2)


def _theta_extension(layer: Layer, D1, first, last):
    """Theta's unknowns are the nodes inside the blocks; the block ends follow from the
    thermal conditions at the walls and continuity of Theta and Theta' at interfaces.
    Returns ``ext`` (Theta at every node = ext @ Theta inside) and the inner node indices."""
    size = D1.shape[0]
    eye = np.eye(size)
    heat_row = {"temperature": eye, "flux": D1}
    bc = [heat_row[layer.top_heat][first[0]], heat_row[layer.bottom_heat][last[-1]]]
    for a, b in zip(last[:-1], first[1:]):
        bc += [eye[a] - eye[b], D1[a] - D1[b]]
    bc = np.array(bc)
    ends = np.array([first[0], last[-1]] + [i for ab in zip(last[:-1], first[1:]) for i in ab])
    inner = np.setdiff1d(np.arange(size), ends)
    ext = np.zeros((size, inner.size))
    ext[inner, np.arange(inner.size)] = 1.0
    ext[ends] = -np.linalg.solve(bc[:, ends], bc[:, inner])
    return ext, inner


class StabilityProblem:
    """The discretised linear-stability problem of one layer: build once, query many wavenumbers.

    Parameters
    ----------
    layer : Layer
    points : int or None
        Chebyshev degree N (N + 1 collocation nodes), 8 <= N <= 512; None picks
        ``default_points(layer)``.
    """

    def __init__(self, layer: Layer, points: int | None = None):
        if points is None:
            points = default_points(layer)
        if isinstance(points, bool) or not isinstance(points, int) or not 8 <= points <= 512:
            raise ConfigError(f"points = {points!r}: expected a whole number, 8 <= points <= 512")
        self.layer = layer
        self.points = points
        z, D1, first, last = _collocation(layer, points)
        D2 = D1 @ D1
        D3 = D1 @ D2
        size = z.size
        self.z = z
        self.T0 = conductive_profile(layer, z)
        self.dT0 = conductive_gradient(layer, z)
        eta = np.asarray(layer.viscosity(self.T0, z), dtype=float) * np.ones_like(z)
        if not np.all(np.isfinite(eta)) or np.any(eta <= 0.0):
            raise ConfigError("viscosity: the law gives a non-positive or non-finite viscosity "
                              "on the conductive profile; allowed: finite eta > 0")
        self.eta = eta
        # L = eta Lt with g = ln eta:  Lt = (D^2 + k^2) f + 2 g' f' + (g'' + g'^2) f
        #                                   - 4 k^2 (Phi'' + g' Phi'),   f = (D^2 + k^2) Phi,
        # kept well scaled however large the viscosity contrast; eta moves to the right side.
        g = np.log(eta)
        g1 = D1 @ g
        h = D2 @ g + g1 * g1
        self._L0 = D2 @ D2 + 2.0 * g1[:, None] * D3 + h[:, None] * D2
        self._L2 = -2.0 * D2 - 2.0 * g1[:, None] * D1 + np.diag(h)
        self._L4 = np.eye(size)
        self._phi_rows, self._phi_bc0, self._phi_bc2 = _phi_conditions(layer, (D1, D2, D3), g1,
                                                                       first, last)
        self._ext, self._inner = _theta_extension(layer, D1, first, last)  # Theta = ext @ inner
        self._D2 = D2
        rhs = np.diag(1.0 / eta)
        rhs[self._phi_rows] = 0.0
        self._rhs = rhs @ self._ext           # right side of (1) per unit k Ra Theta_interior

    # -- operators --------------------------------------------------------------------
    def operators(self, k: float) -> tuple[np.ndarray, np.ndarray]:
        """(A, B) with s Theta = (A + Ra B) Theta on the interior nodes, at wavenumber k.

        A = D^2 - k^2 (with Theta's conditions), B = -k^2 T0' L^{-1} (with Phi's).
        """
        k2 = k * k
        L = self._L0 + k2 * self._L2 + (k2 * k2) * self._L4
        L[self._phi_rows] = self._phi_bc0 + k2 * self._phi_bc2
        G = np.linalg.solve(L, self._rhs)                # Phi per unit (k Ra Theta)
        inner = self._inner
        A = self._D2[inner] @ self._ext - k2 * self._ext[inner]
        B = (-k2 * self.dT0[inner])[:, None] * G[inner]
        return A, B

    def growth_rates(self, rayleigh: float, k: float) -> np.ndarray:
        """Growth rates s (1/(d^2/kappa)) of the modes at (Ra, k), largest real part first."""
        A, B = self.operators(k)
        s = sla.eigvals(A + rayleigh * B)
        s = s[np.argsort(-s.real)]
        return s.real if np.all(np.abs(s.imag) <= 1e-9 * np.maximum(1.0, np.abs(s))) else s

    def neutral_rayleigh(self, k: float, method: str = "eigen") -> float:
        """Smallest positive Ra at which a mode of wavenumber k is neutral (s = 0).

        ``method='eigen'`` solves -A^{-1} B Theta = Theta / Ra (steady onset);
        ``method='growth'`` root-finds Re s_max(Ra) = 0 with Brent's method.
        Returns ``inf`` when no Ra > 0 makes the mode grow.
        """
        if not (math.isfinite(k) and k > 0.0):
            raise ConfigError(f"wavenumber = {k!r}: expected a finite number > 0")
        if method == "eigen":
            A, B = self.operators(k)
            mu = sla.eigvals(-np.linalg.solve(A, B))
            real = mu[(np.abs(mu.imag) <= 1e-8 * np.abs(mu)) & (mu.real > 0.0)].real
            if real.size == 0 or 1.0 / real.max() > RA_INFINITE:
                return math.inf
            return float(1.0 / real.max())
        if method == "growth":
            return self._neutral_by_growth(k)
        raise ConfigError(f"method = {method!r}: expected 'eigen' or 'growth'")

    def _neutral_by_growth(self, k: float) -> float:
        A, B = self.operators(k)

        def smax(q):                              # largest Re s at Ra = exp(q)
            return float(np.max(sla.eigvals(A + math.exp(q) * B).real))
        q_lo = q_hi = 0.0
        if smax(0.0) < 0.0:
            while smax(q_hi) < 0.0:
                q_lo, q_hi = q_hi, q_hi + math.log(10.0)
                if q_hi > math.log(RA_INFINITE):
                    return math.inf
        else:
            while smax(q_lo) >= 0.0:
                q_lo, q_hi = q_lo - math.log(10.0), q_lo
                if q_lo < -math.log(RA_INFINITE):
                    return 0.0
        return math.exp(brentq(smax, q_lo, q_hi, xtol=1e-13, rtol=1e-13, maxiter=200))

    def neutral_curve(self, wavenumbers) -> np.ndarray:
        """Ra(k) at each wavenumber (``inf`` where stable)."""
        return np.array([self.neutral_rayleigh(float(k)) for k in np.asarray(wavenumbers, float)])

    # -- the minimum of the neutral curve -----------------------------------------------
    def critical(self, scan=None) -> tuple[float, float]:
        """(Ra_c, k_c): the minimum of the neutral curve, by a bounded Brent minimiser in ln k.

        A coarse logarithmic scan (or ``scan``, an array of wavenumbers) brackets the
        minimum; the bracket is widened while the minimum sits on its edge.  Returns
        (inf, nan) when the layer is stable at every scanned wavenumber.
        """
        ks = np.geomspace(0.05, 50.0, 25) if scan is None else np.sort(np.asarray(scan, float))
        for _ in range(6):
            ra = self.neutral_curve(ks)
            if not np.any(np.isfinite(ra)):
                return math.inf, math.nan
            i = int(np.argmin(ra))
            if 0 < i < len(ks) - 1:
                break
            # minimum on an edge: extend the scan that way by a decade
            if i == 0:
                ks = np.concatenate([np.geomspace(ks[0] / 10.0, ks[0], 8)[:-1], ks])
            else:
                ks = np.concatenate([ks, np.geomspace(ks[-1], ks[-1] * 10.0, 8)[1:]])
        else:
            log.warning("neutral curve minimum not bracketed in k = %g..%g; reporting the edge",
                        ks[0], ks[-1])
            return float(ra[i]), float(ks[i])
        res = minimize_scalar(lambda q: self.neutral_rayleigh(math.exp(q)), method="bounded",
                              bounds=(math.log(ks[i - 1]), math.log(ks[i + 1])),
                              options={"xatol": 1e-10, "maxiter": 200})
        k_c = math.exp(res.x)
        ra_c = float(res.fun)
        if ra[i] < ra_c:                     # the minimiser should never lose to the scan
            ra_c, k_c = float(ra[i]), float(ks[i])
        return ra_c, k_c
