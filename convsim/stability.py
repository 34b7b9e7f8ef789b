"""Linear stability of the conductive state and the critical Rayleigh number.

The layer 0 <= z <= 1 (z up, unit depth) at infinite Prandtl number obeys, in
the streamfunction form (u = dpsi/dz, w = -dpsi/dx),

    (d_zz - d_xx)[eta (psi_zz - psi_xx)] + 4 d_xz[eta psi_xz] = Ra dT/dx,
    dT/dt + u . grad T = lap T + H,

which for constant viscosity is lap^2 psi = Ra dT/dx.  Times are in d^2/kappa,
temperatures in the scale of Ra, the viscosity eta is nondimensional (1 at
T = 0, z = 1).

Conductive base state.  With no flow, T0'' = -H, so T0(z) = -H z^2/2 + a z + b,
with a, b from the thermal conditions: fixed temperature T0 = value, or fixed
upward heat flux -dT0/dz = value, at z = 0 and z = 1 independently (not flux at
both: the temperature level and the problem at k -> 0 are then undetermined).

Perturbations.  T = T0(z) + Theta(z) cos(k x) e^{s t},
psi = -Phi(z) sin(k x) e^{s t}, so that w = k Phi(z) cos(k x) e^{s t}.  Linearised:

    L Phi = k Ra Theta,                                               (1)
    L = (D^2 + k^2)[eta0 (D^2 + k^2)] - 4 k^2 D[eta0 D],   D = d/dz,
    s Theta = (D^2 - k^2) Theta - k T0'(z) Phi,                       (2)

with eta0(z) = eta(T0(z), z).  The viscosity perturbation eta' = (deta/dT) Theta
multiplies the strain rate of the base state, which is zero (no flow), so it
drops out at linear order: only the base-state profile eta0(z) enters.  For
constant eta, L = (D^2 - k^2)^2.

Boundary conditions at z = 0 and z = 1, each independently: free-slip
Phi = Phi'' = 0 or no-slip Phi = Phi' = 0; fixed temperature Theta = 0 or fixed
flux Theta' = 0.

Discretisation.  Chebyshev collocation on the Gauss-Lobatto points of [0, 1]
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

Viscosity laws (``viscosity_law``): constant; Frank-Kamenetskii
eta = exp(-b T + c (1 - z)), b = ln(thermal_contrast), c = ln(depth_contrast);
Arrhenius eta = exp((E + V (1 - z))/(T + T_off) - E/T_off); each optionally cut
off to [minimum, maximum].  (These mirror the simulator's laws; when a shared
rheology module exists this module should use it.)
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import scipy.linalg as sla
from scipy.optimize import brentq, minimize_scalar

from .errors import ConfigError

__all__ = [
    "Layer", "StabilityProblem", "OnsetResult", "VISCOSITY_LAWS", "viscosity_law",
    "conductive_gradient", "conductive_profile", "chebyshev", "default_points", "growth_rates",
    "neutral_rayleigh", "box_wavenumbers", "analyse_onset",
]

log = logging.getLogger(__name__)

FLOW_CONDITIONS = ("free-slip", "no-slip")
HEAT_CONDITIONS = ("temperature", "flux")
SIDE_CONDITIONS = ("reflecting", "periodic")

#: A neutral Rayleigh number above this is reported as infinite (no steady instability).
RA_INFINITE = 1.0e30


# --------------------------------------------------------------------------------------
# Viscosity laws
# --------------------------------------------------------------------------------------

def _cutoff(eta, minimum, maximum):
    if minimum > 0.0:
        eta = np.maximum(eta, minimum)
    if maximum > 0.0:
        eta = np.minimum(eta, maximum)
    return eta


def _constant(**_):
    return lambda T, z: np.ones(np.broadcast(T, z).shape)


def _frank_kamenetskii(thermal_contrast=1.0, depth_contrast=1.0, **_):
    b = math.log(thermal_contrast)
    c = math.log(depth_contrast)
    return lambda T, z: np.exp(-b * np.asarray(T) + c * (1.0 - np.asarray(z)))


def _arrhenius(activation_energy=0.0, activation_volume=0.0, temperature_offset=1.0, **_):
    E, V, T_off = activation_energy, activation_volume, temperature_offset

    def eta(T, z):
        absolute = np.asarray(T) + T_off
        if np.any(absolute <= 0.0):
            raise ConfigError(
                f"temperature_offset = {T_off!r}: T + temperature_offset must stay > 0 in the "
                f"conductive profile (its minimum is {float(np.min(absolute)) - T_off:g}); "
                "allowed: a larger offset")
        return np.exp((E + V * (1.0 - np.asarray(z))) / absolute - E / T_off)
    return eta


#: Viscosity laws by name: each maps its parameters to eta(T, z).
VISCOSITY_LAWS = {
    "constant": _constant,
    "frank-kamenetskii": _frank_kamenetskii,
    "arrhenius": _arrhenius,
}


def viscosity_law(name: str, *, thermal_contrast: float = 1.0, depth_contrast: float = 1.0,
                  activation_energy: float = 0.0, activation_volume: float = 0.0,
                  temperature_offset: float = 1.0, minimum: float = 0.0,
                  maximum: float = 0.0) -> Callable[[np.ndarray, np.ndarray], np.ndarray]:
    """The nondimensional viscosity eta(T, z) of a named law.

    Parameters
    ----------
    name : str
        One of ``VISCOSITY_LAWS``: 'constant' (eta = 1); 'frank-kamenetskii'
        (eta = exp(-b T + c (1 - z)), b = ln thermal_contrast, c = ln depth_contrast);
        'arrhenius' (eta = exp((E + V (1 - z))/(T + T_off) - E/T_off)).
    thermal_contrast, depth_contrast : float
        Frank-Kamenetskii contrasts eta(T=0)/eta(T=1) and eta(z=0)/eta(z=1), both > 0.
    activation_energy, activation_volume, temperature_offset : float
        Arrhenius E, V and T_off, in the temperature scale; T_off > 0.
    minimum, maximum : float
        Cut-offs of eta (0: none).

    Returns
    -------
    callable
        ``eta(T, z)`` on arrays, dimensionless.
    """
    if name not in VISCOSITY_LAWS:
        raise ConfigError(f"viscosity law = {name!r}: unknown; allowed: "
                          + ", ".join(repr(n) for n in VISCOSITY_LAWS))
    for key, value in (("thermal_contrast", thermal_contrast), ("depth_contrast", depth_contrast),
                       ("temperature_offset", temperature_offset)):
        if not (math.isfinite(value) and value > 0.0):
            raise ConfigError(f"{key} = {value!r}: expected a finite number > 0")
    for key, value in (("activation_energy", activation_energy),
                       ("activation_volume", activation_volume),
                       ("minimum", minimum), ("maximum", maximum)):
        if not (math.isfinite(value) and value >= 0.0):
            raise ConfigError(f"{key} = {value!r}: expected a finite number >= 0")
    base = VISCOSITY_LAWS[name](thermal_contrast=thermal_contrast, depth_contrast=depth_contrast,
                                activation_energy=activation_energy,
                                activation_volume=activation_volume,
                                temperature_offset=temperature_offset)
    if minimum == 0.0 and maximum == 0.0:
        return base
    return lambda T, z: _cutoff(base(T, z), minimum, maximum)


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
    """

    top_flow: str = "free-slip"
    bottom_flow: str = "free-slip"
    top_heat: str = "temperature"
    top_value: float = 0.0
    bottom_heat: str = "temperature"
    bottom_value: float = 1.0
    internal_heating: float = 0.0
    viscosity: Callable = field(default=None, compare=False)

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
            object.__setattr__(self, "viscosity", _constant())


