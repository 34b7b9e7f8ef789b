"""Physical units: the scales that map the nondimensional equations to a real layer.

Nondimensionalisation
---------------------
A layer of depth ``d`` [m] between a top at temperature ``T_s`` [K] and a bottom
``dT`` [K] hotter, with density ``rho`` [kg m^-3], gravity ``g`` [m s^-2],
thermal expansivity ``alpha`` [K^-1], thermal diffusivity ``kappa`` [m^2 s^-1],
thermal conductivity ``k`` [W m^-1 K^-1], reference viscosity ``eta_ref``
[Pa s] and heat production per unit mass ``H`` [W kg^-1].  The scales are

==================  ==========================  ==================
quantity            scale                       dimensional value
==================  ==========================  ==================
length              d                           x_dim = d x
time                d^2 / kappa                 t_dim = (d^2/kappa) t
temperature         dT (offset T_s)             T_dim = T_s + dT T
velocity            kappa / d                   u_dim = (kappa/d) u
viscosity           eta_ref                     eta_dim = eta_ref eta
heat flux           k dT / d                    q_dim = (k dT/d) q
==================  ==========================  ==================

so a nondimensional Nusselt number or heat flux ``q`` is ``q k dT / d`` W m^-2
(reported in mW m^-2).  The numbers that enter the equations are

    Ra   = rho g alpha dT d^3 / (kappa eta_ref)                 (thermal Rayleigh number)
    H_nd = rho H d^2 / (k dT)                                   (internal heating number)
    Ra_H = rho g alpha H_vol d^5 / (k kappa eta_ref) = Ra H_nd  (internal-heating Rayleigh number)

with ``H_vol = rho H`` [W m^-3] the heat production per unit volume.  ``H_nd``
is the ``H`` of ``dT/dt + u.grad T = lap T + H`` (``physics.internal_heating``).

Years are Julian years (365.25 days, the ``year`` of pint); 1 Myr = 1e6 years.

User-given values (config numbers in SI, or strings with units such as
``"2900 km"`` or ``"1e21 Pa s"``) go through :func:`parse_quantity`, which uses
the single module-level pint registry :data:`UREG`.  The conversions themselves
are plain arithmetic on numbers or numpy arrays.
"""

from __future__ import annotations

import functools
import math
import numbers
import re
from dataclasses import dataclass

import pint

from convsim.errors import ConfigError
from convsim.model.choices import FLOW_CONDITIONS

__all__ = [
    "UREG", "SECONDS_PER_YEAR", "SECONDS_PER_MYR", "PROPERTIES", "Property", "Scales",
    "parse_quantity", "parse_property", "scales_from_body", "critical_rayleigh_for",
    "FLOW_CONDITIONS", "PHYSICAL_UNITS", "physical_quantities", "wall_heat_flows",
    "GAS_CONSTANT",
]

#: The one unit registry of convsim (pint objects from different registries do not mix).
UREG = pint.UnitRegistry()

#: Seconds in a Julian year (365.25 d), from the registry's ``year``.
SECONDS_PER_YEAR = float(UREG.Quantity(1.0, "year").to("s").magnitude)
#: Seconds in a million Julian years.
SECONDS_PER_MYR = 1.0e6 * SECONDS_PER_YEAR

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


@dataclass(frozen=True)
class Property:
    """One physical property of the layer: its ``Scales`` field, its ``[body]`` key and SI unit."""

    name: str
    body_key: str
    units: str
    required: bool
    doc: str


#: The properties a ``Scales`` is built from, in order; ``units`` is the SI unit of the number.
PROPERTIES = (
    Property("depth", "depth", "m", True, "layer depth d"),
    Property("temperature_contrast", "temperature_contrast", "K", True,
             "temperature difference across the layer dT"),
    Property("surface_temperature", "surface_temperature", "K", False,
             "temperature at the top T_s (default 0 K)"),
    Property("gravity", "gravity", "m s^-2", True, "gravitational acceleration g"),
    Property("density", "density", "kg m^-3", True, "reference density rho"),
    Property("expansivity", "thermal_expansivity", "K^-1", True, "thermal expansivity alpha"),
    Property("diffusivity", "thermal_diffusivity", "m^2 s^-1", True,
             "thermal diffusivity kappa"),
    Property("conductivity", "conductivity", "W m^-1 K^-1", True, "thermal conductivity k"),
    Property("reference_viscosity", "reference_viscosity", "Pa s", True,
             "reference viscosity eta_ref"),
    Property("heat_production", "heat_production", "W kg^-1", False,
             "heat production per unit mass H (default 0)"),
    Property("activation_energy", "activation_energy", "kJ mol^-1", False,
             "Arrhenius activation energy E* (default 0: no Arrhenius law)"),
    Property("activation_volume", "activation_volume", "cm^3 mol^-1", False,
             "Arrhenius activation volume V* (default 0)"),
    Property("maximum_viscosity", "maximum_viscosity", "Pa s", False,
             "upper cut-off of the viscosity (default 0: none)"),
)

