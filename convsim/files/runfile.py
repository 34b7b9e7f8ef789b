"""The run file: one HDF5 file per run, laid out by netCDF-4 / CF conventions.

No numerics here.  The file stays a plain HDF5 file for h5py and opens in
netCDF tools (``xarray.open_dataset(path, engine="h5netcdf")``): every dimension
is an HDF5 dimension scale with a coordinate variable of the same name, and
every variable carries ``units`` and ``long_name`` attributes.

Layout (root group):

- coordinates ``x`` (cell centres), ``z``, ``x_node`` (cell corners), ``z_node``,
  ``time`` (one entry per snapshot, unlimited, axis T) and ``series_time`` (one entry
  per row of the diagnostic time series, unlimited, axis T: the series' own time
  coordinate, so that ``ds.nusselt_top.plot()`` draws against time);
- snapshot fields over (time, ...): every advected field of the run (``temperature``,
  and ``dye`` where [tracer] is enabled; declared in ``convsim.model.fields.ADVECTED``,
  named in the root attribute ``advected_fields``), the derived fields that apply to the
  run (``strain_rate``, ``stress`` and the 0/1 flag ``yielded`` where the law yields;
  ``convsim.model.fields.DERIVED``), ``viscosity`` (cells),
  ``streamfunction`` (corners), ``velocity_x`` (vertical faces: z, x_node),
  ``velocity_z`` (horizontal faces: z_node, x), profiles over (time, z), corner
  gradients ``q1`` .. ``q4`` and ``step`` over (time,);
- time series over (series_time,): ``record`` (the row index), ``series_step`` and
  every declared diagnostic that applies to the run
  (``convsim.model.diagnostics.DIAGNOSTICS``; the yielding ones where the law yields);
- units: strings that udunits and pint read; nondimensional numbers have units
  ``"1"`` and name their scale in the attribute ``nondimensional_scale`` (and in
  ``comment``), e.g. ``"kappa/d"`` for a velocity; ``long_name`` says what it is;
- with a ``[body]`` table in the config, physical coordinates ``x_km``, ``z_km``,
  ``x_node_km``, ``z_node_km`` (km) and ``time_myr``, ``series_time_myr`` (Myr)
  beside the nondimensional ones;
- coordinates carry ``axis`` (X, Z, T) and the vertical ones ``positive = "up"``;
- group ``restart``: the exact state to continue the run bit for bit;
- group ``statistics`` (once the run has finished): time means, 95 % half-widths
  and averaging windows, the settled word, lid diagnostics (``write_statistics``);
- attributes: ``Conventions``, ``title``, ``config`` (the full TOML), provenance
  (``convsim_version``, ``created``, ``wall_seconds``, ``status``).

Crash safety: the committed file is never changed in place.  Each snapshot
(with its series rows, the restart state and the status) is one commit: copy
the file, append to the copy, rename the copy over the file
(``convsim.files.commit``).  A reader sees the file before a snapshot or after
it, never a part of one; a run killed at any moment leaves its last committed
snapshot; a full disk stops the run with every earlier snapshot kept.
"""

from __future__ import annotations

import datetime as _dt
import os
from pathlib import Path

import h5py
import numpy as np

from convsim.errors import DiskFullError, OutputExistsError, SnapshotError
from convsim.files.commit import commit, fault_point, is_disk_full
from convsim.files.statistics_group import write_statistics
from convsim.model.diagnostics import DIAGNOSTICS
from convsim.model.fields import ADVECTED, DERIVED

__all__ = ["FIELDS", "SERIES", "RunFileWriter", "RunFileObserver", "open_run_file",
           "check_writable", "check_output_folder", "snapshot_bytes", "RECORD_BYTES",
           "stored_fields"]