def _profile_coefficients(layer: Layer) -> tuple[float, float]:
    """(a, b) of T0 = -H z^2/2 + a z + b."""
    H = layer.internal_heating
    if layer.top_heat == "temperature" and layer.bottom_heat == "temperature":
        b = layer.bottom_value
        a = layer.top_value - b + 0.5 * H
    elif layer.bottom_heat == "flux":        # -T0'(0) = q_bottom, T0(1) = T_top
        a = -layer.bottom_value
        b = layer.top_value + 0.5 * H - a
    else:                                    # -T0'(1) = q_top, T0(0) = T_bottom
        a = H - layer.top_value
        b = layer.bottom_value
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
        self.points = n = points
        z, D1 = chebyshev(n)
        D2 = D1 @ D1
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
        g2 = D2 @ g
        h = g2 + g1 * g1
        D3 = D1 @ D2
        self._L0 = D2 @ D2 + 2.0 * g1[:, None] * D3 + h[:, None] * D2
        self._L2 = -2.0 * D2 - 2.0 * g1[:, None] * D1 + np.diag(h)
        self._L4 = np.eye(n + 1)
        # Boundary rows of Phi: value at both ends, then the slip condition.
        flow_row = {"free-slip": D2, "no-slip": D1}
        self._phi_rows = np.array([0, 1, n - 1, n])
        self._phi_bc = np.vstack([np.eye(n + 1)[0], flow_row[layer.top_flow][0],
                                  flow_row[layer.bottom_flow][n], np.eye(n + 1)[n]])
        # Theta: interior unknowns; boundary values eliminated through the conditions.
        heat_row = {"temperature": np.eye(n + 1), "flux": D1}
        bc = np.vstack([heat_row[layer.top_heat][0], heat_row[layer.bottom_heat][n]])
        inner = np.arange(1, n)
        ends = np.array([0, n])
        ext = np.zeros((n + 1, n - 1))
        ext[inner, np.arange(n - 1)] = 1.0
        ext[ends] = -np.linalg.solve(bc[:, ends], bc[:, inner])
        self._ext = ext                       # theta_full = ext @ theta_interior
        self._inner = inner
        self._D2 = D2
        rhs = np.diag(1.0 / eta)
        rhs[self._phi_rows] = 0.0
        self._rhs = rhs @ ext                 # right side of (1) per unit k Ra Theta_interior

    # -- operators --------------------------------------------------------------------
    def operators(self, k: float) -> tuple[np.ndarray, np.ndarray]:
        """(A, B) with s Theta = (A + Ra B) Theta on the interior nodes, at wavenumber k.

        A = D^2 - k^2 (with Theta's conditions), B = -k^2 T0' L^{-1} (with Phi's).
        """
        k2 = k * k
        L = self._L0 + k2 * self._L2 + (k2 * k2) * self._L4
        L[self._phi_rows] = self._phi_bc
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


