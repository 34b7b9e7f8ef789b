"""The layer a config describes: its Rayleigh numbers and the [body] table, resolved once.

The model works with one Rayleigh number, Ra_top = rho g alpha dT d^3 / (kappa eta_top),
taken with the viscosity of the law at its own reference state (eta = 1 at T = 0,
z = 1, the cold top).  A config may state Ra at another viscosity
(``physics.rayleigh_reference``):

=========  =======================================  ===========================
reference  state (T, z)                             Ra_top
=========  =======================================  ===========================
top        (T_top, 1)                               Ra eta(T_top, 1)
bottom     (T_bottom, 0)                            Ra eta(T_bottom, 0)
interior   ((T_top + T_bottom)/2, 1/2)              Ra eta(T_mid, 1/2)
=========  =======================================  ===========================

with T_top, T_bottom the wall temperatures (0 and 1 by default; a wall with a fixed
flux counts as 0 at the top, 1 at the bottom) and eta the law after its cut-offs but
without yielding (``rheology.reference_viscosity``: a stress-dependent viscosity has no
value of its own at a state; without flow the harmonic mean would double it), so
that Ra_ref eta_ref = Ra_top (Ra is inversely proportional to the viscosity it is
taken with).  ``internal_rayleigh`` is the one place this conversion is made;
``rayleigh_numbers`` gives Ra at all three states for the summaries.

A complete [body] table (every required property) gives Ra itself,
rho g alpha dT d^3 / (kappa eta_ref) with eta_ref its ``reference_viscosity`` at the
stated reference; with ``activation_energy`` > 0, the Arrhenius law in units of dT
(``convsim.units.Scales.arrhenius``); with ``maximum_viscosity``, the upper cut-off in units
of the law's reference viscosity.  ``resolve`` writes these into the config: a key
the config does not set takes the body's value; a key it sets must agree to
``AGREEMENT`` relative (it is then kept as written), or the run is refused with one line
naming both keys.
"""

from __future__ import annotations

import logging
import math

import numpy as np

from convsim.config import Config
from convsim.errors import ConfigError
from convsim.model.rheology import ViscosityLaw, reference_viscosity, viscosity

__all__ = ["REFERENCES", "reference_states", "internal_rayleigh", "rayleigh_numbers",
           "viscosity_law", "resolve", "body_scales", "AGREEMENT", "smallest_viscosity",
           "runaway_velocity"]

log = logging.getLogger(__name__)

REFERENCES = ("top", "bottom", "interior")
#: Relative difference allowed between a config key and the value its [body] implies.
AGREEMENT = 1.0e-3


def viscosity_law(config: Config) -> ViscosityLaw:
    """The model's ``ViscosityLaw`` from the config's [viscosity] table."""
    return ViscosityLaw.from_table(config.viscosity)


def reference_states(config: Config) -> dict:
    """``{reference: (T, z)}`` for top, bottom and interior (see the module docstring)."""
    b = config.boundaries
    t_top = b.top_value if b.top_heat == "temperature" else 0.0
    t_bottom = b.bottom_value if b.bottom_heat == "temperature" else 1.0
    return {"top": (t_top, 1.0), "bottom": (t_bottom, 0.0),
            "interior": (0.5 * (t_top + t_bottom), 0.5)}


def _eta(config: Config, reference: str) -> float:
    T, z = reference_states(config)[reference]
    return float(reference_viscosity(viscosity_law(config), np.array(T), np.array(z)))


def internal_rayleigh(config: Config, value: float | None = None) -> float:
    """Ra with the law's reference viscosity (eta = 1), from Ra stated at ``rayleigh_reference``.

    Parameters
    ----------
    config : Config
    value : float, optional
        A Rayleigh number stated at the config's reference (default ``physics.rayleigh``;
        also used for the continuation stages).
    """
    value = config.physics.rayleigh if value is None else float(value)
    return value * _eta(config, config.physics.rayleigh_reference)


def rayleigh_numbers(config: Config) -> dict:
    """Ra taken with the viscosity at the top, the bottom and the interior state."""
    ra = internal_rayleigh(config)
    return {name: ra / _eta(config, name) for name in REFERENCES}


