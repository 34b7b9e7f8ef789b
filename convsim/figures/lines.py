"""Line figures of a run file: profiles against height, diagnostic series against time.

Drawn in the house style (:mod:`convsim.figures.style`) from a
:class:`convsim.files.reader.RunFile`; :mod:`convsim.figures.fields` re-exports them.

Profiles
--------
Horizontally averaged temperature from wall to wall: the cell-centre means of
the file plus the wall values, the imposed temperature at a fixed-temperature
wall, or at a fixed-flux wall the quadratic through the two nearest cell means
with the imposed slope (as ``convsim.model.diagnostics.wall_temperatures``).
The second panel is the horizontally averaged viscosity (log scale, extended
to the walls by log-linear extrapolation of the two nearest means), or, when
the viscosity is uniform, the rms velocity sqrt(<u^2 + w^2>_x)(z) instead of a
flat line.  The title says which snapshot (time) the profiles are.

Series
------
Nusselt numbers (or wall heat flows in mW m^-2) and vrms against time.  When
the run file holds time statistics (group ``statistics``: per quantity the
mean, its 95 % half-width and the start of the averaging window), the mean is
drawn over its window as a horizontal line with a band of the interval, and
the window's start as a dotted vertical line.
"""

from __future__ import annotations

import numpy as np

from convsim.figures import style
from convsim.figures.presentation import Presentation, presentation_for, viscosity_varies
from convsim.files.reader import RunFile

__all__ = ["wall_profiles", "velocity_profile", "draw_profiles", "draw_series",
           "profiles_figure", "series_figure", "run_statistics"]


def wall_profiles(run: RunFile, config=None):
    """(z, T(z), eta(z)) from wall to wall: nz + 2 points, nondimensional.

    ``config``: the run's config (for the thermal conditions); default read from the file.
    """
    from convsim.figures.presentation import run_config
    cfg = run_config(run) if config is None else config
    b = cfg.boundaries
    T, eta = run.fields["temperature_profile"], run.fields["viscosity_profile"]
    zn, zc = run.z_node, run.z
    walls = []      # quadratic through the two wall cells (centres n1, n2 from the wall)
    for kind, value, t1, t2, sign, n1, n2 in (
            ("bottom_heat", b.bottom_value, T[0], T[1], 1.0, zc[0] - zn[0], zc[1] - zn[0]),
            ("top_heat", b.top_value, T[-1], T[-2], -1.0, zn[-1] - zc[-1], zn[-1] - zc[-2])):
        if getattr(b, kind) == "temperature":
            walls.append(value)
        else:
            slope = -sign * value
            curvature = (t2 - t1 - slope * (n2 - n1)) / (n2 * n2 - n1 * n1)
            walls.append(t1 - slope * n1 - curvature * n1 * n1)
    z = np.concatenate([[run.z_node[0]], run.z, [run.z_node[-1]]])
    log_eta = np.log(eta)
    below = (zc[0] - zn[0]) / (zc[1] - zc[0])        # 1/2 on a uniform grid
    above = (zn[-1] - zc[-1]) / (zc[-1] - zc[-2])
    eta_walls = np.exp([log_eta[0] + below * (log_eta[0] - log_eta[1]),
                        log_eta[-1] + above * (log_eta[-1] - log_eta[-2])])
    return (z, np.concatenate([[walls[0]], T, [walls[1]]]),
            np.concatenate([[eta_walls[0]], eta, [eta_walls[1]]]))


def velocity_profile(run: RunFile) -> np.ndarray:
    """sqrt(<u^2 + w^2>_x)(z) at the cell centres, face velocities averaged to the cells."""
    ux, wz = run.fields["velocity_x"], run.fields["velocity_z"]
    u, w = 0.5 * (ux[:, 1:] + ux[:, :-1]), 0.5 * (wz[1:, :] + wz[:-1, :])
    return np.sqrt(np.mean(u * u + w * w, axis=1))


