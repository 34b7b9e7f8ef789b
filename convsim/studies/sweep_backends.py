"""Back ends of a sweep: where the cases run (see ``convsim.studies.sweep`` for the how-to).

A back end runs ``runner(task)`` somewhere: ``submit(task)`` queues a case,
``next_done()`` blocks until one finishes and returns (case_id, record or the
exception it raised), ``close(cancel)`` ends it.  ``BACKENDS`` is the registry
by name; ``make_backend`` picks one.
"""

from __future__ import annotations

import dataclasses
import logging
import os
from collections import deque

from convsim.errors import ConfigError
from convsim.studies.sweep_case import CaseTask

__all__ = ["InlineBackend", "LocalBackend", "DaskBackend", "BACKENDS", "make_backend"]

log = logging.getLogger(__name__)


class InlineBackend:
    """Runs each case in the calling process, one at a time (debugging, tests)."""

    name = "inline"

    def __init__(self, runner, jobs=None, scheduler=None):
        self.runner, self.queue, self.workers = runner, deque(), 1

    def submit(self, task: CaseTask) -> None:
        self.queue.append(dataclasses.replace(task, threads=0))

    def next_done(self):
        task = self.queue.popleft()
        try:
            return task.case_id, self.runner(task)
        except Exception as exc:
            return task.case_id, exc

    def close(self, cancel: bool = False) -> None:
        self.queue.clear()


class LocalBackend:
    """A ``ProcessPoolExecutor`` of spawned processes, ``jobs`` of them (default: all cores)."""

    name = "local"

    def __init__(self, runner, jobs=None, scheduler=None):
        if jobs is not None and (isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1):
            raise ConfigError(f"--jobs = {jobs!r}: expected a whole number >= 1")
        self.runner = runner
        self.workers = jobs or os.cpu_count() or 1
        self.pending: dict = {}
        self.pool = self._new_pool()

    def _new_pool(self):
        from convsim.pool import process_pool
        return process_pool(self.workers)

    def submit(self, task: CaseTask) -> None:
        from concurrent.futures.process import BrokenProcessPool
        try:
            future = self.pool.submit(self.runner, task)
        except BrokenProcessPool:       # a worker died (killed, out of memory): start afresh
            log.warning("the process pool broke; starting a new one")
            self.pool.shutdown(wait=False, cancel_futures=True)
            self.pool = self._new_pool()
            future = self.pool.submit(self.runner, task)
        self.pending[future] = task.case_id

    def next_done(self):
        import concurrent.futures as cf
        done, _ = cf.wait(list(self.pending), return_when=cf.FIRST_COMPLETED)
        future = min(done, key=lambda f: self.pending[f])
        cid = self.pending.pop(future)
        try:
            return cid, future.result()
        except Exception as exc:
            return cid, exc

    def close(self, cancel: bool = False) -> None:
        """End the pool; ``cancel``: drop the queued cases and stop the running ones."""
        if cancel:
            from convsim.pool import stop_workers
            stop_workers(self.pool)
        self.pool.shutdown(wait=True, cancel_futures=cancel)


class DaskBackend:
    """An existing ``dask.distributed`` cluster: ``Client(address).submit`` + ``as_completed``.

    ``scheduler`` is the scheduler address (``tcp://host:8786``) or a connected
    ``distributed.Client``.
    """

    name = "dask"

    def __init__(self, runner, jobs=None, scheduler=None):
        try:
            from distributed import Client, as_completed
        except ImportError:
            raise ConfigError("--scheduler: dask.distributed is not installed; "
                              "pip install 'dask[distributed]'") from None
        if scheduler is None:
            raise ConfigError("backend 'dask' needs a scheduler address (--scheduler)")
        if isinstance(scheduler, str):
            try:
                self.client = Client(scheduler, timeout="20s")
            except (OSError, TimeoutError, ValueError) as exc:
                raise ConfigError(f"--scheduler = {scheduler!r}: cannot connect ({exc})") from None
            self.own = True
        else:
            self.client, self.own = scheduler, False
        self.runner = runner
        self.workers = max(1, len(self.client.scheduler_info().get("workers", {})))
        self.completed = as_completed()
        self.pending: dict = {}

    def submit(self, task: CaseTask) -> None:
        import uuid
        future = self.client.submit(self.runner, task, pure=False,
                                    key=f"convsim-case-{task.case_id}-{uuid.uuid4().hex[:8]}")
        self.pending[future.key] = task.case_id
        self.completed.add(future)

    def next_done(self):
        future = next(self.completed)
        cid = self.pending.pop(future.key)
        try:
            record = future.result()
        except Exception as exc:        # includes a worker lost with its job (KilledWorker)
            record = exc
        future.release()
        return cid, record

    def close(self, cancel: bool = False) -> None:
        if cancel:
            self.completed.clear()
        if self.own:
            self.client.close()


BACKENDS = {"local": LocalBackend, "dask": DaskBackend, "inline": InlineBackend}


def make_backend(name: str | None, runner, jobs=None, scheduler=None):
    """The back end by name (default: 'dask' with a scheduler, else 'local')."""
    if name is None:
        name = "dask" if scheduler is not None else "local"
    if name not in BACKENDS:
        raise ConfigError(f"backend = {name!r}: expected one of {', '.join(BACKENDS)}")
    return BACKENDS[name](runner, jobs=jobs, scheduler=scheduler)
