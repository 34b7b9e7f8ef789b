"""Figure of the onset analysis: the neutral curve with the box's modes and the operating Ra.

matplotlib is imported here only, through the Agg canvas (no display needed).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

__all__ = ["plot_neutral_curve"]


def plot_neutral_curve(result, path: str | Path) -> Path:
    """Draw Ra(k) of an ``OnsetResult`` and write it to ``path`` (format from the suffix).

    The layer's minimum (k_c, Ra_c), the admissible box modes k_n (the least stable one
    filled) and the operating Rayleigh number (a horizontal line) are marked.
    """
    path = Path(path)
    fig = Figure(figsize=(6.0, 4.2), layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    k = np.asarray(result.wavenumbers, float)
    ra = np.asarray(result.neutral_rayleigh, float)
    ax.plot(k, ra, color="black", lw=1.5, label="neutral curve Ra(k)")
    if np.isfinite(result.critical_rayleigh):
        ax.plot([result.critical_wavenumber], [result.critical_rayleigh], "o", color="black",
                mfc="white", label=f"layer: Ra_c = {result.critical_rayleigh:.6g}, "
                                   f"k_c = {result.critical_wavenumber:.4g}")
    mk = np.asarray(result.mode_wavenumbers, float)
    mr = np.asarray(result.mode_rayleigh, float)
    if mk.size:
        ax.plot(mk, mr, "s", color="tab:blue", ms=4, mfc="none", label="box modes k_n")
    if result.box_mode is not None:
        ax.plot([result.box_wavenumber], [result.box_critical_rayleigh], "s", color="tab:blue",
                label=f"box: Ra_c = {result.box_critical_rayleigh:.6g} (n = {result.box_mode})")
    if result.rayleigh is not None:
        ax.axhline(result.rayleigh, color="tab:red", lw=1.0, ls="--",
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
    plain = FuncFormatter(lambda value, _: f"{value:g}")
    for axis in (ax.xaxis, ax.yaxis):
        axis.set_major_formatter(plain)
        axis.set_minor_formatter(NullFormatter())
    ax.set_xlabel("horizontal wavenumber k (1/depth)")
    ax.set_ylabel("Rayleigh number")
    ax.set_title("Onset of convection: conductive state")
    ax.legend(fontsize=8, loc="best")
    fig.savefig(path, dpi=120)
    return path
