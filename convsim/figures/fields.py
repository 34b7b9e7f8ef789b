"""Figures of a run file: fields, profiles, time series and a one-page summary sheet.

Every ``*_figure`` function takes a :class:`convsim.files.runfile.RunFile` (from
``read_run``) and returns a :class:`matplotlib.figure.Figure` on an Agg canvas
(no pyplot, no global state), drawn in the house style of
:mod:`convsim.figures.style` with its layout fixed (:func:`convsim.figures.style.freeze_layout`);
:func:`save_figures` writes it in the formats asked for.  Tests read the
plotted data back from the artists.  Numbers and labels come from a
:class:`convsim.figures.presentation.Presentation`: nondimensional, or physical units
when the run's config has a ``[body]`` table.  The animation is in
:mod:`convsim.figures.animation`.

What is drawn
-------------
- temperature field T(x, z) (cell centres, ``pcolormesh`` over the cell
  corners) with streamlines: in 2D the streamlines of an incompressible flow
  are the contours of the streamfunction psi (u = dpsi/dz, w = -dpsi/dx), so
  they are contours of psi on the corner grid, at levels +-k m / (n + 1),
  k = 1..n, m = max |psi|, dashed where psi < 0 (the sense of rotation);
  or, on request, velocity arrows (face velocities averaged to cell centres);
- viscosity field eta(x, z) on a log colour scale when it varies;
- temperature anomaly T - <T>(z) on the diverging map (summary sheet, uniform
  viscosity);
- horizontally averaged temperature and viscosity profiles against height;
- time series of the Nusselt number at the top and the bottom (or the heat
  flux, q_dim = Nu k dT / d, in physical units) and of vrms;
- a one-page summary sheet with all of these and the run's key parameters.
"""

from __future__ import annotations

import logging
import math
from pathlib import Path

import numpy as np
from matplotlib import colors as mcolors
from matplotlib import patheffects, ticker

from convsim.figures import style
from convsim.errors import ConfigError
from convsim.figures.presentation import (Presentation, parameter_lines, presentation_for, run_config,
                           select_snapshot, viscosity_varies)
from convsim.files.runfile import RunFile, check_writable, read_run

__all__ = ["Presentation", "presentation_for", "select_snapshot", "viscosity_varies",
           "temperature_figure", "viscosity_figure", "profiles_figure", "series_figure",
           "summary_figure", "draw_temperature", "draw_streamlines", "draw_arrows",
           "draw_anomaly", "draw_viscosity", "draw_profiles", "draw_series", "log_ticks",
           "save_figures", "plot_run"]

log = logging.getLogger(__name__)

#: Number of streamline levels on each side of zero.
STREAMLINE_LEVELS = 6
#: Arrows across the box in the arrow plot (at most).
ARROWS_ACROSS = 14
_HALO = [patheffects.withStroke(linewidth=1.3, foreground="white")]


# -- drawing on given axes ----------------------------------------------------------------------
def _tick_step(extent: float, bins: int) -> float:
    """A 1-2-2.5-5 tick step giving at most ``bins`` intervals over ``extent``."""
    values = ticker.MaxNLocator(nbins=bins, steps=[1, 2, 2.5, 5, 10]).tick_values(0.0, extent)
    return float(values[1] - values[0])


def _field_axes(ax, run: RunFile, pres: Presentation):
    """Equal aspect, limits at the box walls, ticks fixed by the box size alone.

    The tick steps do not depend on the axes size: equal aspect shrinks the axes
    after the layout is computed, and ticks chosen for the shrunk axes would have
    other label widths than those the layout made room for.
    """
    x0, x1 = pres.length(run.x_node[0]), pres.length(run.x_node[-1])
    z0, z1 = pres.length(run.z_node[0]), pres.length(run.z_node[-1])
    ax.set_aspect("equal")
    ax.set_xlim(x0, x1)
    ax.set_ylim(z0, z1)
    wide = (x1 - x0) / (z1 - z0)
    ax.xaxis.set_major_locator(ticker.MultipleLocator(_tick_step(x1 - x0, 6)))
    ax.yaxis.set_major_locator(ticker.MultipleLocator(_tick_step(z1 - z0, 4 if wide < 2 else 2)))
    ax.set_xlabel(pres.x_label)
    ax.set_ylabel(pres.z_label)