# name: (dimensions after time, units, long_name); the advected fields from their declarations
FIELDS = {
    **{name: (("z", "x"), d.units, d.long_name) for name, d in ADVECTED.items()},
    "viscosity": (("z", "x"), "1", "viscosity over the reference viscosity, cell centres"),
    "streamfunction": (("z_node", "x_node"), "1", "streamfunction psi (u = dpsi/dz, w = -dpsi/dx) in kappa"),
    "velocity_x": (("z", "x_node"), "1", "horizontal velocity on vertical faces, units kappa/d"),
    "velocity_z": (("z_node", "x"), "1", "vertical velocity on horizontal faces, units kappa/d"),
    "temperature_profile": (("z",), "1", "horizontally averaged temperature"),
    "viscosity_profile": (("z",), "1", "horizontally averaged viscosity"),
    "q1": ((), "1", "-dT/dz at corner (0, 1)"),
    "q2": ((), "1", "-dT/dz at corner (aspect, 1)"),
    "q3": ((), "1", "-dT/dz at corner (aspect, 0)"),
    "q4": ((), "1", "-dT/dz at corner (0, 0)"),
    "step": ((), "1", "time step number of the snapshot"),
    # derived fields of the runs they apply to (a law that yields: model.fields.DERIVED)
    **{name: (("z", "x"), d.units, d.long_name) for name, d in DERIVED.items()},
}

# the step's own columns, then every declared diagnostic (units, long_name, CF attributes)
SERIES = {
    "series_time": ("1", "time of the record, units d^2/kappa"),
    "series_step": ("1", "time step number"),
    "dt": ("1", "time step size, units d^2/kappa"),
    "rayleigh": ("1", "Rayleigh number in force"),
    **{name: (d.units, d.long_name) for name, d in DIAGNOSTICS.items()},
}

COORDINATES = {
    "x": "horizontal position of cell centres, units d",
    "z": "height of cell centres above the bottom, units d",
    "x_node": "horizontal position of cell corners, units d",
    "z_node": "height of cell corners, units d",
    "time": "time of the snapshot, units d^2/kappa",
    "series_time": "time of the time-series record, units d^2/kappa",
    "record": "index of the time-series record",
}

#: Scale of each nondimensional variable (its CF attribute ``nondimensional_scale``).
NONDIMENSIONAL_SCALES = {
    "x": "d", "z": "d", "x_node": "d", "z_node": "d", "time": "d^2/kappa",
    "series_time": "d^2/kappa", "dt": "d^2/kappa", "temperature": "dT above the top",
    "temperature_profile": "dT above the top", "mean_temperature": "dT above the top",
    "viscosity": "eta_ref", "viscosity_profile": "eta_ref", "streamfunction": "kappa",
    "velocity_x": "kappa/d", "velocity_z": "kappa/d", "vrms": "kappa/d",
    "surface_vrms": "kappa/d", "q1": "dT/d", "q2": "dT/d", "q3": "dT/d", "q4": "dT/d",
    "tendency_max": "dT kappa/d^2",
}


def cf_attributes(name: str, units: str, long_name: str) -> dict:
    """CF attributes of a variable: ``units`` as declared, ``long_name`` without the scale
    (a trailing ", units ..." moves into ``nondimensional_scale`` and ``comment``)."""
    text, _, scale = long_name.partition(", units ")
    scale = NONDIMENSIONAL_SCALES.get(name, scale.strip())
    attrs = {"units": units, "long_name": text.strip()}
    if units == "1" and scale:
        attrs["nondimensional_scale"] = scale
        attrs["comment"] = f"nondimensional, in units of {scale}"
    return attrs




def snapshot_bytes(nx: int, nz: int) -> int:
    """Bytes one snapshot adds to a run file (float64 fields, uncompressed)."""
    sizes = {"z": nz, "x": nx, "z_node": nz + 1, "x_node": nx + 1}
    return sum(8 * int(np.prod([sizes[d] for d in dims])) for name, (dims, _, _) in FIELDS.items()
               if name not in DERIVED)


#: Bytes one row of the diagnostic series adds to a run file.
RECORD_BYTES = 8 * (len(SERIES) + 1)


def open_run_file(path, mode: str = "r"):
    """Open a run file for reading.  Readers skip HDF5's file lock: the writer never changes a
    committed file in place (it renames a finished copy over it), so no lock is needed, and a
    reader never stops the run writing the file."""
    if mode != "r":
        raise ValueError("run files are changed only through convsim.files.commit")
    try:
        return h5py.File(path, "r", locking=False)
    except OSError as exc:   # already open in this process with locking (xarray, say)
        if "locking flag" not in str(exc):
            raise
        return h5py.File(path, "r")


def check_writable(path: Path, overwrite: bool, *,
                   other: str = " or --out to choose another folder") -> None:
    """Refuse to replace an existing file unless asked; check that the folder can be written.

    ``other`` ends the refusal's advice (empty for a command without ``--out``)."""
    path = Path(path)
    if path.exists() and not overwrite:
        raise OutputExistsError(f"output {str(path)!r}: exists; pass --overwrite to replace "
                                f"it{other}")
    folder = path.parent
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise SnapshotError(f"output folder {str(folder)!r}: cannot be created ({exc.strerror})") from None
    if not os.access(folder, os.W_OK):
        raise SnapshotError(f"output folder {str(folder)!r}: not writable")


