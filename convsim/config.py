"""Run configuration: TOML text -> frozen dataclasses, one per table.

Every key is declared once, in the dataclasses below, with its meaning, units,
default and allowed values.  The loader rejects unknown tables and keys (with
a suggestion for a misspelt one), wrong types and out-of-range values; each
message names the key, the value and what is allowed.  The README's config
reference is generated from these declarations (``reference_markdown``).

Only the standard library, ``convsim.errors`` and the plain-data law declarations
(``convsim.model.laws``, whose [viscosity] keys are built here) are imported.
"""

from __future__ import annotations

import dataclasses
import difflib
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from convsim.errors import ConfigError
from convsim.model.choices import (ADVECTION_SCHEMES, FACTOR_REUSE, FLOW_CONDITIONS, LIMITERS,
                                   NONLINEAR_METHODS, SIDE_CONDITIONS, THERMAL_CONDITIONS,
                                   TIME_SCHEMES)
import convsim.model.laws as _laws   # plain-data law declarations (no numpy at import)

__all__ = [
    "Config", "Domain", "Physics", "Boundaries", "Viscosity", "Start", "Numerics", "Stop",
    "Output", "Tracer", "Body", "load_config", "parse_config", "apply_overrides", "to_toml",
    "reference_markdown",
]


def _key(doc, units="-", *, ge=None, gt=None, le=None, lt=None, choices=None, default=None,
         default_factory=None, optional=False, quantity=False):
    """A config key: its doc line, units and allowed values travel in the field metadata.

    ``quantity`` keys (the physical properties of [body]) also take a string with units,
    such as "30 km"; ``convsim.units`` converts and checks it (dimension included).
    """
    meta = dict(doc=doc, units=units, ge=ge, gt=gt, le=le, lt=lt, choices=choices,
                optional=optional, quantity=quantity)
    if default_factory is not None:
        return field(default_factory=default_factory, metadata=meta)
    return field(default=default, metadata=meta)


def _quantity(doc, units, *, le):
    """A physical property of [body]: >= 0 (0: not given), a number in ``units`` or a quantity string."""
    return _key(doc, units, default=0.0, ge=0.0, le=le, quantity=True)


@dataclass(frozen=True)
class Domain:
    """Box geometry and grid: 0 <= x <= aspect, 0 <= z <= 1, z up (length unit: layer depth)."""

    aspect: float = _key("width of the box divided by its depth", "layer depth",
                         default=1.0, gt=0.0, le=64.0)
    nx: int = _key("number of cells across the box (x)", "cells", default=64, ge=4, le=4096)
    nz: int = _key("number of cells through the depth (z)", "cells", default=64, ge=4, le=4096)
    wall_refinement: float = _key(
        "grid refinement towards the top and bottom walls: beta of the corner heights "
        "z = (1 + tanh(beta (2 s - 1)) / tanh(beta)) / 2 of equally spaced s; middle / wall "
        "cell height about cosh(beta)^2; 0: uniform grid", default=0.0, ge=0.0, le=4.0)


@dataclass(frozen=True)
class Physics:
    """Nondimensional numbers of the layer."""

    rayleigh: float = _key("thermal Rayleigh number, with the viscosity at rayleigh_reference "
                           "(with a complete [body]: its Ra, or agree with it to 0.1 %)",
                           default=1.0e4, gt=0.0, le=1.0e13)
    rayleigh_reference: str = _key(
        "where the viscosity of rayleigh is taken: the cold top (T = top wall, z = 1), the hot "
        "bottom (T = bottom wall, z = 0) or the interior (mid temperature, z = 0.5)",
        default="top", choices=("top", "bottom", "interior"))
    internal_heating: float = _key(
        "internal heat production H in dT/dt + u.grad T = lap T + H", "dT/(d^2/kappa)",
        default=0.0, ge=-1.0e6, le=1.0e6)


