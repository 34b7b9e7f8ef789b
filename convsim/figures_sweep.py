"""Figures of a sweep: a scaling plot (log-log, with the fit and a reference slope) and a
regime map.  matplotlib only here, through the Agg canvas (no pyplot, no display).

Style choices are collected in ``STYLE`` (to be unified with a project style module).
Every function takes plain arrays and fit results and writes one PNG file.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

__all__ = ["STYLE", "scaling_figure", "regime_map_figure"]

STYLE = {
    "figsize": (5.2, 4.0),
    "dpi": 150,
    "font_size": 9,
    "point_marker": "o",
    "point_size": 28,
    "point_colors": ("#1b4f72", "#b03a2e", "#1e8449", "#7d3c98", "#b9770e", "#2e4053"),
    "fit_linestyle": "-",
    "reference_linestyle": "--",
    "reference_color": "#7f7f7f",
    "excluded_color": "#bbbbbb",
    "line_width": 1.2,
    "regime_markers": {"mobile": "o", "transitional": "s", "stagnant": "^",
                       "conductive": "D", "unclassified": "x"},
    "regime_colors": {"mobile": "#1b4f72", "transitional": "#b9770e", "stagnant": "#b03a2e",
                      "conductive": "#1e8449", "unclassified": "#7f7f7f"},
    "grid_alpha": 0.3,
}


def _figure():
    fig = Figure(figsize=STYLE["figsize"], dpi=STYLE["dpi"])
    FigureCanvasAgg(fig)
    ax = fig.add_subplot(1, 1, 1)
    for item in [ax.title, ax.xaxis.label, ax.yaxis.label] + ax.get_xticklabels() \
            + ax.get_yticklabels():
        item.set_fontsize(STYLE["font_size"])
    ax.grid(True, which="both", alpha=STYLE["grid_alpha"])
    return fig, ax


def _save(fig, path) -> Path:
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".part.png")
    fig.savefig(tmp, dpi=STYLE["dpi"], bbox_inches="tight")
    tmp.replace(path)
    return path


def scaling_figure(path, series, *, x_label: str, y_label: str, reference_slope=None,
                   reference_label: str = "", title: str = "", excluded=None) -> Path:
    """y against x on log-log axes: the points, each fitted power law, a reference slope.

    Parameters
    ----------
    path : output PNG
    series : list of (label, x, y, fit) with ``fit`` a ``fitting.PowerLawFit`` or None
    x_label, y_label : axis labels
    reference_slope : float, optional
        Drawn as y ~ x^slope through the geometric centre of all points.
    excluded : (x, y), optional
        Rows not used by the fit (another status), drawn in grey.
    """
    fig, ax = _figure()
    all_x, all_y = [], []
    for i, (label, x, y, fit) in enumerate(series):
        color = STYLE["point_colors"][i % len(STYLE["point_colors"])]
        x, y = np.asarray(x, float), np.asarray(y, float)
        all_x.append(x)
        all_y.append(y)
        ax.scatter(x, y, s=STYLE["point_size"], marker=STYLE["point_marker"], color=color,
                   label=label or None, zorder=3)
        if fit is not None:
            xs = np.geomspace(x.min(), x.max(), 50)
            lo, hi = fit.exponent_interval
            text = (f"fit: {fit.prefactor:.3g} x^{fit.exponent:.4f}"
                    + (f" [{lo:.4f}, {hi:.4f}]" if np.isfinite(lo) else ""))
            ax.plot(xs, fit.predict(xs), STYLE["fit_linestyle"], color=color,
                    lw=STYLE["line_width"], label=text)
    if excluded is not None and len(excluded[0]):
        ax.scatter(excluded[0], excluded[1], s=STYLE["point_size"], marker="x",
                   color=STYLE["excluded_color"], label="not fitted", zorder=2)
    if reference_slope is not None and all_x:
        x = np.concatenate(all_x)
        y = np.concatenate(all_y)
        x0, y0 = np.exp(np.mean(np.log(x))), np.exp(np.mean(np.log(y)))
        xs = np.geomspace(x.min(), x.max(), 50)
        ax.plot(xs, y0 * (xs / x0) ** reference_slope, STYLE["reference_linestyle"],
                color=STYLE["reference_color"], lw=STYLE["line_width"],
                label=reference_label or f"slope {reference_slope:.4g}")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel(x_label)
    ax.set_ylabel(y_label)
    if title:
        ax.set_title(title)
    ax.legend(fontsize=STYLE["font_size"] - 1, frameon=False)
    return _save(fig, path)


def regime_map_figure(path, rayleigh, contrast, regimes, *, thresholds_text: str = "",
                      x_label: str = "Rayleigh number Ra",
                      y_label: str = "viscosity contrast") -> Path:
    """Cases on (Ra, viscosity contrast) log-log axes, one marker per regime."""
    fig, ax = _figure()
    rayleigh, contrast = np.asarray(rayleigh, float), np.asarray(contrast, float)
    regimes = np.asarray(regimes, dtype=object)
    ok = np.isfinite(rayleigh) & np.isfinite(contrast) & (rayleigh > 0) & (contrast > 0)
    for name, marker in STYLE["regime_markers"].items():
        sel = ok & (regimes == name)
        if sel.any():
            ax.scatter(rayleigh[sel], contrast[sel], s=STYLE["point_size"] * 1.3, marker=marker,
                       color=STYLE["regime_colors"][name], label=name, zorder=3)
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel(x_label)
    ax.set_ylabel(y_label)
    if thresholds_text:
        ax.set_title(thresholds_text, fontsize=STYLE["font_size"] - 1)
    ax.legend(fontsize=STYLE["font_size"] - 1, frameon=False)
    return _save(fig, path)