# --------------------------------------------------------------------------------------
# Convenience functions and the front door
# --------------------------------------------------------------------------------------

def growth_rates(rayleigh: float, k: float, layer: Layer | None = None,
                 points: int | None = None) -> np.ndarray:
    """Growth rates s of the modes exp(i k x + s t) at (Ra, k), largest real part first.

    See ``StabilityProblem.growth_rates``; ``layer`` defaults to the free-slip layer
    heated from below (T = 1 at z = 0, T = 0 at z = 1).
    """
    return StabilityProblem(layer or Layer(), points).growth_rates(rayleigh, k)


def neutral_rayleigh(k: float, layer: Layer | None = None, points: int | None = None,
                     method: str = "eigen") -> float:
    """Neutral Rayleigh number Ra(k); see ``StabilityProblem.neutral_rayleigh``."""
    return StabilityProblem(layer or Layer(), points).neutral_rayleigh(k, method)


def box_wavenumbers(aspect: float, sides: str, modes) -> np.ndarray:
    """Horizontal wavenumbers a box admits: k_n = n pi / aspect (reflecting), 2 n pi / aspect (periodic)."""
    if not (math.isfinite(aspect) and aspect > 0.0):
        raise ConfigError(f"aspect = {aspect!r}: expected a finite number > 0")
    if sides not in SIDE_CONDITIONS:
        raise ConfigError(f"sides = {sides!r}: expected one of "
                          + ", ".join(repr(s) for s in SIDE_CONDITIONS))
    factor = math.pi if sides == "reflecting" else 2.0 * math.pi
    return factor * np.asarray(modes, dtype=float) / aspect