def check_output_folder(folder, option: str = "--out") -> Path:
    """Make sure ``folder`` exists (created with its parents) and a file can be written in it:
    checked before any work, so that hours of runs never end in an unwritable place."""
    import tempfile
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise SnapshotError(f"{option} {str(folder)!r}: exists and is not a directory")
    try:
        folder.mkdir(parents=True, exist_ok=True)
        with tempfile.NamedTemporaryFile(dir=folder, prefix=".convsim-check-"):
            pass
    except OSError as exc:
        raise SnapshotError(f"{option} {str(folder)!r}: cannot be written "
                            f"({exc.strerror or exc})") from None
    return folder


class RunFileWriter:
    """Writes snapshots and the diagnostic series of one run into its HDF5 file.

    Every write is one commit of a copy (see the module docstring); the committed file is
    never open for writing.
    """

    def __init__(self, path: str | Path, *, overwrite: bool = False, append: bool = False):
        self.path = Path(path)
        self.append = append
        self._fresh = False          # the new file waits as RUN.h5.part for its first snapshot
        if not append:
            check_writable(self.path, overwrite)
        elif not self.path.is_file():
            raise SnapshotError(f"run file {str(self.path)!r}: not found")

    # -- creation -----------------------------------------------------------------------------
    def create(self, grid, config_text: str, title: str, version: str,
               advected=("temperature",), derived=(), diagnostics=None) -> None:
        """Prepare a new file with the grid and metadata, as ``RUN.h5.part``: it replaces an
        old file (checked before) together with the first snapshot, in one commit.

        ``advected``: names of the run's advected fields (``ADVECTED``); ``derived``: names
        of the derived fields that apply to the run (``DERIVED``); ``diagnostics``: names
        of the declared diagnostics that apply (None: those every run has); the others get
        no dataset.
        """
        if self.append:
            return
        tmp = self.path.with_name(self.path.name + ".part")
        if diagnostics is None:
            diagnostics = [n for n, d in DIAGNOSTICS.items() if d.needs == ""]
        skip = ({n for n in ADVECTED if n not in advected} | {n for n in DERIVED if n not in derived}
                | {n for n in DIAGNOSTICS if n not in diagnostics})
        try:
            self._create(tmp, grid, config_text, title, version, advected, skip)
            self._fresh = True
        except OSError as exc:
            tmp.unlink(missing_ok=True)
            if is_disk_full(exc, self.path.parent):
                raise DiskFullError(f"run file {str(self.path)!r}: the disk is full, no snapshot "
                                    f"written ({exc.strerror or exc})") from None
            raise SnapshotError(f"run file {str(self.path)!r}: cannot be written ({exc})") from None

    def _create(self, tmp, grid, config_text, title, version, advected=("temperature",),
                skip=frozenset()):
        fault_point("create")
        with h5py.File(tmp, "w", locking=False) as f:
            scales = _Scales(f)      # the coordinate datasets, looked up once
            f.attrs["Conventions"] = "CF-1.8"
            f.attrs["title"] = title or "convsim run"
            f.attrs["source"] = f"convsim {version}"
            f.attrs["convsim_version"] = version
            f.attrs["created"] = _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
            f.attrs["config"] = config_text
            f.attrs["status"] = "running"
            f.attrs["wall_seconds"] = 0.0
            f.attrs["aspect"] = grid.aspect
            f.attrs["periodic"] = int(grid.periodic)
            f.attrs["advected_fields"] = " ".join(advected)
            for name, values in (("x", grid.x_cell), ("z", grid.z_cell), ("x_node", grid.x_node),
                                 ("z_node", grid.z_node)):
                d = f.create_dataset(name, data=values)
                self._coordinate(d, name, "1")
                d.attrs["axis"] = "X" if name.startswith("x") else "Z"
                if name.startswith("z"):
                    d.attrs["positive"] = "up"  # CF: direction of a vertical coordinate
            for name in ("time", "series_time"):
                d = f.create_dataset(name, shape=(0,), maxshape=(None,), dtype="f8",
                                     chunks=(256,) if name == "time" else (4096,))
                self._coordinate(d, name, "1")
                d.attrs["axis"] = "T"
                d.attrs["standard_name"] = "time"
            d = f.create_dataset("record", shape=(0,), maxshape=(None,), dtype="i8",
                                 chunks=(4096,))
            self._attach(scales, d, ("series_time",), "1", COORDINATES["record"])
            for name, (dims, units, long_name) in FIELDS.items():
                if name in skip or (name in ADVECTED and name not in advected):
                    continue
                shape = tuple(len(scales[d]) for d in dims)
                d = f.create_dataset(name, shape=(0,) + shape, maxshape=(None,) + shape,
                                     dtype="i8" if name == "step" else
                                     DERIVED[name].dtype if name in DERIVED else "f8",
                                     chunks=(1,) + shape if shape else (256,))
                self._attach(scales, d, ("time",) + dims, units, long_name)
                d.attrs.update(ADVECTED[name].cf if name in ADVECTED else
                               DERIVED[name].cf if name in DERIVED else {})
            for name, (units, long_name) in SERIES.items():
                if name == "series_time" or name in skip:
                    continue
                kind = DIAGNOSTICS[name].dtype if name in DIAGNOSTICS else "f8"
                d = f.create_dataset(name, shape=(0,), maxshape=(None,),
                                     dtype="i8" if name == "series_step" else kind,
                                     chunks=(4096,))
                self._attach(scales, d, ("series_time",), units, long_name)
                d.attrs.update(DIAGNOSTICS[name].cf if name in DIAGNOSTICS else {})
            _physical_coordinates(f, config_text)

    @staticmethod
    def _coordinate(d, name, units):
        d.make_scale(name)
        d.attrs.update(cf_attributes(name, units, COORDINATES[name]))

    @staticmethod
    def _attach(scales, d, dims, units, long_name):
        for axis, dim in enumerate(dims):
            d.dims[axis].attach_scale(scales[dim])
        d.attrs.update(cf_attributes(d.name.lstrip("/"), units, long_name))

    # -- appending ----------------------------------------------------------------------------
    def write(self, *, time: float, fields: dict, series: dict, restart: dict,
              status: str, wall_seconds: float) -> int:
        """Append one snapshot and the new series rows; replace the restart state.

        One commit (``convsim.files.commit``): the snapshot, its series rows, the restart state
        and the status become visible together or not at all.  Returns the snapshot index."""
        def update(f):
            n = f["time"].shape[0]
            f["time"].resize((n + 1,))
            f["time"][n] = time
            for name in stored_fields(f):
                d = f[name]
                d.resize((n + 1,) + d.shape[1:])
                d[n] = fields[name]
            fault_point("fields")
            rows = len(series.get("series_time", ()))
            if rows:
                m = f["record"].shape[0]
                f["record"].resize((m + rows,))
                f["record"][m:] = np.arange(m, m + rows)
                for name in (n for n in SERIES if n in f):
                    d = f[name]
                    d.resize((m + rows,))
                    d[m:] = series[name]
            _append_physical_times(f)
            fault_point("series")
            _replace_restart(f, restart)
            fault_point("restart")
            f.attrs["status"] = status
            f.attrs["wall_seconds"] = wall_seconds
            fault_point("attrs")
            return n

        size = sum(np.asarray(v).nbytes for v in fields.values())
        size += sum(np.asarray(v).nbytes for v in series.values())
        try:
            n = commit(self.path, update, extra_bytes=size, fresh=self._fresh)
            self._fresh = False
            return n
        except DiskFullError as exc:
            raise DiskFullError(f"{exc}; the file keeps every snapshot completed before "
                                f"({self.snapshots()} of them); free some space and continue "
                                f"the run with --restart {str(self.path)!r}") from None

    def snapshots(self) -> int:
        """Snapshots in the committed file."""
        try:
            with open_run_file(self.path) as f:
                return int(f["time"].shape[0])
        except (OSError, KeyError):
            return 0

    def finish(self, status: str, wall_seconds: float, summary: dict) -> None:
        def update(f):
            f.attrs["status"] = status
            f.attrs["wall_seconds"] = wall_seconds
            for key, value in summary.items():
                if isinstance(value, (int, float, str, bool, np.floating, np.integer)):
                    f.attrs[f"final_{key}"] = value
            if summary.get("statistics"):
                write_statistics(f, summary)
            fault_point("attrs")
        commit(self.path, update)


