"""The coupled model and its time step.

One step, from the state (f^n for every advected field f, psi^n) at time t_n
(psi^n already solved from the fields at t_n; see ``convsim.model.fields``):

1. explicit term N_f^n = -div(u^n f^n) + S_f for every field (``energy.advection``,
   the numba TVD kernel; S_f the uniform source, the internal heating H for T; the
   tendency dT/dt is the whole right side, its largest value ``StepReport.tendency_max``);
2. dt from ``convsim.model.stepsize.StepSizeRule``: the Courant number of u^n,
   ``max_dt``, a growth of at most 25 % over the previous step, and a fraction of the
   time scale on which the advective part of the temperature's N changes;
3. implicit-explicit update of every field (diffusion implicit, advection and
   sources explicit).  Second-order SBDF with step ratio r = dt_n / dt_{n-1} (w is the
   vertical velocity):

       (1+2r)/(1+r) f^{n+1} - (1+r) f^n + r^2/(1+r) f^{n-1}
           = dt_n [ (1+r) N^n - r N^{n-1} + kappa_f lap f^{n+1} ],

   or first-order IMEX Euler, f^{n+1} - f^n = dt (N^n + kappa_f lap f^{n+1}) (also
   the first step of SBDF2).  Both have the coefficients of f summing to zero and
   the explicit weights summing to one, so a steady state satisfies
   N + kappa_f lap f = 0 whatever the step size: there is no splitting error.  A
   field with kappa_f = 0 needs no solve; its total is conserved to round-off in an
   insulated box, as the advective fluxes telescope;
4. viscosity from T^{n+1}, then the Stokes solve for psi^{n+1} (buoyancy from every
   field that declares some);
5. checks: a non-finite field or a runaway temperature rejects the step, which is
   retried with half the time step (up to ``MAX_REJECTIONS`` times); then the run is
   declared diverged and the previous state is kept.

The time loop itself belongs to ``convsim.run.controller``.
"""

from __future__ import annotations

import time
from dataclasses import field, make_dataclass
from typing import NamedTuple

import numpy as np

from convsim.model import diagnostics as diag
from convsim.model.energy import AdvectionKernels, DiffusionSolver, ThermalBoundaries, advection
from convsim.model.fields import FieldDeclaration, temperature_field
from convsim.model.grid import Grid
from convsim.model.linsolve import SolveReport
from convsim.model.nonlinear import strain_rate_invariants
from convsim.model.plates import yield_fields, yields
from convsim.model.rheology import ViscosityLaw, viscosity
from convsim.model.solvers import StokesProblem, make_stokes_solver
from convsim.model.state import ModelState, from_record, to_record
from convsim.model.stepsize import GROWTH_LIMIT, StepSizeRule
from convsim.model.stokes import StokesOperator, face_velocities

__all__ = ["ModelState", "StepReport", "Model", "MAX_REJECTIONS", "StepFailed"]

MAX_REJECTIONS = 6


StepReport = make_dataclass(
    "StepReport",
    [("step", int), ("time", float), ("dt", float)]
    + [(name, float, field(default=float("nan"))) for name in diag.DIAGNOSTICS]
    + [("rejections", int, 0), ("refactored", bool, False),
       ("seconds", dict, field(default_factory=dict))])
StepReport.__doc__ = """Diagnostics of the state reached by one step, and what the step cost.

Fields: ``step``, ``time``, ``dt``; one per declared diagnostic
(``convsim.model.diagnostics.DIAGNOSTICS``: nusselt_top, nusselt_bottom, vrms, ...; NaN
where a declaration does not apply to the run, e.g. the yielding ones);
``rejections`` (halvings of dt), ``refactored`` (the Stokes factor was renewed) and
``seconds`` (wall time per phase: advect, diffuse, stokes, factor, diagnose).
"""
StepReport.__module__ = __name__


class StepFailed(RuntimeError):
    """The step could not be completed even with the smallest allowed time step."""


class Imex(NamedTuple):
    """Coefficients of one IMEX update a0 f^{n+1} - dt kappa lap f^{n+1} = rhs with
    rhs = a1 f^n - a2 f^{n-1} + dt (b1 N^n - b2 N^{n-1}); ``history`` False: the
    f^{n-1}, N^{n-1} terms are absent (IMEX Euler)."""

    a0: float
    a1: float
    a2: float
    b1: float
    b2: float
    history: bool


