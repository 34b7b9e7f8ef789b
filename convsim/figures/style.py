"""The figure style of convsim, set in one place.

Every figure module (``convsim.figures.fields`` and the onset and benchmark figures)
draws inside :func:`context` and saves through :func:`save`, so that fonts,
sizes, colour maps and the bytes of the files come out the same everywhere.

Sizes
-----
One journal column is about 3.5 in (89 mm) wide, two columns about 7.2 in
(183 mm) (common practice).  Fonts are 8 pt (labels) and 7 pt (ticks, legends),
readable when a figure is printed at one column width without scaling.

Colour maps (Crameri, Shephard & Heron 2020, Nature Communications 11, 5444)
-------------------------------------------------------------------------
The scientific colour maps of Crameri (the ``cmcrameri`` package) are
perceptually uniform (even steps in a perceptual colour space), ordered in
lightness, readable by viewers with colour-vision deficiencies and in grey;
this field's journals now ask for them.

- Temperature: ``lajolla`` (dark red-brown, cold, through red and orange to
  pale yellow, hot); its hue keeps changing through the middle of the range,
  so the well-mixed interior of a convecting layer shows structure instead of
  one flat colour.
- Viscosity: ``devon`` (dark blue to white), a cool map, so that a viscosity
  panel is never mistaken for a temperature panel; drawn on a log scale over
  its dynamically relevant range (:data:`VISCOSITY_DECADES`).
- Anomalies (signed, zero in the middle): ``vik`` (blue, light centre, red),
  symmetric in lightness about its light centre (use with
  :func:`symmetric_limits`).
- Lines: matplotlib's ``okabe_ito`` colours (Okabe & Ito 2008, "Color
  universal design"), distinguishable under all common colour vision
  deficiencies; lines also differ in style and points in marker
  (:data:`LINE_STYLES`, :data:`MARKERS`, the n-th with the n-th colour), so
  figures survive grey printing.  Guides (reference slopes, zero lines, points
  left out of a fit) are grey (:data:`GUIDE_COLOR`), drawn under the data.

Deterministic files
-------------------
The same figure gives the same bytes: SVG ids come from a fixed hash salt
(``svg.hashsalt``), dates are left out of the metadata of PDF and SVG (and
PNG carries none), fonts are the DejaVu family that matplotlib ships (the same
on every machine) and are embedded as paths (SVG) or TrueType subsets (PDF).
"""

from __future__ import annotations

import logging
import math
from pathlib import Path

import cmcrameri.cm  # noqa: F401  (registers the "cmc.*" colour maps with matplotlib)
import matplotlib
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib import ticker
from matplotlib.figure import Figure

from convsim.files.atomic import atomic_path

__all__ = ["COLUMN_WIDTH", "PAGE_WIDTH", "TEMPERATURE_CMAP", "VISCOSITY_CMAP", "DIVERGING_CMAP",
           "VISCOSITY_DECADES", "DYE_CMAP", "FIELD_CMAPS",
           "LINE_COLORS", "LINE_STYLES", "MARKERS", "GUIDE_COLOR", "RC", "FORMATS", "context", "new_figure", "freeze_layout", "save",
           "save_file", "metadata_for", "to_rgba_array", "symmetric_limits", "figure_width",
           "light_grid", "log_label", "log_ticks"]

#: Width of one journal column [in].
COLUMN_WIDTH = 3.5
#: Width of two columns, or of a page with margins [in].
PAGE_WIDTH = 7.2

#: Sequential map for temperature fields (Crameri's lajolla).
TEMPERATURE_CMAP = "cmc.lajolla"
#: Sequential map for viscosity fields, drawn on a log scale when they vary (Crameri's devon).
VISCOSITY_CMAP = "cmc.devon"
#: Diverging map for anomalies (Crameri's vik; use with :func:`symmetric_limits`).
DIVERGING_CMAP = "cmc.vik"
#: Decades of viscosity shown above the lowest value: a region more viscous than this
#: relative to the least viscous one hardly moves (common practice: a contrast of 1e4 or
#: more behaves as a rigid lid), so its colour is clipped and the colour bar says so.
VISCOSITY_DECADES = 4.0
#: Sequential map for passive fields, a dye (Crameri's batlow).  Each advected field names its
#: map in its declaration (``convsim.model.fields``), looked up in :data:`FIELD_CMAPS`.
DYE_CMAP = "cmc.batlow"
#: Strain rate and stress of a yielding flow (log scales; ``convsim.figures.plates``).
STRAIN_CMAP = "cmc.batlow"
FIELD_CMAPS = {"temperature": TEMPERATURE_CMAP, "viscosity": VISCOSITY_CMAP, "dye": DYE_CMAP,
               "strain": STRAIN_CMAP}
