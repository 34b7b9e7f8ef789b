"""Diagnostics of a convecting layer: pure functions of the fields.

Conventions: heat flux is upward, q = -dT/dz (nondimensional, units of k dT/d).
The Nusselt number at a boundary is its mean upward heat flux divided by the
conductive flux of the same temperature contrast,

    Nu = mean_x(-dT/dz) / (mean_x T(z=0) - mean_x T(z=1)),

which for unit temperature contrast and a unit-width box is the definition of
the steady-state benchmark of Blankenbach et al. (1989, Geophys. J. Int. 98,
23-38).  The wall flux is the finite-volume scheme's own conservative flux,

    -dT/dz(wall) = (T_1 - T_w) / (dz / 2)   (bottom; mirrored at the top),

so that at steady state Nu_top = Nu_bottom (+ H / contrast) to round-off.  It
converges at second order and, measured on case 1a, with an error constant about
twenty times smaller than the three-point one-sided gradient (see DEVELOPERS.md).
Corner gradients q1..q4 extrapolate this wall flux to the side walls.

The rms velocity is vrms = sqrt(<u^2 + w^2>) over the box (area mean).

Each diagnostic the run reports is declared once in ``DIAGNOSTICS`` (name, units,
long_name, CF attributes, the function that computes it from a ``Sample``): the
step report (``timestepping.StepReport`` has one attribute per declaration), the
time series and its run-file variables, ``--json``, ``convsim info`` and the run
result read that table.  A new diagnostic is one ``Diagnostic(...)`` line there.
A declaration with ``needs = "yielding"`` applies only to runs whose law yields
(``convsim.model.plates``): elsewhere it is NaN in the step report and absent from
the run file's series and the final diagnostics.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Callable

import numpy as np

from convsim.model.energy import ThermalBoundaries, boundary_heat_flux
from convsim.model.grid import Grid
from convsim.model.linsolve import SolveReport
from convsim.model.stokes import face_velocities

__all__ = ["wall_temperatures", "nusselt_numbers", "rms_velocity", "surface_rms_velocity",
           "corner_gradients", "heat_content", "horizontal_mean", "heat_budget", "Sample",
           "Diagnostic", "DIAGNOSTICS", "evaluate", "applicable", "NEEDS"]

#: What a diagnostic may need beyond the temperature and the flow ("": every run).
NEEDS = ("", "yielding")


def wall_temperatures(grid: Grid, T: np.ndarray, bc: ThermalBoundaries) -> tuple[np.ndarray, np.ndarray]:
    """Temperature on the bottom and top walls, each (nx,): imposed, or extrapolated (fixed flux)."""
    h = grid.dz_cell
    out = []
    for kind, value, t1, t2, sign, h1, h2 in (
            (bc.bottom_heat, bc.bottom_value, T[0], T[1], 1.0, h[0], h[1]),
            (bc.top_heat, bc.top_value, T[-1], T[-2], -1.0, h[-1], h[-2])):
        if kind == "temperature":
            out.append(np.full(grid.nx, value))
        elif not grid.stretched:  # quadratic through the two cells with slope b = dT/dn
            dz = grid.dz          # (n: distance from the wall)
            b = -sign * value
            curvature = (t2 - t1 - b * dz) / (2.0 * dz * dz)
            out.append(t1 - 0.5 * b * dz - curvature * dz * dz / 4.0)
        else:                     # the same quadratic, centres at n1 = h1 / 2, n2 = h1 + h2 / 2
            b, n1, n2 = -sign * value, 0.5 * h1, h1 + 0.5 * h2
            curvature = (t2 - t1 - b * (n2 - n1)) / (n2 * n2 - n1 * n1)
            out.append(t1 - b * n1 - curvature * n1 * n1)
    return out[0], out[1]


def nusselt_numbers(grid: Grid, T: np.ndarray, bc: ThermalBoundaries) -> tuple[float, float]:
    """(Nu_top, Nu_bottom): mean upward wall heat flux over the mean wall temperature contrast."""
    bottom, top = boundary_heat_flux(grid, T, bc)
    tb, tt = wall_temperatures(grid, T, bc)
    contrast = float(np.mean(tb) - np.mean(tt))
    if contrast == 0.0:
        return float("nan"), float("nan")
    return float(np.mean(top)) / contrast, float(np.mean(bottom)) / contrast


def corner_gradients(grid: Grid, T: np.ndarray, bc: ThermalBoundaries) -> np.ndarray:
    """-dT/dz at the corners q1 (0, 1), q2 (aspect, 1), q3 (aspect, 0), q4 (0, 0).

    The wall gradient of the first two columns is extrapolated to the side wall
    with zero slope there (insulating side): f(0) = (9 f_1 - f_2) / 8.  With
    periodic sides the same formula is applied at x = 0 and x = aspect.
    """
    bottom, top = boundary_heat_flux(grid, T, bc)

    def left(f):
        return (9.0 * f[0] - f[1]) / 8.0

    def right(f):
        return (9.0 * f[-1] - f[-2]) / 8.0

    return np.array([left(top), right(top), right(bottom), left(bottom)])


def rms_velocity(grid: Grid, psi: np.ndarray) -> float:
    """vrms = sqrt(mean(u^2 + w^2)) over the box.

    u^2 is integrated on the vertical faces and w^2 on the horizontal ones, by the
    trapezoidal rule across the faces and the midpoint rule along them (second order);
    on a stretched grid u^2 weighs its row height and w^2 its corner row's control height.
    """
    u, w = face_velocities(grid, psi)
    wx = np.full(grid.nx + 1, grid.dx)
    if not grid.periodic:
        wx[[0, -1]] *= 0.5
    else:
        wx[-1] = 0.0
    if grid.stretched:
        integral = (np.sum((u * u) * wx[None, :] * grid.dz_cell[:, None])
                    + np.sum((w * w) * grid.dz_node[:, None]) * grid.dx)
        return float(np.sqrt(integral / grid.area))
    wz = np.full(grid.nz + 1, grid.dz)
    wz[[0, -1]] *= 0.5
    integral = np.sum((u * u) * wx[None, :]) * grid.dz + np.sum((w * w) * wz[:, None]) * grid.dx
    return float(np.sqrt(integral / grid.area))


def surface_rms_velocity(grid: Grid, psi: np.ndarray) -> float:
    """rms of the horizontal velocity on the top wall, u = dpsi/dz (one-sided, second order)."""
    from convsim.model.plates import surface_velocity
    u_top = surface_velocity(grid, psi)
    if grid.periodic:
        return float(np.sqrt(np.mean(u_top[:-1] ** 2)))
    weights = np.full(grid.nx + 1, 1.0)
    weights[[0, -1]] = 0.5
    return float(np.sqrt(np.sum(weights * u_top ** 2) / np.sum(weights)))


def mean_temperature(grid: Grid, T: np.ndarray) -> float:
    """Area mean of a cell field (plain mean on a uniform grid)."""
    if grid.stretched:
        return heat_content(grid, T) / grid.area
    return float(T.mean())


def horizontal_mean(field: np.ndarray) -> np.ndarray:
    """Mean over x of a cell field (nz, nx) -> (nz,)."""
    return field.mean(axis=1)


def heat_content(grid: Grid, T: np.ndarray) -> float:
    """Integral of T over the box (cell sums times cell area)."""
    return grid.integral(T)


def heat_budget(grid: Grid, heat_rate: float, T: np.ndarray, bc: ThermalBoundaries,
                heating: float) -> tuple[float, float]:
    """(energy residual, heat imbalance) of the box, both over the largest heat flow.

    With the scheme's own wall fluxes, inflow through the bottom, outflow through
    the top and the internal source H * area:

    - energy residual = d/dt(heat) - (inflow - outflow + source); ``heat_rate`` is
      the rate of change of the heat content the time stepper computed, so for a
      conservative scheme this is round-off at every step;
    - heat imbalance = inflow + source - outflow, which vanishes at steady state
      (top and bottom heat flow balanced with the internal heating).
    """
    bottom, top = boundary_heat_flux(grid, T, bc)
    inflow = float(np.sum(bottom) * grid.dx)
    outflow = float(np.sum(top) * grid.dx)
    source = heating * grid.area
    scale = max(abs(outflow), abs(inflow), abs(source), 1e-300)
    imbalance = inflow + source - outflow
    return (heat_rate - imbalance) / scale, imbalance / scale


# -- the declared diagnostics -------------------------------------------------------------------
class Sample:
    """What a diagnostic may read: the state a step reached and, for the step's own
    measures, the step (each shared quantity computed once, on first use).

    Parameters
    ----------
    grid, thermal, heating : the problem (``heating`` = H).
    T, psi : temperature (nz, nx) and streamfunction (nz + 1, nx + 1) of the state.
    previous_T : temperature one step earlier, or None (no step: a start, a jump).
    dt : the step's size (0: no step).
    heat_rate : d/dt of the heat content as the time stepper computed it (0: no step).
    solve : the step's Stokes ``SolveReport`` (iterations, residual, nonlinear iterations),
        or None.
    plates : callable or None
        For a law that yields: ``() -> convsim.model.plates.YieldFields`` of the state
        (called once, on first use); None: the law does not yield.
    """

    def __init__(self, grid: Grid, thermal: ThermalBoundaries, heating: float, T: np.ndarray,
                 psi: np.ndarray, previous_T: np.ndarray | None = None, dt: float = 0.0,
                 heat_rate: float = 0.0, solve=None, plates=None):
        self.grid, self.thermal, self.heating = grid, thermal, float(heating)
        self.T, self.psi, self.previous_T = T, psi, previous_T
        self.dt, self.heat_rate = dt, heat_rate
        self.solve = solve if solve is not None else SolveReport()
        self._plates = plates

    def has(self, need: str) -> bool:
        """Whether the sample provides what a diagnostic ``needs`` ("" always)."""
        return need == "" or (need == "yielding" and self._plates is not None)

    @cached_property
    def plates(self):
        """The yield fields of the state (``convsim.model.plates.YieldFields``)."""
        return self._plates()

    @cached_property
    def vrms(self) -> float:
        return rms_velocity(self.grid, self.psi)

    @cached_property
    def surface_vrms(self) -> float:
        return surface_rms_velocity(self.grid, self.psi)

    def mobility(self) -> float:
        """M = surface vrms / vrms (Tackley 2000, quoted from memory); NaN without flow."""
        return self.surface_vrms / self.vrms if self.vrms > 0.0 else float("nan")

    @cached_property
    def nusselt(self) -> tuple[float, float]:
        return nusselt_numbers(self.grid, self.T, self.thermal)

    @cached_property
    def budget(self) -> tuple[float, float]:
        return heat_budget(self.grid, self.heat_rate, self.T, self.thermal, self.heating)

    def tendency_max(self) -> float:
        """max |T^{n+1} - T^n| / dt (NaN without a step)."""
        if self.previous_T is None or not self.dt > 0:
            return float("nan")
        return float(np.abs(self.T - self.previous_T).max() / self.dt)


@dataclass(frozen=True)
class Diagnostic:
    """One scalar diagnostic, declared once.

    ``of_state``: it depends on the state alone (so it is also computed for the final
    state of a run); otherwise it measures the step that reached the state.
    ``needs``: one of ``NEEDS``; the runs it applies to (``applicable``).
    """

    name: str
    units: str
    long_name: str
    compute: Callable[[Sample], float]
    of_state: bool = True
    dtype: str = "f8"
    cf: dict = field(default_factory=dict)
    needs: str = ""


DIAGNOSTICS = {d.name: d for d in (
    Diagnostic("nusselt_top", "1", "Nusselt number at the top (upward wall heat flux over the "
               "conductive one)", lambda s: s.nusselt[0]),
    Diagnostic("nusselt_bottom", "1", "Nusselt number at the bottom", lambda s: s.nusselt[1]),
    Diagnostic("vrms", "1", "root-mean-square velocity of the box, units kappa/d",
               lambda s: s.vrms),
    Diagnostic("surface_vrms", "1", "rms horizontal velocity at the top, units kappa/d",
               lambda s: s.surface_vrms),
    Diagnostic("mobility", "1", "surface mobility M = surface_vrms / vrms (Tackley 2000)",
               Sample.mobility),
    Diagnostic("mean_temperature", "1", "mean temperature of the box",
               lambda s: mean_temperature(s.grid, s.T)),
    Diagnostic("heat_imbalance", "1", "bottom inflow + heating - top outflow over the largest "
               "heat flow (0 when steady)", lambda s: s.budget[1]),
    Diagnostic("energy_residual", "1", "heat budget misfit of the step over the largest heat "
               "flow (round-off)", lambda s: s.budget[0], of_state=False),
    Diagnostic("tendency_max", "1", "max |dT/dt| over the step, units dT/(d^2/kappa)",
               Sample.tendency_max, of_state=False),
    Diagnostic("stokes_iterations", "1", "conjugate-gradient iterations of the Stokes solve",
               lambda s: int(s.solve.iterations), of_state=False, dtype="i8"),
    Diagnostic("stokes_residual", "1", "relative residual ||b - A psi|| / ||b|| of the Stokes "
               "solve", lambda s: float(s.solve.residual), of_state=False),
    Diagnostic("stokes_flow_error", "1", "conjugate gradients' estimate of the flow's relative "
               "error in the dissipation norm, sqrt(r M^-1 r / b psi) (0: not estimated)",
               lambda s: float(s.solve.flow_error), of_state=False),
    Diagnostic("nonlinear_iterations", "1", "Picard/Newton steps of a strain-rate law's Stokes "
               "iteration (0: linear law)", lambda s: int(s.solve.nonlinear_iterations),
               of_state=False, dtype="i8"),
    Diagnostic("nonlinear_residual", "1", "final ||R|| / ||b|| of that iteration",
               lambda s: float(s.solve.nonlinear_residual), of_state=False),
    # a law that yields (convsim.model.plates): the lid's plates and the stresses
    Diagnostic("yielded_fraction", "1", "area fraction of the yielded cells (plastic viscosity "
               "below the linear law's)", lambda s: float(np.mean(s.plates.yielded)),
               needs="yielding"),
    Diagnostic("plateness", "1", "plateness P = 1 - f80 / 0.6 of the surface velocity "
               "(Tackley 2000; near 1: rigid plates)", lambda s: _plateness(s),
               needs="yielding"),
    Diagnostic("stress_max", "1", "largest stress invariant 2 eta e_II of the cells, units "
               "eta_ref kappa/d^2", lambda s: float(np.max(s.plates.stress)), needs="yielding"),
    Diagnostic("interior_vrms", "1", "rms velocity of the middle half of the layer (1/4 < z "
               "< 3/4), units kappa/d", lambda s: _interior_vrms(s), needs="yielding"),
    Diagnostic("viscosity_min", "1", "smallest viscosity of the cells, units eta_ref",
               lambda s: float(np.min(s.plates.viscosity)), needs="yielding"),
    Diagnostic("viscosity_max", "1", "largest viscosity of the cells, units eta_ref",
               lambda s: float(np.max(s.plates.viscosity)), needs="yielding"),
)}


def _interior_vrms(sample: Sample) -> float:
    from convsim.model.plates import interior_rms_velocity
    return interior_rms_velocity(sample.grid, sample.psi)


def _plateness(sample: Sample) -> float:
    from convsim.model.plates import plateness
    return plateness(sample.grid, sample.psi)


def applicable(yielding: bool) -> list[str]:
    """Names of the declared diagnostics of a run (whose law yields or not)."""
    return [name for name, d in DIAGNOSTICS.items() if d.needs == "" or yielding]


def evaluate(sample: Sample, state_only: bool = False) -> dict:
    """{name: value} of every declared diagnostic the sample provides (of the state alone
    if ``state_only``)."""
    return {name: d.compute(sample) for name, d in DIAGNOSTICS.items()
            if (d.of_state or not state_only) and sample.has(d.needs)}
