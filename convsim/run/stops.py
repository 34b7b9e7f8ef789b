"""Stop rules: small objects that watch the step reports and say when a run ends.

Every rule has the same interface (``StopRule``):

- ``observe(report) -> Decision | None`` after every accepted step (every rule
  sees every step, so rules that keep a history stay current);
- ``time_limit()`` a time the run must land on exactly (the end time), or inf;
- ``reset()`` when the state jumps (a Newton finish, a new continuation stage);
- ``restart_state() -> dict`` and ``restore(saved)`` so that ``--restart``
  continues bit for bit (flat keys of numbers or arrays; keep key names stable,
  old run files are read with them).

The controller asks the rules in the order of ``RULES`` (then ``Interrupted``);
the first decision wins.  A decision with ``ends_stage`` (steady state) ends only
the current continuation stage while further stages remain.

To add a rule: write one class here (or in its own module imported by
``convsim.run``) with ``@register`` and a ``from_config(stop)`` classmethod that
returns the rule, or None when the config does not ask for it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Decision", "StopRule", "RULES", "register", "rules_from_config", "run_statuses",
           "EndTime", "StepLimit", "SteadyState", "MeanPrecision", "Interrupted", "runaway",
           "SETTLE_STEPS"]

SETTLE_STEPS = 20
TIME_ROUNDING = 1e-12      # relative: a time this close to a target has reached it


@dataclass(frozen=True)
class Decision:
    """A rule's verdict: the run's status and the message that explains it."""

    status: str
    message: str
    ends_stage: bool = False      # ends a continuation stage rather than the run


class StopRule:
    """Base class: a rule that never stops and keeps no state.

    ``status``: the run status of the rule's decisions (listed by ``run_statuses``).
    """

    status = ""

    def observe(self, report) -> Decision | None:
        return None

    def time_limit(self) -> float:
        return math.inf

    def reset(self) -> None:
        pass

    def restart_state(self) -> dict:
        return {}

    def restore(self, saved: dict) -> None:
        pass

    def reached(self, state) -> Decision | None:
        """The decision when a restored run has met this rule already (no step taken then)."""
        return None

    def watch(self, averages) -> None:
        """Receive the run's time means (``run.averages.RunAverages``), for rules that read them."""


RULES: list = []


def register(cls):
    """Class decorator: add a rule (with ``from_config``) to the rules every run consults."""
    RULES.append(cls)
    return cls


def run_statuses() -> tuple:
    """Every status a run can end with: one per registered rule, then interrupted, diverged."""
    return tuple(cls.status for cls in RULES) + (Interrupted.status, "diverged")


def rules_from_config(stop) -> list:
    """The rules the config's [stop] table asks for, in the order they are consulted."""
    made = (cls.from_config(stop) for cls in RULES)
    return [rule for rule in made if rule is not None]


@register
class SteadyState(StopRule):
    """Steady when, for ``settle`` consecutive steps, max|dT/dt| <= tol * max(Nu, 1), the
    relative drift (peak to peak) of Nu and vrms over those steps <= tol and the heat
    imbalance (bottom inflow + heating - top outflow, relative) <= tol.  The drift of vrms
    is relative to max(vrms, 1) (the velocity unit kappa/d): a layer at rest has a vrms of
    round-off, whose relative drift is of order one."""

    status = "steady"

    def __init__(self, tolerance: float, settle: int = SETTLE_STEPS):
        self.tolerance, self.settle = float(tolerance), int(settle)
        self.reset()

    @classmethod
    def from_config(cls, stop):
        return cls(stop.steady_tolerance) if stop.steady else None

    def reset(self) -> None:
        self.settled = 0
        self.window: list = []

    def observe(self, report) -> Decision | None:
        tol = self.tolerance
        self.window.append((report.nusselt_top, report.vrms))
        if len(self.window) > self.settle:
            self.window.pop(0)
        arr = np.array(self.window)
        drift = np.ptp(arr, axis=0) / np.maximum(np.abs(arr.mean(axis=0)), [1e-300, 1.0])
        quiet = (report.tendency_max <= tol * max(abs(report.nusselt_top), 1.0)
                 and abs(report.heat_imbalance) <= tol and bool(np.all(drift <= tol)))
        self.settled = self.settled + 1 if quiet else 0
        if self.settled >= self.settle:
            return Decision(self.status, f"steady at step {report.step} (tolerance {tol:g})",
                            ends_stage=True)
        return None

    def restart_state(self) -> dict:
        return dict(settled=self.settled,
                    window=np.array(self.window, dtype=float).reshape(-1, 2))

    def restore(self, saved: dict) -> None:
        self.settled = int(saved.get("settled", 0))
        self.window = [tuple(v) for v in np.asarray(saved.get("window", np.zeros((0, 2))))]

    def reached(self, state) -> Decision | None:
        if self.settled >= self.settle:
            return Decision(self.status, f"already steady at step {state.step} before this "
                                         f"restart; nothing to do", ends_stage=True)
        return None


