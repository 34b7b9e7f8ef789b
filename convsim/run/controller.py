"""The run controller: the numerics advance, the controller decides.

Data flow: config -> ``run.build.build_model`` -> ``Model`` -> repeated
``Model.step(state) -> (state, StepReport)``.  After each step the controller
asks, in this order:

1. divergence (``stops.runaway``; a failed step raises ``StepFailed``): stop, keep
   the previous state;
2. the stop rules (``run.stops``: steady state, end time, step limit, then the
   interrupt flag): the first decision wins; a steady decision only ends the
   current continuation stage (``run.continuation``) while stages remain;
3. the Newton finish (``run.newton_finish``), which may replace the state by the
   solved steady state;
4. the snapshot schedule (``run.schedule``): a due snapshot goes to the observers
   as plain data (``run.records.SnapshotData``).

A step never passes the next output time or the end time: it is cut to land on
it.  The controller never writes files; the run-file writer
(``convsim.files.runfile``) and the progress bar come in as observers.  Every
way a run ends (a stop rule, divergence, Ctrl-C) hands the last good state to the
observers as a final snapshot, and the result says what happened.
"""

from __future__ import annotations

import logging
import math
import time
from dataclasses import dataclass

from convsim.config import Config, to_toml
from convsim.model.grid import Grid
from convsim.model.timestepping import Model, ModelState, StepFailed
from convsim.run import layer
from convsim.run.averages import RunAverages, finish_statistics, step_quantities, wall_contrast
from convsim.run.build import build_model
from convsim.run.continuation import Continuation
from convsim.run.initial import initial_temperature
from convsim.run.interrupt import DeferredInterrupt
from convsim.run.newton_finish import NewtonFinish
from convsim.run.records import (SERIES_COLUMNS, Observer, ResumePoint, RunResult, Series,
                                 SnapshotData, final_result, snapshot_fields)
from convsim.run.restart import state_from_record, state_record
from convsim.run.schedule import TIME_ROUNDING, SnapshotSchedule
from convsim.run.sequence import coarse_temperature
from convsim.run.stops import SETTLE_STEPS, Decision, Interrupted, rules_from_config, runaway

__all__ = ["Simulation", "RunResult", "SnapshotData", "Observer", "ResumePoint", "SETTLE_STEPS",
           "SERIES_COLUMNS", "build_model", "initial_temperature"]

log = logging.getLogger(__name__)


@dataclass
class RunProgress:
    """What changes during one run: the model of the current stage, the state, the policies."""

    model: Model
    state: ModelState
    continuation: Continuation
    rules: list
    newton: NewtonFinish | None
    schedule: SnapshotSchedule
    series: Series
    averages: RunAverages
    wall0: float
    phase: dict
    last_snapshot_step: int = -1

    def parts(self) -> list:
        """The objects that keep restart state."""
        return [p for p in (self.continuation, self.schedule, self.newton, self.averages,
                            *self.rules) if p is not None]