def draw_profiles(ax_t, ax_2, run: RunFile, pres: Presentation, config=None, statistics=None):
    """T(z) with its wall values, and eta(z) (or the rms velocity); returns the two Line2D."""
    z, T, eta = wall_profiles(run, config)
    (lt,) = ax_t.plot(pres.temperature(T), pres.length(z), color=style.LINE_COLORS[1],
                      label="temperature")
    ax_t.set_xlabel(pres.temperature_label)
    ax_t.set_ylabel(pres.z_label)
    if viscosity_varies(eta):
        eta = pres.viscosity(eta)
        (l2,) = ax_2.plot(eta, pres.length(z), color=style.LINE_COLORS[0], label="viscosity")
        ax_2.set_xscale("log")
        lo, hi = float(eta.min()), float(eta.max())
        pad = (hi / lo) ** 0.05
        ax_2.set_xlim(lo / pad, hi * pad)
        style.log_ticks(ax_2.xaxis, lo / pad, hi * pad, max_labels=4)
        ax_2.set_xlabel(pres.viscosity_label)
    else:
        v = pres.velocity(velocity_profile(run))
        (l2,) = ax_2.plot(v, pres.length(run.z), color=style.LINE_COLORS[2],
                          label="rms velocity")
        ax_2.set_xlim(0.0, 1.08 * float(np.max(v)) if np.max(v) > 0 else 1.0)
        ax_2.set_xlabel(pres.velocity_label.replace("v_\\mathrm{rms}", "v_\\mathrm{rms}(z)"))
    for ax in (ax_t, ax_2):
        ax.set_ylim(pres.length(run.z_node[0]), pres.length(run.z_node[-1]))
        ax.grid(True, linewidth=0.3, color="0.85")
    ax_2.tick_params(labelleft=False)
    if statistics is None:          # the mean profile of an unfinished run is still moving
        settled = (getattr(run, "statistics", None) or {}).get("settled")
        statistics = run_statistics(run) if settled == "statistically-steady" else {}
    stats = statistics
    ax_t.set_title("horizontal means at " + pres.time_text(run.times[run.snapshot])
                   + ("; dashed: time means" if _draw_mean_profiles(ax_t, ax_2, run, pres, stats)
                      else ""), loc="left")
    return lt, l2


def run_statistics(run: RunFile) -> dict:
    """The time means of a time-dependent run: ``{quantity: {"mean", "ci95", "from_time"}}``.

    From ``run.statistics`` when the reader provides it, else from the file's group
    ``statistics`` (``convsim.files.statistics_group.read_statistics``); {} for a steady run or a
    file without statistics.
    """
    found = getattr(run, "statistics", None)
    if found is None:
        from convsim.files import runfile
        reader = getattr(runfile, "read_statistics", None)
        if reader is None:
            return {}
        try:
            with runfile.open_run_file(run.path) as f:
                found = reader(f) or {}
        except (OSError, KeyError, ValueError, TypeError):
            return {}
    if not found or found.get("settled") in (None, "steady"):
        return {}
    return dict(found.get("statistics") or {})


def _draw_mean_profiles(ax_t, ax_2, run: RunFile, pres: Presentation, statistics) -> bool:
    """Time-mean profiles (dashed, with 95 % bands) over the instantaneous ones; True if drawn."""
    drawn = False
    for ax, name, convert, colour in ((ax_t, "temperature_profile", pres.temperature, 1),
                                      (ax_2, "viscosity_profile", pres.viscosity, 0)):
        if name not in statistics or ax.get_lines()[0].get_label() == "rms velocity":
            continue
        m = np.asarray(statistics[name]["mean"], float)
        h = np.asarray(statistics[name]["ci95"], float)
        h = np.where(np.isfinite(h), h, 0.0)
        z = pres.length(run.z)
        ax.fill_betweenx(z, convert(m - h), convert(m + h), color=style.LINE_COLORS[colour],
                         alpha=0.2, linewidth=0)
        ax.plot(convert(m), z, color=style.LINE_COLORS[colour], linestyle="--",
                label="time mean from " + pres.time_text(statistics[name]["from_time"]))
        drawn = True
    if drawn:
        ax_t.legend(loc="best")
    return drawn


