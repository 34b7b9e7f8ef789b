"""A run: builds the model from a config, owns the time loop, decides when to record.

Data flow: config -> ``Simulation.from_config`` (grid, thermal conditions,
viscosity law, Stokes back end, stepper: a ``timestepping.Model``) -> repeated
``Model.step`` -> ``StepReport`` -> observers.  The simulation decides when a
snapshot is due and hands the observers plain data (``SnapshotData``); it never
writes files itself.  The writer (``convsim.files.runfile``) and the progress bar
(``convsim.cli``) come in as observers.

A run ends at the first of: steady state, end time, step limit; or it is
stopped by divergence (a step that fails even at small dt, or a runaway
velocity) or by Ctrl-C.  In every case the last good state is handed to the
observers as a final snapshot and the result says what happened.

Steady state: for ``SETTLE_STEPS`` consecutive steps, max|dT/dt| <= tol * Nu,
the drift of Nu and vrms over those steps <= tol relative, and the heat-budget
imbalance (bottom inflow + heating - top outflow, with the scheme's own
fluxes) <= tol relative to the top outflow.
"""

from __future__ import annotations

import logging
import math
import signal
import threading
import time
from dataclasses import dataclass, field, fields as dc_fields

import numpy as np

from convsim.model import diagnostics as diag
from convsim.config import Config, to_toml
from convsim.model.energy import ThermalBoundaries
from convsim.model.grid import Grid
from convsim.model.rheology import ViscosityLaw
from convsim.model.steady import newton_steady
from convsim.model.timestepping import Model, ModelState, StepFailed, StepReport
from convsim.run import averages as avg

__all__ = ["Simulation", "RunResult", "SnapshotData", "Observer", "ResumePoint",
           "initial_temperature", "conductive_profile", "SETTLE_STEPS"]

log = logging.getLogger(__name__)

SETTLE_STEPS = 20
NEWTON_FIRST_WAIT = 50      # steps before the first Newton attempt; doubled after a failure
SERIES_COLUMNS = ("series_time", "series_step", "dt", "rayleigh", "nusselt_top", "nusselt_bottom",
                  "vrms", "surface_vrms", "mean_temperature", "energy_residual", "tendency_max",
                  "stokes_iterations")


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

    def on_start(self, simulation: "Simulation", resumed: bool) -> None: ...

    def on_step(self, report: StepReport) -> None: ...

    def on_snapshot(self, snapshot: SnapshotData) -> None: ...

    def on_finish(self, result: "RunResult") -> None: ...


@dataclass
class ResumePoint:
    """The restart group of a run file, as plain data (see ``convsim.files.runfile.read_run``)."""

    state: dict


@dataclass
class RunResult:
    """What a run produced: status, final diagnostics and fields."""

    status: str                   # steady | mean-precision | end-time | step-limit | diverged
                                  # | interrupted
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

    @property
    def steady(self) -> bool:
        return self.status == "steady"

    def summary(self) -> dict:
        """The headline numbers as a JSON-ready dict."""
        q = [float(v) for v in self.corner_gradients]
        return dict(status=self.status, steady=self.steady, nusselt_top=self.nusselt_top,
                    nusselt_bottom=self.nusselt_bottom, vrms=self.vrms,
                    surface_vrms=self.surface_vrms, mean_temperature=self.mean_temperature,
                    q1=q[0], q2=q[1], q3=q[2], q4=q[3], time=self.time, steps=self.steps,
                    wall_seconds=self.wall_seconds, nx=self.grid.nx, nz=self.grid.nz,
                    output=self.output, message=self.message, settled=self.settled,
                    regime=self.lid.get("regime"), statistics=_finite(self.statistics),
                    lid=_finite(self.lid), heat_balance=_finite(self.heat_balance))


def _finite(value):
    """Nested dicts and lists with NaN and inf as None (JSON has neither)."""
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_finite(v) for v in value]
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.bool_):
        return bool(value)
    return value


