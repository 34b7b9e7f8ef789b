"""The figure style of convsim, set in one place.

Every figure module (``convsim.figures`` and the onset and benchmark figures)
draws inside :func:`context` and saves through :func:`save`, so that fonts,
sizes, colour maps and the bytes of the files come out the same everywhere.

Sizes
-----
One journal column is about 3.5 in (89 mm) wide, two columns about 7.2 in
(183 mm) (common practice).  Fonts are 8 pt (labels) and 7 pt (ticks, legends),
readable when a figure is printed at one column width without scaling.

Colour maps (all from matplotlib's own set)
-------------------------------------------
- Fields (temperature): ``cividis`` (Nunez, Anderton & Renslow 2018, PLoS ONE
  13, e0199239), built to look nearly the same to viewers with red-green colour
  vision deficiency and with a lightness that rises linearly.
- Fields of a second quantity (viscosity): ``viridis`` (van der Walt & Smith
  2015, matplotlib's default), perceptually uniform and colour-blind safe, so
  that a viscosity panel is never mistaken for a temperature panel.
- Anomalies (signed, zero in the middle): ``coolwarm`` (Moreland 2009,
  "Diverging color maps for scientific visualization", ISVC).  It is built
  by interpolation in a polar form of CIELAB, so the perceived difference
  grows smoothly from the centre; its lightness falls symmetrically and
  monotonically from a light grey centre to both ends (L* 88 to 38), and its
  two hues (blue, red) stay apart for the common red-green deficiencies.
  ``RdBu`` from the same set has a nearly white centre but uneven lightness
  steps; the dark-centred maps (``berlin``, ``vanimo``) are uniform too but
  make "no anomaly" look like the strongest feature.
- Lines: matplotlib's ``okabe_ito`` colours (Okabe & Ito 2008, "Color
  universal design"), distinguishable under all common colour vision
  deficiencies; lines also differ in style, so figures survive grey printing.

Deterministic files
-------------------
The same figure gives the same bytes: SVG ids come from a fixed hash salt
(``svg.hashsalt``), dates are left out of the metadata of PDF and SVG (and
PNG carries none), fonts are the DejaVu family that matplotlib ships (the same
on every machine) and are embedded as paths (SVG) or TrueType subsets (PDF).
"""

from __future__ import annotations

import logging
from pathlib import Path

import matplotlib
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

__all__ = ["COLUMN_WIDTH", "PAGE_WIDTH", "TEMPERATURE_CMAP", "VISCOSITY_CMAP", "DIVERGING_CMAP",
           "LINE_COLORS", "RC", "FORMATS", "context", "new_figure", "freeze_layout", "save",
           "metadata_for", "to_rgba_array", "symmetric_limits"]

#: Width of one journal column [in].
COLUMN_WIDTH = 3.5
#: Width of two columns, or of a page with margins [in].
PAGE_WIDTH = 7.2

#: Sequential map for temperature fields.
TEMPERATURE_CMAP = "cividis"
#: Sequential map for viscosity fields (drawn on a log scale when they vary).
VISCOSITY_CMAP = "viridis"
#: Diverging map for anomalies (use with :func:`symmetric_limits`).
DIVERGING_CMAP = "coolwarm"
#: Line colours, in order: blue, vermillion, bluish green, orange, reddish purple, sky blue,
#: black from matplotlib's ``okabe_ito`` map (its yellow is left out: too light on white).
LINE_COLORS = tuple(matplotlib.colors.to_hex(matplotlib.colormaps["okabe_ito"].colors[i])
                    for i in (5, 6, 3, 1, 7, 2, 0))

#: Formats :func:`save` writes, by file suffix.
FORMATS = ("png", "pdf", "svg")

_FONT = ["DejaVu Sans"]

#: The rcParams of the style; applied by :func:`context`.
RC = {
    "figure.figsize": (COLUMN_WIDTH, 0.75 * COLUMN_WIDTH),
    "figure.dpi": 100,
    "figure.facecolor": "white",
    "figure.constrained_layout.use": True,
    "figure.constrained_layout.h_pad": 0.02,
    "figure.constrained_layout.w_pad": 0.02,
    "font.family": "sans-serif",
    "font.sans-serif": _FONT,
    "font.size": 8.0,
    "mathtext.fontset": "dejavusans",
    "axes.titlesize": 8.0,
    "axes.labelsize": 8.0,
    "axes.linewidth": 0.6,
    "axes.prop_cycle": matplotlib.cycler(color=LINE_COLORS),
    "axes.spines.top": True,
    "axes.spines.right": True,
    "axes.formatter.use_mathtext": True,
    "axes.formatter.limits": (-3, 4),
    "xtick.labelsize": 7.0,
    "ytick.labelsize": 7.0,
    "xtick.major.width": 0.6,
    "ytick.major.width": 0.6,
    "xtick.minor.width": 0.4,
    "ytick.minor.width": 0.4,
    "xtick.major.size": 3.0,
    "ytick.major.size": 3.0,
    "xtick.minor.size": 1.6,
    "ytick.minor.size": 1.6,
    "xtick.direction": "out",
    "ytick.direction": "out",
    "legend.fontsize": 7.0,
    "legend.frameon": False,
    "legend.handlelength": 1.8,
    "lines.linewidth": 1.0,
    "lines.markersize": 3.0,
    "contour.linewidth": 0.6,
    "contour.negative_linestyle": "dashed",
    "image.cmap": TEMPERATURE_CMAP,
    "savefig.dpi": 300,
    "savefig.bbox": None,
    "savefig.facecolor": "white",
    "pdf.fonttype": 42,
    "pdf.compression": 6,
    "svg.fonttype": "path",
    "svg.hashsalt": "convsim",
    "svg.image_inline": True,
    "path.simplify": True,
}


