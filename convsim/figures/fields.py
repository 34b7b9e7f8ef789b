"""Figures of a run file: fields, profiles, time series and a one-page summary sheet.

Every ``*_figure`` function takes a :class:`convsim.files.reader.RunFile` (from
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
from matplotlib import patheffects, ticker, transforms

from convsim.figures import style
from convsim.errors import ConfigError
from convsim.figures.presentation import (Presentation, parameter_lines, presentation_for, run_config,
                           select_snapshot, viscosity_varies)
from convsim.figures.lines import (draw_profiles, draw_series, profiles_figure, run_statistics,
                                   series_figure)
from convsim.files.runfile import check_writable
from convsim.files.reader import RunFile, read_run
from convsim.model.fields import ADVECTED

__all__ = ["Presentation", "presentation_for", "select_snapshot", "viscosity_varies",
           "temperature_figure", "viscosity_figure", "profiles_figure", "series_figure",
           "summary_figure", "advected_figure", "draw_advected", "draw_temperature",
           "draw_streamlines", "draw_arrows",
           "draw_anomaly", "draw_viscosity", "draw_profiles", "draw_series", "log_ticks",
           "save_figures", "plot_run", "draw_field", "streamline_levels", "SHADINGS"]

log = logging.getLogger(__name__)

#: Number of streamline levels on each side of zero.
STREAMLINE_LEVELS = 6
#: Field shadings: "smooth" (bilinear between cell centres, held in the outer half
#: cells) or "cells" (one flat colour per cell, the values the scheme holds).
SHADINGS = ("smooth", "cells")
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


def draw_streamlines(ax, run: RunFile, pres: Presentation, psi=None, levels=None,
                     legend=True):
    """Contours of the streamfunction on the corner grid; returns the ContourSet or None.

    ``levels``: fixed contour levels (an animation keeps one set for every frame); default
    :func:`streamline_levels` of this psi.  ``legend``: a key under the axes saying the
    contour interval and the sense of rotation (u = dpsi/dz, w = -dpsi/dx, so the flow
    turns anticlockwise around a maximum of psi: solid, psi > 0; dashed, psi < 0 clockwise).
    """
    psi = run.fields["streamfunction"] if psi is None else psi
    levels = streamline_levels(psi) if levels is None else np.asarray(levels)
    if levels.size == 0:
        return None
    cs = ax.contour(pres.length(run.x_node), pres.length(run.z_node), psi, levels=levels,
                    colors="black", linewidths=0.6, negative_linestyles="dashed")
    cs.set_path_effects(_HALO)
    if legend:
        _streamline_key(ax, levels, pres)
    return cs


def streamline_interval_text(levels, pres: Presentation) -> str:
    """The contour interval of psi, nondimensional (kappa) or in m^2 s^-1."""
    step = float(levels[1] - levels[0]) if len(levels) > 1 else float(abs(levels[0]))
    if pres.physical:
        return f"{style.log_label(float(f'{step * pres.scales.diffusivity:.2g}'))} m$^2$ s$^{{-1}}$"
    return f"{style.log_label(float(f'{step:.3g}'))} $\\kappa$"


def _streamline_key(ax, levels, pres: Presentation):
    from matplotlib.lines import Line2D
    handles = [Line2D([], [], color="black", linewidth=0.6),
               Line2D([], [], color="black", linewidth=0.6, linestyle="--")]
    ax.legend(handles, ["$\\psi > 0$, anticlockwise", "$\\psi < 0$, clockwise"],
              title=f"streamlines every $\\Delta\\psi$ = {streamline_interval_text(levels, pres)}",
              loc="upper center", bbox_to_anchor=(0.5, 0.0), ncols=2, fontsize=6.5,
              bbox_transform=transforms.offset_copy(ax.transAxes, fig=ax.figure, y=-28,
                                                    units="points"),
              title_fontsize=6.5, handlelength=2.2, borderaxespad=0.0, columnspacing=1.2)


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


def draw_field(ax, run: RunFile, pres: Presentation, values, *, shading="smooth", **kwargs):
    """A cell field on ``ax``: an image (``smooth``) or a QuadMesh (``cells``).

    ``smooth`` interpolates bilinearly between the cell centres and holds the value in
    the outer half cells (``imshow`` over the box); ``cells`` draws one flat colour per
    cell over the cell corners.  Either way ``get_array()`` is ``values`` itself.  A grid
    refined towards the walls (unequal rows) is always drawn as cells at their real
    corners (an image would place the rows at equal heights).
    """
    if shading not in SHADINGS:
        raise ConfigError(f"--shading = {shading!r}: expected one of {', '.join(SHADINGS)}")
    x, z = pres.length(run.x_node), pres.length(run.z_node)
    rows = np.diff(np.asarray(run.z_node, dtype=float))
    if shading == "cells" or not np.allclose(rows, rows[0], rtol=1e-9, atol=0.0):
        return ax.pcolormesh(x, z, values, shading="flat", rasterized=True, **kwargs)
    return ax.imshow(values, origin="lower", extent=(x[0], x[-1], z[0], z[-1]),
                     interpolation="bilinear", interpolation_stage="data", aspect="equal",
                     rasterized=True, **kwargs)


def draw_temperature(ax, run: RunFile, pres: Presentation, *, arrows=False, colorbar=True,
                     shading="smooth", levels=None):
    """Temperature field with streamlines (or arrows) on ``ax``; returns the image or mesh."""
    T = pres.temperature(run.fields["temperature"])
    mesh = draw_field(ax, run, pres, T, shading=shading, cmap=style.TEMPERATURE_CMAP,
                      vmin=float(np.min(T)), vmax=float(np.max(T)))
    mesh.set_label("temperature")
    if arrows:
        draw_arrows(ax, run, pres)
    else:
        draw_streamlines(ax, run, pres, levels=levels)
    _field_axes(ax, run, pres)
    ax.set_title(pres.time_text(run.times[run.snapshot]) + f"  (snapshot {run.snapshot})",
                 loc="left")
    if colorbar:
        _colorbar(ax, mesh, pres.temperature_label)
    return mesh


def draw_anomaly(ax, run: RunFile, pres: Presentation, *, colorbar=True, shading="smooth"):
    """Temperature anomaly T - <T>(z) (row mean removed) on the diverging map."""
    T = run.fields["temperature"]
    anomaly = pres.temperature_difference(T - T.mean(axis=1, keepdims=True))
    lo, hi = style.symmetric_limits(anomaly)
    mesh = draw_field(ax, run, pres, anomaly, shading=shading, cmap=style.DIVERGING_CMAP,
                      vmin=lo, vmax=hi)
    mesh.set_label("temperature anomaly")
    _field_axes(ax, run, pres)
    ax.set_title(pres.time_text(run.times[run.snapshot]), loc="left")
    if colorbar:
        _colorbar(ax, mesh, pres.anomaly_label)
    return mesh


def draw_advected(ax, run: RunFile, pres: Presentation, name: str, *, colorbar=True):
    """An advected field other than the temperature (a dye) with streamlines; the QuadMesh.

    Colour map and label come from the field's declaration (``convsim.model.fields``).
    """
    declaration = ADVECTED[name]
    values = run.fields[name]
    lo, hi = float(np.min(values)), float(np.max(values))
    mesh = ax.pcolormesh(pres.length(run.x_node), pres.length(run.z_node), values,
                         cmap=style.FIELD_CMAPS.get(declaration.colormap, style.DYE_CMAP),
                         vmin=lo, vmax=hi if hi > lo else lo + 1.0, shading="flat",
                         rasterized=True)
    mesh.set_label(name)
    draw_streamlines(ax, run, pres)
    _field_axes(ax, run, pres)
    ax.set_title(pres.time_text(run.times[run.snapshot]), loc="left")
    if colorbar:
        units = "" if declaration.units == "1" else f" [{declaration.units}]"
        _colorbar(ax, mesh, f"{name}{units}")
    return mesh


def _colorbar(ax, mesh, label):
    """A colour bar exactly as tall as the (equal-aspect) field axes, just right of it."""
    cax = ax.inset_axes([1.04, 0.0, 0.05, 1.0])
    return ax.figure.colorbar(mesh, cax=cax, label=label)


#: Log-axis tick helpers live in the shared style (the onset, bench and sweep figures use them too).
_log_label = style.log_label
log_ticks = style.log_ticks


def viscosity_range(eta) -> tuple[float, float, bool]:
    """(lo, hi, clipped): the colour range of a varying viscosity field.

    From the lowest value up :data:`convsim.figures.style.VISCOSITY_DECADES` decades (the
    dynamically relevant range); ``clipped`` when the field goes above it.
    """
    lo, top = float(np.min(eta)), float(np.max(eta))
    hi = min(top, lo * 10.0 ** style.VISCOSITY_DECADES)
    return lo, hi, top > hi * (1.0 + 1e-9)


def draw_viscosity(ax, run: RunFile, pres: Presentation, *, colorbar=True, shading="smooth"):
    """Viscosity field on ``ax``, log colour scale over its dynamically relevant range when
    it varies (the colour bar says where it is clipped); returns the image or mesh."""
    eta = pres.viscosity(run.fields["viscosity"])
    lo, hi, clipped = viscosity_range(eta)
    norm = (mcolors.LogNorm(vmin=lo, vmax=hi) if viscosity_varies(eta)
            else mcolors.Normalize(vmin=lo * 0.5, vmax=hi * 1.5))
    mesh = draw_field(ax, run, pres, eta, shading=shading, cmap=style.VISCOSITY_CMAP,
                      norm=norm)
    mesh.set_label("viscosity")
    _field_axes(ax, run, pres)
    ax.set_title(pres.time_text(run.times[run.snapshot]), loc="left")
    if colorbar:
        label = pres.viscosity_label
        if clipped:
            label += f"\nclipped above {style.log_label(hi)}"
        cax = ax.inset_axes([1.04, 0.0, 0.05, 1.0])
        cbar = ax.figure.colorbar(mesh, cax=cax, label=label,
                                  extend="max" if clipped else "neither")
        if isinstance(norm, mcolors.LogNorm):
            log_ticks(cbar.ax.yaxis, lo, hi, max_labels=6)
    return mesh


# -- figures ----------------------------------------------------------------------------------
def _field_size(run: RunFile, width=style.COLUMN_WIDTH):
    aspect = float(run.x_node[-1] - run.x_node[0]) / float(run.z_node[-1] - run.z_node[0])
    height = min(width * 1.3, max(1.3, (width - 1.3) / aspect + 0.75))
    return width, height


def temperature_figure(run: RunFile, *, arrows: bool = False, pres: Presentation | None = None,
                       shading: str = "smooth"):
    """Temperature field with streamlines (or velocity arrows), one column wide."""
    pres = presentation_for(run) if pres is None else pres
    width, height = _field_size(run)
    with style.context():
        fig = style.new_figure(width, height + (0 if arrows else 0.35))
        draw_temperature(fig.add_subplot(), run, pres, arrows=arrows, shading=shading)
    return style.freeze_layout(fig)


def viscosity_figure(run: RunFile, *, pres: Presentation | None = None, shading: str = "smooth"):
    """Viscosity field (log colour scale when it varies), one column wide."""
    pres = presentation_for(run) if pres is None else pres
    with style.context():
        fig = style.new_figure(*_field_size(run))
        draw_viscosity(fig.add_subplot(), run, pres, shading=shading)
    return style.freeze_layout(fig)


def advected_figure(run: RunFile, name: str, *, pres: Presentation | None = None):
    """An advected field (a dye) with streamlines, one column wide."""
    pres = presentation_for(run) if pres is None else pres
    with style.context():
        fig = style.new_figure(*_field_size(run))
        draw_advected(fig.add_subplot(), run, pres, name)
    return style.freeze_layout(fig)


def _parameter_columns(lines, width_chars: int = 64):
    """The (name, value) pairs as two columns of wrapped text (no line runs into the other)."""
    import textwrap
    wrapped = [textwrap.fill(f"{k}: {v}", width_chars, subsequent_indent="    ")
               for k, v in lines]
    counts = [w.count("\n") + 1 for w in wrapped]
    total, acc, split = sum(counts), 0, len(wrapped)
    for i, c in enumerate(counts):
        if acc + c > (total + 1) // 2:
            split = i
            break
        acc += c
    left, right = wrapped[:split], wrapped[split:]
    rows = max(sum(counts[:split]), sum(counts[split:]))
    return "\n".join(left), "\n".join(right), rows


def summary_figure(run: RunFile, *, arrows: bool = False, pres: Presentation | None = None,
                   shading: str = "smooth", statistics=None):
    """One page: fields, profiles, time series and the key parameters of the run.

    The fields are the temperature (with streamlines or arrows) and the
    viscosity, or, when the viscosity is uniform, the temperature anomaly
    T - <T>(z) on the diverging map.  Boxes wider than 1.6 depths are stacked,
    narrower ones side by side.  The parameters are set in two columns wrapped
    to their width, the page as tall as its contents.
    """
    cfg = run_config(run)
    pres = presentation_for(run, config=cfg) if pres is None else pres
    aspect = float(run.x_node[-1] - run.x_node[0]) / float(run.z_node[-1] - run.z_node[0])
    stacked = aspect >= 1.6
    if stacked:
        field_height = min(1.7, (style.PAGE_WIDTH - 1.7) / aspect)
        top_height = 2.0 * (field_height + 1.0)
    else:
        field_height = min(3.0, (style.PAGE_WIDTH / 2.0 - 1.3) / aspect)
        top_height = field_height + 1.2
    left, right, rows = _parameter_columns(parameter_lines(run, pres, cfg))
    heights = [top_height, 2.2, 2.2, 0.15 * rows + 0.2]
    with style.context():
        fig = style.new_figure(style.PAGE_WIDTH, sum(heights) + 0.3)
        title = run.attrs.get("title") or cfg.title or run.path.stem
        fig.suptitle(title, fontsize=10, x=0.02, horizontalalignment="left")
        top, middle, bottom, text = fig.subfigures(4, 1, height_ratios=heights)
        ax_t, ax_2 = top.subplots(2, 1) if stacked else top.subplots(1, 2)
        draw_temperature(ax_t, run, pres, arrows=arrows, shading=shading)
        if viscosity_varies(run.fields["viscosity"]):
            draw_viscosity(ax_2, run, pres, shading=shading)
        else:
            draw_anomaly(ax_2, run, pres, shading=shading)
        ax_pt, ax_pe = middle.subplots(1, 2, sharey=True)
        draw_profiles(ax_pt, ax_pe, run, pres, cfg, statistics)
        ax_nu, ax_v = bottom.subplots(1, 2)
        draw_series(ax_nu, ax_v, run, pres, statistics)
        ax_nu.tick_params(labelbottom=True)
        ax_nu.set_xlabel(pres.time_label)
        for col, body in enumerate((left, right)):
            text.text(0.02 + 0.5 * col, 0.98, body, va="top", ha="left", fontsize=7,
                      linespacing=1.45)
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


def _yielding_makers(run: RunFile, first: RunFile, stem: str, tag: str, pres, shading) -> dict:
    """The figures of a lid that can yield (``convsim.figures.plates``): the yield fields and
    surface velocity where the law yields, the mobility series where it yields or the lid
    history switched."""
    from convsim.figures import plates
    makers = {}
    if plates.has_yield_fields(run):
        makers[f"{stem}_yielding{tag}"] = lambda: plates.yielding_figure(run, pres=pres,
                                                                         shading=shading)
    lid = (first.statistics or {}).get("lid") or {}
    if "mobility" in first.series and (plates.has_yield_fields(run) or lid.get("switches")):
        makers[f"{stem}_mobility"] = lambda: plates.mobility_figure(first, pres=pres)
    return makers


def plot_run(path: str | Path, *, snapshot: int | None = None, time=None, out_dir=None,
             formats=style.FORMATS, arrows: bool = False, overwrite: bool = False,
             units: str = "auto", shading: str = "smooth") -> list[Path]:
    """All figures of one run file (the ``convsim plot`` command); returns the paths written.

    Files are ``<stem>_temperature``, ``_viscosity`` (only when the viscosity
    varies), one per further advected field (``_dye``), ``_yielding`` and
    ``_mobility`` (a law that yields: ``convsim.figures.plates``), ``_profiles``,
    ``_series`` and ``_summary`` in ``out_dir`` (default:
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
    if shading not in SHADINGS:
        raise ConfigError(f"--shading = {shading!r}: expected one of {', '.join(SHADINGS)}")
    stats = run_statistics(first)
    makers = {f"{stem}_temperature{tag}": lambda: temperature_figure(run, arrows=arrows, pres=pres,
                                                                     shading=shading)}
    if viscosity_varies(run.fields["viscosity"]):
        makers[f"{stem}_viscosity{tag}"] = lambda: viscosity_figure(run, pres=pres,
                                                                    shading=shading)
    else:
        log.info("viscosity uniform (%g): no viscosity field figure",
                 run.fields["viscosity"].flat[0])
    for name in run.advected[1:]:                # the dye and any other advected field
        makers[f"{stem}_{name}{tag}"] = lambda name=name: advected_figure(run, name, pres=pres)
    makers.update(_yielding_makers(run, first, stem, tag, pres, shading))
    makers[f"{stem}_profiles{tag}"] = lambda: profiles_figure(run, pres=pres, statistics=stats)
    makers[f"{stem}_series"] = lambda: series_figure(run, pres=pres, statistics=stats)
    makers[f"{stem}_summary{tag}"] = lambda: summary_figure(run, arrows=arrows, pres=pres,
                                                            shading=shading, statistics=stats)
    out_dir = path.parent if out_dir is None else Path(out_dir)
    for name in makers:  # refuse before drawing anything
        for fmt in formats:
            check_writable(out_dir / f"{name}.{fmt}", overwrite)
    written = []
    for name, make in makers.items():  # one figure in memory at a time
        written += save_figures({name: make()}, out_dir, formats, overwrite=True,
                                title=first.attrs.get("title", ""))
    return written