def conductive_profile(z: np.ndarray, thermal: ThermalBoundaries, heating: float) -> np.ndarray:
    """Steady conductive temperature T(z) = a + b z - H z^2 / 2 for the thermal conditions.

    Fixed T at both walls: T(0) = Tb, T(1) = Tt.  Fixed upward flux q = -dT/dz
    at one wall and T at the other.
    """
    H = heating
    if thermal.bottom_kind == "temperature" and thermal.top_kind == "temperature":
        a = thermal.bottom_value
        b = thermal.top_value - thermal.bottom_value + 0.5 * H
    elif thermal.bottom_kind == "temperature":          # flux at the top: -T'(1) = q
        a = thermal.bottom_value
        b = H - thermal.top_value
    else:                                               # flux at the bottom: -T'(0) = q
        b = -thermal.bottom_value
        a = thermal.top_value - b + 0.5 * H
    return a + b * z - 0.5 * H * z * z


def initial_temperature(grid: Grid, thermal: ThermalBoundaries, heating: float, start,
                        rayleigh: float) -> np.ndarray:
    """Cell temperatures of a conductive or one-cell start, shape (nz, nx).

    ``start`` is the config's [start] table (read for kind, perturbation,
    amplitude, mode, seed).  The conductive profile is averaged over each cell
    exactly (T is quadratic in z).
    """
    X, Z = grid.cell_mesh()
    T = conductive_profile(Z, thermal, heating) + heating * grid.dz ** 2 / 24.0
    if start.kind == "one-cell":
        # isothermal core at the mean wall temperature with error-function boundary layers of
        # the boundary-layer-theory thickness delta ~ (Ra / 1000)^(-1/3) / 2 (common practice)
        from scipy.special import erf
        tb, tt = T[0].mean(), T[-1].mean()
        core = 0.5 * (tb + tt)
        delta = 0.5 * max(rayleigh / 1000.0, 1.0) ** (-1.0 / 3.0)
        T = (core + (tb - core) * (1.0 - erf(Z / delta)) + (tt - core) * (1.0 - erf((1.0 - Z) / delta)))
        T = T + 0.05 * np.cos(np.pi * X / grid.aspect) * np.sin(np.pi * Z)
        return T
    k = (2.0 if grid.periodic else 1.0) * start.mode * np.pi / grid.aspect
    if start.perturbation == "mode":
        T = T + start.amplitude * np.cos(k * X) * np.sin(np.pi * Z)
    elif start.perturbation == "noise":
        rng = np.random.default_rng(start.seed)
        T = T + start.amplitude * rng.uniform(-1.0, 1.0, grid.cell_shape) * np.sin(np.pi * Z)
    return T