def streamline_levels(psi, n: int = STREAMLINE_LEVELS) -> np.ndarray:
    """Contour levels of psi: +-k m/(n+1), k = 1..n, m = max|psi| (empty for psi = 0)."""
    m = float(np.max(np.abs(psi))) if np.size(psi) else 0.0
    if not (m > 0.0 and math.isfinite(m)):
        return np.array([])
    k = np.arange(1, n + 1) / (n + 1)
    return np.concatenate([-m * k[::-1], m * k])


def draw_streamlines(ax, run: RunFile, pres: Presentation, psi=None):
    """Contours of the streamfunction on the corner grid; returns the ContourSet or None."""
    psi = run.fields["streamfunction"] if psi is None else psi
    levels = streamline_levels(psi)
    if levels.size == 0:
        return None
    cs = ax.contour(pres.length(run.x_node), pres.length(run.z_node), psi, levels=levels,
                    colors="black", linewidths=0.6, negative_linestyles="dashed")
    cs.set_path_effects(_HALO)
    return cs


def cell_velocities(run: RunFile):
    """Face velocities averaged to the cell centres: (u, w), each (nz, nx), in kappa/d."""
    ux, wz = run.fields["velocity_x"], run.fields["velocity_z"]
    return 0.5 * (ux[:, 1:] + ux[:, :-1]), 0.5 * (wz[1:, :] + wz[:-1, :])


def draw_arrows(ax, run: RunFile, pres: Presentation):
    """Velocity arrows at (a subset of) the cell centres; returns the Quiver."""
    u, w = cell_velocities(run)
    nz, nx = u.shape
    stride = max(1, math.ceil(max(nx, nz) / ARROWS_ACROSS))
    j0, i0 = (nz % stride) // 2 + stride // 2, (nx % stride) // 2 + stride // 2
    sl = (slice(j0, None, stride), slice(i0, None, stride))
    x, z = np.meshgrid(pres.length(run.x), pres.length(run.z))
    q = ax.quiver(x[sl], z[sl], pres.velocity(u[sl]), pres.velocity(w[sl]), color="white",
                  edgecolor="black", linewidth=0.3, pivot="mid", width=0.006,
                  angles="xy", scale_units=None)
    speed = float(np.max(np.hypot(u, w)))
    if speed > 0:
        ref = float(f"{pres.velocity(speed) / 2:.1g}")
        unit = "cm/yr" if pres.physical else "$\\kappa/d$"
        ax.quiverkey(q, 0.92, 1.045, ref, f"{ref:g} {unit}", labelpos="W", coordinates="axes",
                     fontproperties={"size": 7}, color="black", labelsep=0.05)
    return q


def draw_temperature(ax, run: RunFile, pres: Presentation, *, arrows=False, colorbar=True):
    """Temperature field with streamlines (or arrows) on ``ax``; returns the QuadMesh."""
    T = pres.temperature(run.fields["temperature"])
    mesh = ax.pcolormesh(pres.length(run.x_node), pres.length(run.z_node), T,
                         cmap=style.TEMPERATURE_CMAP, shading="flat", rasterized=True,
                         vmin=float(np.min(T)), vmax=float(np.max(T)))
    mesh.set_label("temperature")
    if arrows:
        draw_arrows(ax, run, pres)
    else:
        draw_streamlines(ax, run, pres)
    _field_axes(ax, run, pres)
    ax.set_title(pres.time_text(run.times[run.snapshot]) + f"  (snapshot {run.snapshot})",
                 loc="left")
    if colorbar:
        _colorbar(ax, mesh, pres.temperature_label)
    return mesh


