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

Discretisation: Chebyshev collocation, see ``convsim.analysis._stability_operator``.

Viscosity laws (``viscosity_law``): the simulator's own, from ``convsim.model.rheology``
(constant; Frank-Kamenetskii eta = exp(-b T + c (1 - z)), b = ln(thermal_contrast),
c = ln(depth_contrast); Arrhenius eta = exp((E + V (1 - z))/(T + T_off) - E/T_off);
each optionally cut off to [minimum, maximum]).  A cut-off puts a kink in eta0(z);
``cutoff_breaks`` finds where, so that the collocation can split there.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
from scipy.optimize import brentq

from convsim.model.choices import SIDE_CONDITIONS
from convsim.analysis._stability_operator import (RA_INFINITE, Layer, StabilityProblem, chebyshev,
                                  conductive_gradient, conductive_profile, default_points)
from convsim.model import laws, rheology
from convsim.errors import ConfigError

__all__ = [
    "Layer", "StabilityProblem", "OnsetResult", "VISCOSITY_LAWS", "viscosity_law",
    "conductive_gradient", "conductive_profile", "cutoff_breaks", "chebyshev",
    "default_points", "growth_rates", "neutral_rayleigh", "box_wavenumbers", "analyse_onset",
    "RA_INFINITE",
]

log = logging.getLogger(__name__)



# --------------------------------------------------------------------------------------
# Viscosity laws: the simulator's own (convsim.model.rheology), checked for this use
# --------------------------------------------------------------------------------------

#: Viscosity laws by name: the registry of ``convsim.model.rheology``.
VISCOSITY_LAWS = rheology.LAWS


def viscosity_law(name: str, **parameters) -> Callable[[np.ndarray, np.ndarray], np.ndarray]:
    """The nondimensional viscosity eta(T, z) of a declared law, as the onset solver uses it.

    Parameters
    ----------
    name : str
        One of ``VISCOSITY_LAWS``: 'constant' (eta = 1); 'frank-kamenetskii'
        (eta = exp(-b T + c (1 - z)), b = ln thermal_contrast, c = ln depth_contrast);
        'arrhenius' (eta = exp((E + V (1 - z))/(T + T_off) - E/T_off)); see
        ``convsim.model.laws``.
    **parameters : float
        Any declared parameter (``convsim.model.laws.PARAMETERS``: thermal_contrast,
        depth_contrast, activation_energy, activation_volume, temperature_offset, minimum,
        maximum, ...); each is checked against its declared range.

    Returns
    -------
    callable
        ``eta(T, z)`` on arrays, dimensionless: the law and the modifiers that act on a
        state without flow (``rheology.base_state_viscosity``; a yield stress acts through
        the strain rate, zero in the conductive state).  Where a declaration says the law is
        undefined on the profile (Arrhenius with T + T_off <= 0) it raises ConfigError.
    """
    if name not in VISCOSITY_LAWS:
        raise ConfigError(f"viscosity law = {name!r}: unknown; allowed: "
                          + ", ".join(repr(n) for n in VISCOSITY_LAWS))
    for key, value in parameters.items():
        declared = laws.PARAMETERS.get(key)
        if declared is None:
            raise ConfigError(f"{key}: unknown viscosity parameter; allowed: "
                              + ", ".join(laws.PARAMETERS))
        if (message := declared.problem(value)) is not None:
            raise ConfigError(message)
    law = rheology.ViscosityLaw(name, **parameters)
    checks = [d.undefined for d in laws.declarations(name) if d.undefined is not None]

    def eta(T, z):
        for check in checks:
            if (message := check(np.ravel(T), np.ravel(z), law)) is not None:
                raise ConfigError(message)
        return rheology.base_state_viscosity(law, T, z)
    return eta


def cutoff_breaks(eta: Callable, layer: Layer, minimum: float = 0.0, maximum: float = 0.0,
                  samples: int = 2049, gap: float = 1e-4) -> tuple:
    """Heights where a cut-off of eta switches on along the conductive profile.

    Parameters
    ----------
    eta : callable
        The law without cut-offs, eta(T, z).
    layer : Layer
        Gives the conductive profile T0(z).
    minimum, maximum : float
        The cut-offs (0: none).
    samples : int
        Uniform samples of z in which sign changes of ln eta - ln cut are sought
        (then refined by Brent's method to 1e-13).
    gap : float
        Crossings closer than this to a wall, or to each other, are dropped: blocks
        thinner than that cost more accuracy (conditioning) than the kink does.

    Returns
    -------
    tuple of float
        Sorted heights 0 < z < 1, for ``Layer.breaks``.
    """
    z = np.linspace(0.0, 1.0, samples)

    def log_eta(zz):
        return np.log(np.asarray(eta(conductive_profile(layer, zz), zz), dtype=float))
    found = []
    for cut in (minimum, maximum):
        if cut <= 0.0:
            continue
        values = log_eta(z) - math.log(cut)
        below = values < 0.0
        for i in np.nonzero(below[:-1] != below[1:])[0]:
            found.append(brentq(lambda zz: float(log_eta(np.array([zz]))[0]) - math.log(cut),
                                z[i], z[i + 1], xtol=1e-13))
    breaks = []
    for b in sorted(found):
        if gap <= b <= 1.0 - gap and (not breaks or b - breaks[-1] > gap):
            breaks.append(float(b))
    return tuple(breaks)


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
    breaks : tuple of float
        Heights where a viscosity cut-off switches on (collocation split there).
    layer : Layer
        The layer analysed (for further queries, e.g. growth rates at the box mode).
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
    breaks: tuple = ()
    layer: Layer | None = field(default=None, repr=False, compare=False)

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
            "viscosity_breaks": [float(b) for b in self.breaks],
            "neutral_curve": {"wavenumber": arr(self.wavenumbers),
                              "rayleigh": arr(self.neutral_rayleigh)},
            "box_modes": {"mode": [int(n) for n in self.modes],
                          "wavenumber": arr(self.mode_wavenumbers),
                          "rayleigh": arr(self.mode_rayleigh)},
        }


