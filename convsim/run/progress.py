"""A progress display for runs, in a terminal and in Jupyter alike (``tqdm.auto``).

What it measures depends on the stop rule of the config:

- an end time (``stop.end_time > 0``): simulated time against the end time, so the rate
  and the time left come from the simulated time per second of wall time;
- otherwise, a steady run: the steady residual ``r = max|dT/dt| / max(Nu, 1)`` against its
  tolerance on a log scale, as decades done out of ``log10(r_0 / tol)`` from the first
  step's residual ``r_0``; the time left is tqdm's extrapolation of decades per second
  (a guide: residuals do not fall at a steady rate, and Newton's finish jumps);
- the step count and steps per second are shown beside it in both cases.

The display is an observer (see ``convsim.run.controller.Observer``); it writes to stderr
through tqdm and is silent when stderr is not a terminal (``disable=None``) unless
``always`` is set (notebooks set it: Jupyter's output is not a terminal).  A silent display
does not import tqdm at all (``tqdm.auto`` costs about 30 ms of a run's start-up, and a run
piped into a file or a script never shows the bar).
"""

from __future__ import annotations

import math
import sys
import time

__all__ = ["ProgressDisplay"]


class ProgressDisplay:
    """Observer showing a run's progress against its stop rule.

    Parameters
    ----------
    config : convsim.config.Config
        Its ``stop`` table sets what is measured.
    always : bool
        Show the bar even when stderr is not a terminal (default: only on a terminal,
        or in a notebook, where ``tqdm.auto`` draws a widget).
    """

    def __init__(self, config, *, always: bool = False):
        self.stop = config.stop
        self.end_time = float(config.stop.end_time)
        self.tolerance = float(config.stop.steady_tolerance)
        self.disable = False if always else None
        self.bar = None
        self.first_residual = None
        self.steps0 = 0
        self.wall0 = 0.0

    def _open(self, total, desc):
        from tqdm.auto import tqdm
        fmt = "{desc}: {percentage:3.0f}%|{bar}| [{elapsed}<{remaining}{postfix}]"
        self.bar = tqdm(total=total, desc=desc, bar_format=fmt, disable=self.disable,
                        leave=False, mininterval=0.5, dynamic_ncols=True, file=sys.stderr)

    def _silent(self) -> bool:
        """tqdm's own rule for ``disable=None``: no bar when stderr is not a terminal."""
        if self.disable is None:
            self.disable = True if not _is_terminal(sys.stderr) else None
        return self.disable is True

    def on_start(self, simulation, resumed):
        self.wall0 = time.perf_counter()
        if self._silent():
            return
        if self.end_time > 0:
            self._open(self.end_time, "time")

    def _steady_fraction(self, residual: float) -> float:
        """Decades of residual done since the first step, of log10(r_0 / tol)."""
        if self.first_residual is None:
            self.first_residual = max(residual, self.tolerance * 10.0)
            self._open(math.log10(self.first_residual / self.tolerance), "steady")
        done = math.log10(self.first_residual / max(residual, 1e-300))
        return min(max(done, 0.0), self.bar.total)

    def on_step(self, report):
        if self._silent():
            return
        if self.steps0 == 0:
            self.steps0 = max(report.step - 1, 0)
        residual = report.tendency_max / max(abs(report.nusselt_top), 1.0)
        if self.end_time > 0:
            self.bar.n = min(report.time, self.end_time)
            where = f"t = {report.time:.4g} of {self.end_time:.4g}"
        else:
            if not math.isfinite(residual):
                return
            self.bar.n = self._steady_fraction(residual)
            where = f"residual {residual:.2e} -> {self.tolerance:.0e}"
        wall = max(time.perf_counter() - self.wall0, 1e-9)
        rate = (report.step - self.steps0) / wall
        self.bar.set_postfix_str(f"{where}, step {report.step} ({rate:.0f}/s), "
                                 f"Nu {report.nusselt_top:.5g}", refresh=False)
        self.bar.refresh() if report.step % 50 == 0 else self.bar.update(0)

    def on_snapshot(self, snap):
        pass

    def on_finish(self, result):
        if self.bar is not None:
            self.bar.close()


def _is_terminal(stream) -> bool:
    isatty = getattr(stream, "isatty", None)
    try:
        return bool(isatty()) if isatty is not None else True
    except ValueError:          # a closed stream
        return False
