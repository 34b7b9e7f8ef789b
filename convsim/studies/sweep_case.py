"""One case of a sweep: its config, its run on a worker, its record.

``run_case(CaseTask) -> record`` is what the back ends execute (a plain, picklable
function of plain data); it never raises: an exception becomes status ``failed``
with the message in ``error``.  Besides the run's own diagnostics the record
holds what the regime classification needs (``convsim.analysis.fitting``): the rms
velocity of the interior band and the viscosity contrast of the case.
"""

from __future__ import annotations

import hashlib
import math
import logging
import os
import socket
import time
import tomllib
import traceback
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from convsim.config import Config, parse_config, to_dict, to_toml
from convsim.model.lid import law_viscosity_contrast
from convsim.studies.sweep_table import FAILED

__all__ = ["CaseTask", "run_case", "case_config", "config_digest", "interior_rms_velocity",
           "law_viscosity_contrast", "INTERIOR_BAND", "base_record"]

log = logging.getLogger(__name__)

INTERIOR_BAND = (0.2, 0.8)   # depth band of interior_vrms, z in layer depths (our choice)


def case_config(base: Config, params, fixed=()) -> Config:
    """The base config with the fixed keys and the case's parameters set, fully validated."""
    data = to_dict(base)
    for key, value in list(fixed) + list(params):
        section, name = key.split(".")
        data.setdefault(section, {})[name] = value
    return parse_config(data, source="case")


def config_digest(config: Config) -> str:
    """SHA-256 (first 16 hex digits) of the config's full TOML text."""
    return hashlib.sha256(to_toml(config).encode("utf-8")).hexdigest()[:16]


# -- one case (runs on a worker) ---------------------------------------------------------------
def interior_rms_velocity(grid, psi: np.ndarray, band=INTERIOR_BAND) -> float:
    """rms velocity of the cells whose centres lie in the depth band z0 <= z <= z1.

    v_int = sqrt(mean over those cells of (u_c^2 + w_c^2)), with u_c, w_c the
    cell-centre averages of the face velocities; units kappa / d.
    """
    from convsim.model.stokes import node_velocities
    u, w = node_velocities(grid, psi)
    z = grid.z_cell
    rows = (z >= band[0]) & (z <= band[1])
    if not rows.any():
        return float("nan")
    return float(np.sqrt(np.mean(u[rows] ** 2 + w[rows] ** 2)))


@dataclass(frozen=True)
class CaseTask:
    """Everything a worker needs to run one case (plain, picklable data)."""

    case_id: str
    index: int
    params: tuple
    base_toml: str
    fixed: tuple
    run_file: str          # absolute path of the run file
    run_file_name: str     # relative to the sweep folder, for the table
    start_file: str = ""   # continuation: the run file to start from
    started_from: str = ""
    config_hash: str = ""
    threads: int = 1       # BLAS threads on the worker (0: leave alone)


def _limit_threads(n: int):
    if n <= 0:
        return None
    from convsim.model.linsolve import limit_blas_threads
    return limit_blas_threads(n)


def base_record(task: CaseTask) -> dict:
    rec = {"case_id": task.case_id, "index": task.index}
    rec.update(dict(task.params))
    rec.update(run_file=task.run_file_name, started_from=task.started_from,
               config_hash=task.config_hash,
               worker=f"{socket.gethostname()}:{os.getpid()}", error="", message="")
    return rec


def run_case(task: CaseTask) -> dict:
    """Run one case and return its record; an exception becomes status 'failed', never raises."""
    from convsim import api
    t0 = time.perf_counter()
    rec = base_record(task)
    limiter = _limit_threads(task.threads)
    try:
        base = parse_config(tomllib.loads(task.base_toml), source="base config")
        cfg = case_config(base, task.params, task.fixed)
        rec.update(rayleigh=cfg.physics.rayleigh,
                   rayleigh_reference=cfg.physics.rayleigh_reference,     # issue 10: stated Ra
                   nx=cfg.domain.nx, nz=cfg.domain.nz,
                   aspect=cfg.domain.aspect, top_flow=cfg.boundaries.top_flow,
                   viscosity_law=cfg.viscosity.law)
        if task.start_file:
            cfg = cfg.replace(start__kind="snapshot", start__file=task.start_file,
                              start__continuation=())
        Path(task.run_file).parent.mkdir(parents=True, exist_ok=True)
        result = api.run(cfg, task.run_file, overwrite=True)
        rec.update(_result_columns(cfg, result))
        rec.update(_yield_columns(cfg, result))
    except Exception as exc:          # any failure of one case is data, not a crash
        rec.update(status=FAILED, error=f"{type(exc).__name__}: {exc}")
        log.debug("case %s failed:\n%s", task.case_id, traceback.format_exc())
    finally:
        if limiter is not None:
            limiter.unregister()
    rec["case_seconds"] = time.perf_counter() - t0
    return rec