#: Line colours, in order: blue, vermillion, bluish green, orange, reddish purple, sky blue,
#: black from matplotlib's ``okabe_ito`` map (its yellow is left out: too light on white).
LINE_COLORS = tuple(matplotlib.colors.to_hex(matplotlib.colormaps["okabe_ito"].colors[i])
                    for i in (5, 6, 3, 1, 7, 2, 0))
#: Line styles, in order, cycled with :data:`LINE_COLORS` when lines of one kind are many.
LINE_STYLES = ("-", "--", "-.", ":")
#: Point markers, one per line colour (the n-th marker goes with the n-th colour).
MARKERS = ("o", "s", "^", "v", "D", "<", ">")
#: Grey of guides: reference slopes, zero lines, points not used by a fit.
GUIDE_COLOR = "0.45"

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


def figure_width(panels: int = 1) -> float:
    """Width [in] of a figure of ``panels`` side-by-side panels: one column for one panel,
    two columns (:data:`PAGE_WIDTH`) for more."""
    return COLUMN_WIDTH if panels <= 1 else PAGE_WIDTH


def light_grid(ax) -> None:
    """A faint grid at the major ticks, under the data (for log-log plots read by eye)."""
    ax.grid(True, which="major", linewidth=0.3, color="0.85")
    ax.set_axisbelow(True)


def log_label(value: float) -> str:
    """A tick label: plain for 1e-3 <= v < 1e4, else m x 10^k in mathtext."""
    if value == 0.0 or not math.isfinite(value):
        return f"{value:g}"
    if 1.0e-3 <= abs(value) < 1.0e4:
        return f"{value:g}"
    exponent = math.floor(math.log10(abs(value)) + 1e-9)
    mantissa = round(value / 10.0**exponent, 6)
    if mantissa == 1.0:
        return f"$10^{{{exponent}}}$"
    return f"${mantissa:g}\\times10^{{{exponent}}}$"


def log_ticks(axis, lo: float, hi: float, max_labels: int = 5) -> list[float]:
    """Label a log axis over [lo, hi] with 1, 1-2-5 or 1..9 times powers of ten.

    The densest of those sets with at most ``max_labels`` ticks inside the range
    (at least two) is used, so that a range of less than a decade still gets
    labels and a wide one does not crowd; minor ticks stay unlabelled.
    """
    first, last = math.floor(math.log10(lo)), math.ceil(math.log10(hi))
    chosen = []
    for subs in ((1.0,), (1.0, 2.0, 5.0), (1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0)):
        ticks = [m * 10.0**k for k in range(first, last + 1) for m in subs
                 if lo * (1 - 1e-9) <= m * 10.0**k <= hi * (1 + 1e-9)]
        if len(ticks) > max_labels and len(chosen) >= 2:
            break
        chosen = ticks
        if len(ticks) >= 3:
            break
    if len(chosen) > max_labels:  # many decades: every n-th power of ten
        step = math.ceil(len(chosen) / max_labels)
        chosen = chosen[::step]
    axis.set_major_locator(ticker.FixedLocator(chosen))
    axis.set_major_formatter(ticker.FixedFormatter([log_label(v) for v in chosen]))
    axis.set_minor_locator(ticker.LogLocator(subs="auto"))
    axis.set_minor_formatter(ticker.NullFormatter())
    return chosen


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
    ``convsim.files.runfile.check_writable``).  Returns the paths written.
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


def save_file(fig: Figure, path: str | Path, *, title: str = "",
              creator: str = "convsim") -> Path:
    """Write ``fig`` to ``path`` in the format of its suffix (one of :data:`FORMATS`).

    The file is written under a temporary name in the same folder and then renamed,
    so an interrupted write never leaves a partial figure under ``path``.  Existing
    files are replaced: the caller checks first.
    """
    path = Path(path)
    fmt = path.suffix.lstrip(".").lower()
    if fmt not in FORMATS:
        raise ValueError(f"figure path {str(path)!r}: suffix {path.suffix!r} is not one of "
                         f"{', '.join('.' + f for f in FORMATS)}")
    with atomic_path(path, suffix=f".{fmt}") as tmp:
        save(fig, tmp.with_suffix(""), (fmt,), title=title, creator=creator)
    return path


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