@dataclass(frozen=True)
class Boundaries:
    """Mechanical and thermal conditions on the four sides."""

    top_flow: str = _key("mechanical condition at z = 1", default="free-slip",
                         choices=FLOW_CONDITIONS)
    bottom_flow: str = _key("mechanical condition at z = 0", default="free-slip",
                            choices=FLOW_CONDITIONS)
    sides: str = _key("side walls: reflecting (free-slip and insulating) or periodic",
                      default="reflecting", choices=SIDE_CONDITIONS)
    top_heat: str = _key("thermal condition at z = 1: fixed temperature or fixed heat flux",
                         default="temperature", choices=THERMAL_CONDITIONS)
    top_value: float = _key("temperature at z = 1, or upward heat flux -dT/dz there",
                            "dT or dT/d", default=0.0, ge=-1.0e6, le=1.0e6)
    bottom_heat: str = _key("thermal condition at z = 0: fixed temperature or fixed heat flux",
                            default="temperature", choices=THERMAL_CONDITIONS)
    bottom_value: float = _key("temperature at z = 0, or upward heat flux -dT/dz there",
                               "dT or dT/d", default=1.0, ge=-1.0e6, le=1.0e6)


def _viscosity_table():
    """The [viscosity] table, built from the law declarations of ``convsim.model.laws``.

    ``law`` chooses one of ``laws.LAWS``; every parameter of every law and modifier is a
    key with its declared doc, units, default and range (a law's keys say which law they
    belong to).  A new law file adds its choice and keys here without an edit.
    """
    fields = [("law", "str", _key("viscosity law", default=_laws.DEFAULT_LAW,
                                  choices=tuple(_laws.LAWS)))]
    owner = {p.name: d for d in (*_laws.LAWS.values(), *_laws.MODIFIERS.values())
             for p in d.parameters}
    for key, p in _laws.PARAMETERS.items():
        doc = p.doc if isinstance(owner[key], _laws.Modifier) else f"{owner[key].name}: {p.doc}"
        if p.choices:
            fields.append((key, "str", _key(doc, p.units, default=p.default, choices=p.choices)))
        else:
            fields.append((key, "float", _key(doc, p.units, default=float(p.default), ge=p.ge,
                                              gt=p.gt, le=p.le)))
    cls = dataclasses.make_dataclass("Viscosity", fields, frozen=True)
    cls.__module__ = __name__
    cls.__doc__ = ("Viscosity law eta(T, z), nondimensional, equal to 1 at T = 0, z = 1 "
                   "(the reference of Ra); optionally yielding (strain-rate dependent) and "
                   "cut off.")
    return cls


Viscosity = _viscosity_table()


@dataclass(frozen=True)
class Start:
    """Initial temperature field."""

    kind: str = _key("conductive profile, one-cell guess, or a snapshot of another run",
                     default="conductive", choices=("conductive", "one-cell", "snapshot"))
    perturbation: str = _key("added to a conductive start: a single mode, seeded noise, none",
                             default="mode", choices=("mode", "noise", "none"))
    amplitude: float = _key("amplitude of the perturbation", "dT", default=0.01, ge=0.0, le=1.0)
    mode: int = _key("horizontal mode n of cos(n pi x / aspect) sin(pi z)", default=1, ge=1,
                     le=1024)
    seed: int = _key("random seed of the noise perturbation", default=0, ge=0, le=2**32 - 1)
    file: str = _key("run file to start from (kind = snapshot); interpolated to this grid",
                     "path", default="")
    continuation_key: str = _key(
        "the config key the continuation values set (the final stage has the config's own "
        "value)", default="physics.rayleigh",
        choices=("physics.rayleigh", "viscosity.thermal_contrast", "viscosity.depth_contrast",
                 "viscosity.activation_energy"))
    continuation: tuple = _key(
        "values of continuation_key (Rayleigh numbers by default) run to steady state, in order, "
        "before the config's own", default_factory=tuple)
    coarse_grid: int = _key(
        "grid sequencing: first run this config to steady state (or, with mean_precision, "
        "to statistical steady state) on a coarser grid (half the cells through the depth, "
        "but not fewer than this; nx in proportion), then start from its final temperature "
        "interpolated to the run's grid (0: off; ignored on a grid not finer, with kind = "
        "snapshot and with continuation stages)",
        default=0, ge=0, le=4096)


