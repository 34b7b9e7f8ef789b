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
import difflib
import hashlib
import itertools
import json
import logging
import math
import time
from collections import deque
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np

from convsim.config import TABLES, Config, read_toml, to_toml
from convsim.errors import ConfigError, OutputExistsError
from convsim.studies.sweep_backends import BACKENDS, make_backend
from convsim.studies.sweep_case import (INTERIOR_BAND, CaseTask, base_record, case_config, config_digest,
                         interior_rms_velocity, law_viscosity_contrast, run_case)
from convsim.studies.sweep_table import FAILED, atomic_write_text, read_record, write_record, write_table

__all__ = ["Axis", "Continuation", "SweepSpec", "Case", "CaseTask", "SweepProgress",
           "SweepOutcome", "load_sweep", "parse_sweep", "expand_cases", "case_id",
           "case_config", "config_digest", "run_case", "run_sweep", "BACKENDS",
           "interior_rms_velocity", "law_viscosity_contrast", "INTERIOR_BAND"]

log = logging.getLogger(__name__)

SWEEP_KEYS = ("title", "base", "combine", "fixed", "axis", "continuation")
AXIS_KEYS = ("key", "values", "start", "stop", "count", "spacing")
CONTINUATION_KEYS = ("axis", "accept")
RUN_STATUSES = ("steady", "mean-precision", "end-time", "step-limit", "diverged", "interrupted")
RETRY_STATUSES = (FAILED, "interrupted")    # a rerun runs these cases again


# -- the definition --------------------------------------------------------------------------
@dataclass(frozen=True)
class Axis:
    """One sweep axis: a config key and its values, in order."""

    key: str
    values: tuple


@dataclass(frozen=True)
class Continuation:
    """Start each case from the nearest finished case along ``axis`` (see the module doc)."""

    axis: str
    accept: tuple = ("steady",)


@dataclass(frozen=True)
class SweepSpec:
    """A parsed sweep file."""

    base_config: Config
    axes: tuple
    combine: str = "product"
    fixed: tuple = ()                      # ((key, value), ...)
    continuation: Continuation | None = None
    title: str = ""
    source: str = ""                       # the sweep file, for messages
    base: str = ""                         # the base config path as resolved

    @property
    def param_keys(self) -> tuple:
        return tuple(a.key for a in self.axes)


