"""Figures of a lid that can yield: the yield fields, the surface velocity, the mobility series.

Drawn in the house style (:mod:`convsim.figures.style`) from a
:class:`convsim.files.runfile.RunFile`:

- ``yielding_figure`` (runs whose law yields: the file holds the derived fields
  ``strain_rate``, ``stress``, ``yielded`` of ``convsim.model.fields.DERIVED``):
  the strain-rate invariant e_II and the stress invariant 2 eta e_II (log colour
  scales), the yielded region over the temperature, and the surface velocity
  u(x, z = 1) with its plateness P = 1 - f80 / 0.6 (Tackley 2000, quoted from
  memory; ``convsim.model.plates.plateness``): the surface cells that carry 80 %
  of the surface deformation are shaded, so narrow shaded zones between flat
  stretches of u are plates, and a profile shaded all over is not plate-like.
- ``mobility_figure``: the mobility M(t) = surface vrms / vrms of the series with
  the two bounds of the lid decision (``convsim.model.lid``), the start of the
  averaging window, the lid-breaking events the run recorded (group
  ``statistics/lid``, over that window) or, for a file without them, those of the
  whole series, and the regime word.
"""

from __future__ import annotations

import numpy as np
from matplotlib import colors as mcolors

from convsim.figures import style
from convsim.figures.fields import _colorbar, _field_axes, draw_field, draw_streamlines
from convsim.figures.presentation import Presentation, presentation_for
from convsim.files.reader import RunFile
from convsim.model.fields import DERIVED
from convsim.model.lid import RegimeThresholds, lid_history
from convsim.model.plates import ISOVISCOUS_F80, top_velocity

__all__ = ["has_yield_fields", "draw_log_field", "draw_yielded", "draw_surface_velocity",
           "draw_mobility", "yielding_figure", "mobility_figure", "deforming_cells"]

_YIELDED_CMAP = mcolors.ListedColormap(["#f2f2f2", style.LINE_COLORS[1]])


def has_yield_fields(run: RunFile) -> bool:
    """Whether the snapshot holds every derived field of a yielding law."""
    return all(name in run.fields for name in DERIVED)


def _time_title(ax, run: RunFile, pres: Presentation, what: str) -> None:
    ax.set_title(f"{what}, {pres.time_text(run.times[run.snapshot])}", loc="left")


def draw_log_field(ax, run: RunFile, pres: Presentation, name: str, label: str, *,
                   shading: str = "smooth"):
    """A positive derived field on a log colour scale (zeros drawn at the smallest positive
    value), with streamlines; returns the image."""
    values = np.asarray(run.fields[name], float)
    positive = values[values > 0]
    lo = float(positive.min()) if positive.size else 1.0
    hi = float(values.max()) if positive.size else 10.0
    shown = np.where(values > 0, values, lo)
    norm = mcolors.LogNorm(vmin=lo, vmax=hi if hi > lo else lo * 10.0)
    cmap = style.FIELD_CMAPS.get(DERIVED[name].colormap, style.STRAIN_CMAP)
    mesh = draw_field(ax, run, pres, shown, shading=shading, cmap=cmap, norm=norm)
    mesh.set_label(name)
    draw_streamlines(ax, run, pres, legend=False)
    _field_axes(ax, run, pres)
    cbar = _colorbar(ax, mesh, label)
    style.log_ticks(cbar.ax.yaxis, norm.vmin, norm.vmax, max_labels=5)
    return mesh


def draw_yielded(ax, run: RunFile, pres: Presentation):
    """The yielded cells (coloured) over the others (light grey), with isotherms; the mesh."""
    mask = np.asarray(run.fields["yielded"], float)
    mesh = ax.pcolormesh(pres.length(run.x_node), pres.length(run.z_node), mask,
                         cmap=_YIELDED_CMAP, vmin=0.0, vmax=1.0, shading="flat",
                         rasterized=True)
    mesh.set_label("yielded")
    ax.contour(pres.length(run.x), pres.length(run.z), run.fields["temperature"],
               levels=np.linspace(0.1, 0.9, 5), colors="0.25", linewidths=0.5)
    _field_axes(ax, run, pres)
    ax.set_title(f"yielded region (orange): {100.0 * mask.mean():.3g} % of the area\n"
                 f"isotherms T = 0.1, 0.3, ..., 0.9", loc="left")
    return mesh


def deforming_cells(u: np.ndarray, share: float = 0.8) -> np.ndarray:
    """Mask of the surface cells (between the node columns of u) that carry ``share`` of the
    surface deformation sum |du|, the largest first (the f80 cells of the plateness)."""
    deformation = np.abs(np.diff(u))
    order = np.argsort(deformation)[::-1]
    total = deformation.sum()
    mask = np.zeros(deformation.size, dtype=bool)
    if total > 0.0:
        count = int(np.searchsorted(np.cumsum(deformation[order]), share * total) + 1)
        mask[order[:count]] = True
    return mask


