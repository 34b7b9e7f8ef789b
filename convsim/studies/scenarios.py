"""Starting configs for typical questions: a commented TOML per scenario (``convsim scenario``).

Each scenario is a config a user edits rather than writes: the layer of an invented
body with its physical properties in a ``[body]`` table, the Rayleigh number those
properties give (``convsim.units.Scales.rayleigh``, written into ``physics.rayleigh``
so the run and its units agree), the viscosity law, a grid and a stop rule; or one
of the published benchmark cases exactly as the bench runs it.  Bodies are invented
(Vesperia, a rocky planet; Quellis, an icy moon); their property values are typical
of rock and of ice (Turcotte & Schubert, Geodynamics, for rock; common practice for
ice near its melting point), uncertain by orders of magnitude in the viscosity.

The reference viscosity of Ra is the viscosity at the cold top (T = 0, z = 1), as
everywhere in convsim: a layer whose viscosity falls by ``thermal_contrast`` towards
its hot base has eta_top = eta_base x thermal_contrast, and its Rayleigh number with
the basal viscosity is Ra x thermal_contrast.
"""

from __future__ import annotations

from dataclasses import dataclass
from importlib import resources

from convsim.errors import ConfigError

__all__ = ["Scenario", "SCENARIOS", "scenario_names", "scenario_toml"]


@dataclass(frozen=True)
class Scenario:
    """A body scenario: what it asks, its [body] values (SI) and the model choices."""

    name: str
    question: str
    title: str
    body: dict                       # key -> (SI value, comment)
    basal_viscosity: float           # Pa s, near the melting point / hot base
    thermal_contrast: float          # eta_top / eta_base of the Frank-Kamenetskii law
    domain: tuple                    # (aspect, nx, nz)
    boundaries: tuple                # (top_flow, bottom_flow, comment)
    end_time: float


SCENARIOS = {
    "rocky-mantle": Scenario(
        "rocky-mantle", "does the mantle of Vesperia convect, how fast, how much heat?",
        "Vesperia mantle (invented planet)",
        {"depth": (1.5e6, "m: a 1500 km mantle"),
         "temperature_contrast": (1200.0, "K: 300 K surface, 1500 K base"),
         "surface_temperature": (300.0, "K"),
         "gravity": (6.0, "m s^-2"),
         "density": (3700.0, "kg m^-3"),
         "thermal_expansivity": (2.5e-5, "K^-1 (rock: 2e-5 to 4e-5)"),
         "thermal_diffusivity": (1.0e-6, "m^2 s^-1 (rock: about 1e-6)"),
         "conductivity": (3.5, "W m^-1 K^-1 (rock: 3 to 5)")},
        basal_viscosity=2.248e20, thermal_contrast=100.0, domain=(2.0, 96, 48),
        boundaries=("free-slip", "free-slip", "free surface above, a liquid core below"),
        end_time=0.02),
    "ice-shell": Scenario(
        "ice-shell", "does the ice shell of Quellis convect, in which regime, with which "
        "surface heat flow?", "Quellis ice shell (invented moon)",
        {"depth": (2.0e4, "m: a 20 km shell"),
         "temperature_contrast": (170.0, "K: 100 K surface, 270 K base near melting"),
         "surface_temperature": (100.0, "K"),
         "gravity": (1.3, "m s^-2"),
         "density": (920.0, "kg m^-3 (ice)"),
         "thermal_expansivity": (1.6e-4, "K^-1 (ice)"),
         "thermal_diffusivity": (1.5e-6, "m^2 s^-1 (ice)"),
         "conductivity": (2.3, "W m^-1 K^-1 (ice near its melting point)")},
        basal_viscosity=1.0e14, thermal_contrast=1.0e4, domain=(2.0, 96, 48),
        boundaries=("no-slip", "free-slip", "a stiff cold surface, an ocean below"),
        end_time=0.05),
}

_CASES = ("1a", "1b", "1c", "2a")


def scenario_names() -> tuple:
    """Every scenario: the body scenarios, then the published cases (``case-1a`` ...)."""
    return tuple(SCENARIOS) + tuple(f"case-{c}" for c in _CASES)


def _fmt(value: float) -> str:
    return f"{value:.6g}"


def _body_toml(s: Scenario) -> tuple[str, float]:
    from convsim.units import scales_from_body
    from types import SimpleNamespace
    eta_top = s.basal_viscosity * s.thermal_contrast
    values = {k: v for k, (v, _) in s.body.items()} | {"reference_viscosity": eta_top}
    scales = scales_from_body(SimpleNamespace(**values))
    lines = ["[body]                  # SI numbers, or strings with units (\"20 km\")"]
    for key, (value, comment) in s.body.items():
        lines.append(f"{key} = {_fmt(value)}".ljust(34) + f"# {comment}")
    lines.append(f"reference_viscosity = {_fmt(eta_top)}".ljust(34)
                 + f"# Pa s at the cold top: {_fmt(s.basal_viscosity)} Pa s at the base "
                 f"x thermal_contrast")
    return "\n".join(lines), scales


def _scenario_toml(s: Scenario) -> str:
    body, scales = _body_toml(s)
    ra = scales.rayleigh()
    aspect, nx, nz = s.domain
    top, bottom, why = s.boundaries
    return f"""# {s.title}: {s.question}
# Written by `convsim scenario {s.name}`: edit the [body] values, then
#   convsim rayleigh THIS.toml     (Ra, scales and onset from the properties)
#   convsim onset THIS.toml        (does it convect? Ra / Ra_c of the box)
#   convsim run THIS.toml          (a run file with snapshots; answers in mW m^-2, cm/yr, K)
#   convsim plot runs/THIS.h5      (figures in physical units)
# Values are invented for an invented body; the viscosity is uncertain by orders of magnitude,
# and Ra with it (research estimates: see the README's Cautions).
title = "{s.title}"

[domain]
aspect = {aspect:g}           # width / depth
nx = {nx}
nz = {nz}

[physics]
# Ra = rho g alpha dT d^3 / (kappa eta_top) from the [body] table below: {ra:.4g}
# (with the basal viscosity: {ra * s.thermal_contrast:.4g})
rayleigh = {_fmt(ra)}

[boundaries]
top_flow = "{top}"        # {why}
bottom_flow = "{bottom}"
top_heat = "temperature"
top_value = 0.0
bottom_heat = "temperature"
bottom_value = 1.0

[viscosity]
law = "frank-kamenetskii"     # eta = exp(-ln(thermal_contrast) T): stiff cold top, soft hot base
thermal_contrast = {_fmt(s.thermal_contrast)}

[start]
kind = "conductive"
perturbation = "noise"
amplitude = 0.01

[stop]
steady = true
end_time = {s.end_time:g}        # in d^2/kappa = {scales.time_to_myr(s.end_time):.4g} Myr

[output]
snapshot_interval = {s.end_time / 20:g}

{body}
"""


def scenario_toml(name: str) -> str:
    """The commented TOML config of a scenario (see :func:`scenario_names`)."""
    if name in SCENARIOS:
        return _scenario_toml(SCENARIOS[name])
    if name.startswith("case-") and name[5:] in _CASES:
        case = name[5:]
        text = resources.files("convsim.studies").joinpath(
            "cases", f"benchmark_case_{case}.toml").read_text(encoding="utf-8")
        return (f"# Written by `convsim scenario {name}`: the published benchmark case {case} as "
                f"`convsim bench` runs it\n# (nondimensional: no [body] table).\n" + text)
    raise ConfigError(f"scenario {name!r}: unknown; allowed: {', '.join(scenario_names())}")
