"""The parts of a viscosity-law declaration: plain data, standard library only.

A law file in this folder declares one ``Law`` (a viscosity chosen by the config's
``[viscosity] law``) or one ``Modifier`` (applied to whatever law is chosen: the
cut-offs, yielding), as a module-level ``DECLARATION``.  The config builds its
``[viscosity]`` table from these declarations, so this module and every law file
import nothing heavy at import time: numpy is imported inside the functions
(``tests/test_rheology.py`` checks that ``import convsim.config`` loads no numpy).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Callable

__all__ = ["Parameter", "LawInputs", "Law", "Modifier", "ONSET_USES"]

#: How the linear-stability (onset) solver uses a declaration: the conductive base state
#: has no flow, so only its profile eta0(z) = eta(T0(z), z) enters.
ONSET_USES = {
    "profile": "evaluated on the conductive profile T0(z) with no flow (strain rate 0)",
    "kinks": "evaluated on the conductive profile; the collocation splits where it switches on",
}


@dataclass(frozen=True)
class Parameter:
    """One parameter of a law: a key of the config's [viscosity] table.

    ``doc`` states the meaning (with the equation where it helps), ``units`` the
    nondimensional unit, ``default`` the value when the key is absent; ``ge``, ``gt``,
    ``le`` bound a number (None: no bound); ``choices`` lists the words a word parameter takes.
    """

    name: str
    doc: str
    default: float | str
    units: str = "-"
    ge: float | None = None
    gt: float | None = None
    le: float | None = None
    choices: tuple | None = None     # a word parameter: its allowed values (default one of them)

    def problem(self, value: Any) -> str | None:
        """Why ``value`` is not allowed (one phrase quoting it), or None when it is."""
        if self.choices is not None:
            if value in self.choices:
                return None
            return (f"{self.name} = {value!r}: expected one of "
                    + ", ".join(repr(c) for c in self.choices))
        if isinstance(value, bool) or not isinstance(value, (int, float)) \
                or not math.isfinite(value):
            return f"{self.name} = {value!r}: expected a finite number"
        bad = ((self.ge is not None and not value >= self.ge)
               or (self.gt is not None and not value > self.gt)
               or (self.le is not None and not value <= self.le))
        if not bad:
            return None
        bounds = [f"{op} {b:g}" for op, b in ((">=", self.ge), (">", self.gt), ("<=", self.le))
                  if b is not None]
        return f"{self.name} = {value!r}: out of range, allowed {' and '.join(bounds)}"


@dataclass(frozen=True)
class LawInputs:
    """What a viscosity may depend on, as arrays of one shape (broadcastable).

    temperature : T (dT units); z : height (layer depths, 0 bottom, 1 top);
    strain_rate : e_II = sqrt(e_ij e_ij / 2), the second invariant of the strain-rate
    tensor (1/(d^2/kappa)); None means no flow (zero); composition : reserved for a
    compositional field (None today).
    """

    temperature: Any
    z: Any
    strain_rate: Any = None
    composition: Any = None


def _never(values) -> bool:
    return False


def _no_text(values) -> str:
    return ""


def _no_problem(values) -> str | None:
    return None


@dataclass(frozen=True)
class Law:
    """A viscosity law eta(inputs), nondimensional, 1 at the reference state T = 0, z = 1.

    Attributes
    ----------
    name : the config word (``[viscosity] law = name``).
    doc : the equation, one line.
    function : ``function(inputs: LawInputs, values) -> eta`` (numpy arrays); ``values``
        has every parameter of the registry as an attribute.
    parameters : its keys of the [viscosity] table.
    uniform : ``uniform(values) -> bool``, True when eta = 1 everywhere (the transform
        Stokes solver then applies).
    onset : a key of ``ONSET_USES``.
    describe : ``describe(values) -> str``, the parameters as shown in figures.
    check : ``check(values) -> message or None``, rules involving several keys.
    undefined : optional ``undefined(T, z, values) -> message or None``, where the law is
        not defined on a conductive profile (the onset solver reports it as bad input).
    needs : the LawInputs fields it reads besides temperature and z ("strain_rate").
    """

    name: str
    doc: str
    function: Callable
    parameters: tuple = ()
    uniform: Callable = _never
    onset: str = "profile"
    describe: Callable = _no_text
    check: Callable = _no_problem
    undefined: Callable | None = None
    needs: tuple = ()

    def __post_init__(self):
        if self.onset not in ONSET_USES:
            raise ValueError(f"law {self.name!r}: onset = {self.onset!r}, expected one of "
                             f"{tuple(ONSET_USES)}")


@dataclass(frozen=True)
class Modifier(Law):
    """A change applied to the chosen law's viscosity (cut-offs, yielding).

    ``function(eta, inputs, values) -> eta`` receives the viscosity so far;
    ``active(values) -> bool`` says whether its parameters switch it on; ``order``
    sorts the modifiers (lower first); ``uniform(values)`` says whether it leaves
    eta = 1 unchanged.
    """

    active: Callable = _never
    order: int = 0