def draw_surface_velocity(ax, run: RunFile, pres: Presentation):
    """u(x) on the top wall with the f80 cells shaded and the plateness in the title."""
    z = run.z_node
    dz = float(z[1] - z[0])
    if np.allclose(np.diff(z), dz):
        u = top_velocity(run.fields["streamfunction"], dz)
    else:                                   # a grid refined towards the walls
        u = top_velocity(run.fields["streamfunction"], float(z[-1] - z[-2]), float(z[-2] - z[-3]))
    x = pres.length(run.x_node)
    mask = deforming_cells(u)
    for i in np.flatnonzero(mask):
        ax.axvspan(x[i], x[i + 1], color="0.85", linewidth=0, zorder=0)
    (line,) = ax.plot(x, pres.velocity(u), color=style.LINE_COLORS[0], zorder=3)
    ax.axhline(0.0, color=style.GUIDE_COLOR, linewidth=0.5, zorder=1)
    f80 = mask.sum() / max(mask.size, 1)
    plate = 1.0 - f80 / ISOVISCOUS_F80 if mask.any() else float("nan")
    ax.set_xlim(x[0], x[-1])
    ax.set_xlabel(pres.x_label)
    ax.set_ylabel("surface velocity $u$ (cm yr$^{-1}$)" if pres.physical
                  else r"surface velocity $u\,/\,(\kappa/d)$")
    ax.set_title(f"surface velocity, plateness P = {plate:.2f}\nshaded: 80 % of |du/dx| "
                 f"(P near 1: plates)", loc="left")
    ax.grid(True, linewidth=0.3, color="0.85")
    return line


def yielding_figure(run: RunFile, *, pres: Presentation | None = None,
                    shading: str = "smooth"):
    """Strain rate, stress, yielded region and surface velocity of a yielding run, 2 x 2."""
    pres = presentation_for(run) if pres is None else pres
    with style.context():
        fig = style.new_figure(style.PAGE_WIDTH, 6.0)
        (a, b), (c, d) = fig.subplots(2, 2)
        draw_log_field(a, run, pres, "strain_rate", r"strain rate $e_{II}$ [$\kappa/d^2$]",
                       shading=shading)
        _time_title(a, run, pres, "strain-rate invariant")
        draw_log_field(b, run, pres, "stress", r"stress $2\eta e_{II}$ "
                       r"[$\eta_{ref}\kappa/d^2$]", shading=shading)
        _time_title(b, run, pres, "stress invariant")
        draw_yielded(c, run, pres)
        draw_surface_velocity(d, run, pres)
    return style.freeze_layout(fig)


def _breaking_times(run: RunFile, thresholds: RegimeThresholds) -> tuple[np.ndarray, str]:
    """(times, where from): the run's recorded events, or those of the whole series."""
    lid = (run.statistics or {}).get("lid") or {}
    if "breaking_times" in lid:
        return np.asarray(lid["breaking_times"], float), "recorded"
    s = run.series
    history = lid_history(s["series_time"], s["mobility"], thresholds)
    return np.asarray(history.breaking_times, float), "whole series"


def draw_mobility(ax, run: RunFile, pres: Presentation,
                  thresholds: RegimeThresholds = RegimeThresholds()):
    """M(t) with the lid bounds and the breaking events; returns the line."""
    s = run.series
    t = pres.time(s["series_time"])
    (line,) = ax.plot(t, s["mobility"], color=style.LINE_COLORS[0], label="mobility M")
    for value, text, ls in ((thresholds.mobile_ratio, "lid breaks at", "--"),
                            (thresholds.closed_ratio, "lid closes at", ":")):
        ax.axhline(value, color=style.GUIDE_COLOR, linewidth=0.7, linestyle=ls,
                   label=f"{text} M = {value:g}")
    times, where = _breaking_times(run, thresholds)
    for i, when in enumerate(times):
        ax.axvline(pres.time(when), color=style.LINE_COLORS[1], linewidth=0.8,
                   label=f"{len(times)} lid break{'s' if len(times) > 1 else ''} ({where})"
                   if i == 0 else None)
    window = ((run.statistics or {}).get("statistics") or {}).get("nusselt_top") or {}
    start = window.get("from_time")
    if (start is not None and np.isfinite(start) and len(t)
            and s["series_time"][0] < start < s["series_time"][-1]):     # steady: no window
        ax.axvline(pres.time(start), color=style.GUIDE_COLOR, linewidth=0.7, linestyle="-.",
                   label="averaging window starts")
    lid = (run.statistics or {}).get("lid") or {}
    word = lid.get("regime")
    breaks = "" if len(times) else f"; no lid break ({where})"
    ax.set_title((f"regime: {word}" if word else "regime: (run unfinished)") + breaks, loc="left")
    ax.set_xlabel(pres.time_label)
    ax.set_ylabel("mobility M = surface vrms / vrms")
    top = float(np.nanmax(s["mobility"])) if len(t) else 1.0
    ax.set_ylim(0.0, max(1.0, 1.1 * top) if np.isfinite(top) else 1.0)
    if len(t):
        ax.set_xlim(float(t[0]), float(t[-1]) if t[-1] > t[0] else float(t[0]) + 1.0)
    ax.grid(True, linewidth=0.3, color="0.85")
    ax.figure.legend(loc="outside lower center", ncols=2, fontsize=6.5, columnspacing=1.0)
    return line


def mobility_figure(run: RunFile, *, pres: Presentation | None = None,
                    thresholds: RegimeThresholds = RegimeThresholds()):
    """The mobility series with the lid bounds and the lid-breaking events, one column wide."""
    pres = presentation_for(run) if pres is None else pres
    with style.context():
        fig = style.new_figure(style.COLUMN_WIDTH, 3.0)
        draw_mobility(fig.add_subplot(), run, pres, thresholds)
    return style.freeze_layout(fig)
