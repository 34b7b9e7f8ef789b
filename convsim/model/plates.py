"""Diagnostics of a lid that can yield: pure functions of the fields.

Nondimensional: velocities in kappa/d, strain rates in kappa/d^2, stresses in
eta_ref kappa/d^2, lengths in layer depths.

- Strain rate ``strain_rate_field``: e_II = sqrt(e_ij e_ij / 2) at the cell centres, as the
  Stokes operator sees it (``convsim.model.nonlinear.strain_rate_invariants``).
- Stress ``stress_field``: the second invariant of the deviatoric stress, 2 eta e_II.
- Yielded region ``yielded_mask`` and its area fraction ``yielded_fraction``: cells where
  the plastic branch is below the linear law, eta_plast < eta_lin (the yield stress is
  reached there: 2 eta_lin e_II > sigma_y for eta* = 0).
- Surface velocity profile ``surface_velocity``: u = dpsi/dz on the top wall at the node
  columns (one-sided, second order; the same as ``diagnostics.surface_rms_velocity``).
- Mobility ``mobility``: surface rms velocity / rms velocity of the layer (Tackley 2000,
  Geochem. Geophys. Geosyst. 1, quoted from memory; the definition of the lid regime label).
- Interior rms velocity ``interior_rms_velocity``: sqrt(mean of u^2 + w^2) over the cells with
  1/4 < z < 3/4, the middle half of the layer away from both thermal boundary layers (our
  definition for the viscoplastic benchmark cases; no published one is recalled).
- Plateness ``plateness``: P = 1 - f80 / 0.6, with f80 the smallest fraction of the surface
  that holds 80 % of the surface deformation sum |du/dx| dx, and 0.6 its value for
  isoviscous convection (Tackley 2000, quoted from memory): near 1 for rigid plates with
  narrow boundaries, near 0 or below for a smoothly deforming surface.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from convsim.model.grid import Grid
from convsim.model.nonlinear import strain_rate_invariants
from convsim.model.rheology import ViscosityLaw, viscosity
from convsim.model.laws.yielding import plastic_viscosity
from convsim.model.laws import LawInputs
from convsim.model.stokes import StokesOperator

__all__ = ["strain_rate_field", "stress_field", "yielded_mask", "yielded_fraction",
           "surface_velocity", "mobility", "plateness", "ISOVISCOUS_F80", "yields",
           "YieldFields", "yield_fields", "top_velocity", "interior_rms_velocity",
           "INTERIOR_BAND"]

ISOVISCOUS_F80 = 0.6      # f80 of isoviscous convection (Tackley 2000, quoted from memory)
INTERIOR_BAND = (0.25, 0.75)   # the middle half of the layer (our definition, module doc)


def strain_rate_field(op: StokesOperator, psi: np.ndarray) -> np.ndarray:
    """e_II at the cell centres, shape (nz, nx)."""
    return strain_rate_invariants(op, psi)[1]


def stress_field(eta_cell: np.ndarray, strain_rate: np.ndarray) -> np.ndarray:
    """sigma_II = 2 eta e_II at the cell centres."""
    return 2.0 * eta_cell * strain_rate


def yields(law: ViscosityLaw) -> bool:
    """Whether the law's yielding modifier is active (a yield stress or its gradient > 0)."""
    from convsim.model.laws import MODIFIERS
    return bool(MODIFIERS["yielding"].active(law))


def yielded_mask(law: ViscosityLaw, T: np.ndarray, z: np.ndarray,
                 strain_rate: np.ndarray) -> np.ndarray:
    """Cells where eta_plast < eta_lin (all False for a law without yielding)."""
    if not yields(law):
        return np.zeros(np.shape(T), dtype=bool)
    lin = viscosity(law, T, z, modifiers=False)
    plast = plastic_viscosity(LawInputs(np.asarray(T), np.asarray(z), strain_rate), law)
    return plast < lin


def interior_rms_velocity(grid: Grid, psi: np.ndarray, band=INTERIOR_BAND) -> float:
    """sqrt(mean(u^2 + w^2)) over the cells whose centres lie in band[0] < z < band[1].

    u, w at the cell centres (``stokes.node_velocities``), in kappa/d.
    """
    from convsim.model.stokes import node_velocities
    u, w = node_velocities(grid, psi)
    rows = (grid.z_cell > band[0]) & (grid.z_cell < band[1])
    return float(np.sqrt(np.mean(u[rows] ** 2 + w[rows] ** 2)))


def yielded_fraction(mask: np.ndarray) -> float:
    """Area fraction of the yielded cells (uniform cells)."""
    return float(np.mean(mask))


def surface_velocity(grid: Grid, psi: np.ndarray) -> np.ndarray:
    """u on the top wall at the node columns x_node, shape (nx + 1,)."""
    if grid.stretched:
        return top_velocity(psi, grid.dz_cell[-1], grid.dz_cell[-2])
    return top_velocity(psi, grid.dz)


def top_velocity(psi: np.ndarray, dz: float, dz_below: float | None = None) -> np.ndarray:
    """u = dpsi/dz on the top wall, one-sided second order, at the node columns, shape
    (nx + 1,): (3 psi_n - 4 psi_n-1 + psi_n-2) / (2 dz) for equal spacings; with the
    top row's spacing a = dz and the next one b = dz_below (a stretched grid) the
    three-point derivative psi_n (2a + b) / (a (a + b)) - psi_n-1 (a + b) / (a b)
    + psi_n-2 a / (b (a + b))."""
    if dz_below is None:
        return (3.0 * psi[-1] - 4.0 * psi[-2] + psi[-3]) / (2.0 * dz)
    a, b = dz, dz_below
    return (psi[-1] * (2.0 * a + b) / (a * (a + b)) - psi[-2] * (a + b) / (a * b)
            + psi[-3] * a / (b * (a + b)))


def mobility(surface_vrms: float, vrms: float) -> float:
    """M = surface rms velocity / rms velocity (NaN without flow)."""
    return float(surface_vrms / vrms) if vrms > 0.0 else float("nan")


def plateness(grid: Grid, psi: np.ndarray, share: float = 0.8) -> float:
    """P = 1 - f80 / 0.6 of the surface velocity profile (see the module docstring)."""
    u = surface_velocity(grid, psi)
    deformation = np.abs(np.diff(u))                  # |du/dx| dx per surface cell
    total = deformation.sum()
    if total == 0.0:
        return float("nan")
    ordered = np.sort(deformation)[::-1]
    cells = int(np.searchsorted(np.cumsum(ordered), share * total) + 1)
    return 1.0 - (cells / grid.nx) / ISOVISCOUS_F80


@dataclass(frozen=True)
class YieldFields:
    """The cell fields of a yielding flow, each (nz, nx): e_II, sigma_II = 2 eta e_II, eta
    and the yielded mask (see the module docstring)."""

    strain_rate: np.ndarray
    stress: np.ndarray
    viscosity: np.ndarray
    yielded: np.ndarray


def yield_fields(op: StokesOperator, law: ViscosityLaw, T: np.ndarray, z_cell: np.ndarray,
                 psi: np.ndarray) -> YieldFields:
    """e_II of psi, eta = law(T, z, e_II) at the cells (the viscosity the Stokes operator
    uses there), the stress 2 eta e_II and the yielded mask."""
    rate = strain_rate_field(op, psi)
    eta = viscosity(law, T, z_cell, rate)
    return YieldFields(rate, stress_field(eta, rate), eta, yielded_mask(law, T, z_cell, rate))
