"""The figure of two runs compared (``convsim compare``): both temperature fields, their
difference on the diverging map, and the Nusselt number (or heat flow) of both against time.

Takes a :class:`convsim.analysis.compare.Comparison`; drawn in the house style with run
A's presentation (physical units when its config has a [body] table).
"""

from __future__ import annotations

import dataclasses

from convsim.figures import style
from convsim.figures.fields import draw_field, _field_axes, _colorbar
from convsim.figures.presentation import presentation_for

__all__ = ["comparison_figure"]


def _short_name(paths, index: int) -> str:
    """The file name, with its folder when both runs have the same name."""
    path = paths[index]
    return path.name if paths[0].name != paths[1].name else f"{path.parent.name}/{path.name}"


def comparison_figure(comparison, *, units: str = "auto"):
    """Temperature of A and of B (on A's cells), T_B - T_A, and Nu(t) of both; a Figure."""
    a, b = comparison.runs
    pres = presentation_for(a, units)
    b_on_a = dataclasses.replace(a, fields=dict(a.fields,
                                                temperature=comparison.temperature_b_on_a))
    aspect = float(a.x_node[-1] - a.x_node[0])
    panel_height = min(2.4, (style.PAGE_WIDTH / 3.0 - 0.9) / aspect + 0.7)
    with style.context():
        fig = style.new_figure(style.PAGE_WIDTH, panel_height + 2.3)
        top, bottom = fig.subfigures(2, 1, height_ratios=[panel_height, 2.1])
        axes = top.subplots(1, 3)
        T_a, T_b = (pres.temperature(r.fields["temperature"]) for r in (a, b_on_a))
        lo, hi = float(min(T_a.min(), T_b.min())), float(max(T_a.max(), T_b.max()))
        for ax, run, T, name in ((axes[0], a, T_a, "A"), (axes[1], b_on_a, T_b, "B")):
            mesh = draw_field(ax, run, pres, T, cmap=style.TEMPERATURE_CMAP, vmin=lo, vmax=hi)
            mesh.set_label(f"temperature {name}")
            _field_axes(ax, run, pres)
            ax.set_title(f"{name}: {_short_name(comparison.paths, 0 if name == 'A' else 1)}",
                         loc="left")
            _colorbar(ax, mesh, pres.temperature_label)
        diff = pres.temperature_difference(comparison.difference)
        dlo, dhi = style.symmetric_limits(diff)
        mesh = draw_field(axes[2], a, pres, diff, cmap=style.DIVERGING_CMAP, vmin=dlo, vmax=dhi)
        mesh.set_label("temperature difference")
        _field_axes(axes[2], a, pres)
        axes[2].set_title("B - A" + (", B interpolated" if comparison.interpolated else ""),
                          loc="left")
        unit = "K" if pres.physical else "$\\Delta T$"
        _colorbar(axes[2], mesh, f"$T_B - T_A$ ({unit})" if pres.physical
                  else "$(T_B - T_A)\\,/\\,\\Delta T$")
        ax = bottom.subplots(1, 1)
        for run, name, color, dash in ((a, "A", style.LINE_COLORS[0], "-"),
                                       (b, "B", style.LINE_COLORS[1], "--")):
            s = run.series
            ax.plot(pres.time(s["series_time"]), pres.heat_flux(s["nusselt_top"]), color=color,
                    linestyle=dash, label=f"{name} top")
        ax.set_xlabel(pres.time_label)
        ax.set_ylabel(pres.heat_flux_label)
        ax.grid(True, linewidth=0.3, color="0.85")
        ax.legend(loc="best", ncols=2)
    return style.freeze_layout(fig)