@dataclass(frozen=True)
class OnsetResult:
    """Onset of convection in a layer and in a box of it.

    Attributes
    ----------
    critical_rayleigh, critical_wavenumber : float
        Minimum of the neutral curve of the infinite layer, Ra_c and k_c (1/depth).
    box_critical_rayleigh : float
        Smallest neutral Ra over the box's admissible wavenumbers.
    box_mode, box_wavenumber : int, float
        The mode n of that minimum and its wavenumber k_n.
    wavenumbers, neutral_rayleigh : ndarray
        The neutral curve Ra(k) (``inf`` where stable).
    modes, mode_wavenumbers, mode_rayleigh : ndarray
        Admissible box modes inside the curve's range (and the box minimum), with Ra(k_n).
    rayleigh, supercriticality : float or None
        The operating Ra, if given, and Ra / box_critical_rayleigh.
    aspect, sides, points : float, str, int
        The box and the collocation degree used.
    resolution_error : float
        |Ra(k_c) at 1.5 x points - Ra_c| / Ra_c: an estimate of the discretisation error.
    """

    critical_rayleigh: float
    critical_wavenumber: float
    box_critical_rayleigh: float
    box_mode: int | None
    box_wavenumber: float
    wavenumbers: np.ndarray
    neutral_rayleigh: np.ndarray
    modes: np.ndarray
    mode_wavenumbers: np.ndarray
    mode_rayleigh: np.ndarray
    rayleigh: float | None
    supercriticality: float | None
    aspect: float
    sides: str
    points: int
    resolution_error: float

    def to_dict(self) -> dict:
        """Plain JSON-ready mapping; non-finite numbers become None."""
        def num(v):
            return float(v) if v is not None and math.isfinite(v) else None

        def arr(a):
            return [num(v) for v in np.asarray(a, float)]
        return {
            "critical_rayleigh": num(self.critical_rayleigh),
            "critical_wavenumber": num(self.critical_wavenumber),
            "box_critical_rayleigh": num(self.box_critical_rayleigh),
            "box_mode": self.box_mode,
            "box_wavenumber": num(self.box_wavenumber),
            "rayleigh": num(self.rayleigh),
            "supercriticality": num(self.supercriticality),
            "aspect": self.aspect,
            "sides": self.sides,
            "points": self.points,
            "resolution_error": num(self.resolution_error),
            "neutral_curve": {"wavenumber": arr(self.wavenumbers),
                              "rayleigh": arr(self.neutral_rayleigh)},
            "box_modes": {"mode": [int(n) for n in self.modes],
                          "wavenumber": arr(self.mode_wavenumbers),
                          "rayleigh": arr(self.mode_rayleigh)},
        }


def _box_minimum(problem: StabilityProblem, k_c: float, aspect: float, sides: str):
    """(Ra, n, k_n) of the box's least stable admissible mode."""
    spacing = box_wavenumbers(aspect, sides, [1])[0]
    if math.isfinite(k_c):
        centre = k_c / spacing
        candidates = range(max(1, math.floor(centre) - 1), math.ceil(centre) + 2)
    else:
        candidates = range(1, 4)
    best = (math.inf, None, math.nan)
    for n in candidates:
        k_n = n * spacing
        ra = problem.neutral_rayleigh(k_n)
        if ra < best[0]:
            best = (ra, n, k_n)
    return best


def _check_wavenumbers(wavenumbers) -> np.ndarray:
    ks = np.asarray(wavenumbers, dtype=float).ravel()
    if ks.size < 1 or not np.all(np.isfinite(ks)) or np.any(ks <= 0.0):
        raise ConfigError(f"wavenumbers = {wavenumbers!r}: expected one or more finite "
                          "numbers > 0")
    return np.sort(ks)


