"""Answers in physical units: a run's numbers as the user's mW m^-2, cm yr^-1, K, km and Myr.

Used by run summaries (``RunResult.physical``, ``convsim run --json``), ``convsim info``,
``convsim compare`` and the xarray views.  The scales themselves are
:class:`convsim.units.Scales` (q_dim = q k dT / d, u_dim = u kappa / d,
T_dim = T_s + dT T, x_dim = d x, t_dim = t d^2 / kappa).
"""

from __future__ import annotations

import math

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from convsim.units import Scales

__all__ = ["PHYSICAL_UNITS", "physical_quantities", "wall_heat_flows"]


#: Units of the physical answers; strings that pint and udunits both read.
PHYSICAL_UNITS = {"heat_flow": "mW m^-2", "velocity": "cm yr^-1", "length": "km",
                  "temperature": "K", "time": "Myr"}

#: nondimensional summary key -> (physical key, kind, doc); the kind picks the converter.
_PHYSICAL = (
    ("vrms", "vrms", "velocity", "root-mean-square velocity of the layer"),
    ("surface_vrms", "surface_vrms", "velocity", "rms horizontal velocity at the top"),
    ("mean_temperature", "mean_temperature", "temperature", "mean temperature of the layer"),
    ("interior_temperature", "interior_temperature", "temperature",
     "temperature of the well-mixed interior"),
    ("lid_thickness", "lid_thickness", "length", "thickness of the stagnant lid"),
    ("time", "time", "time", "simulated time"),
)


def wall_heat_flows(nusselt_top, nusselt_bottom, boundaries=None) -> dict:
    """Nondimensional upward wall heat flows ``{"top": q, "bottom": q}`` (in k dT / d).

    ``Nu = q / (T_bottom - T_top)`` with the mean wall temperatures (convsim.model.diagnostics),
    so with fixed temperatures ``q = Nu (bottom_value - top_value)``; a wall with a fixed
    heat flux has ``q = value`` there; the other wall of such a layer is left out (its
    temperature contrast is not in the summary).  ``boundaries`` is the config's
    [boundaries] table (None: fixed temperatures 0 and 1).  Numbers or arrays.
    """
    b = boundaries
    if b is None or (b.top_heat == "temperature" and b.bottom_heat == "temperature"):
        contrast = 1.0 if b is None else b.bottom_value - b.top_value
        return {"top": nusselt_top * contrast, "bottom": nusselt_bottom * contrast}
    flows = {}
    if b.top_heat == "flux":
        flows["top"] = b.top_value
    if b.bottom_heat == "flux":
        flows["bottom"] = b.bottom_value
    return flows


def physical_quantities(values: dict, scales: Scales, boundaries=None) -> dict:
    """The answers of a run in physical units: ``{name: {"value", "units", "doc"}}``.

    Parameters
    ----------
    values : dict
        Nondimensional numbers by summary key: ``nusselt_top``, ``nusselt_bottom``,
        ``vrms``, ``surface_vrms``, ``mean_temperature``, ``time`` and, when known,
        ``interior_temperature`` and ``lid_thickness``; missing or None keys are skipped.
    scales : Scales
    boundaries : convsim.config.Boundaries, optional
        For the wall heat flows (see :func:`wall_heat_flows`).

    Returns
    -------
    dict
        ``heat_flow_top`` and ``heat_flow_bottom`` in mW m^-2 (q_dim = q k dT / d),
        velocities in cm yr^-1 (u kappa / d), temperatures in K (T_s + dT T), lengths in km
        (d x), time in Myr (t d^2 / kappa).
    """
    convert = {"velocity": scales.velocity_to_cm_per_yr,
               "temperature": scales.temperature_to_kelvin, "length": scales.length_to_km,
               "time": scales.time_to_myr, "heat_flow": scales.heat_flux_to_mw_m2}
    spread = {"velocity": scales.velocity_to_cm_per_yr, "length": scales.length_to_km,
              "temperature": lambda d: d * scales.temperature_contrast,
              "heat_flow": scales.heat_flux_to_mw_m2}         # half-widths: linear parts only
    stats = values.get("statistics") or {}
    if values.get("settled") != "statistically-steady":
        stats = {}                      # steady: its final values are the answer; unfinished:
                                        # its means are not yet settled, so neither are answers

    def entry(kind, value, doc, half=None, start=None):
        out = {"value": float(convert[kind](value)), "units": PHYSICAL_UNITS[kind], "doc": doc}
        if half is not None and math.isfinite(half):
            out["ci95"] = float(spread[kind](half))
            out["doc"] += (f", time mean from t = {float(scales.time_to_myr(start)):.4g} Myr "
                           f"with its 95 % half-width ci95")
        return out

    def pick(key):
        est = stats.get(key) or {}
        if est.get("mean") is not None:
            return float(est["mean"]), est.get("ci95"), est.get("from_time")
        value = values.get(key)
        ok = value is not None and not isinstance(value, (bool, str))
        return (float(value) if ok else None), None, None

    out = {}
    (nu_top, h_top, t0), (nu_bottom, h_bottom, _) = pick("nusselt_top"), pick("nusselt_bottom")
    if nu_top is not None and nu_bottom is not None:
        flows = wall_heat_flows(nu_top, nu_bottom, boundaries)
        b = boundaries
        fixed_t = b is None or (b.top_heat == "temperature" and b.bottom_heat == "temperature")
        contrast = 1.0 if b is None else (b.bottom_value - b.top_value)
        for wall, q in flows.items():
            half = h_top if wall == "top" else h_bottom
            half = half * abs(contrast) if half is not None and fixed_t else None
            out[f"heat_flow_{wall}"] = entry("heat_flow", q,
                                             f"mean upward heat flow through the {wall}",
                                             half, t0)
    for key, name, kind, doc in _PHYSICAL:
        value, half, start = pick(key)
        if value is None:
            continue
        out[name] = entry(kind, value, doc, None if kind == "time" else half, start)
    return out