@dataclass(frozen=True)
class Numerics:
    """Discretisation and solver choices."""

    advection: str = _key("advection scheme: TVD (second order, limited) or first-order upwind",
                          default="tvd", choices=ADVECTION_SCHEMES)
    limiter: str = _key(
        "flux limiter of the TVD scheme; koren: the third-order kappa = 1/3 interpolation, "
        "limited; unlimited: the same without a limiter (not TVD; smooth steady cases)",
        default="van-leer", choices=LIMITERS)
    time_scheme: str = _key("IMEX integrator: sbdf2 (second order) or euler (first order)",
                            default="sbdf2", choices=TIME_SCHEMES)
    cfl: float = _key("Courant number of the adaptive time step", default=0.4, gt=0.0, le=2.0)
    max_dt: float = _key("largest allowed time step", "d^2/kappa", default=1.0e-2, gt=0.0, le=10.0)
    time_scale_fraction: float = _key(
        "largest step as a fraction of the flow's time scale (the change time of the advective "
        "tendency, at most the conductive time 1/pi^2), so that the step resolves how the flow "
        "changes (growth rates within 0.5 %); 0: off", default=0.04, ge=0.0, le=10.0)
    stokes_solver: str = _key(
        "Stokes back end; auto picks the fastest that handles the problem", default="auto",
        choices=("auto", "transform", "cholmod", "superlu"))
    factor_reuse: str = _key(
        "variable viscosity: refactor every step (always) or reuse the factor as a CG "
        "preconditioner while it pays (adaptive)", default="adaptive",
        choices=FACTOR_REUSE)
    stokes_tolerance: float = _key(
        "relative residual ||b - A psi|| / ||b|| of every variable-viscosity flow solve (each "
        "step's solve starts from psi extrapolated in time); 0: automatic, 1e-10 for a run "
        "that stops at steady state (stop.steady), 1e-6 otherwise (1.9x faster steps at "
        "contrast 1e5 and 256 x 256, Nu and vrms unchanged to 1e-10; see DEVELOPERS.md)",
        default=0.0, ge=0.0, le=1.0e-3)
    flow_error_tolerance: float = _key(
        "each step's variable-viscosity flow solve also stops when its conjugate gradients "
        "estimate the flow's relative error in the dissipation norm, sqrt(r M^-1 r / b psi), "
        "at or below this (one solve per step when psi extrapolated in time is close); "
        "0: automatic, 1e-5 for a run that follows the flow in time, off for one that stops at "
        "steady state (stop.steady)", default=0.0, ge=0.0, le=1.0e-3)
    nonlinear_solver: str = _key(
        "strain-rate-dependent (yielding) viscosity: iteration of the nonlinear Stokes problem, "
        "Picard or Newton (Picard steps until the residual is below 1e-2, then Newton with a "
        "line search)", default="newton", choices=NONLINEAR_METHODS)
    nonlinear_tolerance: float = _key(
        "the nonlinear Stokes iteration stops at ||A(eta(psi)) psi - b|| <= this x ||b||",
        default=1.0e-8, ge=1.0e-9, le=1.0e-2)
    nonlinear_max_iterations: int = _key("nonlinear Stokes iterations per solve at most",
                                         default=50, ge=1, le=10000)