def draw_anomaly(ax, run: RunFile, pres: Presentation, *, colorbar=True):
    """Temperature anomaly T - <T>(z) (row mean removed) on the diverging map; the QuadMesh."""
    T = run.fields["temperature"]
    anomaly = pres.temperature_difference(T - T.mean(axis=1, keepdims=True))
    lo, hi = style.symmetric_limits(anomaly)
    mesh = ax.pcolormesh(pres.length(run.x_node), pres.length(run.z_node), anomaly,
                         cmap=style.DIVERGING_CMAP, vmin=lo, vmax=hi, shading="flat",
                         rasterized=True)
    mesh.set_label("temperature anomaly")
    _field_axes(ax, run, pres)
    ax.set_title(pres.time_text(run.times[run.snapshot]), loc="left")
    if colorbar:
        _colorbar(ax, mesh, pres.anomaly_label)
    return mesh


def _colorbar(ax, mesh, label):
    """A colour bar exactly as tall as the (equal-aspect) field axes, just right of it."""
    cax = ax.inset_axes([1.04, 0.0, 0.05, 1.0])
    return ax.figure.colorbar(mesh, cax=cax, label=label)


#: Log-axis tick helpers live in the shared style (the onset, bench and sweep figures use them too).
_log_label = style.log_label
log_ticks = style.log_ticks


def draw_viscosity(ax, run: RunFile, pres: Presentation, *, colorbar=True):
    """Viscosity field on ``ax``, log colour scale when it varies; returns the QuadMesh."""
    eta = pres.viscosity(run.fields["viscosity"])
    lo, hi = float(np.min(eta)), float(np.max(eta))
    norm = (mcolors.LogNorm(vmin=lo, vmax=hi) if viscosity_varies(eta)
            else mcolors.Normalize(vmin=lo * 0.5, vmax=hi * 1.5))
    mesh = ax.pcolormesh(pres.length(run.x_node), pres.length(run.z_node), eta,
                         cmap=style.VISCOSITY_CMAP, norm=norm, shading="flat", rasterized=True)
    mesh.set_label("viscosity")
    _field_axes(ax, run, pres)
    ax.set_title(pres.time_text(run.times[run.snapshot]), loc="left")
    if colorbar:
        cbar = _colorbar(ax, mesh, pres.viscosity_label)
        if isinstance(norm, mcolors.LogNorm):
            log_ticks(cbar.ax.yaxis, lo, hi, max_labels=6)
    return mesh


def draw_profiles(ax_t, ax_eta, run: RunFile, pres: Presentation):
    """Horizontally averaged T(z) and eta(z); returns the two Line2D."""
    z = pres.length(run.z)
    (lt,) = ax_t.plot(pres.temperature(run.fields["temperature_profile"]), z,
                      color=style.LINE_COLORS[1], label="temperature")
    ax_t.set_xlabel(pres.temperature_label)
    ax_t.set_ylabel(pres.z_label)
    eta = pres.viscosity(run.fields["viscosity_profile"])
    (le,) = ax_eta.plot(eta, z, color=style.LINE_COLORS[0], label="viscosity")
    if viscosity_varies(eta):
        ax_eta.set_xscale("log")
        lo, hi = float(eta.min()), float(eta.max())
        pad = (hi / lo) ** 0.05
        ax_eta.set_xlim(lo / pad, hi * pad)
        log_ticks(ax_eta.xaxis, lo / pad, hi * pad, max_labels=4)
    else:
        ax_eta.set_xlim(float(eta.min()) * 0.5, float(eta.max()) * 1.5)
    ax_eta.set_xlabel(pres.viscosity_label)
    for ax in (ax_t, ax_eta):
        ax.set_ylim(pres.length(run.z_node[0]), pres.length(run.z_node[-1]))
        ax.grid(True, linewidth=0.3, color="0.85")
    ax_eta.tick_params(labelleft=False)
    _draw_mean_profiles(ax_t, ax_eta, run, pres, z)
    return lt, le


def _time_means(run: RunFile) -> dict:
    """The run's time means, when it is time-dependent (settled is not 'steady')."""
    stats = getattr(run, "statistics", None) or {}
    if stats.get("settled") in (None, "steady"):
        return {}
    return stats.get("statistics", {})


