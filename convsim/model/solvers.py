"""Stokes solvers behind one interface, chosen by name from one registry.

The model solves A(eta) x = b for the streamfunction unknowns x (see
``convsim.model.stokes``), with b = Ra (dT/dx) at the unknown nodes and A the
dissipation matrix of the viscosity eta(T).  Every solver implements

    solve(T, b, x0)        -> (x, SolveReport)    one flow solve for the field T
    linearised(T, rhs, x0) -> (x, dsolve)         x and dx = dsolve(v), the exact response
                                                  of x to T -> T + v (Newton); rhs: T -> b
    state() / restore(s)   what the solver caches (a factor), as plain arrays, so that a
                                                  restarted run repeats the uninterrupted
                                                  one bit for bit

and is looked up by name (the ``solve_ivp(method=...)`` pattern of SciPy):

- ``transform``: exact sine/Fourier solve, no factor; constant viscosity and free-slip
  top and bottom only (``TransformSolver``);
- ``cholmod``, ``superlu``: a fresh factor of A(eta(T)) at every new viscosity;
- ``lagged-cg``: the last factor preconditions conjugate gradients while it pays, and
  is renewed when CG needs more than 6 iterations or the iterations its age added reach
  the cost of a refactor (``LaggedFactorSolver``), over the
  fastest available factor back end (or the one named by ``backend``).

``make_stokes_solver("auto", problem)`` picks the transform solver where it applies,
otherwise the lagged-factor CG (``factor_reuse = "adaptive"``) or a fresh factor every
step (``"always"``) over the fastest back end.  An unknown name raises ``SolverError``
listing the valid ones; a solver that cannot handle the problem raises ``ConfigError``
saying why and which names can.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Callable

import numpy as np

from convsim.errors import ConfigError, SolverError
from convsim.model.choices import FACTOR_REUSE
from convsim.model.linsolve import (LaggedFactorSolver, SolveReport, available_factorizers,
                                    make_factorizer)
from convsim.model.nonlinear import LaggedLinear, solve_nonlinear
from convsim.model.nonlinear import linearised_flow as nonlinear_linearised
from convsim.model.stokes import StokesOperator, TransformSolver

__all__ = ["StokesProblem", "StokesSolver", "SOLVERS", "make_stokes_solver", "suitable_solvers"]

FD_STEP = 1e-5      # relative step of the central difference of eta(T) along v


@dataclass(frozen=True)
class StokesProblem:
    """What a Stokes solver needs to know about the problem.

    Attributes
    ----------
    operator : StokesOperator
        The assembled operator (pattern, value map, boundary conditions).
    viscosities : callable
        T (nz, nx) -> (eta at the nodes (nz + 1, nx + 1), eta at the cells (nz, nx)).
    uniform : bool
        The viscosity is 1 everywhere, whatever T (the law says so).
    strain_viscosity : callable or None
        For a law that reads the strain rate: ``T -> ((e_node, e_cell) -> (eta_node,
        eta_cell))``; the flow is then the nonlinear iteration of ``convsim.model.nonlinear``
        over the solver's factor.  None: the viscosity depends on T alone.
    nonlinear : tuple
        (method, rtol, max_iterations) of ``convsim.model.nonlinear.solve_nonlinear``.
    tolerance : float
        Relative residual ||b - A x|| / ||b|| a factor-based solve must reach (the CG target of
        the lagged factor, the refinement target of a fresh one).
    flow_error_tolerance : float
        The lagged factor's CG also stops once its estimate of the relative error of x in
        the dissipation norm is at most this (``convsim.model.linsolve._pcg``); 0: off.
    """

    operator: StokesOperator
    viscosities: Callable
    uniform: bool = False
    strain_viscosity: Callable | None = None
    nonlinear: tuple = ("newton", 1e-8, 50)
    tolerance: float = 1e-10
    flow_error_tolerance: float = 0.0

    def weights(self, T: np.ndarray) -> np.ndarray:
        """The viscosity weights of A(eta(T)) (``StokesOperator.viscosity_weights``)."""
        return self.operator.viscosity_weights(*self.viscosities(T))

    def weight_derivative(self, T: np.ndarray, v: np.ndarray, scale: float) -> np.ndarray:
        """d(weights)/dT along v, by a central difference of eta with step FD_STEP / scale."""
        h = FD_STEP / scale
        up_n, up_c = self.viscosities(T + h * v)
        dn_n, dn_c = self.viscosities(T - h * v)
        return self.operator.viscosity_weights((up_n - dn_n) / (2 * h), (up_c - dn_c) / (2 * h))


class StokesSolver:
    """Base class: the interface of every Stokes solver (see the module docstring)."""

    name = ""

    def __init__(self, problem: StokesProblem, **options):
        self.problem = problem

    @classmethod
    def unsuitable(cls, problem: StokesProblem) -> str:
        """Why this solver cannot handle the problem ('' when it can)."""
        return ""

    def solve(self, T: np.ndarray, b: np.ndarray, x0: np.ndarray | None = None
              ) -> tuple[np.ndarray, SolveReport]:
        raise NotImplementedError

    def linearised(self, T: np.ndarray, rhs: Callable, x0: np.ndarray | None = None):
        """x(T) and ``dsolve(v)``: the change of x per unit change of T along v.

        A dx = rhs(v) - (dA/deta . deta/dT v) x, solved with a factor of A(T) of its
        own, apart from the time stepper's (so the stepper's cache, and with it a
        restart, is not disturbed).  Exact derivatives matter: a finite difference
        of two separately factorised solves would be swamped by their rounding
        (condition number ~ n^4 x viscosity contrast).  A strain-rate law goes through
        ``convsim.model.nonlinear.linearised_flow`` (Newton Jacobian, GMRES).
        """
        p, op = self.problem, self.problem.operator
        if p.strain_viscosity is not None:
            x, derivative, _ = nonlinear_linearised(
                op, p.strain_viscosity, rhs, T, x0, make_factorizer(self._backend_name()),
                min(p.nonlinear[1], 1e-9), p.nonlinear[2])
            return x, derivative
        factor = make_factorizer(self._backend_name())
        factor.factor(op.matrix_from_weights(p.weights(T)))
        x = factor.solve(rhs(T))

        def dsolve(v):
            scale = float(np.abs(v).max())
            if scale == 0.0:
                return np.zeros(op.n_unknowns)
            dA = op.matrix_from_weights(p.weight_derivative(T, v, scale))
            return factor.solve(rhs(v) - dA @ x)

        return x, dsolve

    def _backend_name(self) -> str:
        return available_factorizers()[0]

    def state(self) -> dict:
        """What the solver caches, as {name: array} (empty: nothing)."""
        return {}

    def restore(self, state: dict) -> None:
        """Rebuild the cache from ``state()`` of a saved run."""


class TransformStokes(StokesSolver):
    """Exact transform solve for constant viscosity and free-slip top and bottom (no factor)."""

    name = "transform"

    def __init__(self, problem: StokesProblem, **options):
        super().__init__(problem)
        self._transform = TransformSolver(problem.operator)

    @classmethod
    def unsuitable(cls, problem: StokesProblem) -> str:
        op = problem.operator
        if not problem.uniform or not op.top == op.bottom == "free-slip":
            return "needs constant viscosity and free-slip top and bottom"
        if op.grid.stretched:
            return "needs a uniform grid (domain.wall_refinement = 0)"
        return ""

    def solve(self, T, b, x0=None):
        t0 = time.perf_counter()
        x = self._transform.solve(b)
        return x, SolveReport(solve_seconds=time.perf_counter() - t0)

    def linearised(self, T, rhs, x0=None):
        return self._transform.solve(rhs(T)), lambda v: self._transform.solve(rhs(v))


class FactoredStokes(StokesSolver):
    """A fresh factor of A(eta(T)) for every new viscosity (cholmod or superlu back end)."""

    backend = ""

    def __init__(self, problem: StokesProblem, **options):
        super().__init__(problem)
        self._lagged = LaggedFactorSolver(make_factorizer(self._backend_name()), "always",
                                          rtol=problem.tolerance)

    def _backend_name(self) -> str:
        return self.backend

    def solve(self, T, b, x0=None):
        p = self.problem
        if p.strain_viscosity is not None:        # a yielding law: iterate on the strain rate
            method, rtol, most = p.nonlinear
            x, report = solve_nonlinear(p.operator, p.strain_viscosity(T), b, x0,
                                        LaggedLinear(p.operator, self._lagged), method, rtol, most)
            return x, report.solve_report()
        weights = p.weights(T)
        A = p.operator.matrix_from_weights(weights)
        return self._lagged.solve(A, b, x0, weights)

    def state(self) -> dict:
        w = self._lagged.factored_weights
        if w is None:
            return {}
        counts = {f"factor_{k}": np.asarray(v) for k, v in self._lagged.counts().items()}
        return {"factor_weights": w, **counts}

    def restore(self, state: dict) -> None:
        w = state.get("factor_weights")
        if w is not None:
            w = np.asarray(w, dtype=float)
            self._lagged.refactor(self.problem.operator.matrix_from_weights(w), w)
            self._lagged.restore_counts({k[len("factor_"):]: state[k] for k in state
                                         if k.startswith("factor_") and k != "factor_weights"})


class CholmodStokes(FactoredStokes):
    name = backend = "cholmod"


class SuperLUStokes(FactoredStokes):
    name = backend = "superlu"


class LaggedCGStokes(FactoredStokes):
    """The last factor preconditions CG; refactored by the rules of ``LaggedFactorSolver``.

    Options: ``backend`` ('cholmod', 'superlu'; default the fastest available).
    """

    name = "lagged-cg"

    def __init__(self, problem: StokesProblem, backend: str | None = None, **options):
        StokesSolver.__init__(self, problem)
        self.backend = backend or available_factorizers()[0]
        self._lagged = LaggedFactorSolver(make_factorizer(self.backend), "adaptive",
                                          rtol=problem.tolerance,
                                          error_rtol=problem.flow_error_tolerance)


#: Every Stokes solver by name, in the order 'auto' prefers them.
SOLVERS = {cls.name: cls for cls in (TransformStokes, LaggedCGStokes, CholmodStokes, SuperLUStokes)}


def suitable_solvers(problem: StokesProblem) -> list[str]:
    """Names of the registered solvers that can handle the problem."""
    return [name for name, cls in SOLVERS.items() if not cls.unsuitable(problem)]


def make_stokes_solver(method: str | type = "auto", problem: StokesProblem | None = None,
                       factor_reuse: str = "adaptive") -> StokesSolver:
    """The Stokes solver of a name (or class) for a problem.

    Parameters
    ----------
    method : 'auto', a name of ``SOLVERS``, or a ``StokesSolver`` subclass
        'auto' picks 'transform' where it applies, otherwise the fastest back end,
        lagged as a CG preconditioner (factor_reuse 'adaptive') or refactored at
        every new viscosity ('always').  A factor back end named with
        factor_reuse 'adaptive' is used under the lagged-factor CG.
    problem : StokesProblem
    factor_reuse : {'adaptive', 'always'}
    """
    if factor_reuse not in FACTOR_REUSE:
        raise SolverError(f"factor_reuse = {factor_reuse!r}: allowed {', '.join(FACTOR_REUSE)}")
    if isinstance(method, type):
        return method(problem)
    if method == "auto":
        if not TransformStokes.unsuitable(problem):
            return TransformStokes(problem)
        method = available_factorizers()[0]
    if method not in SOLVERS:
        raise SolverError(f"stokes solver {method!r}: unknown; allowed: auto, {', '.join(SOLVERS)}")
    cls = SOLVERS[method]
    reason = cls.unsuitable(problem)
    if reason:
        raise ConfigError(f"numerics.stokes_solver = {method!r}: {reason}; allowed here: 'auto', "
                          + ", ".join(repr(n) for n in suitable_solvers(problem)))
    if issubclass(cls, FactoredStokes) and cls is not LaggedCGStokes and factor_reuse == "adaptive":
        return LaggedCGStokes(problem, backend=method)
    return cls(problem)
