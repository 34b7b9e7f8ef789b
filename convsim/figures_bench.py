"""Figures of the benchmark report: convergence with the grid and error against cost.

matplotlib is imported here only, through the Agg canvas (no display, no pyplot state).  The figures read the plain
JSON-ready dict of a bench result (``BenchResult.as_dict()``, the content of
bench.json), so they can be redrawn from a saved report.
"""

from __future__ import annotations

import math
from pathlib import Path

__all__ = ["STYLE", "convergence_figure", "cost_figure"]

STYLE = {  # the house style of these figures in one place
    "panel_size": (3.4, 3.2),          # inches per panel
    "dpi": 150,
    "font_size": 8,
    "quantity_colors": {"nusselt": "#1b6ca8", "vrms": "#c4451c", "q1": "#3a8f3a",
                        "q2": "#7b4fa0"},
    "quantity_labels": {"nusselt": "Nu", "vrms": "vrms", "q1": "q1", "q2": "q2"},
    "markers": {"nusselt": "o", "vrms": "s", "q1": "^", "q2": "v"},
    "guide_color": "0.55",
    "guide_style": "--",
    "line_width": 1.2,
}


def _figure(ncols: int, width_panels: int | None = None):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure
    w, h = STYLE["panel_size"]
    fig = Figure(figsize=(w * (width_panels or ncols), h), layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(1, ncols, squeeze=False, sharey=True)[0]
    return fig, axes


def _font(ax):
    for item in (ax.title, ax.xaxis.label, ax.yaxis.label):
        item.set_fontsize(STYLE["font_size"])
    ax.tick_params(which="both", labelsize=STYLE["font_size"])


def _save(fig, stem) -> list:
    stem = Path(stem)
    paths = []
    for ext in ("png", "pdf"):
        path = stem.with_suffix("." + ext)
        fig.savefig(path, dpi=STYLE["dpi"], bbox_inches="tight")
        paths.append(path)
    return paths


def _finite_positive(xs, ys):
    pts = [(x, abs(y)) for x, y in zip(xs, ys)
           if x is not None and y is not None and math.isfinite(x) and math.isfinite(y) and y != 0]
    return [p[0] for p in pts], [p[1] for p in pts]


def _legend(ax):
    if ax.get_legend_handles_labels()[0]:
        ax.legend(loc="best", frameon=False, fontsize=STYLE["font_size"])


def convergence_figure(bench: dict, stem) -> list:
    """|relative error| against published values versus grid spacing h, log-log.

    One panel per case, one line per quantity, with a slope-2 guide (error ~ h^2)
    through the finest Nu point; runs that did not reach steady state get open markers.  Writes ``stem``.png and ``stem``.pdf.

    Parameters
    ----------
    bench : dict
        ``BenchResult.as_dict()``.
    stem : path without suffix.

    Returns
    -------
    list of Path
    """
    cases = bench["cases"]
    fig, axes = _figure(max(len(cases), 1))
    for ax, case in zip(axes, cases):
        rows = case["rows"]
        hs = [r["h"] for r in rows]
        for q in ("nusselt", "vrms", "q1", "q2"):
            x, y = _finite_positive(hs, [r["relative_error"].get(q) for r in rows])
            if not x:
                continue
            ax.loglog(x, y, marker=STYLE["markers"][q], color=STYLE["quantity_colors"][q],
                      lw=STYLE["line_width"], ms=4, label=STYLE["quantity_labels"][q])
            xo, yo = _finite_positive([r["h"] for r in rows if r["status"] != "steady"],
                                      [r["relative_error"].get(q) for r in rows
                                       if r["status"] != "steady"])
            if xo:                                   # not steady: open markers
                ax.loglog(xo, yo, ls="none", marker=STYLE["markers"][q], ms=6, mfc="white",
                          color=STYLE["quantity_colors"][q])
        x, y = _finite_positive(hs, [r["relative_error"].get("nusselt") for r in rows])
        if len(x) >= 1:
            h0, e0 = min(zip(x, y))
            hmax = max(hs)
            ax.loglog([h0, hmax], [e0, e0 * (hmax / h0) ** 2], STYLE["guide_style"],
                      color=STYLE["guide_color"], lw=1.0, label="slope 2")
        ax.set_title(f"case {case['case']}")
        ax.set_xlabel("grid spacing h (depth units)")
        ax.grid(True, which="both", lw=0.3, alpha=0.5)
        _font(ax)
    axes[0].set_ylabel("|relative error| vs published", fontsize=STYLE["font_size"])
    _legend(axes[-1])
    return _save(fig, stem)


def cost_figure(bench: dict, stem) -> list:
    """|relative error| of Nu and vrms against wall seconds of each run, log-log, per case."""
    fig, axes = _figure(2)
    markers = "osD^v<>p*"
    for ax, q in zip(axes, ("nusselt", "vrms")):
        for i, case in enumerate(bench["cases"]):
            rows = case["rows"]
            x, y = _finite_positive([r["wall_seconds"] for r in rows],
                                    [r["relative_error"].get(q) for r in rows])
            if x:
                ax.loglog(x, y, marker=markers[i % len(markers)], lw=STYLE["line_width"], ms=4,
                          label=f"case {case['case']}")
        ax.set_title(STYLE["quantity_labels"][q])
        ax.set_xlabel("wall time of the run (s)")
        ax.grid(True, which="both", lw=0.3, alpha=0.5)
        _font(ax)
    axes[0].set_ylabel("|relative error| vs published", fontsize=STYLE["font_size"])
    _legend(axes[-1])
    return _save(fig, stem)