class Simulation:
    """One run of a config.

    Parameters
    ----------
    config : Config
    model : Model
    temperature : ndarray, optional
        Initial cell temperatures (default: from the config's [start] table).
    observers : sequence of Observer
    """

    def __init__(self, config: Config, model: Model, temperature: np.ndarray | None = None,
                 observers=()):
        self.config, self.model = config, model
        self.grid = model.grid
        if temperature is None:
            temperature = initial_temperature(self.grid, model.thermal, model.internal_heating,
                                              config.start, config.physics.rayleigh)
        self.temperature0 = temperature
        self.observers = list(observers)
        self.config_text = to_toml(config)
        self.newton_reports: list = []

    @classmethod
    def from_config(cls, config: Config, temperature: np.ndarray | None = None, observers=(),
                    grid: Grid | None = None) -> "Simulation":
        return cls(config, build_model(config, grid), temperature, observers)

    # -- helpers ------------------------------------------------------------------------------
    def _fields(self, state: ModelState) -> dict:
        from convsim.model.stokes import face_velocities
        m = self.model
        eta_n, eta_c = m.viscosities(state.temperature)
        u, w = face_velocities(self.grid, state.psi)
        q = diag.corner_gradients(self.grid, state.temperature, m.thermal)
        return dict(temperature=state.temperature, viscosity=eta_c, streamfunction=state.psi,
                    velocity_x=u, velocity_z=w,
                    temperature_profile=diag.horizontal_mean(state.temperature),
                    viscosity_profile=diag.horizontal_mean(eta_c),
                    q1=q[0], q2=q[1], q3=q[2], q4=q[3], step=state.step)

    @staticmethod
    def _restart(state: ModelState, extra: dict) -> dict:
        out = dict(temperature=state.temperature, psi=state.psi,
                   previous_temperature=state.previous_temperature,
                   previous_tendency=state.previous_tendency,
                   factor_weights=state.factor_weights, time=state.time, step=state.step,
                   previous_dt=state.previous_dt)
        out.update(extra)
        return out

    def _emit(self, method, *args):
        for obs in self.observers:
            getattr(obs, method)(*args)

    # -- the loop -------------------------------------------------------------------------------
    def run(self, resume: ResumePoint | None = None) -> RunResult:
        """Run to the stop rule; returns the result (status, final numbers and fields)."""
        cfg = self.config
        stop, out = cfg.stop, cfg.output
        stages = list(cfg.start.continuation) + [cfg.physics.rayleigh]
        wall0 = time.perf_counter()
        phase = dict(advect=0.0, diffuse=0.0, stokes=0.0, factor=0.0, diagnose=0.0)
        series_rows: list = []
        all_rows: list = []
        window: list = []
        settled = 0
        newton_wait, newton_next = NEWTON_FIRST_WAIT, NEWTON_FIRST_WAIT
        newton_done = False
        averages = avg.RunAverages(self.grid.nz, self.model.internal_heating,
                                   _wall_contrast(self.model))
        if resume is None:
            stage = 0
            model = self.model.with_rayleigh(stages[0])
            state = model.initial_state(self.temperature0)
            next_snapshot = out.snapshot_interval if out.snapshot_interval > 0 else math.inf
        else:
            r = resume.state
            stage = int(r["stage"])
            model = self.model.with_rayleigh(stages[stage])
            state = ModelState(time=float(r["time"]), step=int(r["step"]),
                               temperature=np.array(r["temperature"]), psi=np.array(r["psi"]),
                               previous_temperature=r.get("previous_temperature"),
                               previous_tendency=r.get("previous_tendency"),
                               previous_dt=float(r["previous_dt"]),
                               factor_weights=r.get("factor_weights"))
            model.restore_factor(state.factor_weights)
            next_snapshot = float(r["next_snapshot"])
            settled = int(r["settled"])
            newton_wait, newton_next = int(r["newton_wait"]), int(r["newton_next"])
            newton_done = bool(r["newton_done"])
            window = [tuple(v) for v in np.asarray(r.get("window", np.zeros((0, 2))))]
            averages.restore(r)
        self._emit("on_start", self, resume is not None)
        status, message = "", ""
        tol = stop.steady_tolerance

        def snapshot(st, status_now):
            extra = dict(stage=stage, next_snapshot=next_snapshot, settled=settled,
                         newton_wait=newton_wait, newton_next=newton_next,
                         newton_done=int(newton_done),
                         window=np.array(window, dtype=float).reshape(-1, 2),
                         **averages.state())
            cols = {c: np.array([row[i] for row in series_rows]) for i, c in enumerate(SERIES_COLUMNS)}
            data = SnapshotData(time=st.time, step=st.step, fields=self._fields(st), series=cols,
                                restart=self._restart(st, extra), status=status_now,
                                wall_seconds=time.perf_counter() - wall0)
            series_rows.clear()
            self._emit("on_snapshot", data)

        if resume is None:
            snapshot(state, "running")
        last_snapshot_step = state.step
        interrupt = _DeferredInterrupt()
        try:
            while True:
                dt_limit = None
                if stop.end_time > 0:
                    dt_limit = stop.end_time - state.time
                if next_snapshot < math.inf:
                    dt_limit = min(dt_limit or math.inf, next_snapshot - state.time)
                if dt_limit is not None and dt_limit <= 0:
                    dt_limit = None
                try:
                    new, report = model.step(state, dt_limit)
                except StepFailed as exc:
                    status, message = "diverged", str(exc)
                    break
                runaway = max(1.0e3, 100.0 * model.rayleigh ** (2.0 / 3.0))
                if not (np.isfinite(report.vrms) and np.isfinite(report.nusselt_top)) \
                        or report.vrms > runaway:
                    status = "diverged"
                    message = (f"step {report.step} at t = {report.time:.6g}: vrms = "
                               f"{report.vrms:.3g} is not finite or above {runaway:.3g}")
                    break
                state = new
                averages.record(state.time, lambda: avg.step_quantities(
                    self.grid, state.temperature, state.psi,
                    model.viscosities(state.temperature)[1], report))
                for k, v in report.seconds.items():
                    phase[k] = phase.get(k, 0.0) + v
                if report.step % out.series_every == 0:
                    row = (report.time, report.step, report.dt, model.rayleigh, report.nusselt_top,
                           report.nusselt_bottom, report.vrms, report.surface_vrms,
                           report.mean_temperature, report.energy_residual, report.tendency_max,
                           report.stokes_iterations)
                    series_rows.append(row)
                    all_rows.append(row)
                self._emit("on_step", report)
                # steady-state test
                window.append((report.nusselt_top, report.vrms))
                if len(window) > SETTLE_STEPS:
                    window.pop(0)
                nu_scale = max(abs(report.nusselt_top), 1.0)
                imbalance = abs(report.heat_imbalance)
                arr = np.array(window)
                drift = np.ptp(arr, axis=0) / np.maximum(np.abs(arr.mean(axis=0)), 1e-300)
                quiet = (report.tendency_max <= tol * nu_scale and imbalance <= tol
                         and bool(np.all(drift <= tol)))
                settled = settled + 1 if quiet else 0
                steady_now = stop.steady and settled >= SETTLE_STEPS
                if steady_now and stage < len(stages) - 1:
                    log.info("stage Ra = %g steady at step %d; continuing at Ra = %g",
                             model.rayleigh, state.step, stages[stage + 1])
                    stage += 1
                    model = self.model.with_rayleigh(stages[stage])
                    state = ModelState(time=state.time, step=state.step,
                                       temperature=state.temperature,
                                       psi=model.solve_flow(state.temperature, state.psi)[0],
                                       factor_weights=model.factor_weights)
                    settled, window = 0, []
                    averages.clear()
                    newton_wait, newton_next = NEWTON_FIRST_WAIT, state.step + NEWTON_FIRST_WAIT
                    newton_done = False
                    continue
                if (stop.steady and stop.newton and not newton_done and state.step >= newton_next
                        and report.tendency_max <= stop.newton_threshold * nu_scale):
                    T_n, psi_n, nrep = newton_steady(model, state.temperature, state.psi,
                                                     0.1 * tol * nu_scale)
                    self.newton_reports.append((state.step, nrep))
                    if nrep.converged:
                        log.info("newton: steady equations solved at step %d in %d iterations "
                                 "(%d residual evaluations)", state.step, nrep.iterations,
                                 nrep.residual_evaluations)
                        state = ModelState(time=state.time, step=state.step, temperature=T_n,
                                           psi=psi_n, factor_weights=model.factor_weights)
                        newton_done = True
                        settled, window = 0, []
                    else:
                        newton_wait *= 2
                        newton_next = state.step + newton_wait
                        log.info("newton: no convergence at step %d; next try at step %d",
                                 state.step, newton_next)
                if steady_now:
                    status = "steady"
                    message = f"steady at step {state.step} (tolerance {tol:g})"
                elif (stop.mean_precision > 0 and state.step % avg.CHECK_EVERY == 0
                      and averages.precision_met(stop.mean_precision)):
                    status = "mean-precision"
                    message = (f"mean Nu known to {100 * stop.mean_precision:g} % (95 %) at step "
                               f"{state.step}")
                elif stop.end_time > 0 and state.time >= stop.end_time * (1 - 1e-12):
                    status, message = "end-time", f"reached end time {stop.end_time:g}"
                elif state.step >= stop.max_steps:
                    status, message = "step-limit", f"reached the step limit {stop.max_steps}"
                elif interrupt.requested:
                    status, message = "interrupted", f"interrupted at step {state.step}"
                if status:
                    break
                due = ((out.snapshot_steps and state.step % out.snapshot_steps == 0)
                       or state.time >= next_snapshot * (1 - 1e-12))
                if due:
                    while next_snapshot <= state.time * (1 + 1e-12):
                        next_snapshot += out.snapshot_interval
                    snapshot(state, "running")
                    last_snapshot_step = state.step
        except KeyboardInterrupt:      # not in the main thread: no deferred handler there
            status, message = "interrupted", f"interrupted at step {state.step}"
        finally:
            interrupt.restore()
        if state.step != last_snapshot_step:
            snapshot(state, status)
        wall = time.perf_counter() - wall0
        q = diag.corner_gradients(self.grid, state.temperature, model.thermal)
        nu_top, nu_bottom = diag.nusselt_numbers(self.grid, state.temperature, model.thermal)
        result = RunResult(
            status=status, message=message, time=state.time, steps=state.step, wall_seconds=wall,
            nusselt_top=nu_top, nusselt_bottom=nu_bottom,
            vrms=diag.rms_velocity(self.grid, state.psi),
            surface_vrms=diag.surface_rms_velocity(self.grid, state.psi),
            mean_temperature=float(state.temperature.mean()), corner_gradients=q,
            temperature=state.temperature, psi=state.psi,
            viscosity=model.viscosities(state.temperature)[1], grid=self.grid,
            series={c: np.array([row[i] for row in all_rows]) for i, c in enumerate(SERIES_COLUMNS)},
            phase_seconds=phase)
        finish_statistics(result, averages, model, state, tol)
        if status == "diverged":
            log.warning("run diverged: %s; the last good state is kept", message)
        self._emit("on_finish", result)
        return result


