"""Parameter sweeps: a base config, parameter axes, one run per case, one table.

The sweep file (TOML)
---------------------
::

    title = "Nu against Ra, constant viscosity"
    base = "benchmark_case_1a.toml"     # run config, relative to this file
    combine = "product"                 # or "zip" (all axes the same length)

    [fixed]                             # optional: set in every case
    domain.nx = 24
    domain.nz = 24

    [[axis]]                            # one table per axis
    key = "physics.rayleigh"            # a config key, section.key
    start = 1e4                         # a range: start, stop, count ...
    stop = 1e5
    count = 3
    spacing = "log"                     # ... "log" (geometric) or "linear"

    [[axis]]
    key = "viscosity.thermal_contrast"
    values = [1.0, 1e2, 1e4]            # or an explicit list

    [continuation]                      # optional
    axis = "physics.rayleigh"
    accept = ["steady"]                 # run statuses a case may start from

Every key is checked: unknown keys are refused with a suggestion, and an axis key
must name a key of the run config (``convsim.config``).  Values of integer keys
on a range are rounded.  Generated values are rounded to 12 significant digits
so that the case identifiers do not depend on round-off.

Cases and identifiers
---------------------
``product`` takes every combination (the last axis varies fastest), ``zip``
takes the i-th value of every axis.  A case's identifier is a readable slug
of its values plus the first 8 hex digits of the SHA-1 of the canonical JSON of
its parameters (``case_id``), so it is the same on every rerun and on every
machine.  Case ``c`` writes ``<out>/cases/<c>.h5`` (its run file) and, when it
finishes, ``<out>/cases/<c>.json`` (its record, written atomically).

Resuming
--------
A rerun into the same folder skips every case whose record exists with a run
status and the same config digest; failed cases (exceptions: a bad value, a lost
worker) and interrupted ones (Ctrl-C) are tried again.  A record with a
different config digest means the folder holds another sweep's case: the
run refuses (``OutputExistsError``) unless ``overwrite=True``.  A run file
without a record (a run cut short) is replaced.

Continuation
------------
With ``[continuation]``, the cases that differ only in the continuation axis
form a chain, in the order of that axis's values (``zip``: all cases form one
chain).  The cases of a chain run one after another; each starts
(``start.kind = "snapshot"``) from the final state of the nearest case of its
chain, by position, that has finished with an accepted status (ties: the
earlier one); without one it starts as the base config says.  Chains run in
parallel.  The base config's ``start.continuation`` stages are dropped for a
case that starts from a snapshot.

Back ends
---------
``local``: a ``concurrent.futures.ProcessPoolExecutor`` (spawned processes,
default one per core; BLAS and numba threads limited to one per worker).
``dask``: an existing ``dask.distributed`` scheduler; cases are sent with
``Client(address).submit`` and gathered with ``distributed.as_completed``.  The
workers must be able to import convsim (installed, or on ``PYTHONPATH``) and see
the sweep folder (a shared file system), since each case writes its run file
itself.  Start workers with one thread each (``dask worker ADDRESS --nthreads 1``
with ``OMP_NUM_THREADS=1``), a case being a single-threaded computation.
``inline``: the calling process, one case at a time (debugging, tests).
The local pool and a ``LocalCluster`` spawn fresh interpreters, so a script that
calls ``run_sweep`` must keep its top level under ``if __name__ == "__main__":``.

On an HPC batch system, dask-jobqueue starts such a scheduler and its workers
as batch jobs; its address is all the sweep needs::

    from dask_jobqueue import SLURMCluster          # or PBSCluster, SGECluster, ...
    cluster = SLURMCluster(cores=1, processes=1, memory="4GB", walltime="02:00:00",
                           job_script_prologue=["export OMP_NUM_THREADS=1"])
    cluster.scale(jobs=16)
    print(cluster.scheduler_address)                # tcp://10.0.0.5:8786

then ``convsim sweep SWEEP.toml --scheduler tcp://10.0.0.5:8786`` (or
``run_sweep(spec, out, scheduler=cluster.scheduler_address)`` in the same
Python session).  A worker lost with its job is reported by Dask as an
exception of that case; the case is recorded as failed and runs again on the
next rerun.

Progress goes to a ``progress(SweepProgress)`` callback; nothing here prints.
"""

