"""What a run hands out: snapshot data for the observers, the diagnostic series, the result.

All plain data: observers (the run-file writer, a progress bar) receive these and
never reach into the controller.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from convsim.model import diagnostics as diag
from convsim.model.grid import Grid

__all__ = ["SnapshotData", "Observer", "ResumePoint", "RunResult", "Series", "RowBuffer",
           "SERIES_COLUMNS", "snapshot_fields", "final_result"]

#: The step's own columns, then one per declared diagnostic (``model.diagnostics.DIAGNOSTICS``).
STEP_COLUMNS = ("series_time", "series_step", "dt", "rayleigh")
SERIES_COLUMNS = STEP_COLUMNS + tuple(diag.DIAGNOSTICS)
_COLUMN_DTYPES = {"series_step": "i8", **{n: d.dtype for n, d in diag.DIAGNOSTICS.items()}}


@dataclass
class SnapshotData:
    """Everything an observer needs to record one snapshot (plain arrays and numbers)."""

    time: float
    step: int
    fields: dict          # name -> array, see convsim.files.runfile.FIELDS
    series: dict          # column -> array of the rows since the previous snapshot
    restart: dict         # the exact state to continue from
    status: str
    wall_seconds: float


class Observer:
    """Receives the run's events.  Subclass and override what you need."""

    def on_start(self, simulation, resumed: bool) -> None: ...

    def on_step(self, report) -> None: ...

    def on_snapshot(self, snapshot: SnapshotData) -> None: ...

    def on_finish(self, result: "RunResult") -> None: ...


@dataclass
class ResumePoint:
    """The restart group of a run file, as plain data (see ``convsim.files.reader.read_run``)."""

    state: dict


@dataclass
class RunResult:
    """What a run produced: status, final diagnostics and fields."""

    status: str                   # one of run.stops.run_statuses()
    message: str
    time: float
    steps: int
    wall_seconds: float
    nusselt_top: float
    nusselt_bottom: float
    vrms: float
    surface_vrms: float
    mean_temperature: float
    corner_gradients: np.ndarray  # q1..q4
    temperature: np.ndarray
    psi: np.ndarray
    viscosity: np.ndarray
    grid: Grid
    series: dict = field(default_factory=dict)
    phase_seconds: dict = field(default_factory=dict)
    output: str | None = None
    statistics: dict = field(default_factory=dict)   # quantity -> mean, ci95, from_time, ...
    settled: str = "unfinished"                      # steady | statistically-steady | unfinished
    lid: dict = field(default_factory=dict)          # stagnant-lid diagnostics and regime
    heat_balance: dict = field(default_factory=dict)  # <Nu_top> - <Nu_bottom> - H / dT
    diagnostics: dict = field(default_factory=dict)   # every declared diagnostic of the state
    rayleigh_numbers: dict = field(default_factory=dict)   # Ra at top, bottom, interior
    scales: object = None          # convsim.units.Scales of the config's [body], or None
    physical: dict | None = None   # the answers in physical units (convsim.units)

    def to_xarray(self):
        """The final fields and the time series as an ``xarray.Dataset`` (see convsim.views)."""
        from convsim.views import result_dataset
        return result_dataset(self)

    @property
    def steady(self) -> bool:
        return self.status == "steady"

    def summary(self) -> dict:
        """The headline numbers as a JSON-ready dict."""
        q = [float(v) for v in self.corner_gradients]
        return dict(status=self.status, steady=self.steady, **self.diagnostics,
                    q1=q[0], q2=q[1], q3=q[2], q4=q[3], time=self.time, steps=self.steps,
                    wall_seconds=self.wall_seconds, nx=self.grid.nx, nz=self.grid.nz,
                    output=self.output, message=self.message, settled=self.settled,
                    regime=self.lid.get("regime"), statistics=_finite(self.statistics),
                    lid=_finite(self.lid), heat_balance=_finite(self.heat_balance),
                    **{f"rayleigh_{k}": v for k, v in self.rayleigh_numbers.items()},
                    **({"physical": self.physical} if self.physical else {}))


def _finite(value):
    """Nested dicts and lists with NaN and inf as None (JSON has neither)."""
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite(v) for v in value]
    if isinstance(value, (float, np.floating)):
        return float(value) if np.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.bool_):
        return bool(value)
    return value