def _mark_mean(ax, t_shown, stat, convert, color):
    """The time mean over its window (line and 95 % band) and the window's start."""
    mean, half, start = stat.get("mean"), stat.get("ci95"), stat.get("from_time")
    if mean is None or start is None or not np.isfinite(mean):
        return None
    t0, t1 = float(t_shown(start)), float(ax.get_xlim()[1])
    y = float(convert(mean))
    if half is not None and np.isfinite(half):
        lo, hi = float(convert(mean - half)), float(convert(mean + half))
        ax.fill_between([t0, t1], lo, hi, color=color, alpha=0.18, linewidth=0, zorder=1)
    ax.plot([t0, t1], [y, y], color=color, linewidth=1.4, zorder=4, label="_mean")
    ax.axvline(t0, color=style.GUIDE_COLOR, linewidth=0.6, linestyle=":", zorder=0)
    return y


def draw_series(ax_nu, ax_v, run: RunFile, pres: Presentation, statistics=None):
    """Nu top and bottom (or heat flow) and vrms against time; returns the three Line2D."""
    s = run.series
    t = pres.time(s["series_time"])
    (top,) = ax_nu.plot(t, pres.heat_flux(s["nusselt_top"]), color=style.LINE_COLORS[1],
                        label="top")
    (bottom,) = ax_nu.plot(t, pres.heat_flux(s["nusselt_bottom"]), color=style.LINE_COLORS[0],
                           linestyle="--", label="bottom")
    ax_nu.set_ylabel(pres.heat_flux_label)
    (vrms,) = ax_v.plot(t, pres.velocity(s["vrms"]), color=style.LINE_COLORS[2], label="vrms")
    ax_v.set_ylabel(pres.velocity_label)
    ax_v.set_xlabel(pres.time_label)
    shown = pres.time(run.times[run.snapshot])
    for ax in (ax_nu, ax_v):
        ax.grid(True, linewidth=0.3, color="0.85")
        if len(t):
            start = min(float(t[0]), float(pres.time(run.times[0])))
            ax.set_xlim(start, float(t[-1]) if t[-1] > start else start + 1.0)
            ax.axvline(shown, color="0.5", linewidth=0.6, linestyle=":", zorder=0)
    stats = run_statistics(run) if statistics is None else statistics
    marked = False
    for ax, name, line, convert in ((ax_nu, "nusselt_top", top, pres.heat_flux),
                                    (ax_nu, "nusselt_bottom", bottom, pres.heat_flux),
                                    (ax_v, "vrms", vrms, pres.velocity)):
        if name in stats:
            marked |= _mark_mean(ax, pres.time, stats[name], convert,
                                 line.get_color()) is not None
    if marked:
        from matplotlib.lines import Line2D
        handles = [top, bottom, Line2D([], [], color="0.3", linewidth=1.4)]
        ax_nu.legend(handles, ["top", "bottom", "time mean, 95 % band"], loc="best", ncols=3)
    else:
        ax_nu.legend(loc="best", ncols=2)
    ax_nu.tick_params(labelbottom=False)
    return top, bottom, vrms


def profiles_figure(run: RunFile, *, pres: Presentation | None = None, statistics=None):
    """Horizontally averaged temperature and viscosity (or rms velocity) against height."""
    pres = presentation_for(run) if pres is None else pres
    with style.context():
        fig = style.new_figure(style.COLUMN_WIDTH, 2.7)
        ax_t, ax_2 = fig.subplots(1, 2, sharey=True)
        draw_profiles(ax_t, ax_2, run, pres, statistics=statistics)
    return style.freeze_layout(fig)


def series_figure(run: RunFile, *, pres: Presentation | None = None, statistics=None):
    """Nusselt numbers (top, bottom) and vrms against time, stacked."""
    pres = presentation_for(run) if pres is None else pres
    with style.context():
        fig = style.new_figure(style.COLUMN_WIDTH, 3.2)
        ax_nu, ax_v = fig.subplots(2, 1, sharex=True)
        draw_series(ax_nu, ax_v, run, pres, statistics)
    return style.freeze_layout(fig)