from __future__ import annotations

import dataclasses
import logging
import time
from collections import deque
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

from convsim.config import to_toml
from convsim.errors import ConfigError, OutputExistsError
from convsim.studies.sweep_backends import BACKENDS, make_backend
from convsim.studies.sweep_case import (INTERIOR_BAND, CaseTask, base_record, case_config, config_digest,
                         interior_rms_velocity, law_viscosity_contrast, run_case)
from convsim.files.jsonio import write_json
from convsim.studies.sweep_spec import (Axis, Case, Continuation, SweepSpec, case_id, expand_cases,
                                       load_sweep, parse_sweep)
from convsim.studies.sweep_table import FAILED, read_record, write_record, write_table

__all__ = ["Axis", "Continuation", "SweepSpec", "Case", "CaseTask", "SweepProgress",
           "SweepOutcome", "load_sweep", "parse_sweep", "expand_cases", "case_id",
           "case_config", "config_digest", "run_case", "run_sweep", "BACKENDS",
           "interior_rms_velocity", "law_viscosity_contrast", "INTERIOR_BAND"]

log = logging.getLogger(__name__)

RETRY_STATUSES = (FAILED, "interrupted")    # a rerun runs these cases again


# -- the sweep ---------------------------------------------------------------------------------
@dataclass(frozen=True)
class SweepProgress:
    """One finished (or skipped) case, for a progress callback."""

    done: int
    total: int
    case_id: str
    status: str
    skipped: bool


@dataclass
class SweepOutcome:
    """What a sweep did: the records in case order, counts, table paths."""

    records: list
    executed: int
    skipped: int
    failed: int
    table_csv: Path
    table_h5: Path
    folder: Path
    backend: str
    workers: int
    wall_seconds: float

    def summary(self) -> dict:
        """Counts and paths as a JSON-ready dict (without the rows)."""
        statuses: dict = {}
        for r in self.records:
            statuses[r["status"]] = statuses.get(r["status"], 0) + 1
        return dict(cases=len(self.records), executed=self.executed, skipped=self.skipped,
                    failed=self.failed, statuses=statuses, table_csv=str(self.table_csv),
                    table_h5=str(self.table_h5), folder=str(self.folder), backend=self.backend,
                    workers=self.workers, wall_seconds=self.wall_seconds)


TABLE_EVERY_SECONDS = 30.0


def _failure_record(task: CaseTask, exc: BaseException) -> dict:
    rec = base_record(task)
    rec["worker"] = ""
    rec.update(status=FAILED, error=f"{type(exc).__name__}: {exc}")
    return rec


def _definition(spec: SweepSpec) -> dict:
    return dict(title=spec.title, source=spec.source, base=spec.base, combine=spec.combine,
                axes=[dict(key=a.key, values=list(a.values)) for a in spec.axes],
                fixed=dict(spec.fixed),
                continuation=(None if spec.continuation is None
                              else dataclasses.asdict(spec.continuation)),
                base_config=to_toml(spec.base_config))