def smallest_viscosity(config: Config, samples: int = 65) -> float:
    """The smallest viscosity of the law (after cut-offs) over the wall temperatures and depths.

    Sampled on ``samples`` x ``samples`` points of [T_top, T_bottom] x [0, 1] (the laws are
    monotonic in T and z, so the corners decide; the samples cover cut-offs too).
    """
    states = reference_states(config)
    lo, hi = sorted((states["top"][0], states["bottom"][0]))
    T, z = np.meshgrid(np.linspace(lo, hi, samples), np.linspace(0.0, 1.0, samples))
    return float(viscosity(viscosity_law(config), T, z).min())


def runaway_velocity(rayleigh: float, eta_min: float, factor: float) -> float:
    """The vrms above which a run is declared diverged (kappa/d).

    ``factor`` x max(10, Ra_max^(2/3)), Ra_max = Ra / eta_min the Rayleigh number of the
    least viscous fluid of the layer: boundary-layer theory gives vrms ~ Ra^(2/3) for
    the convecting part (common practice), so a velocity a hundred times that scale is
    no physical flow.  With Ra at the cold top and constant viscosity this is the former
    rule max(1e3, 100 Ra^(2/3)); a stagnant lid, whose interior is far less viscous than
    its top, gets the scale of its interior.
    """
    ra_max = rayleigh / max(eta_min, 1e-300)
    return factor * max(10.0, ra_max ** (2.0 / 3.0))


def body_scales(config: Config):
    """``convsim.units.Scales`` of a complete [body] table, else None."""
    body = config.body
    if body is None:
        return None
    from convsim import units       # the unit library only for a [body] (start-up time)
    required = [p for p in units.PROPERTIES if p.required]
    if not all(getattr(body, p.body_key) not in (0.0, "") for p in required):
        if body.activation_energy:
            raise ConfigError("body.activation_energy: an Arrhenius law from [body] needs every "
                              "property of Ra too (" + ", ".join(f"body.{p.body_key}"
                                                                   for p in required) + ")")
        return None
    return units.scales_from_body(body)


def _agree(config: Config, key: str, value: float, body_keys: str) -> dict:
    """``{key: value}`` for ``replace``: the body's value for a key the config does not set;
    a key it sets is kept if it agrees with [body] to ``AGREEMENT``, else refused."""
    section, name = key.split(".")
    current = getattr(getattr(config, section), name)
    if key in config.given:
        if not (math.isfinite(current) and abs(current - value) <= AGREEMENT * abs(value)):
            raise ConfigError(f"{key} = {current!r} disagrees with {value:.6g} from {body_keys}; "
                              f"remove {key} (the body's value is used) or make them agree "
                              f"to {AGREEMENT:.1%}")
        return {}
    if current != value:
        log.info("%s = %.6g from %s", key, value, body_keys)
    return {f"{section}__{name}": value}


def resolve(config: Config) -> Config:
    """The config with Ra (and an Arrhenius law) from a complete [body] table written in.

    A config without a complete [body] is returned unchanged.  See the module docstring.
    """
    scales = body_scales(config)
    if scales is None:
        return config
    changes = _agree(config, "physics.rayleigh", scales.rayleigh(),
                     "[body] (rho g alpha dT d^3 / (kappa eta_ref))")
    if scales.activation_energy > 0.0:
        if "viscosity.law" in config.given and config.viscosity.law != "arrhenius":
            raise ConfigError(f"viscosity.law = {config.viscosity.law!r}: body.activation_energy "
                              "gives an Arrhenius law; set 'arrhenius' or leave the key out")
        changes["viscosity__law"] = "arrhenius"
        for name, value in scales.arrhenius().items():
            changes.update(_agree(config, f"viscosity.{name}", value,
                                  "body.activation_energy, activation_volume, "
                                  "surface_temperature, temperature_contrast"))
    resolved = config.replace(**changes)
    if scales.maximum_viscosity > 0.0:
        # eta_max / eta_ref in Pa s, times the law's value at the reference (before cut-offs)
        T, z = reference_states(resolved)[resolved.physics.rayleigh_reference]
        uncut = viscosity_law(resolved.replace(viscosity__minimum=0.0, viscosity__maximum=0.0))
        value = (scales.maximum_viscosity / scales.reference_viscosity
                 * float(reference_viscosity(uncut, np.array(T), np.array(z))))
        resolved = resolved.replace(**_agree(config, "viscosity.maximum", value,
                                             "body.maximum_viscosity / reference_viscosity"))
    return resolved
