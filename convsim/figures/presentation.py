"""How a run is shown: nondimensional or physical units, which snapshot, its key parameters.

No matplotlib here: the figure modules (:mod:`convsim.figures.fields`,
:mod:`convsim.figures.animation`) take a :class:`Presentation` for the numbers and axis
labels they draw.

Nondimensional: lengths in d, time in d^2/kappa, velocities in kappa/d,
temperature in dT above the top, viscosity in eta_ref, heat flow as the
Nusselt number.  Physical (the run's config has a ``[body]`` table), through
:mod:`convsim.units`: x_dim = d x [km], t_dim = (d^2/kappa) t [Myr],
u_dim = (kappa/d) u [cm/yr], T_dim = T_s + dT T [K], eta_dim = eta_ref eta
[Pa s], q_dim = Nu k dT / d [mW m^-2].
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass

import numpy as np

from convsim.errors import ConfigError
from convsim.files.reader import RunFile
from convsim.model.laws import describe as describe_law

__all__ = ["Presentation", "run_config", "presentation_for", "select_snapshot",
           "viscosity_varies", "parameter_lines", "VARIES"]

#: Viscosity counts as varying when max/min exceeds this.
VARIES = 1.0 + 1.0e-9


@dataclass(frozen=True)
class Presentation:
    """How numbers are shown: nondimensional, or physical through ``convsim.units.Scales``.

    The conversion methods (``length``, ``time``, ``temperature``,
    ``temperature_difference``, ``viscosity``, ``heat_flux``, ``velocity``) map
    nondimensional numbers or arrays to the shown ones; each ``*_label``
    property is the matching axis label with its units.
    """

    scales: object = None  # convsim.units.Scales or None

    @property
    def physical(self) -> bool:
        return self.scales is not None

    def length(self, x):
        return self.scales.length_to_km(x) if self.physical else x

    def time(self, t):
        return self.scales.time_to_myr(t) if self.physical else t

    def temperature(self, T):
        return self.scales.temperature_to_kelvin(T) if self.physical else T

    def temperature_difference(self, dT):
        return dT * self.scales.temperature_contrast if self.physical else dT

    def viscosity(self, eta):
        return self.scales.viscosity_to_pa_s(eta) if self.physical else eta

    def heat_flux(self, nu):
        return self.scales.heat_flux_to_mw_m2(nu) if self.physical else nu

    def velocity(self, u):
        return self.scales.velocity_to_cm_per_yr(u) if self.physical else u

    @property
    def x_label(self):
        return "horizontal position $x$ (km)" if self.physical else "$x\\,/\\,d$"

    @property
    def z_label(self):
        return "height $z$ (km)" if self.physical else "$z\\,/\\,d$"

    @property
    def time_label(self):
        return "time (Myr)" if self.physical else "time $t\\,/\\,(d^2/\\kappa)$"

    @property
    def temperature_label(self):
        return "temperature $T$ (K)" if self.physical else "temperature $T\\,/\\,\\Delta T$"

    @property
    def anomaly_label(self):
        return ("$T - \\langle T \\rangle$ (K)" if self.physical
                else "$(T - \\langle T \\rangle)\\,/\\,\\Delta T$")

    @property
    def viscosity_label(self):
        return ("viscosity $\\eta$ (Pa s)" if self.physical
                else "viscosity $\\eta\\,/\\,\\eta_\\mathrm{ref}$")

    @property
    def heat_flux_label(self):
        return "heat flux $q$ (mW m$^{-2}$)" if self.physical else "Nusselt number $Nu$"

    @property
    def velocity_label(self):
        return ("$v_\\mathrm{rms}$ (cm yr$^{-1}$)" if self.physical
                else "$v_\\mathrm{rms}\\,/\\,(\\kappa/d)$")

    def time_text(self, t) -> str:
        return f"t = {self.time(t):.4g} Myr" if self.physical else f"t = {t:.4g}"


def run_config(run: RunFile):
    """The run's config (``convsim.config.Config``) from the TOML text stored in the file."""
    from convsim.config import parse_config
    try:
        return parse_config(tomllib.loads(run.config_text), source=f"{run.path} (attribute config)")
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"run file {str(run.path)!r}: its config attribute is not valid TOML "
                          f"({exc})") from None