def _law_contrast(model: Model, temperature: np.ndarray) -> float:
    th = model.thermal
    if th.top_kind == "temperature" and th.bottom_kind == "temperature":
        lo, hi = sorted((th.top_value, th.bottom_value))
    else:
        lo, hi = float(temperature.min()), float(temperature.max())
    from convsim.model.lid import law_viscosity_contrast
    return law_viscosity_contrast(model.law, lo, hi)


def _wall_contrast(model: Model) -> float:
    th = model.thermal
    if th.top_kind == "temperature" and th.bottom_kind == "temperature":
        return th.bottom_value - th.top_value
    return math.nan          # fixed flux: the contrast varies; no balance of the means


def finish_statistics(result: RunResult, averages, model: Model, state: ModelState,
                      tol: float) -> None:
    """Fill the result's statistics, settled word, lid diagnostics and heat balance
    (``tol``: the steady tolerance, for the heat balance of a steady run)."""
    report = StepReport(step=state.step, time=state.time, dt=0.0,
                        nusselt_top=result.nusselt_top, nusselt_bottom=result.nusselt_bottom,
                        vrms=result.vrms, surface_vrms=result.surface_vrms,
                        mean_temperature=result.mean_temperature, energy_residual=0.0,
                        heat_imbalance=0.0, tendency_max=0.0)
    final = avg.step_quantities(model.grid, state.temperature, state.psi, result.viscosity, report)
    result.statistics, result.settled = avg.run_statistics(averages, result.status, final,
                                                           state.time)
    result.lid = avg.lid_report(result.statistics, model.law, model.grid, state.psi,
                                _law_contrast(model, state.temperature))
    tolerance = tol if result.status == "steady" else 1e-9
    result.heat_balance = avg.heat_balance(result.statistics, model.internal_heating,
                                           _wall_contrast(model), tolerance)