def context():
    """A context manager that applies :data:`RC` (and nothing else) for its block.

    Figures are made and saved inside it::

        with style.context():
            fig = style.new_figure()
            ...
            style.save(fig, "out/field", ("png", "pdf"))
    """
    return matplotlib.rc_context(RC)


def new_figure(width: float = COLUMN_WIDTH, height: float | None = None, **kwargs) -> Figure:
    """A new Figure on an Agg canvas (no pyplot, no global figure list).

    Parameters
    ----------
    width, height : float
        Size [in]; the height defaults to 0.75 of the width.
    **kwargs
        Passed on to :class:`matplotlib.figure.Figure`.
    """
    height = 0.75 * width if height is None else height
    fig = Figure(figsize=(width, height), **kwargs)
    FigureCanvasAgg(fig)
    return fig


def freeze_layout(fig: Figure, digits: int = 6) -> Figure:
    """Lay the figure out once (constrained layout), then fix every axes position.

    Constrained layout is not idempotent (a second draw moves axes by a few
    thousandths) and carries round-off noise of order 1e-16 that reaches the
    SVG clip-path ids (the noise depends on the memory layout of the process);
    so the layout is computed once, rounded (axes and subfigures) to ``digits``
    decimals of the figure size (far below a pixel) and the layout engine is
    switched off.  Every format saved afterwards shows the same layout, and the
    same data give the same bytes.
    """
    with context():
        fig.canvas.draw()
    fig.set_layout_engine("none")
    subfigures = list(fig.subfigs)
    while subfigures:  # constrained layout places subfigures too
        sub = subfigures.pop()
        sub.bbox_relative.set_points(np.round(sub.bbox_relative.get_points(), digits))
        subfigures += list(sub.subfigs)
    for ax in fig.get_axes():
        if ax.get_axes_locator() is not None:  # inset axes follow their parent
            continue
        ax.set_position([round(v, digits) for v in ax.get_position(original=True).bounds],
                        which="original")
    return fig


def metadata_for(fmt: str, title: str = "", creator: str = "convsim") -> dict:
    """File metadata for one format, without dates (deterministic bytes).

    Parameters
    ----------
    fmt : {"png", "pdf", "svg"}
    title : str
        Figure title stored in the file.
    creator : str
        Name of the program that made the figure.
    """
    if fmt == "pdf":
        return {"Title": title, "Creator": creator, "CreationDate": None, "ModDate": None}
    if fmt == "svg":
        return {"Title": title, "Creator": creator, "Date": None}
    if fmt == "png":
        return {"Title": title, "Software": creator}
    raise ValueError(f"format {fmt!r}: expected one of {', '.join(FORMATS)}")


def save(fig: Figure, stem: str | Path, formats=FORMATS, *, title: str = "",
         creator: str = "convsim") -> list[Path]:
    """Write ``fig`` as ``stem.<fmt>`` for each format, with dateless metadata.

    Existing files are replaced: the caller checks first (see
    ``convsim.snapshot.check_writable``).  Returns the paths written.
    """
    stem = Path(stem)
    paths = []
    logging.getLogger("fontTools").setLevel(logging.WARNING)  # font subsetting chatter
    with context():
        for fmt in formats:
            path = stem.with_name(f"{stem.name}.{fmt}")
            fig.savefig(path, format=fmt, metadata=metadata_for(fmt, title, creator))
            paths.append(path)
    return paths


def to_rgba_array(fig: Figure) -> np.ndarray:
    """The figure rendered by Agg: an (height, width, 4) uint8 array."""
    canvas = fig.canvas if isinstance(fig.canvas, FigureCanvasAgg) else FigureCanvasAgg(fig)
    with context():
        canvas.draw()
        return np.asarray(canvas.buffer_rgba()).copy()


def symmetric_limits(values) -> tuple[float, float]:
    """``(-m, m)`` with ``m = max |values|`` (1 for an all-zero field): limits for anomalies."""
    m = float(np.nanmax(np.abs(values))) if np.size(values) else 0.0
    m = m if m > 0.0 and np.isfinite(m) else 1.0
    return -m, m
