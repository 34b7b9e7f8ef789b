"""When the controller records a snapshot: every ``interval`` of time and/or every ``steps`` steps.

Output times are computed, never accumulated: the k-th is ``origin + k * interval``
worked out in decimal from the numbers as written (``repr``) and rounded once to
a float, so the 9th of interval 0.001 is 0.009, not 0.009000000000000001 (the
float product 9 * 0.001) nor a sum that drifts further with every snapshot.  The controller
cuts the step that would pass an output time so that the run lands on it.
"""

from __future__ import annotations

import math
from decimal import Decimal

__all__ = ["SnapshotSchedule", "TIME_ROUNDING"]

TIME_ROUNDING = 1e-12      # relative: a time this close to an output time has reached it


class SnapshotSchedule:
    """Snapshot times ``origin + k interval`` (k = 1, 2, ...) and steps ``n steps``.

    Parameters
    ----------
    interval : float
        Time between snapshots (0: none by time).
    steps : int
        Steps between snapshots (0: none by count).
    origin : float
        The time the schedule counts from (the start of the run).
    """

    def __init__(self, interval: float = 0.0, steps: int = 0, origin: float = 0.0):
        self.interval, self.steps, self.origin = float(interval), int(steps), float(origin)
        self._interval, self._origin = Decimal(repr(self.interval)), Decimal(repr(self.origin))
        self.index = 1

    @property
    def next_time(self) -> float:
        """The next output time (inf when there is no time schedule)."""
        if self.interval <= 0:
            return math.inf
        return float(self._origin + self.index * self._interval)

    def time_limit(self) -> float:
        return self.next_time

    def due(self, time: float, step: int) -> bool:
        """Whether the state at (time, step) is to be recorded."""
        by_steps = self.steps > 0 and step % self.steps == 0
        return by_steps or time >= self.next_time * (1 - TIME_ROUNDING)

    def advance_past(self, time: float) -> None:
        """Move the next output time beyond ``time`` (call after recording at ``time``)."""
        if self.interval <= 0:
            return
        while self.next_time <= time * (1 + TIME_ROUNDING):
            self.index += 1

    def restart_state(self) -> dict:
        return dict(next_snapshot=self.next_time)

    def restore(self, saved: dict) -> None:
        """Continue a saved schedule (``next_snapshot`` as written by ``restart_state``)."""
        saved_next = float(saved.get("next_snapshot", math.inf))
        if self.interval > 0 and math.isfinite(saved_next):
            self.index = max(1, round((saved_next - self.origin) / self.interval))