@dataclass(frozen=True)
class Stop:
    """When a run ends: the first of end time, step limit, steady state, or mean precision."""

    end_time: float = _key("nondimensional end time (0: none)", "d^2/kappa", default=0.0, ge=0.0,
                           le=1.0e6)
    max_steps: int = _key("step limit", "steps", default=200000, ge=1, le=10**9)
    steady: bool = _key("stop at steady state", default=True)
    steady_tolerance: float = _key(
        "steady when max|dT/dt| / Nu and the relative drift of Nu and vrms stay below this",
        default=1.0e-6, gt=0.0, le=1.0)
    newton: bool = _key("when the run has nearly settled, solve the steady equations by "
                        "Newton-Krylov iteration instead of waiting for the transient to decay",
                        default=True)
    runaway_factor: float = _key(
        "diverged when vrms exceeds this times the boundary-layer velocity scale "
        "max(10, Ra_max^(2/3)), Ra_max with the smallest viscosity of the law over the layer",
        default=100.0, gt=0.0, le=1.0e12)
    newton_threshold: float = _key(
        "try Newton once max|dT/dt| / Nu falls below this (retried later if it fails)",
        default=0.1, gt=0.0, le=1.0e9)
    newton_decay: float = _key(
        "also try Newton once max|dT/dt| has decayed to this fraction of its peak in the "
        "stage (0: off)", default=0.1, ge=0.0, lt=1.0)
    mean_precision: float = _key(
        "stop when the time means of Nu at top and bottom are known to this relative 95 % "
        "half-width, after the spin-up (0: off)", default=0.0, ge=0.0, le=1.0)


@dataclass(frozen=True)
class Output:
    """What the run file records and when."""

    snapshot_interval: float = _key("time between snapshots (0: only the last state)",
                                    "d^2/kappa", default=0.0, ge=0.0, le=1.0e6)
    snapshot_steps: int = _key("steps between snapshots (0: none by count)", "steps",
                               default=0, ge=0, le=10**9)
    series_every: int = _key("record the diagnostic time series every this many steps", "steps",
                             default=1, ge=1, le=10**6)


@dataclass(frozen=True)
class Tracer:
    """Optional passive dye: advected with the flow (TVD), no buoyancy, insulating walls."""

    enabled: bool = _key("carry a passive dye", default=False)
    kind: str = _key("starting shape: a layer between two heights, a round blob, or an "
                     "expression in x and z", default="layer",
                     choices=("layer", "blob", "expression"))
    layer_bottom: float = _key("layer: dye = 1 from this height", "d", default=0.0, ge=0.0,
                               le=1.0)
    layer_top: float = _key("layer: dye = 1 up to this height", "d", default=0.1, ge=0.0,
                            le=1.0)
    blob_x: float = _key("blob: centre x", "d", default=0.5, ge=0.0, le=64.0)
    blob_z: float = _key("blob: centre z", "d", default=0.5, ge=0.0, le=1.0)
    blob_radius: float = _key("blob: radius", "d", default=0.1, gt=0.0, le=64.0)
    expression: str = _key("expression: numpy expression in x, z (aspect, pi, e; sin, exp, "
                           "tanh, where, ...), e.g. \"where(z > 0.9, 1.0, 0.0)\"", default="")
    diffusivity: float = _key("dye diffusivity over the thermal diffusivity (0: none)", "kappa",
                              default=0.0, ge=0.0, le=1.0e3)


@dataclass(frozen=True)
class Body:
    """Optional physical properties of the layer, for units in figures and `convsim rayleigh`.

    Each value is a number in the units shown or a string with units ("1500 km",
    "1e21 Pa s"); 0 means not given.
    """

    depth: float = _quantity("layer thickness d", "m", le=1.0e8)
    temperature_contrast: float = _quantity("temperature difference across the layer", "K",
                                            le=1.0e5)
    surface_temperature: float = _quantity("temperature at the top", "K", le=1.0e5)
    gravity: float = _quantity("gravitational acceleration g", "m s^-2", le=1.0e3)
    density: float = _quantity("reference density rho", "kg m^-3", le=1.0e5)
    thermal_expansivity: float = _quantity("thermal expansivity alpha", "K^-1", le=1.0)
    thermal_diffusivity: float = _quantity("thermal diffusivity kappa", "m^2 s^-1", le=1.0)
    conductivity: float = _quantity("thermal conductivity k", "W m^-1 K^-1", le=1.0e4)
    reference_viscosity: float = _quantity(
        "viscosity at physics.rayleigh_reference (the cold top by default)", "Pa s", le=1.0e40)
    activation_energy: float = _quantity(
        "Arrhenius activation energy E* (sets viscosity.law = 'arrhenius'; needs "
        "surface_temperature)", "kJ mol^-1", le=1.0e4)
    activation_volume: float = _quantity("Arrhenius activation volume V*", "cm^3 mol^-1",
                                         le=1.0e3)
    maximum_viscosity: float = _quantity(
        "upper cut-off of the viscosity (sets viscosity.maximum)", "Pa s", le=1.0e40)
    heat_production: float = _quantity("internal heat production per unit mass", "W kg^-1",
                                       le=1.0)


