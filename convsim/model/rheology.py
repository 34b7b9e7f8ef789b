"""The viscosity of a declared law, evaluated on arrays.

Each law and modifier is declared once in ``convsim.model.laws`` (one file each):
its function, parameters (doc, units, default, range), whether it is uniform, how
the onset solver uses it and how it is shown.  This module holds a law's parameter
values (``ViscosityLaw``) and evaluates it:

    eta = modifier_k( ... modifier_1( law(inputs) ) ... )

where the modifiers (yielding, then the cut-offs) apply in their declared order when
their parameters switch them on.  All viscosities are nondimensional, 1 at the
reference state T = 0, z = 1 (the cold top), the viscosity of the Rayleigh number.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from convsim.model import laws as _laws
from convsim.model.laws import LawInputs

__all__ = ["ViscosityLaw", "LAWS", "LawInputs", "viscosity", "base_state_viscosity",
           "reference_viscosity"]

#: The laws chosen by name (declarations of ``convsim.model.laws``).
LAWS = _laws.LAWS


def _value(declared, value):
    """A parameter value as stored: a word for a word parameter, else a float."""
    if declared.choices:
        if value not in declared.choices:
            raise ValueError(declared.problem(value))
        return value
    return float(value)


@dataclass(frozen=True, init=False)
class ViscosityLaw:
    """A law by name and the values of every declared parameter (plain numbers).

    ``ViscosityLaw("frank-kamenetskii", thermal_contrast=1e3)``; parameters not given
    take their declared defaults; each parameter is also an attribute
    (``law.thermal_contrast``).  Unknown names and keys raise ``ValueError``.
    """

    name: str
    values: tuple          # ((key, value), ...) in the order of laws.PARAMETERS

    def __init__(self, name: str = _laws.DEFAULT_LAW, **parameters):
        if name not in LAWS:
            raise ValueError(f"viscosity law {name!r}: expected one of {tuple(LAWS)}")
        unknown = set(parameters) - set(_laws.PARAMETERS)
        if unknown:
            raise ValueError(f"viscosity parameters {sorted(unknown)}: unknown; allowed: "
                             f"{', '.join(_laws.PARAMETERS)}")
        values = tuple((key, _value(p, parameters.get(key, p.default)))
                       for key, p in _laws.PARAMETERS.items())
        object.__setattr__(self, "name", name)
        object.__setattr__(self, "values", values)

    def __getattr__(self, key):
        if key.startswith("__") or key in ("name", "values"):
            raise AttributeError(key)
        for name, value in self.values:
            if name == key:
                return value
        raise AttributeError(f"viscosity law has no parameter {key!r}")

    @classmethod
    def from_table(cls, table) -> "ViscosityLaw":
        """The law of any object with ``law`` and the declared parameters as attributes
        (the config's [viscosity] table): every declared key is read, none is dropped."""
        return cls(table.law, **{key: getattr(table, key) for key in _laws.PARAMETERS})

    @property
    def parameters(self) -> dict:
        return dict(self.values)

    @property
    def is_constant(self) -> bool:
        """True when eta = 1 everywhere (after the modifiers)."""
        return _laws.is_uniform(self.name, self)

    @property
    def needs_strain_rate(self) -> bool:
        """True when an active part of the law reads the strain rate (the Stokes problem is
        then nonlinear)."""
        return any("strain_rate" in d.needs for d in self._active())

    def _active(self) -> list:
        return [LAWS[self.name]] + [m for m in _laws.MODIFIERS.values() if m.active(self)]

    def __call__(self, T, z, strain_rate=None, composition=None) -> np.ndarray:
        return viscosity(self, T, z, strain_rate, composition)


def viscosity(law: ViscosityLaw, T, z, strain_rate=None, composition=None, *,
              modifiers: bool = True, strain_modifiers: bool = True) -> np.ndarray:
    """eta(T, z[, strain rate, composition]) of the law, after its active modifiers.

    Parameters
    ----------
    law : ViscosityLaw
    T, z : array_like
        Temperature (dT units) and height (layer depths); they broadcast.
    strain_rate : array_like, optional
        Second invariant of the strain-rate tensor, for laws that read it.
    composition : array_like, optional
        Reserved for a compositional field.
    modifiers : bool
        False gives the chosen law alone (no cut-offs, no yielding).
    strain_modifiers : bool
        False leaves out the modifiers that read the strain rate (yielding) and keeps the
        others (the cut-offs).

    Returns
    -------
    ndarray
        Nondimensional viscosity, the broadcast shape of the inputs.
    """
    inputs = LawInputs(np.asarray(T, float), np.asarray(z, float),
                       None if strain_rate is None else np.asarray(strain_rate, float),
                       composition)
    eta = LAWS[law.name].function(inputs, law)
    if modifiers:
        for modifier in _laws.MODIFIERS.values():
            if modifier.active(law) and (strain_modifiers
                                         or "strain_rate" not in modifier.needs):
                eta = modifier.function(eta, inputs, law)
    return eta


def base_state_viscosity(law: ViscosityLaw, T, z) -> np.ndarray:
    """eta(T, z) of a state without flow, as the onset (linear stability) solver uses it.

    The law and its active modifiers at zero strain rate: the conductive base state has no
    flow, and the strain-rate dependence of eta multiplies the base strain rate (zero) at
    linear order, so only this profile enters.
    """
    T = np.asarray(T, float)
    return viscosity(law, T, z, strain_rate=np.zeros(np.broadcast(T, z).shape))


def reference_viscosity(law: ViscosityLaw, T, z) -> np.ndarray:
    """eta(T, z) that a Rayleigh number is taken with: the law and its cut-offs, without the
    modifiers that read the strain rate.

    Yielding is left out: without flow its harmonic mean gives 2 eta_lin (the factor 2 of
    Tosi et al. 2015), and a stress-dependent viscosity has no value of its own at a
    reference state.  So Ra = 100 "at the cold top" of the viscoplastic benchmark means
    eta_lin(T = 0, z = 1) = 1, as in the benchmark (Tosi et al. 2015, G-cubed 16,
    2175-2196, from memory), and a yield stress does not change the Rayleigh number.
    """
    return viscosity(law, T, z, strain_modifiers=False)