def run_sweep(spec: SweepSpec, out: str | Path, *, jobs: int | None = None, scheduler=None,
              backend: str | None = None, progress: Callable | None = None,
              overwrite: bool = False, runner: Callable = run_case) -> SweepOutcome:
    """Run every case of a sweep that is not done yet, and gather the table.

    Parameters
    ----------
    spec : SweepSpec
    out : path
        The sweep folder: ``cases/`` (run files and records), ``table.csv``,
        ``table.h5`` and ``sweep.json`` (the definition).
    jobs : int, optional
        Processes of the local pool (default: all cores).
    scheduler : str or distributed.Client, optional
        Run on this Dask cluster instead.
    backend : {'local', 'dask', 'inline'}, optional
    progress : callable, optional
        Called with a ``SweepProgress`` after each case (and once per skipped case).
    overwrite : bool
        Run again the cases whose record holds a different config.
    runner : callable
        ``runner(CaseTask) -> record``; ``run_case`` unless testing.

    Returns
    -------
    SweepOutcome
    """
    t0 = time.perf_counter()
    run = _SweepRun(spec, _sweep_folder(out), progress)
    run.load_records(out, overwrite)
    _check_same_sweep(run.folder, spec, overwrite)
    write_json(run.folder / "sweep.json", _definition(spec), indent=1)
    skipped = run.report_skipped()
    engine = None if run.all_done() else make_backend(backend, runner, jobs=jobs,
                                                      scheduler=scheduler)
    try:
        run.execute(engine)
    except BaseException:
        if engine is not None:
            engine.close(cancel=True)
        run.write_table()
        raise
    if engine is not None:
        engine.close()
    ordered = run.ordered()
    csv_path, h5_path = run.write_table()
    failed = sum(1 for r in ordered if r["status"] == FAILED)
    return SweepOutcome(records=ordered, executed=run.executed, skipped=skipped, failed=failed,
                        table_csv=csv_path, table_h5=h5_path, folder=run.folder,
                        backend=engine.name if engine else "none",
                        workers=engine.workers if engine else 0,
                        wall_seconds=time.perf_counter() - t0)