class RowBuffer:
    """Rows of numbers in one growing float64 array (8 bytes a number; doubles when full);
    integer columns (steps, iteration counts) are exact below 2**53."""

    def __init__(self, width: int, capacity: int = 256):
        self.rows = np.empty((capacity, width))
        self.count = 0

    def append(self, row) -> None:
        if self.count == len(self.rows):
            grown = np.empty((2 * len(self.rows), self.rows.shape[1]))
            grown[:self.count] = self.rows[:self.count]
            self.rows = grown
        self.rows[self.count] = row
        self.count += 1

    def columns(self) -> dict:
        """``{column: array}`` of the rows held (``series_step`` as integers)."""
        used = self.rows[:self.count]
        return {c: used[:, i].astype(_COLUMN_DTYPES.get(c, "f8"))
                for i, c in enumerate(SERIES_COLUMNS)}

    def clear(self) -> None:
        self.count = 0


class Series:
    """The diagnostic time series: one row per recorded step, columns ``SERIES_COLUMNS``.

    Keeps the rows since the last snapshot (handed to the observers, then cleared) and,
    when ``keep_all``, every row of this process for the result, as numbers in numpy
    arrays. A run that writes a run file streams its rows there and keeps none
    (``keep_all=False``): its result reads the series back from the file.
    """

    def __init__(self, every: int = 1, keep_all: bool = True):
        self.every = int(every)
        self.new_rows = RowBuffer(len(SERIES_COLUMNS))
        self.all_rows = RowBuffer(len(SERIES_COLUMNS)) if keep_all else None

    def record(self, report, rayleigh: float) -> None:
        if report.step % self.every:
            return
        row = (report.time, report.step, report.dt, rayleigh,
               *(getattr(report, name) for name in diag.DIAGNOSTICS))
        self.new_rows.append(row)
        if self.all_rows is not None:
            self.all_rows.append(row)

    def all_columns(self) -> dict:
        """Every row kept, as columns (empty columns when the rows were not kept)."""
        if self.all_rows is None:
            return {}
        return self.all_rows.columns()

    def take_new(self) -> dict:
        """The rows since the last call, as columns; forgets them."""
        out = self.new_rows.columns()
        self.new_rows.clear()
        return out


def snapshot_fields(model, state) -> dict:
    """The fields of a snapshot (``convsim.files.runfile.FIELDS``) from the state."""
    from convsim.model.stokes import face_velocities
    grid = model.grid
    eta_c = model.viscosities(state.temperature, state.psi)[1]
    u, w = face_velocities(grid, state.psi)
    q = diag.corner_gradients(grid, state.temperature, model.thermal)
    derived = {}
    if model.yields:               # the derived fields of model.fields.DERIVED
        y = model.yield_fields(state)
        derived = dict(strain_rate=y.strain_rate, stress=y.stress,
                       yielded=y.yielded.astype(np.int8))
    return dict(state.fields, viscosity=eta_c, streamfunction=state.psi,
                velocity_x=u, velocity_z=w,
                temperature_profile=diag.horizontal_mean(state.temperature),
                viscosity_profile=diag.horizontal_mean(eta_c),
                q1=q[0], q2=q[1], q3=q[2], q4=q[3], step=state.step, **derived)


def final_result(model, state, decision, wall: float, series: dict, phase: dict) -> RunResult:
    """The ``RunResult`` of a run that ended in ``state`` for the reason ``decision``."""
    grid = model.grid
    values = model.diagnostics(state)
    return RunResult(
        status=decision.status, message=decision.message, time=state.time, steps=state.step,
        wall_seconds=wall, nusselt_top=values["nusselt_top"],
        nusselt_bottom=values["nusselt_bottom"], vrms=values["vrms"],
        surface_vrms=values["surface_vrms"], mean_temperature=values["mean_temperature"],
        corner_gradients=diag.corner_gradients(grid, state.temperature, model.thermal),
        temperature=state.temperature, psi=state.psi,
        viscosity=model.viscosities(state.temperature, state.psi)[1], grid=grid, series=series,
        phase_seconds=phase, diagnostics=values)
