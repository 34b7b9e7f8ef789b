"""The coupled model and its time step.

One step, from the state (T^n, psi^n) at time t_n (psi^n already solved from T^n):

1. explicit term N^n = -div(u^n T^n) + H (``energy.advection``; the tendency dT/dt
   is the whole right side, its largest value ``StepReport.tendency_max``);
2. dt from ``convsim.model.stepsize.StepSizeRule``: the Courant number of u^n,
   ``max_dt``, a growth of at most 25 % over the previous step, and a fraction of the
   time scale on which the advective part of N changes;
3. implicit-explicit update (diffusion implicit, advection and heating explicit).
   Second-order SBDF with step ratio r = dt_n / dt_{n-1} (w is the vertical velocity):

       (1+2r)/(1+r) T^{n+1} - (1+r) T^n + r^2/(1+r) T^{n-1}
           = dt_n [ (1+r) N^n - r N^{n-1} + lap T^{n+1} ],

   or first-order IMEX Euler, T^{n+1} - T^n = dt (N^n + lap T^{n+1}) (also the
   first step of SBDF2).  Both have the coefficients of T summing to zero and the
   explicit weights summing to one, so a steady state satisfies N + lap T = 0
   whatever the step size: there is no splitting error;
4. viscosity from T^{n+1}, then the Stokes solve for psi^{n+1};
5. checks: a non-finite or runaway field rejects the step, which is retried with
   half the time step (up to ``MAX_REJECTIONS`` times); then the run is declared
   diverged and the previous state is kept.

The time loop itself belongs to ``convsim.run.controller``.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from convsim.model import diagnostics as diag
from convsim.model.energy import DiffusionSolver, ThermalBoundaries, advection
from convsim.model.grid import Grid
from convsim.model.linsolve import LaggedFactorSolver, SolveReport, make_factorizer, available_factorizers
from convsim.model.nonlinear import LaggedLinear, solve_nonlinear, strain_rate_invariants
from convsim.model.nonlinear import linearised_flow as nonlinear_linearised
from convsim.model.rheology import ViscosityLaw, viscosity
from convsim.model.stepsize import GROWTH_LIMIT, StepSizeRule
from convsim.model.stokes import StokesOperator, TransformSolver, face_velocities

__all__ = ["ModelState", "StepReport", "Model", "MAX_REJECTIONS", "StepFailed"]

MAX_REJECTIONS = 6


@dataclass
class ModelState:
    """Everything needed to continue a run bit for bit (plain arrays and numbers)."""

    time: float
    step: int
    temperature: np.ndarray                 # (nz, nx) T^n
    psi: np.ndarray                         # (nz + 1, nx + 1) streamfunction of T^n
    previous_temperature: np.ndarray | None = None   # T^{n-1}
    previous_tendency: np.ndarray | None = None      # N^{n-1}, the explicit term
    previous_dt: float = 0.0
    factor_weights: np.ndarray | None = None         # viscosity weights of the Stokes factor


@dataclass
class StepReport:
    """Diagnostics of the state reached by one step, and what the step cost."""

    step: int
    time: float
    dt: float
    nusselt_top: float
    nusselt_bottom: float
    vrms: float
    surface_vrms: float
    mean_temperature: float
    energy_residual: float                 # heat budget misfit of the step (round-off)
    heat_imbalance: float                  # bottom inflow + heating - top outflow (0 when steady)
    tendency_max: float                    # max |T^{n+1} - T^n| / dt
    rejections: int = 0
    stokes_iterations: int = 0
    refactored: bool = False
    stokes_residual: float = 0.0           # ||b - A psi|| / ||b|| of the Stokes solve
    nonlinear_iterations: int = 0          # Picard/Newton steps of a yielding law (0: linear)
    nonlinear_residual: float = 0.0        # their final ||R|| / ||b||
    seconds: dict = field(default_factory=dict)   # wall time per phase


class StepFailed(RuntimeError):
    """The step could not be completed even with the smallest allowed time step."""


class Model:
    """Grid, operators and solvers of one convection problem, built from plain numbers.

    Parameters
    ----------
    grid : Grid
    rayleigh : float
    internal_heating : float
    thermal : ThermalBoundaries
    top_flow, bottom_flow : {'free-slip', 'no-slip'}
    law : ViscosityLaw
    advection_limiter : str
        A TVD limiter name, or 'upwind'.
    time_scheme : {'sbdf2', 'euler'}
    cfl, max_dt : float
    time_scale_fraction : float
        dt <= this fraction of the flow's time scale (see ``convsim.model.stepsize``); 0: off.
    stokes_solver : {'auto', 'transform', 'cholmod', 'superlu'}
    factor_reuse : {'adaptive', 'always'}
    nonlinear : tuple
        (method, rtol, max_iterations) of ``convsim.model.nonlinear.solve_nonlinear``, used
        when the law reads the strain rate.
    """

    def __init__(self, grid: Grid, rayleigh: float, thermal: ThermalBoundaries,
                 law: ViscosityLaw = ViscosityLaw(), internal_heating: float = 0.0,
                 top_flow: str = "free-slip", bottom_flow: str = "free-slip",
                 advection_limiter: str = "van-leer", time_scheme: str = "sbdf2",
                 cfl: float = 0.4, max_dt: float = 1e-2, stokes_solver: str = "auto",
                 factor_reuse: str = "adaptive", time_scale_fraction: float = 0.04,
                 nonlinear: tuple = ("newton", 1e-8, 50)):
        self.grid, self.rayleigh, self.thermal, self.law = grid, float(rayleigh), thermal, law
        self.internal_heating = float(internal_heating)
        self.limiter, self.time_scheme = advection_limiter, time_scheme
        self.cfl, self.max_dt = float(cfl), float(max_dt)
        self.step_size = StepSizeRule(self.cfl, self.max_dt, float(time_scale_fraction),
                                      GROWTH_LIMIT)
        self.stokes = StokesOperator(grid, top_flow, bottom_flow)
        self.diffusion = DiffusionSolver(grid, thermal)
        self._x_node, self._z_node = grid.node_mesh()
        self._z_cell = grid.cell_mesh()[1]
        transform_ok = law.is_constant and top_flow == bottom_flow == "free-slip"
        if stokes_solver == "auto":
            stokes_solver = "transform" if transform_ok else available_factorizers()[0]
        if stokes_solver == "transform":
            if not transform_ok:
                from convsim.errors import ConfigError
                raise ConfigError("numerics.stokes_solver = 'transform': needs constant viscosity "
                                  "and free-slip top and bottom; allowed here: 'auto', 'cholmod', "
                                  "'superlu'")
            self._transform = TransformSolver(self.stokes)
            self._lagged = None
        else:
            self._transform = None
            self._lagged = LaggedFactorSolver(make_factorizer(stokes_solver), factor_reuse)
        self.stokes_solver = stokes_solver
        self.nonlinear = tuple(nonlinear)

    # -- pieces -----------------------------------------------------------------------------
    def viscosities(self, T: np.ndarray, psi: np.ndarray | None = None
                    ) -> tuple[np.ndarray, np.ndarray]:
        """Viscosity at the nodes (nz + 1, nx + 1) and at the cell centres (nz, nx).

        A law that reads the strain rate takes it from the flow psi (None: no flow).
        """
        law_of_strain = self.viscosity_of_strain(T)
        if psi is None or not self.law.needs_strain_rate:
            return law_of_strain(None, None)
        return law_of_strain(*strain_rate_invariants(self.stokes, psi))

    def viscosity_of_strain(self, T: np.ndarray):
        """``(e_node, e_cell) -> (eta_node, eta_cell)``: the law at temperature T as a
        function of the strain-rate invariant (None: zero)."""
        tb, tt = diag.wall_temperatures(self.grid, T, self.thermal)
        tb_n = np.concatenate([tb[:1], 0.5 * (tb[1:] + tb[:-1]), tb[-1:]])
        tt_n = np.concatenate([tt[:1], 0.5 * (tt[1:] + tt[:-1]), tt[-1:]])
        t_node = self.grid.cell_to_node(T, tb_n, tt_n)
        return lambda e_node, e_cell: (viscosity(self.law, t_node, self._z_node, e_node),
                                       viscosity(self.law, T, self._z_cell, e_cell))

    def restore_factor(self, weights: np.ndarray | None) -> None:
        """Rebuild the Stokes factor a saved run was using (for a bit-for-bit restart)."""
        if weights is not None and self._lagged is not None:
            self._lagged.refactor(self.stokes.matrix_from_weights(weights), weights)

    def solve_flow(self, T: np.ndarray, psi_guess: np.ndarray | None = None
                   ) -> tuple[np.ndarray, SolveReport]:
        """Streamfunction (nz + 1, nx + 1) of the Stokes flow driven by T."""
        b = self.stokes.rhs(T, self.rayleigh)
        if self._transform is not None:
            t0 = time.perf_counter()
            x = self._transform.solve(b)
            return self.stokes.to_nodes(x), SolveReport(solve_seconds=time.perf_counter() - t0)
        x0 = None if psi_guess is None else self.stokes.from_nodes(psi_guess)
        if self.law.needs_strain_rate:
            method, rtol, most = self.nonlinear
            x, nl = solve_nonlinear(self.stokes, self.viscosity_of_strain(T), b, x0,
                                    LaggedLinear(self.stokes, self._lagged), method, rtol, most)
            return self.stokes.to_nodes(x), nl.solve_report()
        eta_n, eta_c = self.viscosities(T)
        weights = self.stokes.viscosity_weights(eta_n, eta_c)
        A = self.stokes.matrix_from_weights(weights)
        x, report = self._lagged.solve(A, b, x0, weights)
        return self.stokes.to_nodes(x), report

    def linearised_flow(self, T: np.ndarray, psi_guess: np.ndarray | None = None):
        """The streamfunction of T and its derivative with respect to T.

        Returns ``psi`` (nz + 1, nx + 1) and a function ``v -> dpsi`` giving the
        change of psi per unit change of T in direction v:
        A dpsi = Ra dv/dx - (dA/deta . deta/dT v) psi, solved with one factor of A(T)
        kept apart from the time stepper's (so restarts stay bit for bit).  Exact
        derivatives matter: a finite difference of two separately factorised solves
        would be swamped by their rounding (condition number ~ (n^4) x viscosity contrast).
        """
        op = self.stokes
        if self._transform is not None:
            psi = op.to_nodes(self._transform.solve(op.rhs(T, self.rayleigh)))
            return psi, lambda v: op.to_nodes(self._transform.solve(op.rhs(v, self.rayleigh)))
        if self.law.needs_strain_rate:
            x, derivative, _ = nonlinear_linearised(
                op, self.viscosity_of_strain, lambda v: op.rhs(v, self.rayleigh), T,
                None if psi_guess is None else op.from_nodes(psi_guess),
                make_factorizer(self.stokes_solver), min(self.nonlinear[1], 1e-9),
                self.nonlinear[2])
            return op.to_nodes(x), lambda v: op.to_nodes(derivative(v))
        factor = make_factorizer(self.stokes_solver)
        eta_n, eta_c = self.viscosities(T)
        factor.factor(self.stokes.matrix_from_weights(op.viscosity_weights(eta_n, eta_c)))
        x = factor.solve(op.rhs(T, self.rayleigh))

        def derivative(v):
            scale = float(np.abs(v).max())
            if scale == 0.0:
                return np.zeros(self.grid.node_shape)
            h = 1e-5 / scale
            up_n, up_c = self.viscosities(T + h * v)
            dn_n, dn_c = self.viscosities(T - h * v)
            dweights = op.viscosity_weights((up_n - dn_n) / (2 * h), (up_c - dn_c) / (2 * h))
            rhs = op.rhs(v, self.rayleigh) - self.stokes.matrix_from_weights(dweights) @ x
            return op.to_nodes(factor.solve(rhs))

        return op.to_nodes(x), derivative

    @property
    def factor_weights(self):
        return None if self._lagged is None else self._lagged.factored_weights

    def initial_state(self, T: np.ndarray, time_: float = 0.0, step: int = 0) -> ModelState:
        psi, _ = self.solve_flow(T)
        return ModelState(time=time_, step=step, temperature=T.copy(), psi=psi,
                          factor_weights=self.factor_weights)

    def explicit_term(self, T: np.ndarray, psi: np.ndarray) -> np.ndarray:
        """Explicit part N = -div(u T) + H, shape (nz, nx)."""
        u, w = face_velocities(self.grid, psi)
        return advection(self.grid, T, u, w, self.thermal, self.limiter) + self.internal_heating

    def courant_dt(self, psi: np.ndarray) -> float:
        """dt = cfl / (max|u|/dx + max|w|/dz), capped by max_dt."""
        u, w = face_velocities(self.grid, psi)
        return self.step_size.courant_dt(u, w, self.grid.dx, self.grid.dz)

    # -- the step ---------------------------------------------------------------------------
    def step(self, state: ModelState, dt_limit: float | None = None) -> tuple[ModelState, StepReport]:
        """Advance one step; returns the new state and its report (the input is not changed)."""
        timings = {}
        t0 = time.perf_counter()
        T, psi = state.temperature, state.psi
        N = self.explicit_term(T, psi)
        timings["advect"] = time.perf_counter() - t0
        u, w = face_velocities(self.grid, psi)
        before = (None if state.previous_tendency is None
                  else state.previous_tendency - self.internal_heating)
        dt = self.step_size.choose(u, w, self.grid.dx, self.grid.dz, N - self.internal_heating,
                                   before, state.previous_dt)
        if dt_limit is not None:
            dt = min(dt, dt_limit)
        use_sbdf2 = self.time_scheme == "sbdf2" and state.previous_temperature is not None
        rejections = 0
        while True:
            t0 = time.perf_counter()
            # a0 T^{n+1} - a1 T^n + a2 T^{n-1} = dt (explicit part + lap T^{n+1})
            if use_sbdf2:
                r = dt / state.previous_dt
                a0, a1, a2 = (1.0 + 2.0 * r) / (1.0 + r), 1.0 + r, r * r / (1.0 + r)
                rhs = (a1 * T - a2 * state.previous_temperature
                       + dt * ((1.0 + r) * N - r * state.previous_tendency))
            else:
                a0, a1, a2 = 1.0, 1.0, 0.0
                rhs = T + dt * N
            rhs = rhs + dt * self.diffusion.boundary_term
            T_new = self.diffusion.solve(a0, dt, rhs)
            timings["diffuse"] = time.perf_counter() - t0
            ok = bool(np.all(np.isfinite(T_new)))
            if ok:
                t0 = time.perf_counter()
                try:
                    psi_new, solve = self.solve_flow(T_new, psi)
                except ArithmeticError:     # the viscosity of a runaway field broke the factor
                    ok = False
                else:
                    timings["stokes"] = time.perf_counter() - t0
                    timings["factor"] = solve.factor_seconds
                    ok = bool(np.all(np.isfinite(psi_new))) and self._plausible(T, T_new)
            if ok:
                break
            rejections += 1
            if rejections > MAX_REJECTIONS:
                raise StepFailed(f"step {state.step + 1} at t = {state.time:.6g}: no finite, "
                                 f"bounded result down to dt = {dt:.3g}")
            dt *= 0.5
        t0 = time.perf_counter()
        previous_sum = state.previous_temperature.sum() if use_sbdf2 else 0.0
        heat_rate = ((a0 * T_new.sum() - a1 * T.sum() + a2 * previous_sum)
                     * self.grid.dx * self.grid.dz / dt)
        new = ModelState(time=state.time + dt, step=state.step + 1, temperature=T_new,
                         psi=psi_new, previous_temperature=T, previous_tendency=N,
                         previous_dt=dt, factor_weights=self.factor_weights)
        report = self.report(new, dt, heat_rate, rejections, solve)
        timings["diagnose"] = time.perf_counter() - t0
        report.seconds = timings
        return new, report

    def _plausible(self, T_old: np.ndarray, T_new: np.ndarray) -> bool:
        """Reject a step whose temperature change exceeds the whole temperature range."""
        span = max(float(T_old.max() - T_old.min()), 1e-12)
        return float(np.abs(T_new - T_old).max()) <= span

    def report(self, state: ModelState, dt: float, heat_rate: float, rejections: int = 0,
               solve: SolveReport | None = None) -> StepReport:
        g, T = self.grid, state.temperature
        nu_top, nu_bottom = diag.nusselt_numbers(g, T, self.thermal)
        change = (np.abs(T - state.previous_temperature).max() / dt
                  if state.previous_temperature is not None and dt > 0 else float("nan"))
        solve = solve or SolveReport()
        residual, imbalance = diag.heat_budget(g, heat_rate, T, self.thermal, self.internal_heating)
        return StepReport(
            step=state.step, time=state.time, dt=dt, nusselt_top=nu_top,
            nusselt_bottom=nu_bottom, vrms=diag.rms_velocity(g, state.psi),
            surface_vrms=diag.surface_rms_velocity(g, state.psi),
            mean_temperature=float(T.mean()),
            energy_residual=residual, heat_imbalance=imbalance,
            tendency_max=float(change), rejections=rejections,
            stokes_iterations=solve.iterations, refactored=solve.refactored,
            stokes_residual=solve.residual,
            nonlinear_iterations=solve.nonlinear_iterations,
            nonlinear_residual=solve.nonlinear_residual)

    def with_rayleigh(self, rayleigh: float) -> "Model":
        """The same model at another Rayleigh number (for continuation)."""
        other = object.__new__(Model)
        other.__dict__.update(self.__dict__)
        other.rayleigh = float(rayleigh)
        return other