class _DeferredInterrupt:
    """Turns Ctrl-C (SIGINT) into a flag the loop reads between steps, so that an interrupt
    never lands inside a snapshot write.  Only in the main thread (signals go there)."""

    def __init__(self):
        self.requested = False
        self._previous = None
        if threading.current_thread() is threading.main_thread():
            self._previous = signal.signal(signal.SIGINT, self._handle)

    def _handle(self, signum, frame):
        self.requested = True

    def restore(self):
        if self._previous is not None:
            signal.signal(signal.SIGINT, self._previous)
            self._previous = None


def build_model(config: Config, grid: Grid | None = None) -> Model:
    """The ``Model`` a config describes (grid override for convergence studies)."""
    d, b, n, v = config.domain, config.boundaries, config.numerics, config.viscosity
    if grid is None:
        grid = Grid(d.nx, d.nz, d.aspect, periodic=(b.sides == "periodic"))
    thermal = ThermalBoundaries(b.top_heat, b.top_value, b.bottom_heat, b.bottom_value)
    law = ViscosityLaw(**{f.name: getattr(v, f.name) for f in dc_fields(ViscosityLaw)})
    limiter = "upwind" if n.advection == "upwind" else n.limiter
    return Model(grid, config.physics.rayleigh, thermal, law, config.physics.internal_heating,
                 b.top_flow, b.bottom_flow, limiter, n.time_scheme, n.cfl, n.max_dt,
                 n.stokes_solver, n.factor_reuse)
