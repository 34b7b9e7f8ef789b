"""Figures of a sweep: a scaling plot (log-log, with the fit and a reference slope) and a
regime map.

Drawn in the house style of :mod:`convsim.figures.style` (one column wide, its fonts, line
colours and markers, layout frozen, dateless files); no pyplot.  ``*_plot``
functions take plain arrays and fit results and return the Figure; ``*_figure``
functions write it to one file (format from the suffix, written atomically).
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure
from matplotlib.legend_handler import HandlerTuple

from convsim.figures import style

__all__ = ["REGIMES", "SYMBOLS", "group_label", "scaling_plot", "regime_map_plot",
           "scaling_figure", "regime_map_figure", "varies"]

#: Regimes of the map in legend order (the words of ``convsim.model.lid.REGIMES``), with the
#: index of their colour and marker in the style (unclassified: black crosses).
REGIMES = {"mobile": 0, "sluggish": 3, "stagnant-lid": 1, "episodic": 4, "conductive": 2,
           "unclassified": 6}
_HEIGHT = 2.6            # [in] of the axes part; legend rows below add to it
_ROW = 0.16              # [in] per legend row
_TITLE_CHARS = 62        # wrap width of a title at 7 pt in one column
_LEGEND_CHARS = 50       # wrap width of a legend entry at 7 pt, beside its handle
_RULE_CHARS = 56         # wrap width of the regime rule over a map (7 pt, one column)


def _figure(legend_rows: int) -> tuple[Figure, object]:
    fig = style.new_figure(style.COLUMN_WIDTH, _HEIGHT + _ROW * legend_rows)
    ax = fig.add_subplot()
    style.light_grid(ax)
    return fig, ax


def _log_axes(ax) -> None:
    ax.set_xscale("log")
    ax.set_yscale("log")
    for axis, (lo, hi) in ((ax.xaxis, ax.get_xlim()), (ax.yaxis, ax.get_ylim())):
        style.log_ticks(axis, lo, hi)


def _number(value: float) -> str:
    """``value`` to 3 digits for mathtext: plain for 1e-3 <= |v| < 1e4, else m x 10^k."""
    if value == 0.0 or not np.isfinite(value) or 1.0e-3 <= abs(value) < 1.0e4:
        return f"{value:.4g}" if abs(value) >= 1.0 else f"{value:.3g}"   # 1000, not 1e+03
    k = int(np.floor(np.log10(abs(value))))
    return rf"{value / 10.0**k:.3g}\times10^{{{k}}}"


#: Readable names of sweep keys and table columns in legends (mathtext where apt).
SYMBOLS = {"rayleigh": "Ra", "physics.rayleigh": "Ra",
           "viscosity.thermal_contrast": r"$\Delta\eta_T$",
           "viscosity_contrast": r"$\Delta\eta$", "viscosity.depth_contrast": r"$\Delta\eta_z$",
           "physics.internal_heating": "H", "domain.aspect": "aspect",
           "viscosity.activation_energy": "E"}


def group_label(key, value) -> str:
    """A legend label for one group of a sweep: ``Delta eta_T = 1000``, not the raw key."""
    name = SYMBOLS.get(key, str(key).split(".")[-1].replace("_", " "))
    text = _number(float(value)) if isinstance(value, (int, float)) else str(value)
    return f"{name} = ${text}$" if isinstance(value, (int, float)) else f"{name} = {text}"


def _fit_text(fit, symbol: str = "x") -> str:
    """``a Ra^b, b in [lo, hi]`` (a mathtext label; the interval where known)."""
    lo, hi = fit.exponent_interval
    base = symbol.strip("$") if symbol.startswith("$") else rf"\mathrm{{{symbol}}}"
    text = rf"${_number(fit.prefactor)}\,{base}^{{{fit.exponent:.3f}}}$"
    return text + (rf", $\beta \in$ [{lo:.3f}, {hi:.3f}]" if np.isfinite(lo)
                   else " (2 points: no interval)" if fit.n == 2 else "")


def _wrap(text: str) -> str:
    """Wrap the plain lines of a legend entry (mathtext lines are short and kept whole)."""
    return "\n".join(part if "$" in part else textwrap.fill(part, _LEGEND_CHARS)
                      for part in text.split("\n"))


def scaling_plot(series, *, x_label: str, y_label: str, reference_slope=None,
                 reference_label: str = "", title: str = "", excluded=None,
                 x_symbol: str = "x") -> Figure:
    """y against x on log-log axes: the points, each fitted power law, a reference slope.

    Parameters
    ----------
    series : list of (label, x, y, fit) with ``fit`` a ``fitting.PowerLawFit`` or None
        The n-th series in the n-th colour and marker of the style; its points and fit
        line share one legend entry.
    x_label, y_label : axis labels
    reference_slope : float, optional
        Drawn as y ~ x^slope through the geometric centre of all points (grey, dashed).
    excluded : (x, y), optional
        Rows not used by the fit (another status), drawn as grey crosses.
    """
    with style.context():
        fig = style.new_figure(style.COLUMN_WIDTH, _HEIGHT)  # height set below, from the legend
        ax = fig.add_subplot()
        style.light_grid(ax)
        handles, labels = [], []
        all_x, all_y = [], []
        for i, (label, x, y, fit) in enumerate(series):
            n = i % len(style.LINE_COLORS)
            color, marker = style.LINE_COLORS[n], style.MARKERS[n]
            x, y = np.asarray(x, float), np.asarray(y, float)
            all_x.append(x)
            all_y.append(y)
            (points,) = ax.plot(x, y, ls="none", marker=marker, ms=4, color=color,
                                label=label or "data", zorder=3)
            handle, text = points, label or "data"
            if fit is not None:
                xs = np.geomspace(x.min(), x.max(), 50)
                fit_text = _fit_text(fit, x_symbol)
                (line,) = ax.plot(xs, fit.predict(xs), ls=style.LINE_STYLES[0], color=color,
                                  label=fit_text, zorder=2)
                handle = (points, line)
                text = f"{label}: {fit_text}" if label else f"fit {fit_text}"
            handles.append(handle)
            labels.append(text)
        if excluded is not None and len(excluded[0]):
            (out,) = ax.plot(excluded[0], excluded[1], ls="none", marker="x", ms=4,
                             color=style.GUIDE_COLOR, label="not fitted", zorder=2)
            handles.append(out)
            labels.append("not fitted")
        if reference_slope is not None and all_x:
            x = np.concatenate(all_x)
            y = np.concatenate(all_y)
            x0, y0 = np.exp(np.mean(np.log(x))), np.exp(np.mean(np.log(y)))
            xs = np.geomspace(x.min(), x.max(), 50)
            (ref,) = ax.plot(xs, y0 * (xs / x0) ** reference_slope, ls=style.LINE_STYLES[1],
                             color=style.GUIDE_COLOR, lw=0.8, zorder=1,
                             label=reference_label or f"slope {reference_slope:.4g}")
            handles.append(ref)
            labels.append(ref.get_label())
        _log_axes(ax)
        ax.set_xlabel(x_label)
        ax.set_ylabel(y_label)
        if title:
            ax.set_title(textwrap.fill(title, _TITLE_CHARS))
        if handles:
            labels = [_wrap(text) for text in labels]
            rows = sum(text.count("\n") + 1 for text in labels)
            fig.set_figheight(_HEIGHT + _ROW * rows)
            fig.legend(handles, labels, loc="outside lower center", ncols=1, labelspacing=0.3,
                       handletextpad=0.5, borderaxespad=0.2,
                       handler_map={tuple: HandlerTuple(ndivide=None)})
    return style.freeze_layout(fig)


def varies(contrast) -> bool:
    """Whether a sweep's viscosity contrasts leave the isoviscous case (a regime map says
    nothing about an isoviscous sweep: every case is mobile or conductive)."""
    contrast = np.asarray(contrast, float)
    contrast = contrast[np.isfinite(contrast)]
    return bool(contrast.size) and float(contrast.max()) > 1.0 + 1e-6


def regime_map_plot(rayleigh, contrast, regimes, *, thresholds_text: str = "",
                    x_label: str = "Rayleigh number Ra",
                    y_label: str = "viscosity contrast") -> Figure:
    """Cases on (Ra, viscosity contrast) log-log axes, one colour and marker per regime."""
    rayleigh, contrast = np.asarray(rayleigh, float), np.asarray(contrast, float)
    regimes = np.asarray(regimes, dtype=object)
    ok = np.isfinite(rayleigh) & np.isfinite(contrast) & (rayleigh > 0) & (contrast > 0)
    present = [name for name in REGIMES if (ok & (regimes == name)).any()]
    with style.context():
        fig, ax = _figure(1)
        for name in present:
            sel = ok & (regimes == name)
            n = REGIMES[name]
            marker = "x" if name == "unclassified" else style.MARKERS[n]
            ax.plot(rayleigh[sel], contrast[sel], ls="none", marker=marker, ms=5,
                    color=style.LINE_COLORS[n], label=name, zorder=3)
        _log_axes(ax)
        ax.set_xlabel(x_label)
        ax.set_ylabel(y_label)
        if thresholds_text:
            ax.set_title(textwrap.fill(thresholds_text, _RULE_CHARS),
                         fontsize=style.RC["legend.fontsize"])
        if present:
            fig.legend(loc="outside lower center", ncols=len(present), columnspacing=1.2,
                       handletextpad=0.3)
    return style.freeze_layout(fig)


def scaling_figure(path, series, *, x_label: str, y_label: str, reference_slope=None,
                   reference_label: str = "", title: str = "", excluded=None,
                   x_symbol: str = "x") -> Path:
    """Draw :func:`scaling_plot` and write it to ``path`` (PNG, or PDF/SVG by suffix)."""
    fig = scaling_plot(series, x_label=x_label, y_label=y_label, reference_slope=reference_slope,
                       reference_label=reference_label, title=title, excluded=excluded,
                       x_symbol=x_symbol)
    return style.save_file(fig, path, title=f"scaling: {y_label} against {x_label}")


def regime_map_figure(path, rayleigh, contrast, regimes, *, thresholds_text: str = "",
                      x_label: str = "Rayleigh number Ra",
                      y_label: str = "viscosity contrast") -> Path:
    """Draw :func:`regime_map_plot` and write it to ``path`` (PNG, or PDF/SVG by suffix)."""
    fig = regime_map_plot(rayleigh, contrast, regimes, thresholds_text=thresholds_text,
                          x_label=x_label, y_label=y_label)
    return style.save_file(fig, path, title="regime map")
