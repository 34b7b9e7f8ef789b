"""Steady states by pseudo-transient Newton-Krylov iteration on the discrete steady equations.

A steady state of the time stepper satisfies

    F(T) = -div(u(T) T) + lap T + H = 0,                                        (1)

with u(T) the Stokes velocity of T (a nonlocal, for variable viscosity nonlinear,
function of T).  Time stepping reaches it only as fast as the slowest mode
decays, at steps bounded by the Courant number; Newton's method on (1) reaches
it in a few iterations once the transient has brought the state near it.

Each pseudo-time step solves (I / delta - J) d = F with GMRES (see
``newton_steady``).  J v is the finite difference of the advective tendency
along v, with the velocity moved by the exact linearised Stokes response
(``Model.linearised_flow``), plus K v; it is preconditioned by the sparse local
part I / delta - (K - C(u)), the implicit diffusion matrix minus the first-order
upwind advection matrix at the current velocity (LU once per step).  The result
is the same discrete steady state the time stepper converges to (the same F),
reached faster; if the iteration does not converge, the caller goes back to
time stepping.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as sla

from convsim.model.energy import diffusion_matrix, upwind_matrix
from convsim.model.stokes import face_velocities

__all__ = ["NewtonReport", "newton_steady", "steady_residual"]

log = logging.getLogger(__name__)

ACCEPT_GROWTH = 10.0     # a pseudo-time step may raise ||F|| at most this much
MIN_GROWTH = 1.5         # delta grows at least this much after a step that lowered ||F||
FIRST_DELTA_STEPS = 50   # the first delta, in Courant time steps


@dataclass
class NewtonReport:
    converged: bool
    iterations: int
    residual_evaluations: int
    residual_max: float          # max |F| at the end
    history: list                # max |F| after each Newton step


def steady_residual(model, T: np.ndarray, psi_guess=None):
    """F(T) of equation (1), shape (nz, nx), and the streamfunction of T (NaN where T is unusable).

    A trial T of the Newton iteration may lie far outside [0, 1], where an exponential
    viscosity law overflows: such a T is judged by its non-finite residual, so the
    floating-point warnings of the evaluation are not shown.
    """
    if not np.all(np.isfinite(T)):
        return np.full_like(T, np.nan), psi_guess
    try:
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            psi, _ = model.solve_flow(T, psi_guess)
            return model.explicit_term(T, psi) + model.diffusion.apply(T), psi
    except ArithmeticError:
        return np.full_like(T, np.nan), psi_guess


def newton_steady(model, T0: np.ndarray, psi0: np.ndarray, tolerance: float,
                  max_iterations: int = 60, delta0: float | None = None,
                  gmres_restart: int = 40) -> tuple[np.ndarray, np.ndarray, NewtonReport]:
    """Pseudo-transient Newton-Krylov solve of F(T) = 0 from T0.

    Each iteration solves (I / delta - J) d = F(T) and sets T <- T + d: an implicit
    Euler step of pseudo-time size delta with the full Jacobian, buoyancy
    coupling included.  delta grows as the residual falls (switched evolution
    relaxation: delta_{k+1} = delta_k ||F_k|| / ||F_{k+1}||), so the iteration
    turns into Newton's method near the solution; a step that makes the residual
    non-finite or ten times larger is retried with a quarter of delta.

    Parameters
    ----------
    model : timestepping.Model
    T0, psi0 : starting temperature (nz, nx) and its streamfunction.
    tolerance : float
        Converged when max |F| <= tolerance.
    max_iterations : int
        Pseudo-time steps at most.
    delta0 : float, optional
        First pseudo-time step (default: FIRST_DELTA_STEPS Courant steps of the starting flow).

    Returns
    -------
    T, psi, NewtonReport
    """
    newton = _PseudoTransient(model, T0.shape, gmres_restart)
    T, psi = T0.copy(), psi0
    F, psi = steady_residual(model, T, psi)
    fmax = float(np.abs(F).max())
    delta = delta0 if delta0 is not None else FIRST_DELTA_STEPS * model.courant_dt(psi)
    for it in range(1, max_iterations + 1):
        if fmax <= tolerance:
            return T, psi, NewtonReport(True, it - 1, newton.evaluations, fmax, newton.history)
        if not np.isfinite(fmax):
            break
        step = newton.step(T, delta, psi)
        if step is None:
            log.info("newton: no acceptable pseudo-time step at iteration %d", it)
            break
        T, F, psi, delta, info = step
        fmax = float(np.abs(F).max())
        newton.history.append(fmax)
        log.info("newton %d: max|F| = %.3e, next pseudo-time step %.3g (gmres info %d)",
                 it, fmax, delta, info)
    converged = bool(fmax <= tolerance)
    return T, psi, NewtonReport(converged, len(newton.history), newton.evaluations, fmax,
                                newton.history)


class _PseudoTransient:
    """The pieces of one pseudo-transient Newton-Krylov iteration (see ``newton_steady``)."""

    def __init__(self, model, shape, gmres_restart: int):
        self.model, self.shape, self.gmres_restart = model, shape, gmres_restart
        self.K = diffusion_matrix(model.grid, model.thermal)
        self.identity = sp.identity(self.K.shape[0], format="csc")
        self.evaluations = 1            # the residual at the start
        self.history: list = []

    def _linearise(self, T, psi_guess=None):
        """F(T) (flat), the flow of T, the Jacobian-vector product and the local part
        K - C(u) of the Jacobian (the preconditioner)."""
        model, K = self.model, self.K
        psi, dflow = model.linearised_flow(T, psi_guess)
        base = model.explicit_term(T, psi)
        f = (base + model.diffusion.apply(T)).ravel()
        u, w = face_velocities(model.grid, psi)
        local = (K - upwind_matrix(model.grid, u, w)).tocsc()

        def jv(v):
            vv = v.reshape(self.shape)
            vn = float(np.abs(vv).max())
            if vn == 0.0:
                return np.zeros_like(v)
            eps = 1e-7 * (1.0 + float(np.abs(T).max())) / vn
            moved = model.explicit_term(T + eps * vv, psi + eps * dflow(vv))
            self.evaluations += 1
            return ((moved - base) / eps).ravel() + K @ v
        return f, psi, jv, local

    def _residual(self, T, psi):
        F, psi = steady_residual(self.model, T, psi)
        self.evaluations += 1
        return F, psi, float(np.linalg.norm(F))

    def step(self, T, delta: float, psi_guess=None):
        """One accepted pseudo-time step from T: (T, F, psi, next delta, gmres info), or None
        when six reductions of delta found no acceptable step."""
        f, psi, jv, local = self._linearise(T, psi_guess)
        fnorm = float(np.linalg.norm(f))
        n = f.size
        for _attempt in range(6):
            lu = sla.splu((self.identity / delta - local).tocsc())
            A = sla.LinearOperator((n, n), matvec=lambda v, d=delta: v / d - jv(v))
            M = sla.LinearOperator((n, n), matvec=lu.solve)
            d, info = sla.gmres(A, f, rtol=1e-3, atol=0.0, restart=self.gmres_restart,
                                maxiter=2, M=M)
            d = d.reshape(self.shape)
            T_try, (F_try, psi_try, norm_try) = T + d, self._residual(T + d, psi)
            if not norm_try <= fnorm:       # also try half the step; keep the better one
                F_half, psi_half, norm_half = self._residual(T + 0.5 * d, psi)
                if norm_half < norm_try:
                    T_try, F_try, psi_try, norm_try = T + 0.5 * d, F_half, psi_half, norm_half
            if np.isfinite(norm_try) and norm_try <= ACCEPT_GROWTH * fnorm:
                ratio = fnorm / max(norm_try, 1e-300)
                delta = min(delta * (max(ratio, MIN_GROWTH) if ratio > 1.0 else ratio), 1e12)
                return T_try, F_try, psi_try, delta, info
            delta *= 0.25
        return None
