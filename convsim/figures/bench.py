"""Figures of the benchmark report: convergence with the grid and error against cost.

Drawn in the house style of :mod:`convsim.figures.style` (its widths, fonts, line colours
and markers, layout frozen, dateless files); no pyplot.  The figures read the
plain JSON-ready dict of a bench result (``BenchResult.as_dict()``, the content
of bench.json), so they can be redrawn from a saved report.
"""

from __future__ import annotations

import math

from matplotlib.figure import Figure

from convsim.figures import style

__all__ = ["QUANTITIES", "convergence_plot", "cost_plot", "convergence_figure", "cost_figure"]

#: The quantities compared with published values, with their legend labels.
QUANTITIES = {"nusselt_top": "Nu", "vrms": r"$v_\mathrm{rms}$", "q1": "$q_1$", "q2": "$q_2$"}
_FORMATS = ("png", "pdf")
_HEIGHT = 2.6          # [in] of the panels' row
_YLABEL = "|relative error| vs published"


def _figure(ncols: int) -> tuple[Figure, list]:
    fig = style.new_figure(style.figure_width(ncols), _HEIGHT)
    axes = list(fig.subplots(1, ncols, squeeze=False, sharey=True)[0])
    return fig, axes


def _finite_positive(xs, ys):
    pts = [(x, abs(y)) for x, y in zip(xs, ys)
           if x is not None and y is not None and math.isfinite(x) and math.isfinite(y) and y != 0
           and x > 0]
    return [p[0] for p in pts], [p[1] for p in pts]


def _finish(fig: Figure, axes: list, xlabel: str, short_xlabel: str) -> Figure:
    """Log ticks that do not crowd, a light grid, one y label, one legend below the panels.

    Narrow panels (more than two across the page) get fewer tick labels and the short
    x label, so that labels of neighbouring panels do not run into each other.
    """
    narrow = fig.get_figwidth() / len(axes) < 3.0           # [in] per panel
    for ax in axes:
        if ax.has_data():
            style.log_ticks(ax.xaxis, *ax.get_xlim(), max_labels=3 if narrow else 5)
        style.light_grid(ax)
    if any(ax.has_data() for ax in axes):
        style.log_ticks(axes[0].yaxis, *axes[0].get_ylim())   # shared by all panels
    axes[0].set_ylabel(_YLABEL)
    for ax in axes:
        ax.set_xlabel(short_xlabel if narrow else xlabel)
    handles, labels = {}, []
    for ax in axes:
        for h, label in zip(*ax.get_legend_handles_labels()):
            if label not in handles:
                handles[label] = h
                labels.append(label)
    if labels:
        wide = fig.get_figwidth() >= style.PAGE_WIDTH
        fig.legend([handles[k] for k in labels], labels, loc="outside lower center",
                   ncols=min(len(labels), 6 if wide else 3))
    return style.freeze_layout(fig)


def convergence_plot(bench: dict) -> Figure:
    """|relative error| against published values versus grid spacing h, log-log, as a Figure.

    One panel per case, one line per quantity (colour and marker from the style), with a
    slope-2 guide (error ~ h^2) through the finest Nu point; runs that did not reach
    steady state get larger open markers.
    """
    cases = bench["cases"]
    with style.context():
        fig, axes = _figure(max(len(cases), 1))
        for ax, case in zip(axes, cases):
            rows = case["rows"]
            hs = [r["h"] for r in rows]
            unsteady = [r for r in rows if r["status"] != "steady"]
            for i, (q, label) in enumerate(QUANTITIES.items()):
                x, y = _finite_positive(hs, [r["relative_error"].get(q) for r in rows])
                if not x:
                    continue
                color, marker = style.LINE_COLORS[i], style.MARKERS[i]
                ax.loglog(x, y, marker=marker, color=color, label=label)
                xo, yo = _finite_positive([r["h"] for r in unsteady],
                                          [r["relative_error"].get(q) for r in unsteady])
                if xo:                                   # not steady: open markers
                    ax.loglog(xo, yo, ls="none", marker=marker, ms=6, mfc="white", color=color,
                              label="not steady (open)")
            x, y = _finite_positive(hs, [r["relative_error"].get("nusselt_top") for r in rows])
            if x:
                h0, e0 = min(zip(x, y))
                hmax = max(x)
                ax.loglog([h0, hmax], [e0, e0 * (hmax / h0) ** 2], ls=style.LINE_STYLES[1],
                          color=style.GUIDE_COLOR, lw=0.8, zorder=1,
                          label=r"slope 2 ($\propto h^2$)")
            ax.set_title(f"case {case['case']}")
        fig = _finish(fig, axes, "grid spacing $h$ (depth units)", "grid spacing $h$")
    return fig


def cost_plot(bench: dict) -> Figure:
    """|relative error| of Nu and vrms against wall seconds of each run, log-log, as a Figure.

    One panel per quantity, one line per case (the n-th case in the n-th colour and marker).
    """
    with style.context():
        fig, axes = _figure(2)
        for ax, q in zip(axes, ("nusselt_top", "vrms")):
            for i, case in enumerate(bench["cases"]):
                rows = case["rows"]
                x, y = _finite_positive([r["wall_seconds"] for r in rows],
                                        [r["relative_error"].get(q) for r in rows])
                if x:
                    n = i % len(style.LINE_COLORS)
                    ax.loglog(x, y, marker=style.MARKERS[n], color=style.LINE_COLORS[n],
                              label=f"case {case['case']}")
            ax.set_title(QUANTITIES[q])
        fig = _finish(fig, axes, "wall time of the run (s)", "wall time (s)")
    return fig


def convergence_figure(bench: dict, stem) -> list:
    """Draw :func:`convergence_plot` and write ``stem``.png and ``stem``.pdf.

    Parameters
    ----------
    bench : dict
        ``BenchResult.as_dict()``.
    stem : path without suffix.

    Returns
    -------
    list of Path
    """
    return style.save(convergence_plot(bench), stem, _FORMATS, title="bench convergence")


def cost_figure(bench: dict, stem) -> list:
    """Draw :func:`cost_plot` and write ``stem``.png and ``stem``.pdf; returns the paths."""
    return style.save(cost_plot(bench), stem, _FORMATS, title="bench cost")
