"""The viscoplastic benchmark cases of Tosi et al. (2015), Geochem. Geophys. Geosyst. 16,
2175-2196 (set-up quoted from memory): what the bench reports for them, and the period and
time means of the periodic case 4.

- ``lid_quantities``: per run, besides Nu and vrms, the surface rms velocity, the interior rms
  velocity, the mobility, the smallest and largest viscosity and the yielded area fraction.
  Interior rms velocity is our definition (no published one is recalled):
  sqrt(mean of u^2 + w^2 over the cells with 1/4 < z < 3/4), the middle half of the layer,
  away from both thermal boundary layers.
- ``oscillation_period``: the period of a periodic series from its upward crossings of its
  mean, and ``periodic_means``: time means over the whole periods of the end of a run.

No published value is compared (none recalled reliably): the grid-convergence study is the
evidence (``convsim bench vp2 vp3 --grids 32,48,64``).
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["CASES", "interior_rms_velocity", "lid_quantities", "LID_QUANTITIES",
           "lid_convergence", "crossing_times", "oscillation_period", "periodic_means"]

#: bench name: (config file in convsim/studies/cases/, one line of set-up)
CASES = {
    "vp2": ("benchmark_viscoplastic_case2.toml",
            "mobile lid: eta = 2 (1/eta_lin + 1/eta_plast)^-1, eta_lin = exp(-ln(1e5) T), "
            "eta_plast = 1e-3 + 1 / sqrt(e_ij e_ij), Ra = 100 at the cold top (Tosi et al. 2015, "
            "case 2; set-up from memory; no published value compared)"),
    "vp3": ("benchmark_viscoplastic_case3.toml",
            "mobile lid, depth-dependent: as vp2 with eta_lin = exp(-ln(1e5) T + ln(10) (1 - z)) "
            "(Tosi et al. 2015, case 3; set-up from memory; no published value compared)"),
}

#: what ``lid_quantities`` returns, with a label for the report
LID_QUANTITIES = {"surface_vrms": "surface vrms", "interior_vrms": "interior vrms",
                  "mobility": "mobility", "eta_min": "eta min", "eta_max": "eta max",
                  "yielded_fraction": "yielded area"}

INTERIOR_BAND = (0.25, 0.75)


def interior_rms_velocity(grid, psi: np.ndarray, band=INTERIOR_BAND) -> float:
    """sqrt(mean(u^2 + w^2)) over the cells whose centres lie in band[0] < z < band[1].

    u, w at the cell centres (``stokes.node_velocities``), in kappa/d.
    """
    from convsim.model.stokes import node_velocities
    u, w = node_velocities(grid, psi)
    rows = (grid.z_cell > band[0]) & (grid.z_cell < band[1])
    return float(np.sqrt(np.mean(u[rows] ** 2 + w[rows] ** 2)))


def lid_quantities(config, result) -> dict:
    """The lid numbers of a finished run (see the module docstring), as plain floats."""
    from convsim.model import plates
    from convsim.run.build import build_model
    model = build_model(config)
    T, psi = np.asarray(result.temperature), np.asarray(result.psi)
    eta = np.asarray(result.viscosity)
    rate = plates.strain_rate_field(model.stokes, psi)
    mask = plates.yielded_mask(model.law, T, model.grid.cell_mesh()[1], rate)
    return dict(surface_vrms=float(result.surface_vrms),
                interior_vrms=interior_rms_velocity(model.grid, psi),
                mobility=plates.mobility(float(result.surface_vrms), float(result.vrms)),
                eta_min=float(eta.min()), eta_max=float(eta.max()),
                yielded_fraction=plates.yielded_fraction(mask))


def lid_convergence(rows) -> dict:
    """{lid quantity: ``analysis.convergence`` estimate from the three finest rows} of steady
    bench rows that carry lid quantities (empty with fewer than three)."""
    from convsim.analysis import convergence as conv
    if len(rows) < 3 or not all(r.lid for r in rows):
        return {}
    return {q: conv.estimate_finest([r.h for r in rows], [r.lid[q] for r in rows])
            for q in rows[0].lid}


def crossing_times(times, values, skip: float = 0.0) -> np.ndarray:
    """Times of the upward crossings of a series' mean (linear interpolation), after ``skip``
    of its time span (the spin-up)."""
    t, f = np.asarray(times, float), np.asarray(values, float)
    keep = t >= t[0] + skip * (t[-1] - t[0])
    t, f = t[keep], f[keep]
    g = f - f.mean()
    up = np.nonzero((g[:-1] < 0.0) & (g[1:] >= 0.0))[0]
    return t[up] - g[up] * (t[up + 1] - t[up]) / (g[up + 1] - g[up])


def oscillation_period(times, values, skip: float = 0.0) -> tuple[float, int]:
    """Period of a periodic series and the number of whole periods it was measured over.

    The mean spacing of the upward crossings of the series' mean (``crossing_times``: first
    to last over their count - 1).  Returns (NaN, 0) with fewer than three crossings.
    """
    crossings = crossing_times(times, values, skip)
    if len(crossings) < 3:
        return math.nan, 0
    return float((crossings[-1] - crossings[0]) / (len(crossings) - 1)), len(crossings) - 1


def periodic_means(times, series: dict, period: float, periods: int) -> dict:
    """Time means of each series over its last ``periods`` whole periods (any window of whole
    periods gives the mean of a periodic signal): the series interpolated linearly in time
    (uneven steps) to 200 points per period, then averaged at the midpoints."""
    t = np.asarray(times, float)
    if not (math.isfinite(period) and periods > 0):
        return {name: math.nan for name in series}
    edges = np.linspace(t[-1] - periods * period, t[-1], 200 * periods + 1)
    mid = 0.5 * (edges[1:] + edges[:-1])
    return {name: float(np.mean(np.interp(mid, t, np.asarray(values, float))))
            for name, values in series.items()}
