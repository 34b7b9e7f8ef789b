"""Steady states by Newton-Krylov iteration on the discrete steady equations.

A steady state of the time stepper satisfies

    F(T) = -div(u(T) T) + lap T + H = 0,                                        (1)

with u(T) the Stokes velocity of T (a nonlocal, for variable viscosity nonlinear,
function of T).  Time stepping reaches it only as fast as the slowest mode
decays, at steps bounded by the Courant number; Newton's method on (1) reaches
it in a few iterations once the transient has brought the state near it.

Each Newton step solves J d = -F with GMRES; J v is approximated by the finite
difference (F(T + e v) - F(T)) / e (one Stokes solve each), preconditioned by
the sparse local part J0 = K - C(u), the implicit diffusion matrix minus the
first-order upwind advection matrix at the current velocity (LU once per
Newton step).  A backtracking line search on ||F||_2 guards the step.  The
result is the same discrete steady state the time stepper converges to (the
same F), reached faster; if the iteration does not converge, the caller goes
back to time stepping.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass

import numpy as np
import scipy.sparse.linalg as sla

from .energy import diffusion_matrix, upwind_matrix
from .stokes import face_velocities

__all__ = ["NewtonReport", "newton_steady", "steady_residual"]

log = logging.getLogger(__name__)


@dataclass
class NewtonReport:
    converged: bool
    iterations: int
    residual_evaluations: int
    residual_max: float          # max |F| at the end
    history: list                # max |F| after each Newton step


def steady_residual(model, T: np.ndarray, psi_guess=None):
    """F(T) of equation (1), shape (nz, nx), and the streamfunction of T."""
    psi, _ = model.solve_flow(T, psi_guess)
    return model.tendency(T, psi) + model.diffusion.apply(T), psi


def newton_steady(model, T0: np.ndarray, psi0: np.ndarray, tolerance: float,
                  max_iterations: int = 12, gmres_restart: int = 40) -> tuple[np.ndarray, np.ndarray, NewtonReport]:
    """Newton-Krylov solve of F(T) = 0 from T0.

    Parameters
    ----------
    model : timestepping.Model
    T0, psi0 : starting temperature (nz, nx) and its streamfunction.
    tolerance : float
        Converged when max |F| <= tolerance.
    max_iterations : int
        Newton steps at most.

    Returns
    -------
    T, psi, NewtonReport
    """
    K = diffusion_matrix(model.grid, model.thermal)
    shape = T0.shape
    T, psi = T0.copy(), psi0
    F, psi = steady_residual(model, T, psi)
    evaluations = 1
    history = []
    fmax = float(np.abs(F).max())
    for it in range(1, max_iterations + 1):
        if fmax <= tolerance:
            return T, psi, NewtonReport(True, it - 1, evaluations, fmax, history)
        u, w = face_velocities(model.grid, psi)
        lu = sla.splu((K - upwind_matrix(model.grid, u, w)).tocsc())
        f = F.ravel()
        fnorm = np.linalg.norm(f)
        scale = 1.0 + np.linalg.norm(T)

        def jv(v, T=T, f=f, psi=psi):
            nonlocal evaluations
            vn = np.linalg.norm(v)
            if vn == 0.0:
                return np.zeros_like(v)
            eps = 1e-7 * scale / vn
            Fp, _ = steady_residual(model, T + eps * v.reshape(shape), psi)
            evaluations += 1
            return (Fp.ravel() - f) / eps

        n = f.size
        J = sla.LinearOperator((n, n), matvec=jv)
        M = sla.LinearOperator((n, n), matvec=lu.solve)
        forcing = min(1e-2, max(1e-6, fnorm / (1.0 + np.linalg.norm(T)) ))
        d, info = sla.gmres(J, -f, rtol=forcing, atol=0.0, restart=gmres_restart, maxiter=3, M=M)
        step = 1.0
        for _ in range(8):
            T_try = T + step * d.reshape(shape)
            F_try, psi_try = steady_residual(model, T_try, psi)
            evaluations += 1
            if np.all(np.isfinite(F_try)) and np.linalg.norm(F_try) < (1.0 - 1e-4 * step) * fnorm:
                break
            step *= 0.5
        else:
            log.info("newton: no decrease along the step at iteration %d", it)
            return T, psi, NewtonReport(False, it, evaluations, fmax, history)
        T, F, psi = T_try, F_try, psi_try
        fmax = float(np.abs(F).max())
        history.append(fmax)
        log.info("newton %d: max|F| = %.3e (step %.3g, gmres info %d)", it, fmax, step, info)
    converged = fmax <= tolerance
    return T, psi, NewtonReport(converged, max_iterations, evaluations, fmax, history)