def _draw_mean_profiles(ax_t, ax_eta, run: RunFile, pres: Presentation, z) -> None:
    """The time-mean profiles (dashed) with their 95 % bands, over the instantaneous ones
    (statistically steady runs only: an unfinished run's mean profile is still moving)."""
    means = _time_means(run) if run.statistics.get("settled") == "statistically-steady" else {}
    for ax, name, convert, colour in ((ax_t, "temperature_profile", pres.temperature, 1),
                                      (ax_eta, "viscosity_profile", pres.viscosity, 0)):
        if name not in means:
            continue
        m, h = np.asarray(means[name]["mean"], float), np.asarray(means[name]["ci95"], float)
        h = np.where(np.isfinite(h), h, 0.0)
        ax.fill_betweenx(z, convert(m - h), convert(m + h), color=style.LINE_COLORS[colour],
                         alpha=0.2, linewidth=0)
        ax.plot(convert(m), z, color=style.LINE_COLORS[colour], linestyle="--",
                label=f"time mean from t = {means[name]['from_time']:.3g}")
    if means:
        ax_t.legend(loc="best")


def draw_series(ax_nu, ax_v, run: RunFile, pres: Presentation):
    """Nu top and bottom (or heat flux) and vrms against time; returns the three Line2D."""
    s = run.series
    t = pres.time(s["series_time"])
    (top,) = ax_nu.plot(t, pres.heat_flux(s["nusselt_top"]), color=style.LINE_COLORS[1],
                        label="top")
    (bottom,) = ax_nu.plot(t, pres.heat_flux(s["nusselt_bottom"]), color=style.LINE_COLORS[0],
                           linestyle="--", label="bottom")
    ax_nu.set_ylabel(pres.heat_flux_label)
    ax_nu.legend(loc="best")
    (vrms,) = ax_v.plot(t, pres.velocity(s["vrms"]), color=style.LINE_COLORS[2], label="vrms")
    ax_v.set_ylabel(pres.velocity_label)
    ax_v.set_xlabel(pres.time_label)
    shown = pres.time(run.times[run.snapshot])
    for ax in (ax_nu, ax_v):
        ax.grid(True, linewidth=0.3, color="0.85")
        if len(t):
            start = min(float(t[0]), float(pres.time(run.times[0])))
            ax.set_xlim(start, float(t[-1]) if t[-1] > start else start + 1.0)
            ax.axvline(shown, color="0.5", linewidth=0.6, linestyle=":", zorder=0)
    ax_nu.tick_params(labelbottom=False)
    _draw_averaging_window(ax_nu, ax_v, run, pres)
    return top, bottom, vrms


def _draw_averaging_window(ax_nu, ax_v, run: RunFile, pres: Presentation) -> None:
    """Shade the averaging window; the time means as horizontal lines with 95 % bands."""
    means = _time_means(run)
    if "nusselt_top" not in means:
        return
    start, end = pres.time(means["nusselt_top"]["from_time"]), pres.time(run.series["series_time"][-1])
    for ax in (ax_nu, ax_v):
        ax.axvspan(start, end, color=style.GUIDE_COLOR, alpha=0.12, linewidth=0, zorder=0,
                   label="averaging window" if ax is ax_nu else None)
    for ax, name, convert, colour, dash in ((ax_nu, "nusselt_top", pres.heat_flux, 1, "-"),
                                            (ax_nu, "nusselt_bottom", pres.heat_flux, 0, "--"),
                                            (ax_v, "vrms", pres.velocity, 2, "-")):
        m, h = means[name]["mean"], means[name]["ci95"]
        h = h if h is not None and np.isfinite(h) else 0.0
        ax.hlines(convert(m), start, end, color=style.LINE_COLORS[colour], linewidth=1.2,
                  linestyles=dash, zorder=3,
                  label="time mean, 95 % band" if name == "nusselt_top" else None)
        ax.fill_between([start, end], convert(m - h), convert(m + h),
                        color=style.LINE_COLORS[colour], alpha=0.25, linewidth=0, zorder=2)
    ax_nu.legend(loc="best")