def _suggest(word, candidates) -> str:
    close = difflib.get_close_matches(word, list(candidates), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


def _config_field(key: str, where: str) -> dataclasses.Field:
    """The declaration of a run-config key ``section.key``; refuses unknown ones."""
    if not isinstance(key, str) or key.count(".") != 1:
        raise ConfigError(f"{where} = {key!r}: expected a run-config key 'section.key', "
                          f"e.g. 'physics.rayleigh'")
    section, name = key.split(".")
    if section not in TABLES:
        raise ConfigError(f"{where} = {key!r}: unknown table [{section}]"
                          f"{_suggest(section, TABLES)}; allowed: {', '.join(TABLES)}")
    fields = {f.name: f for f in dataclasses.fields(TABLES[section])}
    if name not in fields:
        raise ConfigError(f"{where} = {key!r}: unknown key{_suggest(name, fields)}; allowed keys "
                          f"of [{section}]: {', '.join(fields)}")
    return fields[name]


def _check_keys(table: dict, allowed, where: str) -> None:
    for k in table:
        if k not in allowed:
            raise ConfigError(f"{where}.{k}: unknown key{_suggest(k, allowed)}; allowed keys: "
                              f"{', '.join(allowed)}")


def _number(value, where: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ConfigError(f"{where} = {value!r}: expected a finite number")
    return float(value)


def _axis_values(raw: dict, field: dataclasses.Field, where: str) -> tuple:
    has_list = "values" in raw
    has_range = any(k in raw for k in ("start", "stop", "count", "spacing"))
    if has_list == has_range:
        raise ConfigError(f"{where}: give either values = [...] or start, stop, count "
                          f"(and spacing = 'linear' or 'log')")
    if has_list:
        values = raw["values"]
        if not isinstance(values, list) or not values:
            raise ConfigError(f"{where}.values = {values!r}: expected a non-empty list")
        return tuple(values)
    for k in ("start", "stop", "count"):
        if k not in raw:
            raise ConfigError(f"{where}.{k}: missing; a range needs start, stop and count")
    start, stop = _number(raw["start"], f"{where}.start"), _number(raw["stop"], f"{where}.stop")
    count = raw["count"]
    if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= 100000:
        raise ConfigError(f"{where}.count = {count!r}: expected a whole number from 1 to 100000")
    spacing = raw.get("spacing", "linear")
    if spacing not in ("linear", "log"):
        raise ConfigError(f"{where}.spacing = {spacing!r}: expected 'linear' or 'log'")
    if count == 1:
        if start != stop:
            raise ConfigError(f"{where}.count = 1: start and stop must then be equal")
        grid = np.array([start])
    elif spacing == "log":
        if start <= 0 or stop <= 0:
            raise ConfigError(f"{where}: spacing = 'log' needs start > 0 and stop > 0, got "
                              f"{start!r} and {stop!r}")
        grid = np.geomspace(start, stop, count)
    else:
        grid = np.linspace(start, stop, count)
    if field.type == "int":
        values = tuple(int(round(v)) for v in grid)
    else:
        values = tuple(float(f"{v:.12g}") for v in grid)
    if len(set(values)) != len(values):
        raise ConfigError(f"{where}: the range gives repeated values {list(values)}; "
                          f"lower count or widen the range")
    return values


def _flatten(table: dict, prefix: str = "") -> dict:
    out = {}
    for k, v in table.items():
        name = f"{prefix}.{k}" if prefix else k
        if isinstance(v, dict):
            out.update(_flatten(v, name))
        else:
            out[name] = v
    return out


def parse_sweep(data: dict, *, folder: str | Path = ".", source: str = "sweep") -> SweepSpec:
    """A ``SweepSpec`` from the TOML mapping of a sweep file (paths relative to ``folder``)."""
    from convsim.config import load_config
    if not isinstance(data, dict):
        raise ConfigError(f"{source}: expected a TOML table at the top level")
    _check_keys(data, SWEEP_KEYS, source)
    base = data.get("base")
    if not isinstance(base, str) or not base:
        raise ConfigError(f"{source}: base = {base!r}: expected the path of a run config "
                          f"(relative to the sweep file)")
    base_path = (Path(folder) / base) if not Path(base).is_absolute() else Path(base)
    base_config = load_config(base_path)
    combine = data.get("combine", "product")
    if combine not in ("product", "zip"):
        raise ConfigError(f"{source}: combine = {combine!r}: expected 'product' or 'zip'")
    fixed_raw = data.get("fixed", {})
    if not isinstance(fixed_raw, dict):
        raise ConfigError(f"{source}: [fixed] must be a table of section.key = value")
    fixed = _flatten(fixed_raw)
    for key in fixed:
        _config_field(key, "fixed key")
    raw_axes = data.get("axis", [])
    if not isinstance(raw_axes, list) or not raw_axes:
        raise ConfigError(f"{source}: expected at least one [[axis]] table")
    axes = []
    for i, raw in enumerate(raw_axes):
        where = f"axis[{i}]"
        if not isinstance(raw, dict):
            raise ConfigError(f"{source}: {where} must be a table")
        _check_keys(raw, AXIS_KEYS, where)
        field = _config_field(raw.get("key"), f"{where}.key")
        key = raw["key"]
        if key in fixed:
            raise ConfigError(f"{where}.key = {key!r}: also set in [fixed]; keep one")
        if any(a.key == key for a in axes):
            raise ConfigError(f"{where}.key = {key!r}: used by two axes")
        values = _axis_values(raw, field, where)
        if len({json.dumps(v, sort_keys=True) for v in values}) != len(values):
            raise ConfigError(f"{where}.values = {list(values)!r}: repeated values")
        axes.append(Axis(key, values))
    if combine == "zip" and len({len(a.values) for a in axes}) > 1:
        raise ConfigError(f"{source}: combine = 'zip' needs axes of equal length, got "
                          + ", ".join(f"{a.key}: {len(a.values)}" for a in axes))
    continuation = None
    raw_c = data.get("continuation")
    if raw_c is not None:
        if not isinstance(raw_c, dict):
            raise ConfigError(f"{source}: [continuation] must be a table")
        _check_keys(raw_c, CONTINUATION_KEYS, "continuation")
        axis = raw_c.get("axis")
        keys = [a.key for a in axes]
        if axis not in keys:
            raise ConfigError(f"continuation.axis = {axis!r}: expected one of the axis keys "
                              f"{', '.join(keys)}{_suggest(str(axis), keys)}")
        accept = raw_c.get("accept", ["steady"])
        if (not isinstance(accept, list) or not accept
                or any(a not in RUN_STATUSES for a in accept)):
            raise ConfigError(f"continuation.accept = {accept!r}: expected a list of run "
                              f"statuses from {', '.join(RUN_STATUSES)}")
        continuation = Continuation(axis, tuple(accept))
    title = data.get("title", "")
    if not isinstance(title, str):
        raise ConfigError(f"{source}: title = {title!r}: expected a string")
    spec = SweepSpec(base_config=base_config, axes=tuple(axes), combine=combine,
                     fixed=tuple(fixed.items()), continuation=continuation, title=title,
                     source=source, base=str(base_path))
    expand_cases(spec)   # repeated cases are refused here, before anything runs
    return spec


def load_sweep(path: str | Path) -> SweepSpec:
    """Read and check a sweep file."""
    path = Path(path)
    data = read_toml(path, "sweep file")
    return parse_sweep(data, folder=path.parent, source=str(path))


# -- cases -------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Case:
    """One case: its parameter values and its place in a continuation chain."""

    index: int
    case_id: str
    params: tuple          # ((key, value), ...) in axis order
    chain: int = 0
    position: int = 0

    @property
    def values(self) -> dict:
        return dict(self.params)


def _slug(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        text = f"{value:.6g}"
    else:
        text = str(value)
    return "".join(c if c.isalnum() or c in ".+-" else "-" for c in text)


def case_id(params) -> str:
    """Stable identifier of a parameter set: readable slug + 8 hex digits of its SHA-1."""
    params = list(params.items() if isinstance(params, dict) else params)
    canonical = json.dumps([[k, v] for k, v in params], sort_keys=False)
    digest = hashlib.sha1(canonical.encode("utf-8")).hexdigest()[:8]
    slug = "_".join(f"{k.split('.')[-1]}-{_slug(v)}" for k, v in params)
    if len(slug) > 80:
        slug = slug[:80]
    return f"{slug}_{digest}" if slug else digest


def expand_cases(spec: SweepSpec) -> list[Case]:
    """The cases of a sweep, in order, with their continuation chains."""
    keys = spec.param_keys
    if spec.combine == "zip":
        combos = list(zip(*(a.values for a in spec.axes)))
    else:
        combos = list(itertools.product(*(a.values for a in spec.axes)))
    chains: dict = {}
    cases, seen = [], {}
    cont = spec.continuation
    for index, combo in enumerate(combos):
        params = tuple(zip(keys, combo))
        cid = case_id(params)
        if cid in seen:
            raise ConfigError(f"{spec.source}: cases {seen[cid]} and {index} have the same "
                              f"parameters {dict(params)}")
        seen[cid] = index
        if cont is None:
            chain, position = index, 0
        else:
            axis_pos = keys.index(cont.axis)
            if spec.combine == "zip":
                group = ()
            else:
                group = tuple(v for i, v in enumerate(combo) if i != axis_pos)
            group_key = json.dumps(group)
            chain = chains.setdefault(group_key, len(chains))
            position = spec.axes[axis_pos].values.index(combo[axis_pos])
        cases.append(Case(index, cid, params, chain, position))
    return cases


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
    folder = Path(out).absolute()
    cases_dir = folder / "cases"
    try:
        cases_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ConfigError(f"--out {str(out)!r}: cannot create the sweep folder ({exc.strerror})")\
            from None
    cases = expand_cases(spec)
    base_toml = to_toml(spec.base_config)
    digests = {}
    for case in cases:
        try:
            digests[case.case_id] = config_digest(case_config(spec.base_config, case.params,
                                                              spec.fixed))
        except ConfigError:               # the worker reports it as the case's failure
            digests[case.case_id] = "invalid"
    records: dict = {}
    for case in cases:
        rec = read_record(cases_dir / f"{case.case_id}.json")
        if rec is None or rec.get("status") in RETRY_STATUSES:
            continue
        if rec.get("config_hash") != digests[case.case_id]:
            if not overwrite:
                raise OutputExistsError(
                    f"sweep folder {str(out)!r}: case {case.case_id} there was run with another "
                    f"config; pass --overwrite to run it again or --out for another folder")
            continue
        records[case.case_id] = rec
    atomic_write_text(folder / "sweep.json", json.dumps(_definition(spec), indent=1) + "\n")
    total, done = len(cases), 0
    for case in cases:
        if case.case_id in records:
            done += 1
            if progress is not None:
                progress(SweepProgress(done, total, case.case_id,
                                       records[case.case_id]["status"], True))
    skipped = done
    chains: dict = {}
    for case in sorted(cases, key=lambda c: (c.chain, c.position)):
        chains.setdefault(case.chain, deque()).append(case)
    by_chain = {chain: list(q) for chain, q in chains.items()}
    accept = spec.continuation.accept if spec.continuation else ()

    def task_for(case: Case) -> CaseTask:
        start_file, started_from = "", ""
        if spec.continuation is not None:
            best = None
            for other in by_chain[case.chain]:
                rec = records.get(other.case_id)
                if rec is None or rec.get("status") not in accept:
                    continue
                path = folder / rec["run_file"]
                if not path.is_file():
                    continue
                rank = (abs(other.position - case.position), other.position)
                if best is None or rank < best[0]:
                    best = (rank, other.case_id, path)
            if best is not None:
                started_from, start_file = best[1], str(best[2])
        name = f"cases/{case.case_id}.h5"
        return CaseTask(case_id=case.case_id, index=case.index, params=case.params,
                        base_toml=base_toml, fixed=spec.fixed, run_file=str(folder / name),
                        run_file_name=name, start_file=start_file, started_from=started_from,
                        config_hash=digests[case.case_id])

    if all(c.case_id in records for c in cases):
        engine = None                   # nothing to run: no pool, no connection
    else:
        engine = make_backend(backend, runner, jobs=jobs, scheduler=scheduler)
    busy: dict = {}                 # chain -> task in flight
    tasks: dict = {}
    executed = 0
    last_table = time.perf_counter()

    def fill() -> None:
        nonlocal executed
        for chain, queue in chains.items():
            if chain in busy:
                continue
            while queue:
                case = queue.popleft()
                if case.case_id in records:
                    continue
                task = task_for(case)
                tasks[case.case_id] = task
                engine.submit(task)
                busy[chain] = task
                executed += 1
                break

    chain_of = {c.case_id: c.chain for c in cases}
    try:
        fill()
        while busy:
            cid, outcome = engine.next_done()
            task = tasks.pop(cid)
            rec = outcome if isinstance(outcome, dict) else _failure_record(task, outcome)
            if rec["status"] == FAILED:
                log.warning("case %s failed: %s", cid, rec.get("error", ""))
            write_record(cases_dir / f"{cid}.json", rec)
            records[cid] = rec
            busy.pop(chain_of[cid], None)
            done += 1
            if progress is not None:
                progress(SweepProgress(done, total, cid, rec["status"], False))
            fill()
            if time.perf_counter() - last_table > TABLE_EVERY_SECONDS:
                write_table([records[c.case_id] for c in cases if c.case_id in records],
                            spec.param_keys, folder)
                last_table = time.perf_counter()
    except BaseException:
        if engine is not None:
            engine.close(cancel=True)
        write_table([records[c.case_id] for c in cases if c.case_id in records],
                    spec.param_keys, folder)
        raise
    if engine is not None:
        engine.close()
    ordered = [records[c.case_id] for c in cases if c.case_id in records]
    csv_path, h5_path = write_table(ordered, spec.param_keys, folder)
    failed = sum(1 for r in ordered if r["status"] == FAILED)
    return SweepOutcome(records=ordered, executed=executed, skipped=skipped, failed=failed,
                        table_csv=csv_path, table_h5=h5_path, folder=folder,
                        backend=engine.name if engine else "none",
                        workers=engine.workers if engine else 0,
                        wall_seconds=time.perf_counter() - t0)
