"""The ``statistics`` group of a run file: the time means of a finished run.

Written once the run has finished (``RunFileWriter.finish``), replaced when a restarted run
finishes again; read back by :func:`read_statistics`. Layout: see :func:`write_statistics`.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["PROFILE_STATISTICS", "write_statistics", "read_statistics"]

PROFILE_STATISTICS = ("temperature_profile", "viscosity_profile")


def write_statistics(f, summary: dict) -> None:
    """Group ``statistics``: the time means of a finished run (``RunResult.summary``).

    Attributes ``settled`` and, per scalar quantity q, ``q_mean``, ``q_ci95`` (95 %
    half-width), ``q_from_time``; the profiles as variables ``<profile>_mean`` and
    ``<profile>_ci95`` over z; the lid diagnostics as attributes of the subgroup ``lid``
    (the upwellings as its variable ``upwellings``); the heat balance as
    ``heat_balance_<name>``.  Replaced when a restarted run finishes again.
    """
    if "statistics" in f:
        del f["statistics"]
    g = f.create_group("statistics")
    g.attrs["settled"] = str(summary.get("settled"))
    for name, est in summary["statistics"].items():
        if name in PROFILE_STATISTICS:
            for part in ("mean", "ci95"):
                d = g.create_dataset(f"{name}_{part}", data=np.array(
                    [math.nan if v is None else v for v in est[part]], float))
                d.dims[0].attach_scale(f["z"])
                d.attrs["units"] = "1"
                d.attrs["long_name"] = f"time {part} of the {name.replace('_', ' ')}"
            g.attrs[f"{name}_from_time"] = _number(est["from_time"])
            continue
        for part in ("mean", "ci95", "from_time"):
            g.attrs[f"{name}_{part}"] = _number(est[part])
    lid = g.create_group("lid")
    for key, value in (summary.get("lid") or {}).items():
        if key == "upwellings":
            lid.create_dataset("upwellings", data=np.asarray(value, float))
        else:
            lid.attrs[key] = _number(value) if value is None else value
    for key, value in (summary.get("heat_balance") or {}).items():
        g.attrs[f"heat_balance_{key}"] = _number(value) if value is None else value


def _number(value) -> float:
    """A JSON-safe number (None for NaN or inf) back to a float."""
    return math.nan if value is None else float(value)


def read_statistics(f) -> dict:
    """The ``statistics`` group as {settled, statistics: {q: {mean, ci95, from_time}}, lid,
    heat_balance} (empty dict when the run has none)."""
    if "statistics" not in f:
        return {}
    g = f["statistics"]
    attrs = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in g.attrs.items()}
    stats = {}
    for key, value in attrs.items():
        if key.endswith("_from_time"):
            name = key[: -len("_from_time")]
            if name in PROFILE_STATISTICS:
                stats[name] = dict(mean=g[f"{name}_mean"][:], ci95=g[f"{name}_ci95"][:],
                                   from_time=value)
            else:
                stats[name] = dict(mean=attrs[f"{name}_mean"], ci95=attrs[f"{name}_ci95"],
                                   from_time=value)
    lid = {}
    if "lid" in g:
        lid = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in g["lid"].attrs.items()}
        if "upwellings" in g["lid"]:
            lid["upwellings"] = g["lid"]["upwellings"][:]
    return dict(settled=attrs.get("settled"), statistics=stats, lid=lid,
                heat_balance={k[13:]: v for k, v in attrs.items()
                              if k.startswith("heat_balance_")})