def _check_same_sweep(folder: Path, spec: SweepSpec, overwrite: bool) -> None:
    """Refuse a folder that holds another sweep's table (its ``sweep.json`` differs, or a
    table without one) unless ``overwrite``: the table would lose that sweep's rows."""
    import json
    if overwrite:
        return
    new = {k: v for k, v in json.loads(json.dumps(_definition(spec), default=float)).items()
           if k not in ("source", "title")}
    stored = folder / "sweep.json"
    if stored.is_file():
        try:
            old = json.loads(stored.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            old = None
        if isinstance(old, dict) and {k: v for k, v in old.items()
                                      if k not in ("source", "title")} == new:
            return
        what = (f"another sweep ({old.get('source', '?')})" if isinstance(old, dict)
                else "an unreadable sweep.json")
    elif (folder / "table.csv").exists() or (folder / "table.h5").exists():
        what = "a sweep table without its sweep.json"
    else:
        return
    raise OutputExistsError(f"sweep folder {str(folder)!r}: holds {what}; pass --overwrite to "
                            f"replace its table or --out for another folder")


def _sweep_folder(out) -> Path:
    folder = Path(out).absolute()
    try:
        (folder / "cases").mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ConfigError(f"--out {str(out)!r}: cannot create the sweep folder ({exc.strerror})")\
            from None
    return folder


class _SweepRun:
    """The bookkeeping of one sweep run: the records so far, the chains, the cases in flight.

    Cases of one continuation chain run one after the other (each may start from its
    nearest finished neighbour); different chains run side by side.
    """

    def __init__(self, spec: SweepSpec, folder: Path, progress: Callable | None):
        self.spec, self.folder, self.progress = spec, folder, progress
        self.cases_dir = folder / "cases"
        self.cases = expand_cases(spec)
        self.base_toml = to_toml(spec.base_config)
        self.digests = {c.case_id: self._digest(c) for c in self.cases}
        self.records: dict = {}
        self.chains: dict = {}
        for case in sorted(self.cases, key=lambda c: (c.chain, c.position)):
            self.chains.setdefault(case.chain, deque()).append(case)
        self.by_chain = {chain: list(q) for chain, q in self.chains.items()}
        self.chain_of = {c.case_id: c.chain for c in self.cases}
        self.busy: dict = {}            # chain -> task in flight
        self.tasks: dict = {}
        self.executed = self.done = 0

    def _digest(self, case: Case) -> str:
        """The case's config digest; every case is checked here, before the first run."""
        try:
            return config_digest(case_config(self.spec.base_config, case.params, self.spec.fixed))
        except ConfigError as exc:
            params = ", ".join(f"{k} = {v!r}" for k, v in case.params)
            raise ConfigError(f"{self.spec.source}: case {case.index} ({params}): {exc}") from None

    def load_records(self, out, overwrite: bool) -> None:
        """The finished cases of an earlier run of this sweep (resuming)."""
        for case in self.cases:
            rec = read_record(self.cases_dir / f"{case.case_id}.json")
            if rec is None or rec.get("status") in RETRY_STATUSES:
                continue
            if rec.get("config_hash") != self.digests[case.case_id]:
                if not overwrite:
                    raise OutputExistsError(
                        f"sweep folder {str(out)!r}: case {case.case_id} there was run with "
                        f"another config; pass --overwrite to run it again or --out for another "
                        f"folder")
                continue
            self.records[case.case_id] = rec

    def report_skipped(self) -> int:
        for case in self.cases:
            if case.case_id in self.records:
                self._count(case.case_id, self.records[case.case_id]["status"], True)
        return self.done

    def _count(self, cid: str, status: str, skipped: bool) -> None:
        self.done += 1
        if self.progress is not None:
            self.progress(SweepProgress(self.done, len(self.cases), cid, status, skipped))

    def all_done(self) -> bool:
        return all(c.case_id in self.records for c in self.cases)

    def ordered(self) -> list:
        return [self.records[c.case_id] for c in self.cases if c.case_id in self.records]

    def write_table(self):
        return write_table(self.ordered(), self.spec.param_keys, self.folder)

    def _start_from(self, case: Case) -> tuple[str, str]:
        """(case_id, run file) of the nearest finished case of the chain to start from."""
        if self.spec.continuation is None:
            return "", ""
        best = None
        for other in self.by_chain[case.chain]:
            rec = self.records.get(other.case_id)
            if rec is None or rec.get("status") not in self.spec.continuation.accept:
                continue
            path = self.folder / rec["run_file"]
            if not path.is_file():
                continue
            rank = (abs(other.position - case.position), other.position)
            if best is None or rank < best[0]:
                best = (rank, other.case_id, path)
        return ("", "") if best is None else (best[1], str(best[2]))

    def task_for(self, case: Case) -> CaseTask:
        started_from, start_file = self._start_from(case)
        name = f"cases/{case.case_id}.h5"
        return CaseTask(case_id=case.case_id, index=case.index, params=case.params,
                        base_toml=self.base_toml, fixed=self.spec.fixed,
                        run_file=str(self.folder / name), run_file_name=name,
                        start_file=start_file, started_from=started_from,
                        config_hash=self.digests[case.case_id])

    def fill(self, engine) -> None:
        """Submit the next unfinished case of every chain that has none in flight."""
        for chain, queue in self.chains.items():
            if chain in self.busy:
                continue
            while queue:
                case = queue.popleft()
                if case.case_id in self.records:
                    continue
                task = self.task_for(case)
                self.tasks[case.case_id] = task
                engine.submit(task)
                self.busy[chain] = task
                self.executed += 1
                break

    def execute(self, engine) -> None:
        """Run until no chain has work left; records each case as it finishes."""
        if engine is None:
            return
        last_table = time.perf_counter()
        self.fill(engine)
        while self.busy:
            cid, outcome = engine.next_done()
            task = self.tasks.pop(cid)
            rec = outcome if isinstance(outcome, dict) else _failure_record(task, outcome)
            if rec["status"] == FAILED:
                log.warning("case %s failed: %s", cid, rec.get("error", ""))
            write_record(self.cases_dir / f"{cid}.json", rec)
            self.records[cid] = rec
            self.busy.pop(self.chain_of[cid], None)
            self._count(cid, rec["status"], False)
            self.fill(engine)
            if time.perf_counter() - last_table > TABLE_EVERY_SECONDS:
                self.write_table()
                last_table = time.perf_counter()