def analyse_onset(rayleigh: float | None = None, *, aspect: float = 1.0,
                  sides: str = "reflecting", top_flow: str = "free-slip",
                  bottom_flow: str = "free-slip", top_heat: str = "temperature",
                  top_value: float = 0.0, bottom_heat: str = "temperature",
                  bottom_value: float = 1.0, internal_heating: float = 0.0,
                  viscosity: str | Callable = "constant", viscosity_parameters: dict | None = None,
                  wavenumbers=None, curve_points: int = 100,
                  points: int | None = None) -> OnsetResult:
    """Critical Rayleigh number of the conductive state, for the layer and for a box.

    Solves the linear problem of the module docstring: the neutral curve Ra(k), its
    minimum (Ra_c, k_c) by a bounded minimiser, and the box's own critical value
    min_n Ra(k_n) over k_n = n pi / aspect (reflecting sides) or 2 n pi / aspect
    (periodic).

    Parameters
    ----------
    rayleigh : float, optional
        Operating Rayleigh number, for the supercriticality Ra / box Ra_c.
    aspect : float
        Box width / depth.
    sides : str
        'reflecting' or 'periodic'.
    top_flow, bottom_flow, top_heat, top_value, bottom_heat, bottom_value, internal_heating
        As in ``Layer``.
    viscosity : str or callable
        A law name of ``VISCOSITY_LAWS`` (parameters in ``viscosity_parameters``, see
        ``viscosity_law``) or eta(T, z) itself.
    wavenumbers : array_like, optional
        Where to evaluate the neutral curve (1/depth); default ``curve_points``
        log-spaced values over k_c/4 .. 4 k_c.
    points : int, optional
        Chebyshev degree of the vertical discretisation (default ``default_points``).
        The result's ``resolution_error`` is the relative change of Ra(k_c) at 1.5
        times this degree; a warning is logged above 1e-6.

    Returns
    -------
    OnsetResult
    """
    if isinstance(viscosity, str):
        eta = viscosity_law(viscosity, **(viscosity_parameters or {}))
    elif callable(viscosity):
        eta = viscosity
    else:
        raise ConfigError(f"viscosity = {viscosity!r}: expected a law name or eta(T, z)")
    layer = Layer(top_flow=top_flow, bottom_flow=bottom_flow, top_heat=top_heat,
                  top_value=top_value, bottom_heat=bottom_heat, bottom_value=bottom_value,
                  internal_heating=internal_heating, viscosity=eta)
    box_wavenumbers(aspect, sides, [1])     # validates aspect and sides
    if rayleigh is not None and not (math.isfinite(rayleigh) and rayleigh > 0.0):
        raise ConfigError(f"rayleigh = {rayleigh!r}: expected a finite number > 0")
    problem = StabilityProblem(layer, points)

    ra_c, k_c = problem.critical()
    if wavenumbers is None:
        if isinstance(curve_points, bool) or not isinstance(curve_points, int) \
                or curve_points < 2:
            raise ConfigError(f"curve_points = {curve_points!r}: expected a whole number >= 2")
        centre = k_c if math.isfinite(k_c) else math.pi
        ks = np.geomspace(centre / 4.0, centre * 4.0, curve_points)
    else:
        ks = _check_wavenumbers(wavenumbers)
    curve = problem.neutral_curve(ks)
    box_ra, box_n, box_k = _box_minimum(problem, k_c, aspect, sides)

    spacing = box_wavenumbers(aspect, sides, [1])[0]
    n_lo = max(1, math.ceil(ks[0] / spacing - 1e-12))
    n_hi = max(n_lo - 1, math.floor(ks[-1] / spacing + 1e-12))
    modes = list(range(n_lo, min(n_hi, n_lo + 199) + 1))
    if box_n is not None and box_n not in modes:
        modes = sorted(modes + [box_n])
    modes = np.array(modes, dtype=int)
    mode_k = box_wavenumbers(aspect, sides, modes)
    mode_ra = np.array([box_ra if n == box_n else problem.neutral_rayleigh(k)
                        for n, k in zip(modes, mode_k)])

    resolution = math.nan
    if math.isfinite(ra_c):
        finer = StabilityProblem(layer, min(512, problem.points * 3 // 2))
        resolution = abs(finer.neutral_rayleigh(k_c) - ra_c) / ra_c
        if not resolution <= 1e-6:
            log.warning("onset: Ra_c changes by %.2g (relative) at %d points; raise points "
                        "(now %d)", resolution, finer.points, problem.points)

    supercrit = None
    if rayleigh is not None:
        supercrit = rayleigh / box_ra if math.isfinite(box_ra) else 0.0
    log.info("onset: Ra_c = %.6g at k_c = %.6g; box Ra_c = %.6g (mode %s)", ra_c, k_c,
             box_ra, box_n)
    return OnsetResult(critical_rayleigh=ra_c, critical_wavenumber=k_c,
                       box_critical_rayleigh=box_ra, box_mode=box_n, box_wavenumber=box_k,
                       wavenumbers=ks, neutral_rayleigh=curve, modes=modes,
                       mode_wavenumbers=mode_k, mode_rayleigh=mode_ra,
                       rayleigh=None if rayleigh is None else float(rayleigh),
                       supercriticality=supercrit, aspect=float(aspect), sides=sides,
                       points=problem.points, resolution_error=resolution)
