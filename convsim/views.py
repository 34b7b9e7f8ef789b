"""xarray views of runs: a finished run's result and a run file, with physical units.

``result.to_xarray()`` (:func:`result_dataset`) and ``convsim.open_run(path)``
(:func:`open_run`) give an ``xarray.Dataset`` whose variables carry ``units`` that
pint and udunits read ("1" for nondimensional numbers, with the scale in the
attribute ``nondimensional_scale``); the time series lie on the coordinate
``series_time`` (axis T), so ``ds.nusselt_top.plot()`` draws against time.

With a ``[body]`` table (``convsim.units.Scales``) the view also has physical
coordinates ``x_km``, ``z_km``, ``series_time_myr`` and variables
``temperature_kelvin`` [K], ``heat_flow_top`` and ``heat_flow_bottom`` [mW m^-2],
``vrms_cm_per_yr`` [cm yr^-1] (see :func:`convsim.units.physical_quantities`).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from convsim.units import PHYSICAL_UNITS, wall_heat_flows

__all__ = ["result_dataset", "open_run", "add_physical"]

_SERIES_DOC = {
    "dt": ("time step size", "d^2/kappa"), "rayleigh": ("Rayleigh number in force", None),
    "nusselt_top": ("Nusselt number at the top", None),
    "nusselt_bottom": ("Nusselt number at the bottom", None),
    "vrms": ("root-mean-square velocity", "kappa/d"),
    "surface_vrms": ("rms horizontal velocity at the top", "kappa/d"),
    "mean_temperature": ("mean temperature", "dT above the top"),
    "energy_residual": ("heat budget misfit over the top heat flow", None),
    "tendency_max": ("max |dT/dt|", "dT kappa/d^2"),
    "stokes_iterations": ("conjugate-gradient iterations of the Stokes solve", None),
    "series_step": ("time step number", None),
}


def _attrs(long_name: str, scale: str | None = None, units: str = "1") -> dict:
    out = {"long_name": long_name, "units": units}
    if scale:
        out["nondimensional_scale"] = scale
    return out


def result_dataset(result, scales=None):
    """A ``RunResult`` as an ``xarray.Dataset``: final fields on (z, x) and the series.

    Parameters
    ----------
    result : convsim.run.controller.RunResult
    scales : convsim.units.Scales, optional
        Default: ``result.scales`` (set by ``convsim.run`` from the config's [body]).
    """
    import xarray as xr
    g = result.grid
    coords = {
        "x": ("x", g.x_cell, _attrs("horizontal position of cell centres", "d") | {"axis": "X"}),
        "z": ("z", g.z_cell, _attrs("height of cell centres", "d") | {"axis": "Z",
                                                                       "positive": "up"}),
        "x_node": ("x_node", g.x_node, _attrs("horizontal position of cell corners", "d")),
        "z_node": ("z_node", g.z_node, _attrs("height of cell corners", "d")),
    }
    series = dict(result.series or {})
    t = np.asarray(series.pop("series_time", np.zeros(0)))
    coords["series_time"] = ("series_time", t, _attrs("time of the record", "d^2/kappa")
                             | {"axis": "T", "standard_name": "time"})
    data = {
        "temperature": (("z", "x"), result.temperature, _attrs("temperature above the top",
                                                                "dT")),
        "viscosity": (("z", "x"), result.viscosity, _attrs("viscosity", "eta_ref")),
        "streamfunction": (("z_node", "x_node"), result.psi, _attrs("streamfunction", "kappa")),
    }
    for name, values in series.items():
        long_name, scale = _SERIES_DOC.get(name, (name.replace("_", " "), None))
        data[name] = (("series_time",), np.asarray(values), _attrs(long_name, scale))
    ds = xr.Dataset(data, coords=coords, attrs={"status": result.status,
                                                "message": result.message,
                                                "time": float(result.time)})
    scales = getattr(result, "scales", None) if scales is None else scales
    return ds if scales is None else add_physical(ds, scales)


def add_physical(ds, scales, boundaries=None):
    """``ds`` with physical coordinates and variables from ``scales`` (a new Dataset)."""
    ds = ds.copy()
    ds = ds.assign_coords(
        x_km=("x", scales.length_to_km(ds["x"].values),
              {"long_name": "horizontal position", "units": PHYSICAL_UNITS["length"]}),
        z_km=("z", scales.length_to_km(ds["z"].values),
              {"long_name": "height", "units": PHYSICAL_UNITS["length"]}))
    if "series_time" in ds.coords:
        ds = ds.assign_coords(series_time_myr=(
            "series_time", scales.time_to_myr(ds["series_time"].values),
            {"long_name": "time of the record", "units": PHYSICAL_UNITS["time"]}))
    if "temperature" in ds:
        ds["temperature_kelvin"] = ds["temperature"].dims, scales.temperature_to_kelvin(
            ds["temperature"].values), {"long_name": "temperature", "units": "K"}
    if "nusselt_top" in ds and "nusselt_bottom" in ds:
        flows = wall_heat_flows(ds["nusselt_top"].values, ds["nusselt_bottom"].values,
                                boundaries)
        for wall, q in flows.items():
            q = np.broadcast_to(q, ds["nusselt_top"].shape)
            ds[f"heat_flow_{wall}"] = ds["nusselt_top"].dims, scales.heat_flux_to_mw_m2(q), {
                "long_name": f"upward heat flow through the {wall}",
                "units": PHYSICAL_UNITS["heat_flow"]}
    if "vrms" in ds:
        ds["vrms_cm_per_yr"] = ds["vrms"].dims, scales.velocity_to_cm_per_yr(
            ds["vrms"].values), {"long_name": "root-mean-square velocity",
                                 "units": PHYSICAL_UNITS["velocity"]}
    return ds


def open_run(path: str | Path, *, physical: bool = True):
    """A run file as an ``xarray.Dataset``, read into memory (the file is closed again).

    Snapshot fields lie on ``time`` (the snapshot times), the diagnostic series on
    ``series_time``; with ``physical`` and a ``[body]`` table in the run's config, the
    physical coordinates and variables of :func:`add_physical` are added.
    """
    import tomllib

    import xarray as xr

    from convsim.config import parse_config
    from convsim.errors import SnapshotError
    path = Path(path)
    if not path.is_file():
        raise SnapshotError(f"run file {str(path)!r}: not found")
    with xr.open_dataset(path, engine="h5netcdf", decode_timedelta=False) as ds:
        ds = ds.load()
    if physical and "config" in ds.attrs:
        cfg = parse_config(tomllib.loads(ds.attrs["config"]), source=str(path))
        if cfg.body is not None:
            from convsim.units import scales_from_body
            keep = [v for v in ("temperature_kelvin", "heat_flow_top", "heat_flow_bottom",
                                "vrms_cm_per_yr") if v in ds]
            ds = add_physical(ds.drop_vars(keep), scales_from_body(cfg.body), cfg.boundaries)
    return ds
