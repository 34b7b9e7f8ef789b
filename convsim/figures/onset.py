"""Figures of the onset analysis: the neutral curve with the box's modes and the operating Ra;
growth rates against Ra from simulator runs beside the eigen-solver's.

Drawn in the house style of :mod:`convsim.figures.style` (one column wide, its fonts and
line colours, layout frozen, dateless files).  ``*_figure`` functions return the
Figure (on an Agg canvas, no pyplot); ``plot_*`` functions write it to a path,
format from the suffix (png, pdf or svg).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

from convsim.figures import style

__all__ = ["neutral_curve_figure", "growth_rate_figure", "plot_neutral_curve",
           "plot_growth_rates"]

_BLACK, _BLUE, _RED, _GREEN = (style.LINE_COLORS[i] for i in (6, 0, 1, 2))
_HEIGHT = 3.6  # [in]: the axes plus a legend of five entries below them


def _legend_below(fig: Figure) -> None:
    fig.legend(loc="outside lower center", ncols=1)


def neutral_curve_figure(result) -> Figure:
    """Ra(k) of an ``OnsetResult``, log Ra axis, as a frozen Figure.

    The layer's minimum (k_c, Ra_c), the admissible box modes k_n (the least stable one
    filled) and the operating Rayleigh number (a horizontal line) are marked.
    """
    with style.context():
        fig = style.new_figure(style.COLUMN_WIDTH, _HEIGHT)
        ax = fig.add_subplot()
        k = np.asarray(result.wavenumbers, float)
        ra = np.asarray(result.neutral_rayleigh, float)
        ax.plot(k, ra, color=_BLACK, label=r"neutral curve $\mathrm{Ra}(k)$")
        mk = np.asarray(result.mode_wavenumbers, float)
        mr = np.asarray(result.mode_rayleigh, float)
        if mk.size:
            ax.plot(mk, mr, style.MARKERS[1], color=_BLUE, mfc="none", ms=4,
                    label=r"box modes $k_n$")
        if result.box_mode is not None:
            ax.plot([result.box_wavenumber], [result.box_critical_rayleigh], style.MARKERS[1],
                    color=_BLUE, ms=4, label=rf"box: $\mathrm{{Ra}}_c$ = "
                    f"{result.box_critical_rayleigh:.6g} ($n$ = {result.box_mode})")
        if np.isfinite(result.critical_rayleigh):
            ax.plot([result.critical_wavenumber], [result.critical_rayleigh], "o", color=_BLACK,
                    mfc="none", ms=6, zorder=3, label=rf"layer: $\mathrm{{Ra}}_c$ = "
                    f"{result.critical_rayleigh:.6g}, $k_c$ = {result.critical_wavenumber:.4g}")
        if result.rayleigh is not None:
            ax.axhline(result.rayleigh, color=_RED, ls=style.LINE_STYLES[1],
                       label=f"operating Ra = {result.rayleigh:.6g}")
        finite = ra[np.isfinite(ra)]
        if finite.size:
            top = finite.max()
            if result.rayleigh is not None:
                top = max(top, 1.1 * result.rayleigh)
            ax.set_ylim(0.9 * finite.min(), top)
        if k.size > 1 and k[-1] / k[0] > 50.0:
            ax.set_xscale("log")
        ax.set_yscale("log")
        ax.yaxis.set_major_locator(LogLocator(base=10.0, subs=(1.0, 2.0, 5.0)))
        plain = FuncFormatter(lambda value, _: style.log_label(value))   # never "5e-09"
        for axis in (ax.xaxis, ax.yaxis):
            axis.set_major_formatter(plain)
            axis.set_minor_formatter(NullFormatter())
        ax.set_xlabel(r"horizontal wavenumber $k$ (1/depth)")
        ax.set_ylabel("Rayleigh number Ra")
        ax.set_title("Onset of convection: conductive state")
        _legend_below(fig)
    return style.freeze_layout(fig)


def growth_rate_figure(bracket) -> Figure:
    """The growth rate s(Ra) of a ``RunBracket`` as a frozen Figure.

    The eigen-solver's largest growth rate at the box wavenumber (line), the rates
    fitted to the runs (filled circles; open ones for the coarse grid of a
    Richardson pair), s = 0, and both critical values (vertical lines).
    """
    with style.context():
        fig = style.new_figure(style.COLUMN_WIDTH, _HEIGHT + 0.3)
        ax = fig.add_subplot()
        ra_curve, s_curve = (np.asarray(a, float) for a in bracket.theory_curve)
        if ra_curve.size:
            ax.plot(ra_curve, s_curve, color=_BLACK,
                    label=f"eigen-solver, $k$ = {bracket.wavenumber:.4g} ($n$ = {bracket.mode})")
        nx, nz = bracket.grid
        ax.plot(bracket.rayleigh, bracket.rates, style.MARKERS[0], color=_BLUE, ms=4,
                label=f"runs {nx}x{nz}")
        if bracket.coarse is not None:
            cx, cz = bracket.coarse.grid
            ax.plot(bracket.coarse.rayleigh, bracket.coarse.rates, style.MARKERS[0],
                    color=_BLUE, mfc="none", ms=5, label=f"runs {cx}x{cz}")
        ax.axhline(0.0, color=style.GUIDE_COLOR, lw=0.6, zorder=1)
        ax.axvline(bracket.eigen_critical_rayleigh, color=_BLACK, lw=0.8, ls=style.LINE_STYLES[3],
                   label=rf"eigen-solver $\mathrm{{Ra}}_c$ = {bracket.eigen_critical_rayleigh:.6g}")
        if np.isfinite(bracket.critical_rayleigh):
            ax.axvline(bracket.critical_rayleigh, color=_BLUE, lw=0.8, ls=style.LINE_STYLES[1],
                       label=rf"runs $\mathrm{{Ra}}_c$ = {bracket.critical_rayleigh:.6g} "
                             f"({100.0 * bracket.relative_difference:+.2f} %)")
        if np.isfinite(bracket.extrapolated_rayleigh):
            ax.axvline(bracket.extrapolated_rayleigh, color=_GREEN, lw=0.8,
                       ls=style.LINE_STYLES[2],
                       label=rf"extrapolated $\mathrm{{Ra}}_c$ = "
                             f"{bracket.extrapolated_rayleigh:.6g} "
                             f"({100.0 * bracket.extrapolated_difference:+.3f} %)")
        ax.set_xlabel("Rayleigh number Ra")
        ax.set_ylabel(r"growth rate $s$ ($\kappa/d^2$)")
        ax.set_title("Onset of convection: growth of a perturbation")
        _legend_below(fig)
    return style.freeze_layout(fig)


def plot_neutral_curve(result, path: str | Path) -> Path:
    """Draw :func:`neutral_curve_figure` and write it to ``path`` (format from the suffix)."""
    return style.save_file(neutral_curve_figure(result), path, title="onset neutral curve")


def plot_growth_rates(bracket, path: str | Path) -> Path:
    """Draw :func:`growth_rate_figure` and write it to ``path`` (format from the suffix)."""
    return style.save_file(growth_rate_figure(bracket), path, title="onset growth rates")
