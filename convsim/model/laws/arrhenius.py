"""Arrhenius viscosity: eta = exp((E + V (1 - z))/(T + T0) - E/T0).

E, V and T0 are in units of the temperature contrast; T + T0 is the absolute
temperature on that scale, so eta = 1 at T = 0, z = 1 (common practice).
"""

from convsim.model.laws.declare import Law, Parameter


def arrhenius(x, p):
    """eta = exp((E + V (1 - z)) / (T + T0) - E / T0).

    T + T0 <= 0 is unphysical but can appear transiently in a diverging run; the
    absolute temperature is floored at 1e-3 T0 there.
    """
    import numpy as np
    t0 = p.temperature_offset
    absolute = np.maximum(np.asarray(x.temperature, float) + t0, 1e-3 * t0)
    return np.exp((p.activation_energy + p.activation_volume * (1.0 - np.asarray(x.z)))
                  / absolute - p.activation_energy / t0)


def _undefined(T, z, p) -> str | None:
    """On a conductive profile T + T0 must stay > 0 (the floor is for transients only)."""
    lowest = min(float(t) for t in T)
    if lowest + p.temperature_offset > 0.0:
        return None
    return (f"temperature_offset = {p.temperature_offset!r}: T + temperature_offset must "
            f"stay > 0 in the conductive profile (its minimum is {lowest:g}); allowed: a "
            f"larger offset")


DECLARATION = Law(
    name="arrhenius", doc="eta = exp((E + V (1 - z))/(T + T0) - E/T0)", function=arrhenius,
    parameters=(
        Parameter("activation_energy", "E in eta = exp((E + V (1 - z))/(T + T0) - E/T0)",
                  units="dT", default=0.0, ge=0.0, le=1.0e4),
        Parameter("activation_volume", "V (depth term, see activation_energy)", units="dT",
                  default=0.0, ge=0.0, le=1.0e4),
        Parameter("temperature_offset",
                  "T0, the surface temperature on the absolute scale", units="dT",
                  default=1.0, gt=0.0, le=1.0e4),
    ),
    uniform=lambda p: p.activation_energy == 0.0 and p.activation_volume == 0.0,
    describe=lambda p: (f"E = {p.activation_energy:g}, V = {p.activation_volume:g}, "
                        f"T0 = {p.temperature_offset:g}"),
    undefined=_undefined)