@dataclass(frozen=True)
class Config:
    """A whole run configuration, one attribute per TOML table."""

    domain: Domain = field(default_factory=Domain)
    physics: Physics = field(default_factory=Physics)
    boundaries: Boundaries = field(default_factory=Boundaries)
    viscosity: Viscosity = field(default_factory=Viscosity)
    start: Start = field(default_factory=Start)
    numerics: Numerics = field(default_factory=Numerics)
    stop: Stop = field(default_factory=Stop)
    output: Output = field(default_factory=Output)
    tracer: Tracer = field(default_factory=Tracer)
    body: Body | None = None
    title: str = ""
    #: the ``section.key`` names set in the file, by --set or by ``replace`` (not compared)
    given: frozenset = field(default=frozenset(), compare=False, repr=False)

    def replace(self, **tables) -> "Config":
        """A copy with whole tables or ``section__key`` values replaced (``physics__rayleigh=1e5``).

        Validated exactly like a config file: the changed config is written out as a
        mapping and read back by ``parse_config`` (unknown keys, types, ranges, choices and
        the rules between keys), so bad values raise ``ConfigError`` naming the key.
        """
        data = to_dict(self)
        given = set(self.given)
        for name, value in tables.items():
            if "__" in name:
                section, key = name.split("__", 1)
                table = data.setdefault(section, {})
                if not isinstance(table, dict):
                    raise ConfigError(f"{section}: not a table")
                table[key] = _plain(value)
                given.add(f"{section}.{key}")
            elif dataclasses.is_dataclass(value):
                data[name] = {k: _plain(v) for k, v in dataclasses.asdict(value).items()}
                given.update(f"{name}.{k}" for k in data[name])
            elif value is None:
                data.pop(name, None)
            else:
                data[name] = _plain(value)
        new = parse_config(data, source="Config.replace")
        # what the caller set (the file's keys and these), not every key to_dict wrote out
        return dataclasses.replace(new, given=frozenset(given))


def _plain(value):
    """A numpy scalar as the Python number it holds; lists and tuples element by element."""
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if hasattr(value, "item") and hasattr(value, "dtype") and getattr(value, "ndim", 1) == 0:
        return value.item()
    return value


TABLES = {f.name: f.default_factory for f in dataclasses.fields(Config)
          if f.default_factory is not dataclasses.MISSING}
TABLES["body"] = Body
TOP_LEVEL_KEYS = ("title",)


def _allowed(meta) -> str:
    if meta["choices"]:
        return "one of " + ", ".join(repr(c) for c in meta["choices"])
    parts = []
    if meta["gt"] is not None:
        parts.append(f"> {meta['gt']:g}")
    if meta["ge"] is not None:
        parts.append(f">= {meta['ge']:g}")
    if meta["lt"] is not None:
        parts.append(f"< {meta['lt']:g}")
    if meta["le"] is not None:
        parts.append(f"<= {meta['le']:g}")
    text = " and ".join(parts) if parts else "any"
    if meta.get("quantity"):
        text += f', in {meta["units"]}; or a string with units ("2.5 km")'
    return text


