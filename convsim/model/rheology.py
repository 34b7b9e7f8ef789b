"""Viscosity laws eta(T, z) as pure functions, and a registry by name.

All laws are nondimensional and equal 1 at the reference state T = 0, z = 1 (the
cold top), which is the viscosity the Rayleigh number is defined with.

- ``constant``:          eta = 1
- ``frank-kamenetskii``: eta = exp(-b T + c (1 - z)),  b = ln(thermal_contrast),
                         c = ln(depth_contrast)  (the linearised Arrhenius law)
- ``arrhenius``:         eta = exp((E + V (1 - z)) / (T + T0) - E / T0)

Cut-offs: eta is clipped to [minimum, maximum] where those are set (> 0).
To add a law, write one function ``law(T, z, params) -> eta`` here and add it to
``LAWS``; the config's ``viscosity.law`` choices list must name it too.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["ViscosityLaw", "LAWS", "viscosity"]


@dataclass(frozen=True)
class ViscosityLaw:
    """Parameters of a viscosity law (plain numbers, as in the config's [viscosity] table)."""

    law: str = "constant"
    thermal_contrast: float = 1.0
    depth_contrast: float = 1.0
    activation_energy: float = 0.0
    activation_volume: float = 0.0
    temperature_offset: float = 1.0
    minimum: float = 0.0
    maximum: float = 0.0

    def __post_init__(self):
        if self.law not in LAWS:
            raise ValueError(f"viscosity law {self.law!r}: expected one of {tuple(LAWS)}")

    @property
    def is_constant(self) -> bool:
        """True when eta = 1 everywhere (after the cut-offs)."""
        if self.law == "constant":
            return True
        if self.law == "frank-kamenetskii":
            return self.thermal_contrast == 1.0 and self.depth_contrast == 1.0
        return self.activation_energy == 0.0 and self.activation_volume == 0.0

    def __call__(self, T: np.ndarray, z: np.ndarray) -> np.ndarray:
        return viscosity(self, T, z)


def _constant(T, z, p):
    return np.ones(np.broadcast(T, z).shape)


def _frank_kamenetskii(T, z, p):
    b = np.log(p.thermal_contrast)
    c = np.log(p.depth_contrast)
    return np.exp(-b * T + c * (1.0 - z))


def _arrhenius(T, z, p):
    t0 = p.temperature_offset
    # guard against T + T0 <= 0 (unphysical, can appear transiently in a diverging run)
    absolute = np.maximum(T + t0, 1e-3 * t0)
    return np.exp((p.activation_energy + p.activation_volume * (1.0 - z)) / absolute
                  - p.activation_energy / t0)


LAWS = {"constant": _constant, "frank-kamenetskii": _frank_kamenetskii, "arrhenius": _arrhenius}


def viscosity(law: ViscosityLaw, T: np.ndarray, z: np.ndarray) -> np.ndarray:
    """eta(T, z) for the given law, clipped to the cut-offs; T and z broadcast."""
    eta = LAWS[law.law](np.asarray(T, float), np.asarray(z, float), law)
    if law.minimum > 0.0 or law.maximum > 0.0:
        eta = np.clip(eta, law.minimum if law.minimum > 0 else None,
                      law.maximum if law.maximum > 0 else None)
    return eta