class _Scales(dict):
    """The datasets of an open file by name, each looked up in the file once (an h5py
    lookup costs about 0.1 ms; a new file attaches some 60 dimension scales)."""

    def __init__(self, f):
        super().__init__()
        self.f = f

    def __missing__(self, name):
        self[name] = self.f[name]
        return self[name]


def _replace_restart(f, restart: dict) -> None:
    """Write the restart state into group ``restart``, in place where shapes allow (so that the
    file does not grow by a dead copy of the state at every snapshot)."""
    g = f.require_group("restart")
    for key in list(g):
        if restart.get(key) is None or not isinstance(restart[key], np.ndarray) \
                or g[key].shape != restart[key].shape or g[key].dtype != restart[key].dtype:
            del g[key]
    for key in list(g.attrs):
        del g.attrs[key]
    for key, value in restart.items():
        if value is None:
            continue
        if isinstance(value, np.ndarray):
            if key in g:
                g[key][...] = value
            else:
                g.create_dataset(key, data=value)
        else:
            g.attrs[key] = value


def _physical_coordinates(f, config_text: str) -> None:
    """With a [body] table: x_km, z_km, x_node_km, z_node_km (km), and empty time_myr and
    series_time_myr (Myr) that :func:`_append_physical_times` keeps in step."""
    import tomllib
    from convsim.config import parse_config
    try:
        body = parse_config(tomllib.loads(config_text)).body
    except Exception:       # a config the run accepted; anything else: no physical coordinates
        return
    if body is None:
        return
    from convsim.units import scales_from_body      # the unit library only when needed
    scales = scales_from_body(body)
    for name in ("x", "z", "x_node", "z_node"):
        d = f.create_dataset(f"{name}_km", data=scales.length_to_km(f[name][:]))
        d.dims[0].attach_scale(f[name])
        d.attrs.update(units="km", long_name=COORDINATES[name].split(",")[0])
    f.attrs["time_scale_myr"] = scales.time_to_myr(1.0)
    for name in ("time", "series_time"):
        d = f.create_dataset(f"{name}_myr", shape=(0,), maxshape=(None,), dtype="f8",
                             chunks=(256,))
        d.dims[0].attach_scale(f[name])
        d.attrs.update(units="Myr", long_name=COORDINATES[name].split(",")[0])
    physical = {"time": "time_myr", "x": "x_km", "z": "z_km", "x_node": "x_node_km",
                "z_node": "z_node_km"}
    for name in stored_fields(f):                          # CF auxiliary coordinates
        dims = FIELDS[name][0]
        f[name].attrs["coordinates"] = " ".join(physical[d] for d in ("time",) + tuple(dims))
    for name in SERIES:
        if name != "series_time" and name in f:
            f[name].attrs["coordinates"] = "series_time_myr"