def _suggest(word, candidates) -> str:
    close = difflib.get_close_matches(word, list(candidates), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


def _coerce(section: str, f: dataclasses.Field, value: Any):
    """Check one value against its declaration and return it in the declared type."""
    where = f"{section}.{f.name}"
    meta = f.metadata
    tp = f.type
    if meta.get("quantity") and isinstance(value, str):
        if not value.strip():
            raise ConfigError(f"{where} = {value!r}: expected a number or a quantity with units")
        return value.strip()            # converted and checked by convsim.units
    if tp == "bool":
        if not isinstance(value, bool):
            raise ConfigError(f"{where} = {value!r}: expected true or false")
        return value
    if tp == "tuple":
        if not isinstance(value, (list, tuple)) or not all(
                isinstance(v, (int, float)) and not isinstance(v, bool) for v in value):
            raise ConfigError(f"{where} = {value!r}: expected a list of numbers")
        values = tuple(float(v) for v in value)
        if not all(math.isfinite(v) and v > 0 for v in values):
            raise ConfigError(f"{where} = {value!r}: expected positive finite numbers")
        return values
    if tp == "str":
        if not isinstance(value, str):
            raise ConfigError(f"{where} = {value!r}: expected a string, {_allowed(meta)}")
        if meta["choices"] and value not in meta["choices"]:
            raise ConfigError(f"{where} = {value!r}: expected {_allowed(meta)}"
                              f"{_suggest(value, meta['choices'])}")
        return value
    if tp == "int":
        if isinstance(value, bool) or not isinstance(value, int):
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            else:
                raise ConfigError(f"{where} = {value!r}: expected a whole number, {_allowed(meta)}")
    elif tp == "float":
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ConfigError(f"{where} = {value!r}: expected a number, {_allowed(meta)}")
        value = float(value)
        if not math.isfinite(value):
            raise ConfigError(f"{where} = {value!r}: expected a finite number, {_allowed(meta)}")
    bad = ((meta["gt"] is not None and not value > meta["gt"])
           or (meta["ge"] is not None and not value >= meta["ge"])
           or (meta["lt"] is not None and not value < meta["lt"])
           or (meta["le"] is not None and not value <= meta["le"]))
    if bad:
        raise ConfigError(f"{where} = {value!r}: out of range, allowed {_allowed(meta)}")
    return value


def _build_table(section: str, cls, raw) -> Any:
    if not isinstance(raw, dict):
        raise ConfigError(f"[{section}] must be a table, got {raw!r}")
    fields = {f.name: f for f in dataclasses.fields(cls)}
    values = {}
    for key, value in raw.items():
        if key not in fields:
            raise ConfigError(f"{section}.{key}: unknown key{_suggest(key, fields)}; "
                              f"allowed keys: {', '.join(fields)}")
        values[key] = _coerce(section, fields[key], value)
    return cls(**values)


def _check_consistency(cfg: Config) -> None:
    """Rules that involve more than one key."""
    for message in _laws.problems(cfg.viscosity.law, cfg.viscosity):
        raise ConfigError(message)
    b = cfg.boundaries
    if b.top_heat == "flux" and b.bottom_heat == "flux":
        raise ConfigError("boundaries.top_heat = 'flux': with bottom_heat = 'flux' too the "
                          "temperature is undetermined; allowed: at least one 'temperature'")
    if cfg.start.kind == "snapshot" and not cfg.start.file:
        raise ConfigError("start.file = '': start.kind = 'snapshot' needs the path of a run file")
    t = cfg.tracer
    if t.enabled and t.kind == "layer" and not t.layer_top > t.layer_bottom:
        raise ConfigError(f"tracer.layer_top = {t.layer_top!r}: must be > tracer.layer_bottom "
                          f"= {t.layer_bottom!r}")
    if t.enabled and t.kind == "expression" and not t.expression.strip():
        raise ConfigError("tracer.expression = '': tracer.kind = 'expression' needs an "
                          "expression in x and z")
    if cfg.stop.end_time == 0.0 and not cfg.stop.steady and cfg.stop.max_steps >= 10**9:
        raise ConfigError("stop: with end_time = 0 and steady = false, max_steps must be < 1e9")


def parse_config(data: dict, *, source: str = "config") -> Config:
    """Build a ``Config`` from a TOML-like mapping, checking every table and key."""
    if not isinstance(data, dict):
        raise ConfigError(f"{source}: expected a TOML table at the top level")
    tables = {}
    title = ""
    given = set()
    for name, raw in data.items():
        if name == "title":
            if not isinstance(raw, str):
                raise ConfigError(f"title = {raw!r}: expected a string")
            title = raw
            continue
        if name not in TABLES:
            raise ConfigError(f"[{name}]: unknown table{_suggest(name, TABLES)}; allowed tables: "
                              f"{', '.join(TABLES)}")
        tables[name] = _build_table(name, TABLES[name], raw)
        given.update(f"{name}.{key}" for key in raw)
    cfg = Config(title=title, given=frozenset(given), **tables)
    _check_consistency(cfg)
    return cfg


def read_toml(path: str | Path, what: str = "config file") -> dict:
    """Parse a TOML file; a missing, non-UTF-8 or malformed file raises ``ConfigError``."""
    path = Path(path)
    if path.is_dir():
        raise ConfigError(f"{what} {str(path)!r}: is a directory; expected a TOML file")
    if not path.is_file():
        raise ConfigError(f"{what} {str(path)!r}: not found")
    try:
        return tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{what} {str(path)!r}: not valid TOML ({exc})") from None
    except UnicodeDecodeError:
        raise ConfigError(f"{what} {str(path)!r}: not UTF-8 text") from None
    except OSError as exc:
        raise ConfigError(f"{what} {str(path)!r}: cannot be read ({exc.strerror})") from None


def load_config(path: str | Path, overrides: list[str] | tuple[str, ...] = ()) -> Config:
    """Read a TOML config file, apply ``section.key=value`` overrides and validate it."""
    data = read_toml(path)
    apply_overrides(data, overrides)
    return parse_config(data, source=str(path))


def apply_overrides(data: dict, overrides) -> dict:
    """Apply ``section.key=value`` strings to a raw mapping in place; values are TOML literals."""
    for item in overrides:
        if "=" not in item or "." not in item.split("=", 1)[0]:
            raise ConfigError(f"--set {item!r}: expected section.key=value")
        dotted, text = item.split("=", 1)
        section, key = dotted.strip().split(".", 1)
        try:
            value = tomllib.loads(f"v = {text.strip()}")["v"]
        except tomllib.TOMLDecodeError:
            value = text.strip()
        table = data.setdefault(section, {})
        if not isinstance(table, dict):
            raise ConfigError(f"--set {item!r}: {section} is not a table")
        table[key] = value
    return data


def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, (tuple, list)):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ("inf" if value > 0 else "-inf")
    return str(value)


