"""What a run file holds, as a JSON-ready dict (the ``convsim info`` command).

No numerics and no printing: :func:`describe_run` reads a run file (see
:mod:`convsim.files.runfile` for the layout) and returns plain Python numbers,
strings, lists and dicts; the CLI prints them as text or JSON.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np

from convsim.files.jsonio import plain
from convsim.files.reader import reading_run_file
from convsim.files.runfile import FIELDS, SERIES
from convsim.files.statistics_group import read_statistics
from convsim.model.diagnostics import DIAGNOSTICS

__all__ = ["describe_run", "format_info"]

_PROVENANCE = ("title", "source", "convsim_version", "created", "Conventions", "wall_seconds")


def _read(path: Path):
    """What ``describe_run`` needs from the file, read in one opening."""
    with reading_run_file(path) as f:
        attrs = {k: plain(v) for k, v in f.attrs.items()}
        x_node, z_node = f["x_node"][:], f["z_node"][:]
        times, steps = f["time"][:], f["step"][:]
        fields = {name: {"dims": ["time"] + list(FIELDS[name][0]),
                         "shape": list(f[name].shape),
                         "units": plain(f[name].attrs.get("units")),
                         "long_name": plain(f[name].attrs.get("long_name"))}
                  for name in FIELDS if name in f}
        records = int(f["series_time"].shape[0])
        last = {name: plain(f[name][-1]) for name in SERIES if records and name in f}
        first_time = plain(f["series_time"][0]) if records else None
        statistics = read_statistics(f)
    return attrs, x_node, z_node, times, steps, fields, records, last, first_time, statistics


def describe_run(path: str | Path) -> dict:
    """A summary of a run file.

    Returns
    -------
    dict
        ``file`` (path, size_bytes, xdmf sidecar or None), ``status``,
        ``provenance`` (title, source, convsim_version, created, Conventions,
        wall_seconds), ``grid`` (nx, nz, aspect, periodic, dx, dz: the mean row height,
        dz_min and dz_max: the thinnest and thickest rows, which differ on a grid refined
        towards the walls), ``snapshots`` (count, times, steps), ``series`` (records, first_time, last_time, names),
        ``fields`` ({name: {dims, shape, units, long_name}}), ``final`` (the
        ``final_*`` attributes, or the last series row while the run is not
        finished), ``settled``, ``statistics`` (per quantity mean, ci95, from_time),
        ``lid`` and ``heat_balance`` (empty for an unfinished run; see
        ``runfile.write_statistics``), ``physical`` (with a [body] table: the final numbers in
        physical units, ``{name: {"value", "units", "doc"}}``, see
        ``convsim.physical.physical_quantities``; else None) and ``config`` (the stored TOML as
        a nested dict).
    """
    path = Path(path)
    attrs, x_node, z_node, times, steps, fields, records, last, first_time, statistics = \
        _read(path)
    try:
        config = tomllib.loads(attrs.get("config", ""))
    except tomllib.TOMLDecodeError:
        config = None
    final = {k[len("final_"):]: v for k, v in attrs.items() if k.startswith("final_")}
    if not final and last:
        final = {"time": last.get("series_time"), "steps": last.get("series_step"),
                 **{k: last[k] for k, d in DIAGNOSTICS.items() if d.of_state and k in last}}
    nx, nz = len(x_node) - 1, len(z_node) - 1
    sidecar = path.with_suffix(".xdmf")
    return {
        "file": {"path": str(path), "size_bytes": path.stat().st_size,
                 "xdmf": str(sidecar) if sidecar.is_file() else None},
        "status": attrs.get("status"),
        "provenance": {k: attrs.get(k) for k in _PROVENANCE},
        "grid": {"nx": nx, "nz": nz, "aspect": plain(x_node[-1] - x_node[0]),
                 "periodic": bool(attrs.get("periodic", 0)),
                 "dx": plain((x_node[-1] - x_node[0]) / nx),
                 "dz": plain((z_node[-1] - z_node[0]) / nz),
                 "dz_min": plain(np.diff(z_node).min()), "dz_max": plain(np.diff(z_node).max())},
        "snapshots": {"count": int(len(times)), "times": plain(times), "steps": plain(steps)},
        "series": {"records": records, "first_time": first_time,
                   "last_time": last.get("series_time"), "names": list(SERIES),
                   "units": {name: SERIES[name][0] for name in SERIES}},
        "fields": fields,
        "final": final,
        "settled": statistics.get("settled"),
        "statistics": {k: {p: plain(v) for p, v in e.items()}
                       for k, e in statistics.get("statistics", {}).items()},
        "lid": {k: plain(v) for k, v in statistics.get("lid", {}).items()},
        "heat_balance": {k: plain(v) for k, v in statistics.get("heat_balance", {}).items()},
        "physical": _physical(dict(final, settled=statistics.get("settled"),
                                   statistics=statistics.get("statistics")), config),
        "config": config,
    }


def _physical(final: dict, config) -> dict | None:
    """The final numbers in physical units (mW m^-2, cm yr^-1, K, km, Myr) with a [body]."""
    if not final or not config or "body" not in config:
        return None
    from convsim.config import parse_config
    from convsim.errors import ConvsimError
    from convsim.physical import physical_quantities
    from convsim.units import scales_from_body
    try:
        cfg = parse_config(config)
        return physical_quantities(final, scales_from_body(cfg.body), cfg.boundaries)
    except ConvsimError:
        return None


def _short(values, keep=4):
    text = [f"{v:.6g}" if isinstance(v, float) else str(v) for v in values]
    if len(text) > 2 * keep:
        text = text[:keep] + [f"... ({len(values) - 2 * keep} more) ..."] + text[-keep:]
    return ", ".join(text)


def _num(value, digits: int = 6) -> str:
    return f"{value:.{digits}g}" if isinstance(value, (int, float)) else str(value)


def format_info(info: dict) -> str:
    """The dict of :func:`describe_run` as a few lines of text."""
    g, s, sn, p = info["grid"], info["series"], info["snapshots"], info["provenance"]
    cfg = info["config"] or {}
    phys, bnd, visc = cfg.get("physics", {}), cfg.get("boundaries", {}), cfg.get("viscosity", {})
    lines = [
        f"{info['file']['path']}: {p.get('title') or 'convsim run'}",
        f"  status      {info['status']}",
        f"  grid        {g['nx']} x {g['nz']} cells, aspect {g['aspect']:g}, "
        f"{'periodic' if g['periodic'] else 'reflecting'} sides"
        + ("" if g["dz_max"] <= g["dz_min"] * (1 + 1e-9) else
           f", rows {g['dz_min']:.3g} to {g['dz_max']:.3g} thick (refined towards the walls)"),
    ]
    if phys:
        lines.append(f"  physics     Ra = {phys.get('rayleigh', float('nan')):g} (viscosity at the "
                     f"{phys.get('rayleigh_reference', 'top')}), "
                     f"internal heating {phys.get('internal_heating', 0.0):g}")
    if bnd:
        lines.append(f"  boundaries  top {bnd.get('top_flow')} / {bnd.get('top_heat')} "
                     f"{bnd.get('top_value')}, bottom {bnd.get('bottom_flow')} / "
                     f"{bnd.get('bottom_heat')} {bnd.get('bottom_value')}")
    if visc:
        lines.append(f"  viscosity   {visc.get('law')}")
    if "body" in cfg:
        lines.append("  body        " + ", ".join(f"{k} = {v}" for k, v in cfg["body"].items()))
    lines.append(f"  snapshots   {sn['count']} at t = {_short(sn['times'])}")
    lines.append(f"  series      {s['records']} records"
                 + (f", t = {s['first_time']:.6g} to {s['last_time']:.6g}" if s["records"] else ""))
    fin = info["final"]
    if fin:
        state_diagnostics = [k for k, d in DIAGNOSTICS.items() if d.of_state]
        keys = [k for k in ("time", "steps", *state_diagnostics, "message") if k in fin]
        lines.append("  final       " + ", ".join(
            f"{k} = {fin[k]:.6g}" if isinstance(fin[k], float) else f"{k} = {fin[k]}"
            for k in keys))
    stats = info.get("statistics") or {}
    scalars = [(k, e) for k, e in stats.items() if not isinstance(e.get("mean"), list)]
    if scalars:
        lines.append(f"  settled     {info.get('settled')}: time means from t = "
                     f"{scalars[0][1]['from_time']:.6g}, +- 95 % half-width")
        for k, e in scalars:
            lines.append(f"              {k} = {_num(e['mean'])} +- {_num(e['ci95'], 2)}")
    lid = info.get("lid") or {}
    if lid:
        lines.append(f"  lid         regime {lid.get('regime')}, mobility {_num(lid.get('mobility'))}, "
                     f"thickness {_num(lid.get('lid_thickness'))}, T_i "
                     f"{_num(lid.get('interior_temperature'))}, {lid.get('cells')} cell(s)")
        lines += _lid_history_lines(lid)
    physical = info.get("physical") or {}
    if physical:
        rows = list(physical.items())
        for i in range(0, len(rows), 3):
            lines.append(("  physical    " if i == 0 else "              ") + ", ".join(
                f"{k.replace('_', ' ')} {v['value']:.4g} {v['units']}" for k, v in rows[i:i + 3]))
    lines.append(f"  provenance  {p.get('source')}, created {p.get('created')}, "
                 f"wall {p.get('wall_seconds') or 0.0:.3g} s, {p.get('Conventions')}")
    lines.append(f"  fields      {', '.join(info['fields'])}")
    if info["file"]["xdmf"]:
        lines.append(f"  xdmf        {info['file']['xdmf']}")
    return "\n".join(lines)


def _lid_history_lines(lid: dict) -> list[str]:
    """The lid-breaking events of a run whose lid switched (``convsim.model.lid``), or none."""
    if not lid.get("switches"):
        return []
    times = ", ".join(f"{t:.4g}" for t in lid.get("breaking_times", ())[:8])
    when = f" (t = {times})" if times else ""
    return [f"              lid breaks {len(lid.get('breaking_times', ()))} time(s){when}, "
            f"{lid.get('switches')} switch(es), open {_num(lid.get('open_fraction'))} "
            f"of the time"]