#: The molar gas constant R [J mol^-1 K^-1], from the registry.
GAS_CONSTANT = float(UREG.Quantity(1.0, "molar_gas_constant").to("J/mol/K").magnitude)
_BY_NAME = {p.name: p for p in PROPERTIES}


def parse_quantity(key: str, value, expected_units: str, *, absolute: bool = False) -> float:
    """A user-given physical value as a float in ``expected_units``.

    Parameters
    ----------
    key : str
        Name of the setting, quoted in error messages (``"body.depth"``, ``"--depth"``).
    value : float, int or str
        A number, taken to be in ``expected_units`` already; or a string: a bare
        number (same meaning) or a number with units (``"2900 km"``,
        ``"1e21 Pa s"``, ``"3e-5 1/K"``).
    expected_units : str
        The (SI) unit of the result, e.g. ``"m"``, ``"Pa s"``, ``"W m^-1 K^-1"``.
    absolute : bool
        Whether the value is an absolute temperature, so that offset units
        (``"15 degC"``) are converted with their offset.  For temperature
        differences offset units are refused (use ``K`` or ``delta_degC``).

    Returns
    -------
    float
        The magnitude in ``expected_units``; finite (signs are checked by the caller).

    Raises
    ------
    ConfigError
        Unreadable text, unknown unit, wrong dimension (``depth = '3 kg'``) or a
        non-finite number; the message names the key, the value and the
        expected dimension.
    """
    target = UREG.Unit(expected_units)
    dim = _dimension(target)
    want = f"{dim} (a number in {expected_units}, or a number with units of {dim})"
    if isinstance(value, bool) or not isinstance(value, (numbers.Real, str)):
        raise ConfigError(f"{key} = {value!r}: expected {want}")
    if isinstance(value, numbers.Real):
        number = float(value)
    else:
        quantity, offset = _parse_text(key, value, want)
        if quantity.unitless:  # a bare number: already in the expected units
            number = float(quantity.to("dimensionless").magnitude)
        elif quantity.dimensionality != target.dimensionality:
            raise ConfigError(f"{key} = {value!r}: has dimension {_dimension(quantity.units)}, "
                              f"expected {want}")
        elif offset and not absolute:
            raise ConfigError(f"{key} = {value!r}: offset units such as degC are ambiguous for a "
                              f"temperature difference; expected K or delta_degC")
        else:
            number = float(quantity.to(target).magnitude)
    if not math.isfinite(number):
        raise ConfigError(f"{key} = {value!r}: expected a finite number, {want}")
    return number


def _dimension(unit) -> str:
    dim = str(UREG.Quantity(1.0, unit).dimensionality)
    return "[dimensionless]" if dim == "dimensionless" else dim


def _parse_text(key: str, text: str, want: str):
    """``(quantity, has_offset_unit)`` from text such as ``"2900 km"`` or ``"15 degC"``."""
    try:
        return UREG.Quantity(text.strip()), False
    except pint.OffsetUnitCalculusError:
        pass  # "15 degC" cannot be read as the product 15 * degC; read number and unit apart
    except Exception as exc:  # pint raises a variety of parser errors
        raise ConfigError(f"{key} = {text!r}: not readable as a quantity ({_reason(exc)}); "
                          f"expected {want}") from None
    match = _NUMBER.match(text)
    try:
        return UREG.Quantity(float(match.group(1)), match.group(2)), True
    except Exception as exc:
        raise ConfigError(f"{key} = {text!r}: not readable as a quantity ({_reason(exc)}); "
                          f"expected {want}") from None


def _reason(exc: Exception) -> str:
    """An exception as one short line."""
    text = " ".join(str(exc).split())
    return text or type(exc).__name__