@register
class MeanPrecision(StopRule):
    """Stop a statistically steady run once both Nu means are known to a relative 95 %
    half-width ``precision`` (``stop.mean_precision``; ``RunAverages.precision_met``).
    Checked every ``every`` steps; all its state lives in the averages, which the run
    keeps in the restart record, so a restart takes the same decision at the same step."""

    status = "mean-precision"

    def __init__(self, precision: float, every: int = 100):
        self.precision, self.every = float(precision), int(every)
        self.averages = None

    @classmethod
    def from_config(cls, stop):
        return cls(stop.mean_precision) if stop.mean_precision > 0 else None

    def watch(self, averages) -> None:
        self.averages = averages

    def observe(self, report) -> Decision | None:
        if (self.averages is None or report.step % self.every
                or not self.averages.precision_met(self.precision)):
            return None
        return Decision(self.status, f"mean Nu known to {100 * self.precision:g} % (95 %) at "
                                     f"step {report.step}")


@register
class EndTime(StopRule):
    """Stop at the end time; the last step is cut to land on it."""

    status = "end-time"

    def __init__(self, end_time: float):
        self.end_time = float(end_time)

    @classmethod
    def from_config(cls, stop):
        return cls(stop.end_time) if stop.end_time > 0 else None

    def time_limit(self) -> float:
        return self.end_time

    def observe(self, report) -> Decision | None:
        if report.time >= self.end_time * (1 - TIME_ROUNDING):
            return Decision(self.status, f"reached end time {self.end_time:g}")
        return None

    def reached(self, state) -> Decision | None:
        if state.time >= self.end_time * (1 - TIME_ROUNDING):
            return Decision(self.status, f"already at the end time {self.end_time:g} before this "
                                         f"restart; nothing to do (raise stop.end_time to go on)")
        return None


@register
class StepLimit(StopRule):
    """Stop after a number of steps (counted from the start of the run, over restarts)."""

    status = "step-limit"

    def __init__(self, max_steps: int):
        self.max_steps = int(max_steps)

    @classmethod
    def from_config(cls, stop):
        return cls(stop.max_steps)

    def observe(self, report) -> Decision | None:
        if report.step >= self.max_steps:
            return Decision(self.status, f"reached the step limit {self.max_steps}")
        return None

    def reached(self, state) -> Decision | None:
        if state.step >= self.max_steps:
            return Decision(self.status, f"already at the step limit {self.max_steps} (step "
                                         f"{state.step}) before this restart; nothing to do "
                                         f"(raise stop.max_steps to go on)")
        return None


class Interrupted(StopRule):
    """Stop when the interrupt flag (``run.interrupt.DeferredInterrupt``) is set."""

    status = "interrupted"

    def __init__(self, flag):
        self.flag = flag

    def observe(self, report) -> Decision | None:
        if self.flag.requested:
            by = f" ({self.flag.name})" if getattr(self.flag, "name", "") else ""
            return Decision(self.status, f"interrupted{by} at step {report.step}")
        return None


def runaway(report, rayleigh: float, eta_min: float = 1.0, factor: float = 100.0
            ) -> Decision | None:
    """Divergence: vrms or Nu not finite, or vrms far above the boundary-layer scaling
    (``run.layer.runaway_velocity``: factor x max(10, (Ra / eta_min)^(2/3)), Ra with the
    law's reference viscosity, eta_min the smallest viscosity of the layer, so the scale
    is that of its least viscous fluid).  The step is not kept."""
    from convsim.run.layer import runaway_velocity
    limit = runaway_velocity(rayleigh, eta_min, factor)
    if not (np.isfinite(report.vrms) and np.isfinite(report.nusselt_top)) or report.vrms > limit:
        return Decision("diverged", f"step {report.step} at t = {report.time:.6g}: vrms = "
                                    f"{report.vrms:.3g} is not finite or above {limit:.3g}")
    return None