def _append_physical_times(f) -> None:
    """Extend time_myr and series_time_myr to the length of time and series_time."""
    if "time_myr" not in f:
        return
    scale = float(f.attrs["time_scale_myr"])
    for name in ("time", "series_time"):
        d, n = f[f"{name}_myr"], f[name].shape[0]
        if d.shape[0] < n:
            start = d.shape[0]
            d.resize((n,))
            d[start:] = f[name][start:] * scale


def stored_fields(f) -> list[str]:
    """Names of the snapshot fields an open run file holds (``FIELDS`` order)."""
    return [name for name in FIELDS if name in f]


class RunFileObserver:
    """Simulation observer that records the run into its run file."""

    def __init__(self, writer: RunFileWriter):
        self.writer = writer

    def on_start(self, simulation, resumed: bool) -> None:
        from convsim import __version__
        if not resumed:
            model = simulation.model
            self.writer.create(simulation.grid, simulation.config_text, simulation.config.title,
                               __version__, [f.name for f in model.fields],
                               derived=[n for n, d in DERIVED.items() if d.needs == "yielding"
                                        and model.yields],
                               diagnostics=model.diagnostic_names())

    def on_step(self, report) -> None:
        pass

    def on_snapshot(self, snap) -> None:
        self.writer.write(time=snap.time, fields=snap.fields, series=snap.series,
                          restart=snap.restart, status=snap.status, wall_seconds=snap.wall_seconds)

    def on_finish(self, result) -> None:
        summary = {k: v for k, v in result.summary().items() if k != "output" and v is not None}
        self.writer.finish(result.status, result.wall_seconds, summary)