def _result_columns(cfg: Config, result) -> dict:
    """The final diagnostics of a run as table columns."""
    from convsim.model.rheology import ViscosityLaw
    b = cfg.boundaries
    if b.top_heat == "temperature" and b.bottom_heat == "temperature":
        t_low, t_high = sorted((b.top_value, b.bottom_value))
    else:
        t_low, t_high = float(result.temperature.min()), float(result.temperature.max())
    law = ViscosityLaw.from_table(cfg.viscosity)
    eta = np.asarray(result.viscosity)
    return dict(_statistics_columns(result, law, b), status=result.status, message=result.message,
                **{k: float(v) for k, v in result.diagnostics.items()
                   if k != "interior_vrms"},      # the sweep's own band (INTERIOR_BAND) wins
                interior_vrms=interior_rms_velocity(result.grid, result.psi),
                steps=int(result.steps),
                time=float(result.time), wall_seconds=float(result.wall_seconds),
                viscosity_contrast=law_viscosity_contrast(law, t_low, t_high),
                viscosity_contrast_field=float(eta.max() / eta.min()))


#: time-averaged quantities of a run that get ``<q>_mean`` and ``<q>_ci95`` columns
MEAN_QUANTITIES = ("nusselt_top", "nusselt_bottom", "vrms", "surface_vrms",
                   "interior_temperature", "lid_thickness")
LID_COLUMNS = ("mobility", "rheological_temperature_scale", "lid_viscosity_contrast", "cells")


def _statistics_columns(result, law, boundaries) -> dict:
    """Time means, intervals, settled word, regime and lid diagnostics as table columns.

    ``rayleigh_top``, ``rayleigh_bottom`` and ``rayleigh_mean_interior`` restate the run's
    Rayleigh number (defined with eta = 1) with the viscosity at the top wall (its
    temperature, z = 1), the bottom wall (z = 0) and the measured time-mean interior
    temperature T_i (z = 1/2; the Ra_i of stagnant-lid theory): Ra / eta there, whatever
    reference the config stated Ra at.  Not ``rayleigh_interior`` of the run summary,
    which is Ra at the stated interior reference state, the mid wall temperature
    (``convsim.run.layer``): a run input, not a measured one.
    """
    stats, lid = result.statistics or {}, result.lid or {}
    out = {"settled": result.settled, "regime": lid.get("regime", "")}
    for q in MEAN_QUANTITIES:
        est = stats.get(q, {})
        out[f"{q}_mean"] = _float(est.get("mean"))
        out[f"{q}_ci95"] = _float(est.get("ci95"))
    out["from_time"] = _float(stats.get("nusselt_top", {}).get("from_time"))
    for key in LID_COLUMNS:
        out[key] = _float(lid.get(key)) if key != "cells" else int(lid.get(key, -1))
    ra = float(result.series["rayleigh"][-1]) if len(result.series.get("rayleigh", ())) else \
        math.nan
    t_bottom = boundaries.bottom_value if boundaries.bottom_heat == "temperature" else \
        float(result.temperature[0].mean())
    out["rayleigh_bottom"] = ra / float(law(t_bottom, 0.0))
    t_top = boundaries.top_value if boundaries.top_heat == "temperature" else \
        float(result.temperature[-1].mean())
    out["rayleigh_top"] = ra / float(law(t_top, 1.0))
    t_i = out["interior_temperature_mean"]
    out["rayleigh_mean_interior"] = ra / float(law(t_i, 0.5)) if math.isfinite(t_i) else math.nan
    return out


def _float(value) -> float:
    return math.nan if value is None else float(value)


# -- a lid that can yield (issue 11) ---------------------------------------------------------------
def _yield_columns(cfg: Config, result) -> dict:
    """The yield stress and the lid history (``convsim.model.lid.lid_history``) as table
    columns, and the mobility of the means again: the final state's ``mobility`` diagnostic
    has the same name and must not replace it."""
    lid = result.lid or {}
    return dict(yield_stress=float(cfg.viscosity.yield_stress),
                switches=int(lid.get("switches", -1)),
                breaking_events=int(lid.get("breaking_events", -1)),
                mobility=_float(lid.get("mobility")))