# -- figures ----------------------------------------------------------------------------------
def _field_size(run: RunFile, width=style.COLUMN_WIDTH):
    aspect = float(run.x_node[-1] - run.x_node[0]) / float(run.z_node[-1] - run.z_node[0])
    height = min(width * 1.3, max(1.3, (width - 1.3) / aspect + 0.75))
    return width, height


def temperature_figure(run: RunFile, *, arrows: bool = False, pres: Presentation | None = None):
    """Temperature field with streamlines (or velocity arrows), one column wide."""
    pres = presentation_for(run) if pres is None else pres
    with style.context():
        fig = style.new_figure(*_field_size(run))
        draw_temperature(fig.add_subplot(), run, pres, arrows=arrows)
    return style.freeze_layout(fig)


def viscosity_figure(run: RunFile, *, pres: Presentation | None = None):
    """Viscosity field (log colour scale when it varies), one column wide."""
    pres = presentation_for(run) if pres is None else pres
    with style.context():
        fig = style.new_figure(*_field_size(run))
        draw_viscosity(fig.add_subplot(), run, pres)
    return style.freeze_layout(fig)


def profiles_figure(run: RunFile, *, pres: Presentation | None = None):
    """Horizontally averaged temperature and viscosity against height, side by side."""
    pres = presentation_for(run) if pres is None else pres
    with style.context():
        fig = style.new_figure(style.COLUMN_WIDTH, 2.6)
        ax_t, ax_eta = fig.subplots(1, 2, sharey=True)
        draw_profiles(ax_t, ax_eta, run, pres)
    return style.freeze_layout(fig)


def series_figure(run: RunFile, *, pres: Presentation | None = None):
    """Nusselt numbers (top, bottom) and vrms against time, stacked."""
    pres = presentation_for(run) if pres is None else pres
    with style.context():
        fig = style.new_figure(style.COLUMN_WIDTH, 3.2)
        ax_nu, ax_v = fig.subplots(2, 1, sharex=True)
        draw_series(ax_nu, ax_v, run, pres)
    return style.freeze_layout(fig)


def summary_figure(run: RunFile, *, arrows: bool = False, pres: Presentation | None = None):
    """One page: fields, profiles, time series and the key parameters of the run.

    The fields are the temperature (with streamlines or arrows) and the
    viscosity, or, when the viscosity is uniform, the temperature anomaly
    T - <T>(z) on the diverging map.  Boxes wider than 1.6 depths are stacked,
    narrower ones side by side.
    """
    cfg = run_config(run)
    pres = presentation_for(run, config=cfg) if pres is None else pres
    aspect = float(run.x_node[-1] - run.x_node[0]) / float(run.z_node[-1] - run.z_node[0])
    stacked = aspect >= 1.6
    if stacked:
        field_height = min(1.7, (style.PAGE_WIDTH - 1.7) / aspect)
        top_height = 2.0 * (field_height + 0.6)
    else:
        field_height = min(3.0, (style.PAGE_WIDTH / 2.0 - 1.3) / aspect)
        top_height = field_height + 0.8
    heights = [top_height, 2.1, 2.2, 1.5]
    with style.context():
        fig = style.new_figure(style.PAGE_WIDTH, sum(heights) + 0.3)
        title = run.attrs.get("title") or cfg.title or run.path.stem
        fig.suptitle(title, fontsize=10, x=0.02, horizontalalignment="left")
        top, middle, bottom, text = fig.subfigures(4, 1, height_ratios=heights)
        ax_t, ax_2 = top.subplots(2, 1) if stacked else top.subplots(1, 2)
        draw_temperature(ax_t, run, pres, arrows=arrows)
        if viscosity_varies(run.fields["viscosity"]):
            draw_viscosity(ax_2, run, pres)
        else:
            draw_anomaly(ax_2, run, pres)
        ax_pt, ax_pe = middle.subplots(1, 2, sharey=True)
        draw_profiles(ax_pt, ax_pe, run, pres)
        ax_nu, ax_v = bottom.subplots(1, 2)
        draw_series(ax_nu, ax_v, run, pres)
        ax_nu.tick_params(labelbottom=True)
        ax_nu.set_xlabel(pres.time_label)
        lines = parameter_lines(run, pres, cfg)
        half = (len(lines) + 1) // 2
        for col, chunk in enumerate((lines[:half], lines[half:])):
            body = "\n".join(f"{k}: {v}" for k, v in chunk)
            text.text(0.02 + 0.5 * col, 0.95, body, va="top", ha="left", fontsize=7,
                      linespacing=1.5, wrap=True)
    return style.freeze_layout(fig)