def imex_coefficients(scheme: str, dt: float, previous_dt: float, has_history: bool) -> Imex:
    """SBDF2 with step ratio r = dt / previous_dt, or IMEX Euler (first step, or 'euler')."""
    if scheme == "sbdf2" and has_history:
        r = dt / previous_dt
        return Imex((1.0 + 2.0 * r) / (1.0 + r), 1.0 + r, r * r / (1.0 + r), 1.0 + r, r, True)
    return Imex(1.0, 1.0, 0.0, 1.0, 0.0, False)


def flow_guess(state: ModelState, dt: float, order: int = 2) -> np.ndarray:
    """Start of the next flow solve: psi extrapolated in time to t_n + dt (order 1 or 2).

    With psi at t_n, t_(n-1), t_(n-2) (steps h1 = t_n - t_(n-1), h2 = t_(n-1) - t_(n-2)):
    the quadratic through the three (Lagrange form),

        psi^n (dt + h1)(dt + h1 + h2) / (h1 (h1 + h2)) - psi^(n-1) dt (dt + h1 + h2) / (h1 h2)
        + psi^(n-2) dt (dt + h1) / (h2 (h1 + h2)),

    (3, -3, 1 for equal steps: error O(dt^3)); with two (or ``order`` 1), the line through
    them; with one, psi^n itself.
    """
    h1 = state.previous_dt
    if state.previous_psi is None or h1 <= 0.0:
        return state.psi
    h2 = state.earlier_dt
    if order < 2 or state.earlier_psi is None or h2 <= 0.0:
        return state.psi + (dt / h1) * (state.psi - state.previous_psi)
    span = h1 + h2
    return ((dt + h1) * (dt + span) / (h1 * span) * state.psi
            - dt * (dt + span) / (h1 * h2) * state.previous_psi
            + dt * (dt + h1) / (h2 * span) * state.earlier_psi)


