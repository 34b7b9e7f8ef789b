"""The sweep table: one row per case, its inputs and final diagnostics.

No numerics here.  A case's row is first a *record*, a flat JSON object
written atomically (``convsim.files.jsonio``: strict JSON, NaN as null) to
``<out>/cases/<case_id>.json`` when the case finishes; the records are what make
a sweep resumable.  The table is gathered from the records and written in two
forms, both replaced atomically:

- ``table.csv``: a header line, then one line per case, in case order;
- ``table.h5``: netCDF-4 / CF layout through h5py: a dimension ``case`` with a
  coordinate variable of the same name (the case index), every column a
  variable over (case,) with ``units`` and ``long_name`` attributes; text
  columns are variable-length UTF-8 strings.  It opens with
  ``xarray.open_dataset(path, engine="h5netcdf")``.

Column names: the fixed columns of ``COLUMNS`` below, plus one column per sweep
axis named by its config key (``physics.rayleigh``).  ``read_table`` reads
either form back into a dict of numpy arrays.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import h5py
import numpy as np

from convsim.errors import ConfigError, SnapshotError
from convsim.files.atomic import atomic_path
from convsim.files.jsonio import write_json
from convsim.model.diagnostics import DIAGNOSTICS

__all__ = ["COLUMNS", "FAILED", "write_record", "read_record",
           "table_columns", "write_table", "read_table"]

FAILED = "failed"   # status of a case whose run raised an exception (run statuses: RunResult)

# name: (kind, units, long_name); kind is "f" (float), "i" (integer) or "s" (text)
COLUMNS = {
    "case_id": ("s", "1", "case identifier, stable from the parameter values"),
    "index": ("i", "1", "position of the case in the sweep"),
    "status": ("s", "1", "steady, mean-precision, end-time, step-limit, diverged, interrupted, or failed"),
    "rayleigh": ("f", "1", "Rayleigh number of the case, at its rayleigh_reference"),
    "rayleigh_reference": ("s", "1", "where the case states Ra: top, bottom or interior"),
    "nx": ("i", "1", "cells across the box"),
    "nz": ("i", "1", "cells through the depth"),
    "aspect": ("f", "1", "box width over depth"),
    "top_flow": ("s", "1", "mechanical condition at the top"),
    "viscosity_law": ("s", "1", "viscosity law"),
    "viscosity_contrast": ("f", "1", "max/min of the viscosity law over the box's T and z range"),
    "viscosity_contrast_field": ("f", "1", "max/min of the final viscosity field"),
    # every declared diagnostic of the final state (model.diagnostics.DIAGNOSTICS)
    **{name: ("f", d.units, f"final {d.long_name}") for name, d in DIAGNOSTICS.items()
       if d.of_state},
    "interior_vrms": ("f", "1", "final rms velocity of the interior band, units kappa/d"),
    "settled": ("s", "1", "steady, statistically-steady or unfinished (README: time means)"),
    "regime": ("s", "1", "mobile, sluggish, stagnant-lid, episodic, conductive or unclassified"),
    "from_time": ("f", "1", "start of the averaging window (end of the spin-up), units d^2/kappa"),
    "nusselt_top_mean": ("f", "1", "time-mean Nusselt number at the top"),
    "nusselt_top_ci95": ("f", "1", "95 % half-width of nusselt_top_mean"),
    "nusselt_bottom_mean": ("f", "1", "time-mean Nusselt number at the bottom"),
    "nusselt_bottom_ci95": ("f", "1", "95 % half-width of nusselt_bottom_mean"),
    "vrms_mean": ("f", "1", "time-mean rms velocity, units kappa/d"),
    "vrms_ci95": ("f", "1", "95 % half-width of vrms_mean, units kappa/d"),
    "surface_vrms_mean": ("f", "1", "time-mean surface rms velocity, units kappa/d"),
    "surface_vrms_ci95": ("f", "1", "95 % half-width of surface_vrms_mean, units kappa/d"),
    "interior_temperature_mean": ("f", "1", "time-mean interior temperature"),
    "interior_temperature_ci95": ("f", "1", "95 % half-width of interior_temperature_mean"),
    "lid_thickness_mean": ("f", "1", "time-mean lid thickness, units d"),
    "lid_thickness_ci95": ("f", "1", "95 % half-width of lid_thickness_mean, units d"),
    "mobility": ("f", "1", "surface mobility: mean surface vrms / mean vrms"),
    "rheological_temperature_scale": ("f", "1", "-1 / (d ln eta / dT) at the interior temperature"),
    "lid_viscosity_contrast": ("f", "1", "viscosity of the top row over the interior's"),
    "cells": ("i", "1", "convection cells at the end of the run"),
    "switches": ("i", "1", "changes of the lid decision along the mobility series (2 or more: "
                 "episodic)"),
    "breaking_events": ("i", "1", "lid-breaking events (mobility crossing the mobile bound "
                        "upward) in the averaging window"),
    "yield_stress": ("f", "1", "yield stress sigma_y at the surface (0: no yielding), units "
                     "eta_ref kappa/d^2"),
    "rayleigh_top": ("f", "1", "Rayleigh number with the viscosity at the top wall"),
    "rayleigh_bottom": ("f", "1", "Rayleigh number with the viscosity at the bottom wall"),
    "rayleigh_mean_interior": ("f", "1", "Rayleigh number with the viscosity at the measured "
                               "time-mean interior temperature T_i (z = 1/2); the run summary's "
                               "rayleigh_interior is Ra at the mid wall temperature instead"),
    "steps": ("i", "1", "time steps taken"),
    "time": ("f", "1", "final time, units d^2/kappa"),
    "wall_seconds": ("f", "s", "wall time of the run loop"),
    "case_seconds": ("f", "s", "wall time of the whole case on its worker"),
    "started_from": ("s", "1", "case_id whose steady state the case started from (continuation)"),
    "run_file": ("s", "1", "run file of the case, relative to the sweep folder"),
    "worker": ("s", "1", "host and process that ran the case"),
    "config_hash": ("s", "1", "digest of the case's config (before any continuation start)"),
    "message": ("s", "1", "run message"),
    "error": ("s", "1", "exception of a failed case"),
}


def write_record(path: str | Path, record: dict) -> None:
    """Write one case record as JSON, atomically (temporary file, then ``os.replace``)."""
    path = Path(path)
    write_json(path, record, indent=1)


def read_record(path: str | Path) -> dict | None:
    """A case record, or None if the file is missing or unreadable (then the case runs again)."""
    path = Path(path)
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(data, dict) or "case_id" not in data:
        return None
    for key, (kind, *_rest) in COLUMNS.items():
        if kind == "f" and isinstance(data.get(key), str):
            data[key] = float(data[key])
    return data


def table_columns(param_keys) -> list[str]:
    """Column order: case_id, index, the axis keys, then the fixed columns."""
    fixed = list(COLUMNS)
    return fixed[:2] + [k for k in param_keys if k not in COLUMNS] + fixed[2:]


def _column_kind(name: str, values) -> str:
    if name in COLUMNS:
        return COLUMNS[name][0]
    present = [v for v in values if v is not None and v != ""]
    if present and all(isinstance(v, bool) for v in present):
        return "b"
    if present and all(isinstance(v, int) and not isinstance(v, bool) for v in present):
        return "i"
    if all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in present):
        return "f"
    return "s"


def _csv_text(value, kind) -> str:
    if value is None:
        return ""
    if kind == "f":
        return repr(float(value))
    if kind == "b":
        return "true" if value else "false"
    return str(value)


def write_table(records: list[dict], param_keys, folder: str | Path) -> tuple[Path, Path]:
    """Write ``table.csv`` and ``table.h5`` into ``folder`` (atomically); returns both paths."""
    folder = Path(folder)
    names = table_columns(param_keys)
    kinds = {n: _column_kind(n, [r.get(n) for r in records]) for n in names}
    csv_path, h5_path = folder / "table.csv", folder / "table.h5"
    with atomic_path(csv_path) as tmp, open(tmp, "w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(names)
        for r in records:
            writer.writerow([_csv_text(r.get(n), kinds[n]) for n in names])
    with atomic_path(h5_path) as tmp, h5py.File(tmp, "w") as f:
        f.attrs["Conventions"] = "CF-1.8"
        f.attrs["title"] = "convsim sweep table"
        f.attrs["columns"] = json.dumps(names)
        d = f.create_dataset("case", data=np.arange(len(records), dtype="i8"))
        d.make_scale("case")
        d.attrs["units"] = "1"
        d.attrs["long_name"] = "case index"
        for n in names:
            values = [r.get(n) for r in records]
            kind = kinds[n]
            if kind == "f":
                data = np.array([np.nan if v is None else float(v) for v in values], dtype="f8")
            elif kind == "i":
                data = np.array([-1 if v is None else int(v) for v in values], dtype="i8")
            elif kind == "b":
                data = np.array([bool(v) for v in values], dtype="i1")
            else:
                data = np.array(["" if v is None else str(v) for v in values],
                                dtype=h5py.string_dtype("utf-8"))
            ds = f.create_dataset(n, data=data)
            ds.dims[0].attach_scale(f["case"])
            units, long_name = (COLUMNS[n][1:] if n in COLUMNS
                                else ("1", f"sweep parameter {n}"))
            ds.attrs["units"] = units
            ds.attrs["long_name"] = long_name
    return csv_path, h5_path


def _from_text(name: str, texts: list[str]) -> np.ndarray:
    kind = COLUMNS.get(name, ("?",))[0]
    if kind == "s":
        return np.array(texts, dtype=object)
    try:
        return np.array([float(t) if t != "" else np.nan for t in texts], dtype=float)
    except ValueError:
        if kind in ("f", "i"):
            raise
        return np.array(texts, dtype=object)


def read_table(path: str | Path) -> dict[str, np.ndarray]:
    """Read a sweep table (``.csv``, or ``.h5`` / ``.nc``) into {column: array}.

    Numeric columns come back as float arrays (missing values NaN), text columns as
    object arrays of str.
    """
    path = Path(path)
    if not path.is_file():
        raise ConfigError(f"table {str(path)!r}: not found")
    suffix = path.suffix.lower()
    if suffix == ".csv":
        with open(path, newline="", encoding="utf-8") as fh:
            rows = list(csv.reader(fh))
        if not rows:
            raise ConfigError(f"table {str(path)!r}: empty")
        header, body = rows[0], rows[1:]
        try:
            return {name: _from_text(name, [row[i] if i < len(row) else "" for row in body])
                    for i, name in enumerate(header)}
        except ValueError as exc:
            raise ConfigError(f"table {str(path)!r}: a numeric column holds text ({exc})") from None
    if suffix in (".h5", ".nc", ".hdf5"):
        try:
            with h5py.File(path, "r") as f:
                out = {}
                order = json.loads(f.attrs.get("columns", "[]")) or sorted(f)
                for name in order:
                    ds = f.get(name)
                    if name == "case" or not isinstance(ds, h5py.Dataset):
                        continue
                    if ds.dtype.kind in ("O", "S", "U"):
                        out[name] = np.array(ds.asstr()[:], dtype=object)
                    else:
                        out[name] = ds[:].astype(float)
                return out
        except OSError as exc:
            raise SnapshotError(f"table {str(path)!r}: not a readable HDF5 file ({exc})") from None
    raise ConfigError(f"table {str(path)!r}: expected a .csv, .h5 or .nc file")