class Simulation:
    """One run of a config.

    Parameters
    ----------
    config : Config
    model : Model
    temperature : ndarray, optional
        Initial cell temperatures (default: from the config's [start] table).
    observers : sequence of Observer
    keep_series : bool
        Keep every series row in memory for the result (default). A run that writes a run
        file passes False: the rows go to the observers at each snapshot and nowhere else,
        so memory does not grow with the number of steps; its result reads them back.
    """

    def __init__(self, config: Config, model: Model, temperature=None, observers=(),
                 keep_series: bool = True):
        self.config, self.model = config, model
        self.grid = model.grid
        self.start_given = temperature is not None     # else grid sequencing may replace it
        if temperature is None:
            # the one-cell guess takes Ra at the cold top, however the config states it
            temperature = initial_temperature(self.grid, model.thermal, model.internal_heating,
                                              config.start, layer.rayleigh_numbers(config)["top"])
        self.temperature0 = temperature
        self.observers = list(observers)
        self.keep_series = keep_series
        self.config_text = to_toml(config)
        self.newton_reports: list = []
        self.smallest_viscosity = layer.smallest_viscosity(config)

    @classmethod
    def from_config(cls, config: Config, temperature=None, observers=(),
                    grid: Grid | None = None) -> "Simulation":
        config = layer.resolve(config)      # Ra and an Arrhenius law from [body]
        return cls(config, build_model(config, grid), temperature, observers)

    def run(self, resume: ResumePoint | None = None) -> RunResult:
        """Run to the stop rule; returns the result (status, final numbers and fields)."""
        p = self._start(resume)
        self._emit("on_start", self, resume is not None)
        if resume is None:
            self._snapshot(p, "running")
        with DeferredInterrupt() as interrupt:
            p.rules.append(Interrupted(interrupt))
            try:
                decision = self._finished_before(p) if resume is not None else None
                decision = decision or self._loop(p)
            except KeyboardInterrupt:      # not in the main thread: no deferred handler there
                decision = Decision("interrupted", f"interrupted at step {p.state.step}")
            if p.state.step != p.last_snapshot_step:     # a signal now stops nothing half-written
                self._snapshot(p, decision.status)
        result = final_result(p.model, p.state, decision, time.perf_counter() - p.wall0,
                              p.series.all_columns(), p.phase)
        result.rayleigh_numbers = layer.rayleigh_numbers(self.config)
        finish_statistics(result, p.averages, p.model, p.state, self.config.stop.steady_tolerance)
        if decision.status == "diverged":
            log.warning("run diverged: %s; the last good state is kept", decision.message)
        self._emit("on_finish", result)
        return result

    # -- the pieces of a run --------------------------------------------------------------------
    def _start(self, resume: ResumePoint | None) -> RunProgress:
        cfg = self.config
        newton = NewtonFinish.from_config(cfg.stop)
        if newton is not None:
            self.newton_reports = newton.reports
        p = RunProgress(model=self.model, state=None, continuation=Continuation.from_config(cfg),
                        rules=rules_from_config(cfg.stop), newton=newton,
                        schedule=SnapshotSchedule(cfg.output.snapshot_interval,
                                                  cfg.output.snapshot_steps),
                        series=Series(cfg.output.series_every, keep_all=self.keep_series),
                        averages=RunAverages(self.grid.nz, self.model.internal_heating,
                                             wall_contrast(self.model),
                                             precision=cfg.stop.mean_precision),
                        wall0=time.perf_counter(),
                        phase=dict(advect=0.0, diffuse=0.0, stokes=0.0, factor=0.0, diagnose=0.0))
        for rule in p.rules:
            rule.watch(p.averages)
        if resume is None:
            p.model = p.continuation.model(self.model)
            coarse = None if self.start_given else coarse_temperature(cfg, self.grid)
            p.state = p.model.initial_state(self.temperature0 if coarse is None else coarse)
        else:
            for part in p.parts():
                part.restore(resume.state)
            p.model = p.continuation.model(self.model)
            p.state = state_from_record(p.model, resume.state)
            p.last_snapshot_step = p.state.step
        return p

    @staticmethod
    def _finished_before(p: RunProgress) -> Decision | None:
        """A restarted run that met its stop rule already takes no step (a finished run
        restarted stays as it was)."""
        for rule in p.rules:
            decision = rule.reached(p.state)
            if decision is not None and not (decision.ends_stage and p.continuation.has_next):
                return decision
        return None

    def _loop(self, p: RunProgress) -> Decision:
        """Step until a rule decides; returns the decision."""
        while True:
            report, failure = self._advance(p)
            if failure is not None:
                return failure
            verdicts = [rule.observe(report) for rule in p.rules]
            decision = next((v for v in verdicts if v is not None), None)
            if decision is not None and decision.ends_stage and p.continuation.has_next:
                p.model, state = p.continuation.advance(self.model, p.state)
                self._jump(p, state)
                if p.newton is not None:
                    p.newton.reset(state.step)
                continue
            if p.newton is not None:
                solved = p.newton.attempt(p.model, p.state, report)
                if solved is not None:
                    self._jump(p, solved)
            if decision is not None:
                return decision
            if p.schedule.due(p.state.time, p.state.step):
                p.schedule.advance_past(p.state.time)
                self._snapshot(p, "running")

    def _advance(self, p: RunProgress):
        """One step of the model, landing on the next output or end time; returns
        (report, None) or (report or None, the divergence decision)."""
        limit = min([t for t in self._time_targets(p) if t > p.state.time], default=math.inf)
        dt_limit = limit - p.state.time if limit < math.inf else None
        try:
            new, report = p.model.step(p.state, dt_limit)
        except StepFailed as exc:
            return None, Decision("diverged", str(exc))
        failure = runaway(report, p.model.rayleigh, self.smallest_viscosity,
                          self.config.stop.runaway_factor)
        if failure is not None:
            return report, failure
        if limit < math.inf and abs(new.time - limit) <= TIME_ROUNDING * abs(limit):
            new.time = report.time = limit          # exact output times, no drift
        p.state = new
        for k, v in report.seconds.items():
            p.phase[k] = p.phase.get(k, 0.0) + v
        p.series.record(report, p.model.rayleigh)
        p.averages.record(new.time, lambda: step_quantities(      # eta with the strain rate
            self.grid, new.temperature, new.psi,
            p.model.viscosities(new.temperature, new.psi)[1], report))
        self._emit("on_step", report)
        return report, None

    @staticmethod
    def _time_targets(p: RunProgress) -> list:
        return [p.schedule.time_limit()] + [rule.time_limit() for rule in p.rules]

    @staticmethod
    def _jump(p: RunProgress, state: ModelState) -> None:
        """The state jumped (Newton finish, new stage): rules and time means forget their
        history."""
        p.state = state
        p.averages.clear()
        for rule in p.rules:
            rule.reset()

    def _snapshot(self, p: RunProgress, status: str) -> None:
        restart = state_record(p.state)
        for part in p.parts():
            restart.update(part.restart_state())
        data = SnapshotData(time=p.state.time, step=p.state.step,
                            fields=snapshot_fields(p.model, p.state), series=p.series.take_new(),
                            restart=restart, status=status,
                            wall_seconds=time.perf_counter() - p.wall0)
        p.last_snapshot_step = p.state.step
        self._emit("on_snapshot", data)

    def _emit(self, method: str, *args) -> None:
        for obs in self.observers:
            getattr(obs, method)(*args)