def to_toml(cfg: Config) -> str:
    """The full config, every key written out, as TOML text that ``parse_config`` reads back."""
    lines = []
    if cfg.title:
        lines.append(f"title = {_toml_value(cfg.title)}")
    for name in TABLES:
        table = getattr(cfg, name)
        if table is None:
            continue
        lines.append(f"\n[{name}]")
        for f in dataclasses.fields(table):
            lines.append(f"{f.name} = {_toml_value(getattr(table, f.name))}")
    return "\n".join(lines).lstrip() + "\n"


def to_dict(cfg: Config) -> dict:
    """The config as a plain nested dict (for JSON)."""
    return tomllib.loads(to_toml(cfg))


def reference_markdown() -> str:
    """The config reference: one table per TOML table, every key with units, default and range."""
    out = []
    for name, cls in TABLES.items():
        out.append(f"### [{name}]\n\n{cls.__doc__}\n")
        out.append("| key | meaning | units | default | allowed |")
        out.append("|---|---|---|---|---|")
        for f in dataclasses.fields(cls):
            default = f.default if f.default is not dataclasses.MISSING else f.default_factory()
            out.append(f"| `{f.name}` | {f.metadata['doc']} | {f.metadata['units']} | "
                       f"`{_toml_value(default)}` | {_allowed(f.metadata)} |")
        out.append("")
    return "\n".join(out)
