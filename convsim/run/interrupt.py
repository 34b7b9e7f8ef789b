"""Signals as a flag: an interrupt is read between steps, never lands inside a snapshot write.

The controller installs ``DeferredInterrupt`` for the run and asks ``requested``
after each step (the ``Interrupted`` stop rule).  Only the main thread receives
signals, so elsewhere (a worker thread) nothing is installed and Ctrl-C arrives
as ``KeyboardInterrupt``, which the controller also turns into an interrupted run.
"""

from __future__ import annotations

import signal
import threading

__all__ = ["DeferredInterrupt"]


class DeferredInterrupt:
    """Turns the given signals (default: SIGINT, Ctrl-C, and SIGTERM, what batch schedulers send
    before they kill a job) into a flag while it is active; a second Ctrl-C raises
    ``KeyboardInterrupt`` (the command line exits with 130); a second SIGTERM changes nothing
    (a process pool that shuts down sends its workers SIGTERM again).

    Use as a context manager; the previous handlers come back on exit.

    Attributes
    ----------
    requested : bool
        True once one of the signals arrived.
    signum : int or None
        The signal that arrived (the last one).
    """

    def __init__(self, signals=(signal.SIGINT, signal.SIGTERM)):
        self.signals = tuple(signals)
        self.requested = False
        self.signum = None
        self._previous: dict = {}

    def _handle(self, signum, frame):
        if self.requested and signum == signal.SIGINT:   # a second Ctrl-C: stop now (a snapshot
            raise KeyboardInterrupt    # being written is dropped whole, the file keeps the one before)
        self.requested = True
        self.signum = signum

    @property
    def name(self) -> str:
        """The signal that arrived, by name (SIGINT, SIGTERM), or ''."""
        return "" if self.signum is None else signal.Signals(self.signum).name

    def install(self) -> "DeferredInterrupt":
        if threading.current_thread() is threading.main_thread():
            for sig in self.signals:
                self._previous[sig] = signal.signal(sig, self._handle)
        return self

    def restore(self) -> None:
        for sig, handler in self._previous.items():
            signal.signal(sig, handler)
        self._previous = {}

    def __enter__(self) -> "DeferredInterrupt":
        return self.install()

    def __exit__(self, *exc) -> None:
        self.restore()