def parse_property(name: str, value, key: str | None = None) -> float:
    """One of :data:`PROPERTIES` from a number (SI) or a quantity string, checked for sign.

    Parameters
    ----------
    name : str
        A ``Scales`` field name (``"depth"``, ``"reference_viscosity"``, ...).
    value : float or str
        As for :func:`parse_quantity`.
    key : str, optional
        The name quoted in error messages (default ``name``), e.g. ``"--viscosity"``.

    Returns
    -------
    float
        The SI value: > 0 for required properties, >= 0 for the others.
    """
    if name not in _BY_NAME:
        raise ConfigError(f"{name!r}: unknown physical property; allowed: {', '.join(_BY_NAME)}")
    prop = _BY_NAME[name]
    key = key or name
    number = parse_quantity(key, value, prop.units, absolute=name == "surface_temperature")
    return _check(key, number, prop.units, required=prop.required, shown=value)


def _check(key: str, value: float, units: str, *, required: bool, shown=None) -> float:
    """``value`` as a float; > 0 when required, >= 0 otherwise; finite."""
    shown = value if shown is None else shown
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ConfigError(f"{key} = {shown!r}: expected a number in {units}")
    value = float(value)
    if required and not (math.isfinite(value) and value > 0.0):
        raise ConfigError(f"{key} = {shown!r}: expected a positive finite number (in {units})")
    if not required and not (math.isfinite(value) and value >= 0.0):
        raise ConfigError(f"{key} = {shown!r}: expected a finite number >= 0 (in {units})")
    return value


