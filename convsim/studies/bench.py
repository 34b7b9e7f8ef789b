"""Benchmark harness: published steady cases on a series of grids, side by side on local cores.

For each case (a config shipped as package data in convsim/studies/cases/; the
repository's configs/ links to it) and each grid n, one run ``api.run(cfg.replace(domain__nx=n,
domain__nz=n))`` to steady state records Nu (top and bottom), vrms, q1, q2,
wall time, steps, time per phase and peak memory.  From the three finest grids
each quantity gets an observed order, a Richardson-extrapolated value and a
grid convergence index (``convsim.analysis.convergence``); both the finest-grid and the
extrapolated values are compared with the published ones
(``convsim.studies.published``) against our acceptance tolerances.

Runs go to a ``concurrent.futures.ProcessPoolExecutor`` (spawned workers, one
run per worker process, so each run's peak memory is its own).  Each worker
first makes a short untimed warm-up run on an 8 x 8 grid, loading the compiled
kernels, so the timed run measures the solver and not the start-up.

Peak memory: ``resource.getrusage(RUSAGE_SELF).ru_maxrss`` of the worker
process after the run (the high-water resident set size, interpreter and
libraries included), and the growth of that high-water mark over the run
(the memory the run itself added above the warmed-up worker).

Nothing is printed here; the CLI formats (``convsim.studies.bench_report``).
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import hashlib
import logging
import math
import os
import platform
import subprocess
import sys
from concurrent.futures import as_completed
from dataclasses import dataclass, field
from pathlib import Path

from convsim import __version__
from convsim.analysis import convergence as conv
from convsim.errors import ConfigError
from convsim.pool import process_pool
from convsim.studies.viscoplastic import (CASES as VP_CASES, PERIODIC_CASES, lid_convergence,
                                          lid_quantities, periodic_lid_quantities)
from convsim.studies.published import (ACCEPTANCE, CASE_SETUP, DEFAULT_CASES, PUBLISHED,
                                       QUANTITIES, known_cases)

__all__ = ["DEFAULT_GRIDS", "CASE_GRIDS", "case_grids", "MEMORY_METHOD", "BenchTask", "BenchRow", "Check", "CaseSummary",
           "BenchResult", "case_config_path", "package_cases_dir",
           "parse_grids", "parse_cases", "plan", "run_task", "run_bench", "analyse_case",
           "provenance"]

log = logging.getLogger(__name__)

DEFAULT_GRIDS = (32, 64, 128)
#: a case's own grids when none are asked for: the periodic case 4 runs to t = 1 on each
#: (about 2 x 10^4 steps on 32 x 32), so its study stops at 48 cells
CASE_GRIDS = {"vp4": (24, 32, 48)}
MEMORY_METHOD = ("resource.getrusage(RUSAGE_SELF).ru_maxrss of the worker process (one run per "
                 "spawned process): peak_rss_mib is the high-water resident set size after the "
                 "run, interpreter and libraries included; run_rss_mib is its growth over the "
                 "run, above the warmed-up worker")
WARMUP = "an untimed 5-step run on an 8 x 8 grid in each worker first (loads compiled kernels)"


# -- where the case configs live ----------------------------------------------------------------
def package_cases_dir() -> Path:
    """The case configs shipped inside the package (convsim/studies/cases/)."""
    return Path(__file__).resolve().parent / "cases"


def case_config_path(case: str) -> Path:
    """The config file of a published case: the package copy, the one source
    (``configs/benchmark_case_*.toml`` of the repository are links to it)."""
    if case not in PUBLISHED:
        raise ConfigError(f"case {case!r}: unknown; known cases: {', '.join(known_cases())}")
    from convsim.studies.published import case_file
    path = package_cases_dir() / case_file(case)
    if not path.is_file():
        raise ConfigError(f"case {case!r}: config {path.name} not found in {package_cases_dir()}")
    return path


# -- command-line style inputs --------------------------------------------------------------------
def _grid_limits() -> tuple[int, int]:
    from convsim.config import Domain
    meta = {f.name: f.metadata for f in dataclasses.fields(Domain)}["nx"]
    return int(meta["ge"]), int(meta["le"])


def parse_grids(text) -> tuple:
    """'32,64,128' (or a sequence of ints) -> sorted unique tuple; ConfigError on bad input."""
    lo, hi = _grid_limits()
    items = text.split(",") if isinstance(text, str) else list(text)
    try:
        grids = sorted({int(str(v).strip()) for v in items if str(v).strip()})
    except ValueError:
        raise ConfigError(f"--grids {text!r}: expected cell counts separated by commas, "
                          "e.g. 32,64,128") from None
    if not grids or any(n < lo or n > hi for n in grids):
        raise ConfigError(f"--grids {text!r}: each grid must be an integer from {lo} to {hi}")
    return tuple(grids)


def parse_cases(names) -> tuple:
    """Case names (empty: the default cases, in order); ConfigError names an unknown one."""
    if not names:
        return DEFAULT_CASES
    out = []
    for name in names:
        name = name.strip().lower()
        if name not in PUBLISHED:
            raise ConfigError(f"case {name!r}: unknown; known cases: {', '.join(known_cases())}")
        if name not in out:
            out.append(name)
    return tuple(out)


# -- one run -------------------------------------------------------------------------------------
@dataclass(frozen=True)
class BenchTask:
    case: str
    grid: int
    config_path: str
    overrides: tuple = ()
    warmup: bool = True


@dataclass
class BenchRow:
    """One case on one grid."""

    case: str
    grid: int
    h: float                       # grid spacing 1 / nz (unit depth)
    status: str
    message: str
    nusselt_top: float                 # top
    nusselt_bottom: float
    vrms: float
    q1: float
    q2: float
    wall_seconds: float
    steps: int
    time: float
    phase_seconds: dict
    peak_rss_mib: float
    run_rss_mib: float
    upwelling: str                 # side of the hot upwelling: "x=0" or "x=1"
    stage_steps: list              # [(Ra, steps)] per continuation stage and the target
    relative_error: dict = field(default_factory=dict)
    lid: dict = field(default_factory=dict)    # studies/viscoplastic.lid_quantities (vp cases)
    periodic: dict = field(default_factory=dict)   # PeriodicStatistics.to_dict (vp4)

    @property
    def steps_per_second(self) -> float:
        return self.steps / self.wall_seconds if self.wall_seconds > 0 else math.nan

    def as_dict(self) -> dict:
        d = dataclasses.asdict(self)
        d["steps_per_second"] = self.steps_per_second
        return d


def _maxrss_mib() -> float:
    import resource
    kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss   # KiB on Linux
    return kib / (1024.0 * 1024.0) if sys.platform == "darwin" else kib / 1024.0


def _stage_steps(series: dict) -> list:
    ra = series.get("rayleigh")
    if ra is None or len(ra) == 0:
        return []
    out = []
    for value in ra:
        if out and out[-1][0] == float(value):
            out[-1][1] += 1
        else:
            out.append([float(value), 1])
    return [tuple(v) for v in out]


def run_task(task: BenchTask) -> BenchRow:
    """Run one case on one grid (the worker function; top level so that it pickles)."""
    from convsim import api
    from convsim.config import load_config
    cfg = load_config(task.config_path, list(task.overrides))
    if task.warmup:
        warm = cfg.replace(domain__nx=8, domain__nz=8, stop__steady=False, stop__max_steps=5,
                           stop__end_time=0.0, start__continuation=())
        api.run(warm)
    before = _maxrss_mib()
    # grid n: n cells through the depth, square cells across the box (aspect 2.5: 2.5 n)
    cfg = cfg.replace(domain__nx=max(4, round(cfg.domain.aspect * task.grid)),
                      domain__nz=task.grid)
    result = api.run(cfg)
    peak = _maxrss_mib()
    T = result.temperature
    mid = T.shape[0] // 2
    upwelling = "x=0" if T[mid, 0] >= T[mid, -1] else "x=1"
    q = [float(v) for v in result.corner_gradients]
    row = BenchRow(case=task.case, grid=task.grid, h=1.0 / task.grid, status=result.status,
                   message=result.message, nusselt_top=float(result.nusselt_top),
                   nusselt_bottom=float(result.nusselt_bottom), vrms=float(result.vrms),
                   q1=q[0], q2=q[1], wall_seconds=float(result.wall_seconds),
                   steps=int(result.steps), time=float(result.time),
                   phase_seconds={k: float(v) for k, v in result.phase_seconds.items()},
                   peak_rss_mib=peak, run_rss_mib=max(0.0, peak - before), upwelling=upwelling,
                   stage_steps=_stage_steps(result.series))
    if task.case in PERIODIC_CASES:      # time means over whole periods, no corner values
        row.lid, row.periodic = periodic_lid_quantities(result)
        row.nusselt_top, row.vrms = (row.periodic["means"].get(q, math.nan)
                                     for q in ("nusselt_top", "vrms"))
        row.nusselt_bottom = row.q1 = row.q2 = math.nan
    elif task.case in VP_CASES:
        row.lid = lid_quantities(cfg, result)
    row.relative_error = {qn: math.nan for qn in QUANTITIES}     # nan: no published value
    row.relative_error.update({qn: (getattr(row, qn) - pv.value) / pv.value
                               for qn, pv in PUBLISHED[task.case].items()})
    return row


def _error_row(task: BenchTask, exc: BaseException) -> BenchRow:
    nan = math.nan
    log.error("%s grid %d failed: %s", task.case, task.grid, exc)
    return BenchRow(case=task.case, grid=task.grid, h=1.0 / task.grid, status="error",
                    message=f"{type(exc).__name__}: {exc}", nusselt_top=nan, nusselt_bottom=nan,
                    vrms=nan, q1=nan, q2=nan, wall_seconds=nan, steps=0, time=nan,
                    phase_seconds={}, peak_rss_mib=nan, run_rss_mib=nan, upwelling="",
                    stage_steps=[], relative_error={q: nan for q in QUANTITIES})


def case_grids(case: str) -> tuple:
    """The grids of a case when none are asked for: ``CASE_GRIDS`` or ``DEFAULT_GRIDS``."""
    return CASE_GRIDS.get(case, DEFAULT_GRIDS)


def plan(cases, grids, overrides=(), warmup=True) -> list:
    """The tasks, most expensive first (finest grids, highest Ra) so the cores stay busy
    (``grids`` None: each case on its own ``case_grids``)."""
    cost = {"1a": 1.0, "1b": 2.0, "1c": 6.0, "2a": 4.0, "2b": 10.0,   # rough relative cost,
            "vp2": 10.0, "vp3": 10.0, "vp4": 300.0}                    # our guess
    tasks = [BenchTask(c, n, str(case_config_path(c)), tuple(overrides), warmup)
             for c in cases for n in (case_grids(c) if grids is None else grids)]
    return sorted(tasks, key=lambda t: -(t.grid ** 3) * cost.get(t.case, 1.0))


# -- analysis ----------------------------------------------------------------------------------
@dataclass
class Check:
    """One pass/fail test of a case against our acceptance (``published.ACCEPTANCE``)."""

    quantity: str
    kind: str            # steady | finest | extrapolated | order
    value: float
    limit: float
    passed: bool
    note: str = ""


@dataclass
class CaseSummary:
    case: str
    title: str
    setup: str
    config_path: str
    config_sha256: str
    rayleigh: float
    continuation: tuple
    settings: dict
    rows: list
    convergence: dict            # quantity -> ConvergenceEstimate or None
    published: dict              # quantity -> value
    checks: list
    notes: list
    lid_convergence: dict = field(default_factory=dict)   # lid quantity -> estimate (vp cases)

    @property
    def passed(self) -> bool:
        return all(c.passed for c in self.checks)

    def _per_quantity(self, attr) -> dict:
        return {q: (getattr(e, attr) if e is not None else math.nan)
                for q, e in self.convergence.items()}

    @property
    def observed_order(self) -> dict:
        return self._per_quantity("order")

    @property
    def extrapolated(self) -> dict:
        return self._per_quantity("extrapolated")

    @property
    def gci_fine(self) -> dict:
        return self._per_quantity("gci_fine")

    @property
    def extrapolated_error(self) -> dict:
        return {q: (v - self.published[q]) / self.published[q]
                if math.isfinite(v) and q in self.published else math.nan
                for q, v in self.extrapolated.items()}

    @property
    def finest(self):
        return max(self.rows, key=lambda r: r.grid) if self.rows else None

    def as_dict(self) -> dict:
        return dict(
            case=self.case, title=self.title, setup=self.setup, config=self.config_path,
            config_sha256=self.config_sha256, rayleigh=self.rayleigh,
            continuation=list(self.continuation), settings=self.settings,
            rows=[r.as_dict() for r in sorted(self.rows, key=lambda r: r.grid)],
            observed_order=self.observed_order, extrapolated=self.extrapolated,
            extrapolated_relative_error=self.extrapolated_error, gci_fine=self.gci_fine,
            convergence={q: (e.as_dict() if e is not None else None)
                         for q, e in self.convergence.items()},
            published=self.published,
            published_citation={q: pv.citation for q, pv in PUBLISHED[self.case].items()},
            checks=[dataclasses.asdict(c) for c in self.checks], passed=self.passed,
            notes=self.notes,
            lid_convergence={q: (e.as_dict() if e is not None else None)
                             for q, e in self.lid_convergence.items()})


def _sci(v: float) -> str:
    """1e5 for powers of ten, else the shortest %g."""
    if v > 0 and float(f"1e{round(math.log10(v))}") == v:
        return f"1e{round(math.log10(v))}"
    return f"{v:g}"


def _sha256(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def _settled_check(case: str, r: BenchRow) -> Check:
    """A steady case: the run reached steady state.  A periodic case (``PERIODIC_CASES``): it
    ran to its end time and its series holds at least three whole periods after the spin-up
    (``studies.viscoplastic.periodic_statistics``)."""
    if case not in PERIODIC_CASES:
        return Check("all", "steady", float(r.grid), math.nan, r.status == "steady",
                     f"grid {r.grid}: {r.status}: {r.message}")
    periods = int(r.periodic.get("periods", 0)) if r.periodic else 0
    return Check("all", "periodic", float(periods), 3.0,
                 r.status == "end-time" and periods >= 3,
                 f"grid {r.grid}: {r.status}, {periods} whole periods: {r.message}")


def analyse_case(case: str, rows: list, config_path, overrides=()) -> CaseSummary:
    """Convergence study, comparison and checks of one case from its rows."""
    from convsim.config import load_config, to_dict
    cfg = load_config(config_path, list(overrides))
    rows = sorted(rows, key=lambda r: r.grid)
    published = {q: pv.value for q, pv in PUBLISHED[case].items()}
    notes, checks = [], []
    cont = tuple(cfg.start.continuation)
    if cont:
        notes.append("the config chains continuation stages itself (start.continuation = "
                     f"{list(cont)}): each run first reaches steady state at Ra = "
                     + ", then ".join(_sci(r) for r in cont)
                     + f" on the same grid, then continues to Ra = {_sci(cfg.physics.rayleigh)}; "
                     "wall time and steps include those stages")
    settled = [_settled_check(case, r) for r in rows]
    checks += settled
    for r in rows:
        if r.upwelling == "x=1":
            notes.append(f"grid {r.grid}: the upwelling is at x = 1, not x = 0 as in the "
                         "published solution; q1 and q2 change roles")
    steady_rows = [r for r, c in zip(rows, settled) if c.passed]
    if len(steady_rows) < len(rows):
        notes.append("runs that did not reach steady state (a periodic case: three whole "
                     "periods) are left out of the convergence study")
    convergence = {}
    for q in QUANTITIES:
        if len(steady_rows) >= 3:
            convergence[q] = conv.estimate_finest([r.h for r in steady_rows],
                                                  [getattr(r, q) for r in steady_rows])
        else:
            convergence[q] = None
    if len(steady_rows) < 3:
        notes.append(f"{len(steady_rows)} steady grid(s): the observed order and the "
                     "extrapolated value are not measurable (they need three grids); judged: "
                     "steady state and the finest grid's error only")
    finest = rows[-1] if rows else None
    for q in (q for q in QUANTITIES if q in published):     # 2b: Nu and vrms only
        acc = ACCEPTANCE[q]
        if finest is not None:
            err = finest.relative_error[q]
            checks.append(Check(q, "finest", abs(err), acc.finest, abs(err) <= acc.finest,
                                f"grid {finest.grid}"))
        est = convergence[q]
        if est is None:      # not measurable: no check, a note (above), no FAIL for it
            continue
        if math.isfinite(est.extrapolated):
            err = abs(est.extrapolated - published[q]) / abs(published[q])
            checks.append(Check(q, "extrapolated", err, acc.extrapolated,
                                err <= acc.extrapolated, est.behaviour))
        else:
            checks.append(Check(q, "extrapolated", math.nan, acc.extrapolated, False,
                                est.note or est.behaviour))
        if acc.min_order > 0:
            ok = math.isfinite(est.order) and est.order >= acc.min_order
            checks.append(Check(q, "order", est.order, acc.min_order, ok, est.behaviour))
    settings = to_dict(cfg)
    return CaseSummary(lid_convergence=lid_convergence(steady_rows),
                       case=case, title=settings.get("title", case), setup=CASE_SETUP[case],
                       config_path=str(config_path), config_sha256=_sha256(config_path),
                       rayleigh=float(cfg.physics.rayleigh), continuation=cont,
                       settings=settings, rows=rows, convergence=convergence,
                       published=published, checks=checks, notes=notes)


# -- the whole bench -----------------------------------------------------------------------------
def provenance(command: str = "") -> dict:
    """Machine and software versions of this bench run."""
    import numpy
    import scipy
    versions = {"python": platform.python_version(), "numpy": numpy.__version__,
                "scipy": scipy.__version__, "convsim": __version__}
    for name in ("numba", "h5py", "matplotlib"):
        try:
            versions[name] = __import__(name).__version__
        except Exception:                       # pragma: no cover - optional in the report
            versions[name] = "not installed"
    cpu = platform.processor() or ""
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.lower().startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    commit = ""
    try:
        root = Path(__file__).resolve().parents[2]
        commit = subprocess.run(["git", "-C", str(root), "describe", "--always", "--dirty"],
                                capture_output=True, text=True, timeout=10).stdout.strip()
    except Exception:
        pass
    return dict(date=_dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds"),
                platform=platform.platform(), machine=platform.machine(), cpu=cpu,
                cpu_count=os.cpu_count(), versions=versions, git=commit, command=command)


@dataclass
class BenchResult:
    cases: list                  # CaseSummary, in the order asked
    grids: tuple
    jobs: int
    overrides: tuple
    wall_seconds: float
    provenance: dict
    memory_method: str = MEMORY_METHOD
    warmup: str = WARMUP

    @property
    def passed(self) -> bool:
        return all(c.passed for c in self.cases)

    def as_dict(self) -> dict:
        return dict(grids=list(self.grids), jobs=self.jobs, overrides=list(self.overrides),
                    wall_seconds=self.wall_seconds, passed=self.passed,
                    memory_method=self.memory_method, warmup=self.warmup,
                    acceptance={q: dataclasses.asdict(a) for q, a in ACCEPTANCE.items()},
                    acceptance_note="our acceptance tolerances, not published numbers",
                    provenance=self.provenance, cases=[c.as_dict() for c in self.cases])


def run_bench(cases=(), grids=None, jobs: int | None = None, overrides=(),
              progress=None, command: str = "", warmup: bool = True) -> BenchResult:
    """Run cases x grids on local cores and analyse them.

    Parameters
    ----------
    cases : case names (empty: all known).
    grids : cell counts n (each run on n x n); None: each case's ``case_grids``.
    jobs : worker processes (default ``os.cpu_count()``).
    overrides : ``section.key=value`` strings applied to every case config.
    progress : callable(BenchRow, done, total), optional, called as runs finish.
    command : the command line, recorded in the provenance.

    Returns
    -------
    BenchResult
    """
    import time
    cases = parse_cases(cases)
    grids = None if grids is None else parse_grids(grids)
    jobs = int(jobs or os.cpu_count() or 1)
    if jobs < 1:
        raise ConfigError(f"--jobs {jobs}: must be at least 1")
    tasks = plan(cases, grids, overrides, warmup)
    from convsim.config import load_config
    for c in cases:                                  # bad overrides fail here, not in a worker
        load_config(case_config_path(c), list(overrides))
    t0 = time.perf_counter()
    rows = []
    with process_pool(min(jobs, len(tasks)), max_tasks_per_child=1) as pool:
        futures = {pool.submit(run_task, t): t for t in tasks}
        for fut in as_completed(futures):
            try:
                row = fut.result()
            except Exception as exc:      # a crashed run is a row with status "error"
                row = _error_row(futures[fut], exc)
            rows.append(row)
            log.info("%s grid %d: %s in %.1f s", row.case, row.grid, row.status,
                     row.wall_seconds)
            if progress is not None:
                progress(row, len(rows), len(tasks))
    wall = time.perf_counter() - t0
    summaries = [analyse_case(c, [r for r in rows if r.case == c], case_config_path(c),
                              overrides) for c in cases]
    return BenchResult(cases=summaries, grids=tuple(sorted({t.grid for t in tasks})), jobs=jobs, overrides=tuple(overrides),
                       wall_seconds=wall, provenance=provenance(command))