def presentation_for(run: RunFile, units: str = "auto", config=None) -> Presentation:
    """Nondimensional or physical presentation of a run.

    Parameters
    ----------
    units : {"auto", "physical", "nondimensional"}
        ``auto``: physical when the config has a ``[body]`` table.
    """
    if units not in ("auto", "physical", "nondimensional"):
        raise ConfigError(f"--units = {units!r}: expected auto, physical or nondimensional")
    if units == "nondimensional":
        return Presentation()
    cfg = run_config(run) if config is None else config
    if cfg.body is None:
        if units == "physical":
            raise ConfigError(f"--units = 'physical': the run's config has no [body] table "
                              f"(file {str(run.path)!r})")
        return Presentation()
    from convsim.units import scales_from_body
    return Presentation(scales_from_body(cfg.body))


def select_snapshot(run_times, snapshot: int | None = None, time: str | float | None = None,
                    presentation: Presentation | None = None) -> int:
    """Index of the snapshot asked for: by number, by nearest time, or the last.

    Parameters
    ----------
    run_times : array
        Snapshot times (nondimensional).
    snapshot : int, optional
        Index; negative counts from the end.
    time : float or str, optional
        A nondimensional time, or (when the run has physical scales) a quantity
        such as ``"12 Myr"``; the nearest snapshot is taken.
    """
    count = len(run_times)
    if snapshot is not None and time is not None:
        raise ConfigError("--snapshot and --time: give one of them, not both")
    if snapshot is not None:
        index = snapshot if snapshot >= 0 else count + snapshot
        if not 0 <= index < count:
            raise ConfigError(f"--snapshot = {snapshot}: out of range, the file holds {count} "
                              f"snapshots (0 to {count - 1})")
        return index
    if time is None:
        return count - 1
    try:
        t = float(time)
    except (TypeError, ValueError):
        if presentation is None or not presentation.physical:
            raise ConfigError(f"--time = {time!r}: expected a nondimensional number (the run has "
                              f"no [body] table for times with units)") from None
        from convsim.units import parse_quantity
        t = presentation.scales.time_from_seconds(parse_quantity("--time", time, "s"))
    if not math.isfinite(t):
        raise ConfigError(f"--time = {time!r}: expected a finite number")
    return int(np.argmin(np.abs(np.asarray(run_times) - t)))


def viscosity_varies(eta) -> bool:
    """Whether a viscosity field varies (max / min > 1 + 1e-9)."""
    eta = np.asarray(eta, dtype=float)
    lo, hi = float(np.nanmin(eta)), float(np.nanmax(eta))
    return lo > 0.0 and hi / lo > VARIES


def _final(run: RunFile, key: str):
    """A final diagnostic: the ``final_`` attribute, else the last series row."""
    value = run.attrs.get(f"final_{key}")
    if value is None and key in run.series and len(run.series[key]):
        value = run.series[key][-1]
    return value


def _statistics_lines(run: RunFile, num) -> list[tuple[str, str]]:
    """The settled word, the mean Nu with its interval and the lid regime (finished runs)."""
    stats = getattr(run, "statistics", None) or {}
    if not stats.get("statistics"):
        return []
    top = stats["statistics"].get("nusselt_top", {})
    lid = stats.get("lid", {})
    out = [("settled", f"{stats.get('settled')}; mean Nu top {num(top.get('mean'), '.5g')} "
                       f"+- {num(top.get('ci95'), '.2g')} from t = {num(top.get('from_time'), '.4g')}")]
    if lid:
        out.append(("lid", f"{lid.get('regime')}, mobility {num(lid.get('mobility'), '.3g')}, "
                           f"thickness {num(lid.get('lid_thickness'), '.3g')}, "
                           f"{lid.get('cells')} cell(s)"))
    return out


