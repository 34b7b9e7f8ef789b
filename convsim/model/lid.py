"""Stagnant-lid diagnostics and the lid regime of one run: pure functions over arrays.

Nondimensional throughout: heights z in layer depths d (z = 1 the surface),
temperatures in units of the contrast dT, velocities in kappa / d, viscosity over
the reference viscosity.

- Horizontal velocity profile: U(z) = rms over x of u(x, z) on the vertical faces
  (``horizontal_velocity_profile``).
- Lid thickness (``lid_thickness``): the definition of Moresi & Solomatov (1995,
  Phys. Fluids 7, 2154-2162) used again by Solomatov & Moresi (2000, JGR 105,
  21795-21817) (quoted from memory): the base of the lid is the depth where the
  tangent to U(z), taken at the steepest point of the decrease of U between its
  maximum in the upper half of the layer and the surface, crosses U = 0.
  delta_lid = 1 - z_0; 0 where U has its maximum at the surface (a mobile lid).
- Interior temperature T_i (``interior_temperature``): mean of the horizontally
  averaged temperature over the cells with 0.2 <= z <= min(0.8, 1 - delta_lid)
  (below the lid, above the bottom boundary layer; our choice, common practice).
- Rheological temperature scale (``rheological_temperature_scale``):
  dT_rh = -1 / (d ln eta / dT) at T_i and mid-depth; 1 / ln(thermal_contrast) for
  Frank-Kamenetskii, (T_i + T0)^2 / E for Arrhenius (Solomatov 1995, Phys. Fluids
  7, 266-274, quoted from memory).
- Surface mobility (``surface_mobility``): M = v_surface,rms / v_rms, the surface
  rms velocity over the rms velocity of the whole layer, the definition of
  Tackley (2000, Geochem. Geophys. Geosyst. 1, 2000GC000036; quoted from memory).
- Viscosity contrast across the lid (``lid_viscosity_contrast``): horizontally
  averaged viscosity of the top cell row over its mean in the interior band.
- Convection cells (``convection_cells``): the vertical velocity at mid-depth
  w(x, 1/2) changes sign once between two neighbouring cells (and once per cell
  around a periodic box); the upwellings are where w(x, 1/2) peaks in each
  rising segment.  Sign changes of segments weaker than 10 % of max |w| are
  ignored (noise).
- Regime (``regime``), from M and the viscosity contrast of the law over the
  layer's temperature range Delta eta (``law_viscosity_contrast``):
  ``conductive`` when Nu < 1.01 (no convection to classify); ``mobile`` when
  M >= 0.6; ``stagnant-lid`` when M < 0.1 and Delta eta >= 1e3; ``sluggish``
  between them; ``unclassified`` where M is undefined.  The contrast bound
  follows Solomatov (1995) and Moresi & Solomatov (1995), who find the
  stagnant-lid regime above contrasts of about 1e3 to 1e4 (quoted from
  memory); the mobility bounds are our choice, after common practice (a
  stagnant lid moves at a few per cent of the interior or less).
- Lid history (``lid_history``), from the time series of the mobility M(t): a
  decision per time with hysteresis between two bounds (our choice): the lid is
  *closed* once M < closed_ratio (0.3 = CLOSED_SHARE x mobile_ratio) and stays
  so until M >= mobile_ratio (0.6), when it *breaks* (a lid-breaking event, at
  the time of that upward crossing, interpolated linearly between the samples)
  and is *open* until M falls below closed_ratio again (the lid re-forms).  Why
  not the stagnant bound 0.1 as the lower bound: it judges time means, and a lid
  that re-forms within one cycle of periodic lid breaking need not slow its
  surface that far.  Tosi et al. (2015) case 4 (periodic lid breaking, set-up
  from memory), measured: between breaks M falls to 0.12 .. 0.23 in the first
  cycles on 32 x 32 cells (t = 0.05 .. 0.28; to 0.06 .. 0.08 later, as the cycle
  grows) and to 0.16 on 16 x 16 cells; with 0.1 as the lower bound those cycles
  counted no event and a 12 x 12 run to t = 0.075 was called sluggish by its
  mean M.  Half the mobile bound: the surface slows at least twofold between
  breaks.  A series
  that starts between the bounds is undecided until it first reaches one; a run
  counts events in its averaging window, with the decision the samples before the
  window reached.
  ``episodic`` (``regime`` with ``switches``): the lid breaks and re-forms at
  least once in the averaging window (two or more changes of the decision of the
  lid history: M falls below closed_ratio and reaches mobile_ratio again),
  given a viscosity contrast that makes a lid (>= stagnant_contrast); it takes
  precedence over the rule of the means above, which would call such a run
  sluggish or mobile.  Runs that do not switch keep the rule of the means.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from convsim.errors import ConfigError
from convsim.model.grid import Grid
from convsim.model.stokes import face_velocities

__all__ = ["REGIMES", "RegimeThresholds", "regime", "horizontal_velocity_profile",
           "lid_thickness", "interior_temperature", "rheological_temperature_scale",
           "surface_mobility", "lid_viscosity_contrast", "convection_cells",
           "law_viscosity_contrast", "INTERIOR_BAND", "LidHistory", "lid_history"]

REGIMES = ("mobile", "sluggish", "stagnant-lid", "episodic", "conductive", "unclassified")
INTERIOR_BAND = (0.2, 0.8)
CLOSED_SHARE = 0.5      # the lid history's closed bound as a share of the mobile bound


@dataclass(frozen=True)
class RegimeThresholds:
    """Bounds of the regime rule (module doc): mobility M = v_surface / v_rms (``*_ratio``),
    viscosity contrast, conductive Nu; ``closed_ratio``: the lid history's lower bound (the
    lid has re-formed once M(t) < closed_ratio; it breaks when M(t) reaches mobile_ratio)."""

    mobile_ratio: float = 0.6
    stagnant_ratio: float = 0.1
    stagnant_contrast: float = 1.0e3
    conductive_nusselt: float = 1.01
    closed_ratio: float | None = None      # None: mobile_ratio / 2 (module doc)

    def __post_init__(self):
        if self.closed_ratio is None and isinstance(self.mobile_ratio, (int, float)):
            object.__setattr__(self, "closed_ratio", CLOSED_SHARE * self.mobile_ratio)
        for name in ("mobile_ratio", "stagnant_ratio", "stagnant_contrast",
                     "conductive_nusselt", "closed_ratio"):
            value = getattr(self, name)
            if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
                raise ConfigError(f"{name} = {value!r}: expected a positive number")
        for name in ("stagnant_ratio", "closed_ratio"):
            if getattr(self, name) > self.mobile_ratio:
                raise ConfigError(f"{name} = {getattr(self, name)!r}: must not exceed "
                                  f"mobile_ratio = {self.mobile_ratio!r}")

    def text(self) -> str:
        """The rule in one line, for reports and figures."""
        return (f"mobile: M >= {self.mobile_ratio:g}; stagnant-lid: M < "
                f"{self.stagnant_ratio:g} and contrast >= {self.stagnant_contrast:g}; "
                f"sluggish: between; episodic: M(t) falls below {self.closed_ratio:g} and "
                f"reaches {self.mobile_ratio:g} again (twice or more); "
                f"conductive: Nu < {self.conductive_nusselt:g}")


def regime(mobility, viscosity_contrast, nusselt=None,
           thresholds: RegimeThresholds = RegimeThresholds(), switches=None) -> np.ndarray:
    """Regime word of each case (module doc), broadcast over the inputs; object array of str.

    ``switches`` (optional, per case): changes of the lid decision of ``lid_history`` in the
    averaging window; two or more (with a contrast that makes a lid) give ``episodic``.
    """
    m = np.atleast_1d(np.asarray(mobility, float))
    dc = np.atleast_1d(np.asarray(viscosity_contrast, float))
    m, dc = np.broadcast_arrays(m, dc)
    ok = np.isfinite(m) & (m >= 0)
    out = np.full(m.shape, "unclassified", dtype=object)
    out[ok] = "sluggish"
    out[ok & (m >= thresholds.mobile_ratio)] = "mobile"
    out[ok & (m < thresholds.stagnant_ratio) & (dc >= thresholds.stagnant_contrast)] = \
        "stagnant-lid"
    if switches is not None:
        sw = np.broadcast_to(np.atleast_1d(np.asarray(switches, float)), m.shape)
        out[np.isfinite(sw) & (sw >= 2) & (dc >= thresholds.stagnant_contrast)] = "episodic"
    if nusselt is not None:
        nu = np.broadcast_to(np.atleast_1d(np.asarray(nusselt, float)), m.shape)
        out[np.isfinite(nu) & (nu < thresholds.conductive_nusselt)] = "conductive"
    return out


@dataclass(frozen=True)
class LidHistory:
    """What the mobility series says about the lid (module doc, "Lid history").

    Attributes
    ----------
    breaking_times : tuple of float
        Times of the lid-breaking events (upward crossings of mobile_ratio from a closed lid).
    switches : int
        Changes of the decision (closed -> open and open -> closed).
    open_fraction, closed_fraction : float
        Share of the time (weighted by the sample spacing) with the lid open or closed
        (the rest: undecided at the start of the series).
    """

    breaking_times: tuple = ()
    switches: int = 0
    open_fraction: float = math.nan
    closed_fraction: float = math.nan

    def to_dict(self) -> dict:
        return dict(breaking_times=list(self.breaking_times), breaking_events=len(
            self.breaking_times), switches=self.switches, open_fraction=self.open_fraction,
            closed_fraction=self.closed_fraction)


def lid_history(times, mobility, thresholds: RegimeThresholds = RegimeThresholds(),
                start: float | None = None) -> LidHistory:
    """The lid decision along a mobility series M(t) (module doc); non-finite M are skipped.

    ``start``: count events, switches and time shares only from this time on (the
    averaging window); the samples before it still set the decision the window opens with.
    """
    t, m = np.asarray(times, float), np.asarray(mobility, float)
    keep = np.isfinite(t) & np.isfinite(m)
    t, m = t[keep], m[keep]
    first = 0 if start is None else int(np.searchsorted(t, start, side="left"))
    if t.size - first < 2:
        return LidHistory()
    hi, lo = thresholds.mobile_ratio, thresholds.closed_ratio
    state = np.zeros(t.size, dtype=int)          # +1 open, -1 closed, 0 undecided
    current, breaks, switches = 0, [], 0
    for i, value in enumerate(m):
        counted = i >= first
        if value >= hi and current != 1:
            if current == -1 and counted:
                breaks.append(_crossing(t, m, i, hi))
                switches += 1
            current = 1
        elif value < lo and current != -1:
            switches += current == 1 and counted
            current = -1
        state[i] = current
    t, state = t[first:], state[first:]
    weight = np.gradient(t)
    total = float(weight.sum())
    return LidHistory(tuple(breaks), int(switches), float(weight[state == 1].sum() / total),
                      float(weight[state == -1].sum() / total))


def _crossing(t: np.ndarray, m: np.ndarray, i: int, level: float) -> float:
    """Time where M reaches ``level`` between samples i - 1 and i (linear)."""
    if i == 0 or m[i] == m[i - 1]:
        return float(t[i])
    return float(t[i - 1] + (level - m[i - 1]) * (t[i] - t[i - 1]) / (m[i] - m[i - 1]))


def horizontal_velocity_profile(grid: Grid, psi: np.ndarray) -> np.ndarray:
    """U(z): rms over x of the horizontal velocity at each cell-centre height, (nz,).

    u lives on the vertical faces; the side faces count half (reflecting walls) and
    the repeated periodic face not at all.
    """
    u, _ = face_velocities(grid, psi)
    wx = np.ones(grid.nx + 1)
    if grid.periodic:
        wx[-1] = 0.0
    else:
        wx[[0, -1]] = 0.5
    return np.sqrt((u * u) @ wx / wx.sum())


def lid_thickness(z: np.ndarray, profile: np.ndarray) -> float:
    """Lid thickness from the horizontal velocity profile U(z) (module doc), in layer depths.

    Parameters
    ----------
    z : (nz,) increasing heights of the profile values
    profile : (nz,) U(z) >= 0
    """
    z, u = np.asarray(z, float), np.asarray(profile, float)
    upper = z >= 0.5
    if not np.any(upper) or not np.all(np.isfinite(u)):
        return math.nan
    iu = np.flatnonzero(upper)
    top = iu[np.argmax(u[upper])]
    if top >= z.size - 1 or u[top] <= 0.0:
        return 0.0
    slopes = np.diff(u[top:]) / np.diff(z[top:])          # between neighbouring heights
    k = int(np.argmin(slopes))
    if slopes[k] >= 0.0:
        return 0.0
    zs = 0.5 * (z[top + k] + z[top + k + 1])
    us = 0.5 * (u[top + k] + u[top + k + 1])
    z0 = zs - us / slopes[k]
    return float(np.clip(1.0 - z0, 0.0, 1.0 - z[top]))


def _interior_rows(z: np.ndarray, lid: float) -> np.ndarray:
    hi = min(INTERIOR_BAND[1], 1.0 - lid) if np.isfinite(lid) else INTERIOR_BAND[1]
    rows = (z >= INTERIOR_BAND[0]) & (z <= hi)
    if not rows.any():
        rows = np.abs(z - 0.5) == np.min(np.abs(z - 0.5))
    return rows


def _band_mean(values: np.ndarray, rows: np.ndarray, heights) -> float:
    """Mean over the rows of a band, each weighted by its height (rows of a stretched grid;
    ``heights`` None: equal rows, a plain mean)."""
    if heights is None:
        return float(np.mean(values[rows]))
    return float(np.average(values[rows], weights=np.asarray(heights, float)[rows]))


def interior_temperature(z: np.ndarray, temperature_profile: np.ndarray,
                         lid: float = 0.0, heights=None) -> float:
    """T_i: mean of the horizontally averaged temperature in the interior band (module doc),
    rows weighted by their ``heights`` on a stretched grid."""
    z = np.asarray(z, float)
    return _band_mean(np.asarray(temperature_profile, float), _interior_rows(z, lid), heights)


def lid_viscosity_contrast(z: np.ndarray, viscosity_profile: np.ndarray,
                           lid: float = 0.0, heights=None) -> float:
    """Horizontally averaged viscosity of the top row over its interior mean (module doc),
    rows weighted by their ``heights`` on a stretched grid."""
    z, eta = np.asarray(z, float), np.asarray(viscosity_profile, float)
    return float(eta[np.argmax(z)] / _band_mean(eta, _interior_rows(z, lid), heights))


def rheological_temperature_scale(law, temperature: float, z: float = 0.5) -> float:
    """dT_rh = -1 / (d ln eta / dT) at (temperature, z), in units of dT; inf for constant eta.

    ``law(T, z) -> eta`` (a ``ViscosityLaw`` or any callable); the derivative is a
    central difference with step 1e-4 dT.
    """
    h = 1e-4
    lo, hi = float(law(temperature - h, z)), float(law(temperature + h, z))
    slope = (math.log(hi) - math.log(lo)) / (2.0 * h)
    return math.inf if slope == 0.0 else -1.0 / slope


def surface_mobility(surface_vrms: float, vrms: float) -> float:
    """M = v_surface,rms / v_rms (Tackley 2000); NaN where v_rms is not positive."""
    return float(surface_vrms / vrms) if vrms > 0 and np.isfinite(vrms) else math.nan


def convection_cells(grid: Grid, psi: np.ndarray, floor: float = 0.1) -> tuple[int, np.ndarray]:
    """(number of cells, x of the upwellings) from w(x, 1/2) (module doc).

    w on the horizontal faces is interpolated to mid-depth; segments with
    |w| < floor * max|w| are ignored.  No flow gives (0, empty).
    """
    _, w = face_velocities(grid, psi)
    zf = grid.z_node
    wm = np.array([np.interp(0.5, zf, w[:, i]) for i in range(grid.nx)])
    peak = np.max(np.abs(wm)) if wm.size else 0.0
    if not np.isfinite(peak) or peak == 0.0:
        return 0, np.zeros(0)
    strong = np.flatnonzero(np.abs(wm) >= floor * peak)
    signs = np.sign(wm[strong])
    starts = np.concatenate([[0], np.flatnonzero(np.diff(signs) != 0) + 1])
    segments = [strong[s:e] for s, e in zip(starts, np.append(starts[1:], strong.size))]
    if grid.periodic and len(segments) > 1 and signs[0] == signs[-1]:
        segments[0] = np.concatenate([segments.pop(), segments[0]])
    cells = len(segments) - 1 if not grid.periodic else (len(segments) if len(segments) > 1 else 0)
    x = grid.x_cell
    ups = np.array(sorted(float(x[seg[np.argmax(wm[seg])]]) for seg in segments
                          if wm[seg[0]] > 0))
    return int(cells), ups


def law_viscosity_contrast(law, t_low: float, t_high: float, samples: int = 65) -> float:
    """max / min of eta(T, z) over t_low <= T <= t_high, 0 <= z <= 1 (sampled, corners included).

    Rounded to 12 significant digits, so that a contrast of 1e3 set in the config is
    1000.0 here and not 999.9999999999998 (thresholds compare against it).
    """
    T, z = np.meshgrid(np.linspace(t_low, t_high, samples), np.linspace(0.0, 1.0, samples))
    eta = law(T, z)
    return float(f"{eta.max() / eta.min():.12g}")