class Model:
    """Grid, operators and solvers of one convection problem, built from plain numbers.

    Parameters
    ----------
    grid : Grid
    rayleigh : float
    thermal : ThermalBoundaries
    law : ViscosityLaw
    internal_heating : float
    top_flow, bottom_flow : {'free-slip', 'no-slip'}
    advection_limiter : str
        A TVD limiter name, or 'upwind'.
    time_scheme : {'sbdf2', 'euler'}
    cfl, max_dt : float
    time_scale_fraction : float
        dt <= this fraction of the flow's time scale (see ``convsim.model.stepsize``); 0: off.
    stokes_solver : 'auto' or a name of ``convsim.model.solvers.SOLVERS``
    factor_reuse : {'adaptive', 'always'}
        For a factor back end: lag the factor as a CG preconditioner, or refactor.
    nonlinear : tuple
        (method, rtol, max_iterations) of ``convsim.model.nonlinear.solve_nonlinear``, used
        when the law reads the strain rate.
    fields : sequence of FieldDeclaration
        Advected fields besides the temperature (a dye), each with its ``start``.
    stokes_tolerance : float
        Relative residual of every factor-based flow solve (``StokesProblem.tolerance``).
        A step's solve starts from psi extrapolated in time from the last three steps
        (``flow_guess``), so a looser target costs fewer CG iterations.
    flow_error_tolerance : float
        The lagged-factor CG also stops when its estimate of the flow's relative error in the
        dissipation norm is at most this (``StokesProblem.flow_error_tolerance``); 0: off.
        With it on, the flow solve starts from the quadratic extrapolation (which makes one
        CG iteration enough); with it off (a steady run, solved to its residual target
        whatever the start) from the linear one, as measured and tested before the quadratic
        one existed: the pseudo-transient path of case 2b is sensitive to the round-off of
        its flows (measured: the quadratic start sends 80 x 32 to another steady state).
    """

    def __init__(self, grid: Grid, rayleigh: float, thermal: ThermalBoundaries,
                 law: ViscosityLaw = ViscosityLaw(), internal_heating: float = 0.0,
                 top_flow: str = "free-slip", bottom_flow: str = "free-slip",
                 advection_limiter: str = "van-leer", time_scheme: str = "sbdf2",
                 cfl: float = 0.4, max_dt: float = 1e-2, stokes_solver: str = "auto",
                 factor_reuse: str = "adaptive", time_scale_fraction: float = 0.04,
                 nonlinear: tuple = ("newton", 1e-8, 50), fields=(),
                 stokes_tolerance: float = 1e-10, flow_error_tolerance: float = 0.0):
        self.grid, self.rayleigh, self.thermal, self.law = grid, float(rayleigh), thermal, law
        self.internal_heating = float(internal_heating)
        self.limiter, self.time_scheme = advection_limiter, time_scheme
        self._kernels = AdvectionKernels(grid.nx * grid.nz)
        self.cfl, self.max_dt = float(cfl), float(max_dt)
        self.step_size = StepSizeRule(self.cfl, self.max_dt, float(time_scale_fraction),
                                      GROWTH_LIMIT)
        self.fields = (temperature_field(thermal, internal_heating),) + tuple(fields)
        names = [f.name for f in self.fields]
        if len(set(names)) != len(names):
            raise ValueError(f"advected fields {names}: each name once")
        self.stokes = StokesOperator(grid, top_flow, bottom_flow)
        self.diffusion = DiffusionSolver(grid, thermal)
        self._diffusion = {f.name: (self.diffusion if f.name == "temperature"
                                    else DiffusionSolver(grid, f.boundaries))
                           for f in self.fields if f.diffusivity > 0.0}
        self._x_node, self._z_node = grid.node_mesh()
        self._z_cell = grid.cell_mesh()[1]
        self.nonlinear = tuple(nonlinear)
        problem = StokesProblem(
            self.stokes, self.viscosities, uniform=law.is_constant,
            strain_viscosity=self.viscosity_of_strain if law.needs_strain_rate else None,
            nonlinear=self.nonlinear, tolerance=float(stokes_tolerance),
            flow_error_tolerance=float(flow_error_tolerance))
        self.flow_solver = make_stokes_solver(stokes_solver, problem, factor_reuse)
        self.stokes_solver = self.flow_solver.name
        self._guess_order = 2 if flow_error_tolerance > 0.0 else 1

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

    def buoyancy(self, fields: dict) -> np.ndarray:
        """sum_f buoyancy_f f over the declared fields: the field whose x-derivative, times Ra,
        drives the flow (the temperature alone unless another field declares buoyancy)."""
        total = None
        for f in self.fields:
            if f.buoyancy != 0.0:
                term = fields[f.name] if f.buoyancy == 1.0 else f.buoyancy * fields[f.name]
                total = term if total is None else total + term
        return np.zeros(self.grid.cell_shape) if total is None else total

    def solve_flow(self, T: np.ndarray, psi_guess: np.ndarray | None = None,
                   fields: dict | None = None) -> tuple[np.ndarray, SolveReport]:
        """Streamfunction (nz + 1, nx + 1) of the Stokes flow: viscosity from T, buoyancy
        from ``fields`` (every advected field by name) or from T alone."""
        op = self.stokes
        x0 = None if psi_guess is None else op.from_nodes(psi_guess)
        driving = T if fields is None else self.buoyancy(fields)
        x, report = self.flow_solver.solve(T, op.rhs(driving, self.rayleigh), x0)
        return op.to_nodes(x), report

    def linearised_flow(self, T: np.ndarray, psi_guess: np.ndarray | None = None):
        """The streamfunction of T and its derivative with respect to T.

        Returns ``psi`` (nz + 1, nx + 1) and a function ``v -> dpsi`` giving the
        change of psi per unit change of T in direction v:
        A dpsi = Ra dv/dx - (dA/deta . deta/dT v) psi (``StokesSolver.linearised``).
        """
        op = self.stokes
        x0 = None if psi_guess is None else op.from_nodes(psi_guess)
        x, dsolve = self.flow_solver.linearised(T, lambda v: op.rhs(v, self.rayleigh), x0)
        return op.to_nodes(x), lambda v: op.to_nodes(dsolve(v))

    # -- states -----------------------------------------------------------------------------
    def initial_state(self, T: np.ndarray, time_: float = 0.0, step: int = 0, *,
                      others: dict | None = None, psi: np.ndarray | None = None,
                      psi_guess: np.ndarray | None = None) -> ModelState:
        """The state of temperature T with no history (a start, or after a jump).

        The other advected fields come from ``others`` or from their declared ``start``;
        the flow ``psi`` is solved (from ``psi_guess`` where the solver iterates) unless given.
        """
        others = others or {}
        fields = {"temperature": T.copy()}
        for f in self.fields[1:]:
            fields[f.name] = (np.array(others[f.name], dtype=float) if f.name in others
                              else f.initial(self.grid))
        if psi is None:
            psi, _ = self.solve_flow(T, psi_guess, fields)
        return ModelState(time=time_, step=step, fields=fields, psi=psi,
                          solver=self.flow_solver.state())

    def jump(self, state: ModelState, temperature: np.ndarray | None = None,
             psi: np.ndarray | None = None) -> ModelState:
        """The state with its history dropped (after Newton, or a new Rayleigh number):
        the temperature replaced if given, the flow re-solved unless given."""
        T = state.temperature if temperature is None else temperature
        return self.initial_state(T, state.time, state.step, others=state.fields, psi=psi,
                                  psi_guess=state.psi)

    def restart_record(self, state: ModelState) -> dict:
        """The state as a flat {name: array or number} for the run file's restart group."""
        return to_record(state)

    def resume(self, record: dict) -> ModelState:
        """The state of ``restart_record``, with the Stokes solver's cache rebuilt (bit for bit)."""
        state = from_record(record, [f.name for f in self.fields])
        self.flow_solver.restore(state.solver)
        return state

    def explicit_term(self, T: np.ndarray, psi: np.ndarray) -> np.ndarray:
        """Explicit part of the temperature equation N = -div(u T) + H, shape (nz, nx)."""
        u, w = face_velocities(self.grid, psi)
        return self._explicit_term_of(self.fields[0], T, u, w)

    def _explicit_term_of(self, f: FieldDeclaration, values, u, w) -> np.ndarray:
        """N_f = -div(u f) + S_f for one declared field, shape (nz, nx)."""
        return advection(self.grid, values, u, w, f.boundaries, self.limiter,
                         self._kernels.pick()) + f.source

    def courant_dt(self, psi: np.ndarray) -> float:
        """dt = cfl / (max|u|/dx + max|w|/dz), capped by max_dt."""
        u, w = face_velocities(self.grid, psi)
        return self.step_size.courant_dt(u, w, self.grid.dx, self.grid.dz_step)

    # -- the step ---------------------------------------------------------------------------
    def _advance(self, f: FieldDeclaration, state: ModelState, N: dict, c: Imex, dt: float):
        """f^{n+1} of one field by the IMEX update ``c`` (module docstring, item 3)."""
        name = f.name
        if c.history:
            rhs = (c.a1 * state.fields[name] - c.a2 * state.previous[name]
                   + dt * (c.b1 * N[name] - c.b2 * state.previous_explicit[name]))
        else:
            rhs = state.fields[name] + dt * N[name]
        if f.diffusivity == 0.0:
            return rhs / c.a0 if c.history else rhs
        solver, k_dt = self._diffusion[name], dt * f.diffusivity
        return solver.solve(c.a0, k_dt, rhs + k_dt * solver.boundary_term)

    def _try_step(self, state: ModelState, N: dict, dt: float, timings: dict):
        """(c, new fields, psi, SolveReport) of one attempt at dt, or None when it is rejected."""
        t0 = time.perf_counter()
        c = imex_coefficients(self.time_scheme, dt, state.previous_dt, state.previous is not None)
        new = {f.name: self._advance(f, state, N, c, dt) for f in self.fields}
        timings["diffuse"] = time.perf_counter() - t0
        if not all(np.all(np.isfinite(v)) for v in new.values()):
            return None
        t0 = time.perf_counter()
        try:
            psi, solve = self.solve_flow(new["temperature"],
                                         flow_guess(state, dt, self._guess_order), new)
        except ArithmeticError:         # the viscosity of a runaway field broke the factor
            return None
        timings["stokes"] = time.perf_counter() - t0
        timings["factor"] = solve.factor_seconds
        if not (np.all(np.isfinite(psi)) and self._plausible(state.temperature, new["temperature"])):
            return None
        return c, new, psi, solve

    def step(self, state: ModelState, dt_limit: float | None = None) -> tuple[ModelState, StepReport]:
        """Advance one step; returns the new state and its report (the input is not changed)."""
        timings = {}
        t0 = time.perf_counter()
        u, w = face_velocities(self.grid, state.psi)
        N = {f.name: self._explicit_term_of(f, state.fields[f.name], u, w) for f in self.fields}
        timings["advect"] = time.perf_counter() - t0
        H = self.internal_heating
        before = (None if state.previous_explicit is None
                  else state.previous_explicit["temperature"] - H)
        dt = self.step_size.choose(u, w, self.grid.dx, self.grid.dz_step, N["temperature"] - H,
                                   before, state.previous_dt)
        if dt_limit is not None:
            dt = min(dt, dt_limit)
        rejections = 0
        while (attempt := self._try_step(state, N, dt, timings)) is None:
            rejections += 1
            if rejections > MAX_REJECTIONS:
                raise StepFailed(f"step {state.step + 1} at t = {state.time:.6g}: no finite, "
                                 f"bounded result down to dt = {dt:.3g}")
            dt *= 0.5
        c, fields, psi_new, solve = attempt
        t0 = time.perf_counter()
        T, T_new = state.temperature, fields["temperature"]
        heat_rate = self._heat_rate(c, T_new, T, state.previous["temperature"] if c.history
                                    else None, dt)
        new = ModelState(time=state.time + dt, step=state.step + 1, fields=fields, psi=psi_new,
                         previous=state.fields, previous_explicit=N, previous_dt=dt,
                         solver=self.flow_solver.state(), previous_psi=state.psi,
                         earlier_psi=state.previous_psi, earlier_dt=state.previous_dt)
        report = self.report(new, dt, heat_rate, rejections, solve)
        timings["diagnose"] = time.perf_counter() - t0
        report.seconds = timings
        return new, report

    def _heat_rate(self, c: Imex, T_new, T, T_previous, dt: float) -> float:
        """d/dt of the heat content by the step's own IMEX difference (cell sums x areas)."""
        g = self.grid
        if g.stretched:
            before = g.integral(T_previous) if T_previous is not None else 0.0
            return (c.a0 * g.integral(T_new) - c.a1 * g.integral(T) + c.a2 * before) / dt
        previous_sum = T_previous.sum() if T_previous is not None else 0.0
        return (c.a0 * T_new.sum() - c.a1 * T.sum() + c.a2 * previous_sum) * g.dx * g.dz / dt

    def _plausible(self, T_old: np.ndarray, T_new: np.ndarray) -> bool:
        """Reject a step whose temperature change exceeds the whole temperature range."""
        span = max(float(T_old.max() - T_old.min()), 1e-12)
        return float(np.abs(T_new - T_old).max()) <= span

    def report(self, state: ModelState, dt: float, heat_rate: float, rejections: int = 0,
               solve: SolveReport | None = None) -> StepReport:
        """The declared diagnostics of the state a step of size dt reached."""
        solve = solve or SolveReport()
        previous = None if state.previous is None else state.previous["temperature"]
        sample = diag.Sample(self.grid, self.thermal, self.internal_heating, state.temperature,
                             state.psi, previous, dt, heat_rate, solve, self._plates_of(state))
        return StepReport(step=state.step, time=state.time, dt=dt, **diag.evaluate(sample),
                          rejections=rejections, refactored=solve.refactored)

    def diagnostics(self, state: ModelState) -> dict:
        """The declared diagnostics that depend on the state alone (a final state, a jump)."""
        sample = diag.Sample(self.grid, self.thermal, self.internal_heating, state.temperature,
                             state.psi, plates=self._plates_of(state))
        return diag.evaluate(sample, state_only=True)

    @property
    def yields(self) -> bool:
        """Whether the law yields (its yielding modifier is active)."""
        return yields(self.law)

    def diagnostic_names(self) -> list[str]:
        """The declared diagnostics that apply to this model (``diagnostics.applicable``)."""
        return diag.applicable(self.yields)

    def yield_fields(self, state: ModelState):
        """Strain rate, stress, viscosity and yielded mask of the state, at the cells
        (``convsim.model.plates.YieldFields``)."""
        return yield_fields(self.stokes, self.law, state.temperature, self._z_cell, state.psi)

    def _plates_of(self, state: ModelState):
        return (lambda: self.yield_fields(state)) if self.yields else None

    def with_rayleigh(self, rayleigh: float) -> "Model":
        """The same model at another Rayleigh number (for continuation)."""
        other = object.__new__(Model)
        other.__dict__.update(self.__dict__)
        other.rayleigh = float(rayleigh)
        return other
