"""Viscosity laws, each declared once, in one file of this folder.

A file here that defines a module-level ``DECLARATION`` (a ``Law`` or a ``Modifier``,
see ``convsim.model.laws.declare``) is found by its presence: the config's
``[viscosity]`` choices and keys, the model's viscosity (``convsim.model.rheology``),
the onset solver and the figures all read the registries below.  Standard library
only at import time (the config imports this package); numpy lives inside the law
functions.

``LAWS``        the laws chosen by ``[viscosity] law``, by name (files in name order)
``MODIFIERS``   applied after the chosen law when their parameters switch them on
``PARAMETERS``  every parameter of every declaration, by key (keys are unique)
"""

from __future__ import annotations

import importlib
import pkgutil

from convsim.model.laws.declare import ONSET_USES, LawInputs, Law, Modifier, Parameter

__all__ = ["LAWS", "MODIFIERS", "PARAMETERS", "DEFAULT_LAW", "Law", "Modifier", "Parameter",
           "LawInputs", "ONSET_USES", "declarations", "describe", "problems", "is_uniform"]

DEFAULT_LAW = "constant"


def _discover() -> tuple[dict, dict, dict]:
    laws, modifiers = {}, {}
    for info in sorted(pkgutil.iter_modules(__path__), key=lambda m: m.name):
        module = importlib.import_module(f"{__name__}.{info.name}")
        decl = getattr(module, "DECLARATION", None)
        if decl is None:
            continue
        if decl.name in laws or decl.name in modifiers:
            raise ValueError(f"{module.__name__}: law name {decl.name!r} declared twice")
        (modifiers if isinstance(decl, Modifier) else laws)[decl.name] = decl
    modifiers = dict(sorted(modifiers.items(), key=lambda item: item[1].order))
    parameters = {}
    for decl in (*laws.values(), *modifiers.values()):
        for p in decl.parameters:
            if p.name in parameters or p.name == "law":
                raise ValueError(f"law {decl.name!r}: parameter {p.name!r} declared twice")
            parameters[p.name] = p
    return laws, modifiers, parameters


LAWS, MODIFIERS, PARAMETERS = _discover()


def declarations(name: str) -> list:
    """The declarations a viscosity uses: the law ``name``, then every modifier in order."""
    return [LAWS[name], *MODIFIERS.values()]


def describe(name: str, values) -> str:
    """The law and its active parameters as one line of text (``values``: any object with the
    parameters as attributes, such as the config's [viscosity] table)."""
    parts = [name, LAWS[name].describe(values)]
    parts += [m.describe(values) for m in MODIFIERS.values() if m.active(values)]
    return ", ".join(p for p in parts if p)


def problems(name: str, values) -> list[str]:
    """Messages for rules that involve several keys (empty when the values are consistent)."""
    return [msg for decl in declarations(name) if (msg := decl.check(values))]


def is_uniform(name: str, values) -> bool:
    """True when the viscosity is 1 everywhere: the law is uniform and no active modifier
    changes that."""
    return LAWS[name].uniform(values) and all(
        m.uniform(values) for m in MODIFIERS.values() if m.active(values))