def parameter_lines(run: RunFile, pres: Presentation, config=None) -> list[tuple[str, str]]:
    """The run's key parameters as (name, value) text pairs for the summary sheet."""
    cfg = run_config(run) if config is None else config
    ra_series = run.series.get("rayleigh", ())
    ra = float(ra_series[-1]) if len(ra_series) else cfg.physics.rayleigh
    b, v = cfg.boundaries, cfg.viscosity
    law = describe_law(v.law, v)

    def heat(kind, value):
        return f"T = {value:g}" if kind == "temperature" else f"flux {value:g}"

    def num(x, fmt=".6g"):
        return "n/a" if x is None else format(float(x), fmt)

    nz, nx = run.fields["temperature"].shape
    nu_top, nu_bottom, vrms = (_final(run, k) for k in ("nusselt_top", "nusselt_bottom", "vrms"))
    t_end = _final(run, "time")
    if t_end is None and len(run.series.get("series_time", ())):
        t_end = run.series["series_time"][-1]
    flux_units, velocity_units = "mW m^-2", "cm yr^-1"     # one unit style on the sheet
    message = run.attrs.get("final_message")
    lines = [
        ("status", f"{run.attrs.get('status', '?')}" + (f", {message}" if message else "")),
        ("Rayleigh number", f"{ra:.6g}"
         + (f", internal heating H = {cfg.physics.internal_heating:g}"
            if cfg.physics.internal_heating else "")),
        ("grid", f"{nx} x {nz} cells, aspect {float(run.x_node[-1] - run.x_node[0]):g}, "
                 f"sides {b.sides}"),
        ("top", f"{b.top_flow}, {heat(b.top_heat, b.top_value)}"),
        ("bottom", f"{b.bottom_flow}, {heat(b.bottom_heat, b.bottom_value)}"),
        ("viscosity law", law),
        ("final Nu top / bottom", f"{num(nu_top)} / {num(nu_bottom)}"
         + (f"; heat flow {pres.heat_flux(nu_top):.4g} / {pres.heat_flux(nu_bottom):.4g} "
            f"{flux_units}" if pres.physical and None not in (nu_top, nu_bottom) else "")),
        ("final vrms", num(vrms) + (f" = {pres.velocity(vrms):.4g} {velocity_units}"
                                    if pres.physical and vrms is not None else "")),
        ("steps, time", f"{num(_final(run, 'steps'), 'g')}, t = {num(t_end)}"
         + (f" = {pres.time(t_end):.4g} Myr" if pres.physical and t_end is not None else "")),
        ("snapshot shown", f"{run.snapshot} of {len(run.times)}, "
                           f"{pres.time_text(run.times[run.snapshot])}"),
    ]
    lines += _statistics_lines(run, num)
    if pres.physical:
        sc = pres.scales
        lines += [
            ("layer", f"d = {sc.depth / 1e3:g} km, dT = {sc.temperature_contrast:g} K, "
                      f"eta_ref = {sc.reference_viscosity:.3g} Pa s"),
            ("scales", f"time {sc.time_to_myr(1.0):.4g} Myr, velocity "
                       f"{sc.velocity_to_cm_per_yr(1.0):.3g} {velocity_units}, heat flux "
                       f"{sc.heat_flux_to_mw_m2(1.0):.3g} {flux_units}"),
        ]
        ra_body = sc.rayleigh()
        if abs(ra_body - ra) > 1e-3 * ra:
            lines.append(("note", f"Ra from [body] = {ra_body:.4g} differs from the run's Ra"))
    lines.append(("convsim", f"{run.attrs.get('convsim_version', '?')}, file {run.path.name}"))
    return lines