@dataclass(frozen=True)
class Scales:
    """The physical scales of a layer, from plain SI numbers (see the module docstring).

    Parameters
    ----------
    depth : float
        Layer depth d [m].
    temperature_contrast : float
        Temperature difference dT across the layer [K].
    surface_temperature : float
        Temperature T_s at the top [K]; the offset of dimensional temperatures.
    gravity, density, expansivity, diffusivity, conductivity : float
        g [m s^-2], rho [kg m^-3], alpha [K^-1], kappa [m^2 s^-1], k [W m^-1 K^-1].
    reference_viscosity : float
        eta_ref [Pa s], the viscosity that enters Ra.
    heat_production : float
        H [W kg^-1], heat production per unit mass (0: none).
    activation_energy, activation_volume : float
        Arrhenius E* [kJ mol^-1] and V* [cm^3 mol^-1] (0: none); see ``arrhenius``.
    maximum_viscosity : float
        Upper cut-off of the viscosity [Pa s] (0: none).

    All but ``surface_temperature`` and ``heat_production`` must be > 0; those two >= 0.
    The converters take numbers or numpy arrays.
    """

    depth: float
    temperature_contrast: float
    gravity: float
    density: float
    expansivity: float
    diffusivity: float
    conductivity: float
    reference_viscosity: float
    surface_temperature: float = 0.0
    heat_production: float = 0.0
    activation_energy: float = 0.0
    activation_volume: float = 0.0
    maximum_viscosity: float = 0.0

    def __post_init__(self):
        for prop in PROPERTIES:
            checked = _check(prop.name, getattr(self, prop.name), prop.units,
                             required=prop.required)
            object.__setattr__(self, prop.name, checked)

    # --- the numbers of the equations -------------------------------------------------------
    def rayleigh(self) -> float:
        """Thermal Rayleigh number Ra = rho g alpha dT d^3 / (kappa eta_ref) [-]."""
        return (self.density * self.gravity * self.expansivity * self.temperature_contrast
                * self.depth**3 / (self.diffusivity * self.reference_viscosity))

    def internal_heating_number(self) -> float:
        """Nondimensional heat production H_nd = rho H d^2 / (k dT) [-]."""
        return (self.density * self.heat_production * self.depth**2
                / (self.conductivity * self.temperature_contrast))

    def internal_heating_rayleigh(self) -> float:
        """Ra_H = rho g alpha H_vol d^5 / (k kappa eta_ref), H_vol = rho H [W m^-3]; = Ra H_nd."""
        return (self.density * self.gravity * self.expansivity * self.volumetric_heat_production
                * self.depth**5
                / (self.conductivity * self.diffusivity * self.reference_viscosity))

    def arrhenius(self) -> dict:
        """The nondimensional Arrhenius law of E*, V*, T_s and dT, for ``viscosity.law = 'arrhenius'``.

        eta = exp((E + V (1 - z)) / (T + T0) - E / T0) is
        exp((E* + p V*) / (R T_abs) - E* / (R T_s)) with T_abs = T_s + dT T [K] and the
        lithostatic pressure p = rho g d (1 - z) [Pa], so

            E = E* / (R dT),   V = rho g d V* / (R dT),   T0 = T_s / dT

        (E* in J mol^-1, V* in m^3 mol^-1, R the molar gas constant).

        Returns
        -------
        dict
            ``activation_energy``, ``activation_volume``, ``temperature_offset`` (all in units
            of dT), the keys of the config's [viscosity] table.
        """
        if self.activation_energy <= 0.0 or self.surface_temperature <= 0.0:
            raise ConfigError(f"body.activation_energy = {self.activation_energy!r} kJ/mol with "
                              f"body.surface_temperature = {self.surface_temperature!r} K: an "
                              f"Arrhenius law needs both > 0")
        r_dt = GAS_CONSTANT * self.temperature_contrast
        return dict(activation_energy=1.0e3 * self.activation_energy / r_dt,
                    activation_volume=(self.density * self.gravity * self.depth
                                       * 1.0e-6 * self.activation_volume / r_dt),
                    temperature_offset=self.surface_temperature / self.temperature_contrast)

    # --- scales ---------------------------------------------------------------------------
    @property
    def volumetric_heat_production(self) -> float:
        """H_vol = rho H [W m^-3]."""
        return self.density * self.heat_production

    @property
    def time_scale(self) -> float:
        """d^2 / kappa [s]."""
        return self.depth**2 / self.diffusivity

    @property
    def velocity_scale(self) -> float:
        """kappa / d [m s^-1]."""
        return self.diffusivity / self.depth

    @property
    def heat_flux_scale(self) -> float:
        """k dT / d [W m^-2]."""
        return self.conductivity * self.temperature_contrast / self.depth

    # --- converters: nondimensional <-> dimensional -----------------------------------------
    def time_to_seconds(self, t):
        """t_dim [s] = t d^2 / kappa."""
        return t * self.time_scale

    def time_from_seconds(self, seconds):
        """t = t_dim kappa / d^2, t_dim in s."""
        return seconds / self.time_scale

    def time_to_myr(self, t):
        """t_dim [Myr] = t d^2 / kappa / (1e6 Julian years)."""
        return t * (self.time_scale / SECONDS_PER_MYR)

    def time_from_myr(self, myr):
        """Nondimensional time of ``myr`` million (Julian) years."""
        return myr * (SECONDS_PER_MYR / self.time_scale)

    def velocity_to_m_per_s(self, u):
        """u_dim [m s^-1] = u kappa / d."""
        return u * self.velocity_scale

    def velocity_from_m_per_s(self, m_per_s):
        """u = u_dim d / kappa, u_dim in m s^-1."""
        return m_per_s / self.velocity_scale

    def velocity_to_cm_per_yr(self, u):
        """u_dim [cm yr^-1] = u kappa / d, per Julian year."""
        return u * (self.velocity_scale * 100.0 * SECONDS_PER_YEAR)

    def velocity_from_cm_per_yr(self, cm_per_yr):
        """u = u_dim d / kappa, u_dim in cm per Julian year."""
        return cm_per_yr / (self.velocity_scale * 100.0 * SECONDS_PER_YEAR)

    def heat_flux_to_mw_m2(self, q):
        """q_dim [mW m^-2] = 1e3 q k dT / d (q: nondimensional flux or Nusselt number)."""
        return q * (1.0e3 * self.heat_flux_scale)

    def heat_flux_from_mw_m2(self, mw_m2):
        """q = q_dim d / (k dT), q_dim in mW m^-2."""
        return mw_m2 / (1.0e3 * self.heat_flux_scale)

    def temperature_to_kelvin(self, T):
        """T_dim [K] = T_s + dT T."""
        return self.surface_temperature + self.temperature_contrast * T

    def temperature_from_kelvin(self, kelvin):
        """T = (T_dim - T_s) / dT, T_dim in K."""
        return (kelvin - self.surface_temperature) / self.temperature_contrast

    def length_to_km(self, x):
        """x_dim [km] = 1e-3 d x."""
        return x * (1.0e-3 * self.depth)

    def length_from_km(self, km):
        """x = 1e3 x_dim / d, x_dim in km."""
        return km * (1.0e3 / self.depth)

    def viscosity_to_pa_s(self, eta):
        """eta_dim [Pa s] = eta_ref eta."""
        return eta * self.reference_viscosity

    def viscosity_from_pa_s(self, pa_s):
        """eta = eta_dim / eta_ref, eta_dim in Pa s."""
        return pa_s / self.reference_viscosity

    def as_dict(self) -> dict:
        """The properties as ``{name: SI number}``."""
        return {p.name: getattr(self, p.name) for p in PROPERTIES}