def _box_minimum(problem: StabilityProblem, k_c: float, aspect: float, sides: str):
    """(Ra, n, k_n) of the box's least stable admissible mode.

    Only the modes next to k_c (n within one of k_c / k_1) are evaluated, which finds the
    minimum when Ra(k) has a single minimum, as for every layer tested here.
    """
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
    thermal = dict(top_flow=top_flow, bottom_flow=bottom_flow, top_heat=top_heat,
                   top_value=top_value, bottom_heat=bottom_heat, bottom_value=bottom_value,
                   internal_heating=internal_heating)
    layer = _onset_layer(thermal, viscosity, viscosity_parameters)
    box_wavenumbers(aspect, sides, [1])     # validates aspect and sides
    if rayleigh is not None and not (math.isfinite(rayleigh) and rayleigh > 0.0):
        raise ConfigError(f"rayleigh = {rayleigh!r}: expected a finite number > 0")
    problem = StabilityProblem(layer, points)

    ra_c, k_c = problem.critical()
    ks = _curve_wavenumbers(k_c, wavenumbers, curve_points)
    curve = problem.neutral_curve(ks)
    box_ra, box_n, box_k = _box_minimum(problem, k_c, aspect, sides)
    modes, mode_k, mode_ra = _box_modes(problem, ks, aspect, sides, box_ra, box_n)
    resolution = _resolution_error(layer, problem, ra_c, k_c)

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
                       points=problem.points, resolution_error=resolution,
                       breaks=layer.breaks, layer=layer)


def _onset_layer(thermal: dict, viscosity, viscosity_parameters: dict | None) -> Layer:
    """The ``Layer`` of ``analyse_onset``: its law from a name (with any cut-off kinks as
    collocation breaks) or eta(T, z) itself."""
    breaks = ()
    if isinstance(viscosity, str):
        params = dict(viscosity_parameters or {})
        eta = viscosity_law(viscosity, **params)
        # a modifier whose onset use is 'kinks' (the cut-offs) splits the collocation
        cuts = {p.name: params.pop(p.name, p.default)
                for m in laws.MODIFIERS.values() if m.onset == "kinks" for p in m.parameters}
        if any(cuts.values()):
            breaks = cutoff_breaks(viscosity_law(viscosity, **params), Layer(**thermal), **cuts)
    elif callable(viscosity):
        eta = viscosity
    else:
        raise ConfigError(f"viscosity = {viscosity!r}: expected a law name or eta(T, z)")
    return Layer(viscosity=eta, breaks=breaks, **thermal)


def _curve_wavenumbers(k_c: float, wavenumbers, curve_points) -> np.ndarray:
    """Where to draw the neutral curve: the user's wavenumbers, or ``curve_points`` log-spaced
    values over k_c/4 .. 4 k_c (around pi when there is no finite k_c)."""
    if wavenumbers is not None:
        return _check_wavenumbers(wavenumbers)
    if isinstance(curve_points, bool) or not isinstance(curve_points, int) or curve_points < 2:
        raise ConfigError(f"curve_points = {curve_points!r}: expected a whole number >= 2")
    centre = k_c if math.isfinite(k_c) else math.pi
    return np.geomspace(centre / 4.0, centre * 4.0, curve_points)


def _box_modes(problem, ks: np.ndarray, aspect: float, sides: str, box_ra: float, box_n):
    """The box's modes n whose wavenumbers fall in the curve's range (at most 200, plus the
    critical mode), their wavenumbers and their neutral Rayleigh numbers."""
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
    return modes, mode_k, mode_ra


def _resolution_error(layer: Layer, problem, ra_c: float, k_c: float) -> float:
    """Relative change of Ra(k_c) at 1.5 times the Chebyshev degree (NaN without a finite
    Ra_c); logs a warning above 1e-6."""
    if not math.isfinite(ra_c):
        return math.nan
    finer = StabilityProblem(layer, min(512, problem.points * 3 // 2))
    resolution = abs(finer.neutral_rayleigh(k_c) - ra_c) / ra_c
    if not resolution <= 1e-6:
        log.warning("onset: Ra_c changes by %.2g (relative) at %d points; raise points "
                    "(now %d)", resolution, finer.points, problem.points)
    return resolution