# -- writing ----------------------------------------------------------------------------------
def _formats(formats) -> tuple[str, ...]:
    if isinstance(formats, str):
        formats = [f.strip().lower() for f in formats.split(",") if f.strip()]
    formats = tuple(dict.fromkeys(formats))
    bad = [f for f in formats if f not in style.FORMATS]
    if bad or not formats:
        raise ConfigError(f"--format = {','.join(formats)!r}: expected a comma-separated list of "
                          f"{', '.join(style.FORMATS)}")
    return formats


def save_figures(figures: dict, out_dir: str | Path, formats=style.FORMATS, *,
                 overwrite: bool = False, title: str = "") -> list[Path]:
    """Write ``{stem: Figure}`` into ``out_dir`` as ``stem.<fmt>``; refuse any existing file.

    Every target is checked before the first is written, so a refused call
    writes nothing.
    """
    from convsim import __version__
    formats = _formats(formats)
    out_dir = Path(out_dir)
    targets = [out_dir / f"{stem}.{fmt}" for stem in figures for fmt in formats]
    for path in targets:
        check_writable(path, overwrite)
    written = []
    for stem, fig in figures.items():
        written += style.save(fig, out_dir / stem, formats, title=f"{title} {stem}".strip(),
                              creator=f"convsim {__version__}")
    return written


def plot_run(path: str | Path, *, snapshot: int | None = None, time=None, out_dir=None,
             formats=style.FORMATS, arrows: bool = False, overwrite: bool = False,
             units: str = "auto") -> list[Path]:
    """All figures of one run file (the ``convsim plot`` command); returns the paths written.

    Files are ``<stem>_temperature``, ``_viscosity`` (only when the viscosity
    varies), ``_profiles``, ``_series`` and ``_summary`` in ``out_dir`` (default:
    beside the run file); when a snapshot or time is chosen the snapshot
    figures carry ``_sNNNN``.
    """
    path = Path(path)
    formats = _formats(formats)
    first = read_run(path)
    cfg = run_config(first)
    pres = presentation_for(first, units, cfg)
    index = select_snapshot(first.times, snapshot, time, pres)
    run = first if index == first.snapshot else read_run(path, index)
    tag = "" if snapshot is None and time is None else f"_s{index:04d}"
    stem = path.stem
    makers = {f"{stem}_temperature{tag}": lambda: temperature_figure(run, arrows=arrows, pres=pres)}
    if viscosity_varies(run.fields["viscosity"]):
        makers[f"{stem}_viscosity{tag}"] = lambda: viscosity_figure(run, pres=pres)
    else:
        log.info("viscosity uniform (%g): no viscosity field figure",
                 run.fields["viscosity"].flat[0])
    makers[f"{stem}_profiles{tag}"] = lambda: profiles_figure(run, pres=pres)
    makers[f"{stem}_series"] = lambda: series_figure(run, pres=pres)
    makers[f"{stem}_summary{tag}"] = lambda: summary_figure(run, arrows=arrows, pres=pres)
    out_dir = path.parent if out_dir is None else Path(out_dir)
    for name in makers:  # refuse before drawing anything
        for fmt in formats:
            check_writable(out_dir / f"{name}.{fmt}", overwrite)
    written = []
    for name, make in makers.items():  # one figure in memory at a time
        written += save_figures({name: make()}, out_dir, formats, overwrite=True,
                                title=first.attrs.get("title", ""))
    return written