def scales_from_body(body=None, overrides=None, *, options=None) -> Scales:
    """Scales from a ``[body]`` table and/or explicit values; an explicit value wins.

    Parameters
    ----------
    body : convsim.config.Body or None
        Only its attributes are read (``depth``, ``thermal_expansivity``, ...), SI
        numbers or quantity strings; a value of 0 counts as not given for the
        properties that must be positive.
    overrides : mapping, optional
        ``{Scales field name: SI number}`` (already parsed, e.g. from the command
        line); these win over ``body``.
    options : mapping, optional
        ``{Scales field name: command-line option}``, named beside the ``[body]``
        key when a required property is missing.

    Raises
    ------
    ConfigError
        A required property given nowhere, or out of range; the message names the key.
    """
    overrides = dict(overrides or {})
    unknown = set(overrides) - set(_BY_NAME)
    if unknown:
        raise ConfigError(f"unknown physical propert{'y' if len(unknown) == 1 else 'ies'} "
                          f"{sorted(unknown)}; allowed: {', '.join(_BY_NAME)}")
    values, missing = {}, []
    for prop in PROPERTIES:
        if prop.name in overrides:
            values[prop.name] = _check(prop.name, overrides[prop.name], prop.units,
                                       required=prop.required)
            continue
        key = f"body.{prop.body_key}"
        raw = getattr(body, prop.body_key, None) if body is not None else None
        if raw is None:
            value = 0.0
        else:
            value = parse_quantity(key, raw, prop.units,
                                   absolute=prop.name == "surface_temperature")
        if prop.required and value == 0.0:
            option = (options or {}).get(prop.name)
            missing.append(f"{key} or {option}" if option else key)
            continue
        values[prop.name] = _check(key, value, prop.units, required=prop.required, shown=raw)
    if missing:
        raise ConfigError(f"not given: {'; '.join(missing)}; expected a positive value for each "
                          f"(SI number or quantity with units)")
    return Scales(**values)


# ------------------------------------------------------------------------------------------
# Answers in physical units (run summaries, ``convsim info``, ``--json``)
# ------------------------------------------------------------------------------------------

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


# ------------------------------------------------------------------------------------------
# Onset: the critical Rayleigh number from the linear-stability solver (convsim.analysis.stability)
# ------------------------------------------------------------------------------------------



@functools.lru_cache(maxsize=None)
def _critical_rayleigh(top_flow: str, bottom_flow: str) -> float:
    from convsim.analysis.stability import analyse_onset        # scipy only when asked
    return float(analyse_onset(top_flow=top_flow, bottom_flow=bottom_flow,
                               curve_points=2).critical_rayleigh)


def critical_rayleigh_for(top_flow: str, bottom_flow: str) -> float:
    """Critical Rayleigh number of onset for the given mechanical boundary conditions.

    The minimum over wavenumbers of the neutral curve of a layer heated from below
    with fixed temperatures on both sides, no internal heating and constant
    viscosity, from the linear-stability solver (``convsim.analysis.stability.analyse_onset``;
    Chandrasekhar 1961, ch. II, gives 657.511 free-free, 1707.762 rigid-rigid,
    1100.65 rigid-free).  For other heating, thermal conditions or rheology use
    ``analyse_onset`` (``convsim onset``) itself.

    Parameters
    ----------
    top_flow, bottom_flow : str
        ``"free-slip"`` or ``"no-slip"``.

    Returns
    -------
    float
        Ra_c [-].
    """
    for key, value in (("top_flow", top_flow), ("bottom_flow", bottom_flow)):
        if value not in FLOW_CONDITIONS:
            raise ConfigError(f"{key} = {value!r}: expected one of "
                              f"{', '.join(repr(c) for c in FLOW_CONDITIONS)}")
    return _critical_rayleigh(top_flow, bottom_flow)
