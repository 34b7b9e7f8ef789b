"""Sparse symmetric positive definite solves for the Stokes matrix: a front door and a registry.

``solve_spd(A, b, method="superlu")`` is the one-shot front door; ``FACTORIZERS``
maps back-end names to classes with ``factor(A)`` and ``solve(b)``.  An unknown
name raises ``SolverError`` listing the valid ones.

- ``superlu``: scipy's SuperLU (always available), minimum-degree ordering on
  A^T + A and symmetric mode, which roughly halves the fill against the default.
- ``cholmod``: the supernodal Cholesky of SuiteSparse through cvxopt's wheel;
  the symbolic analysis is done once per sparsity pattern and reused.

``LaggedFactorSolver`` reuses an old factor as the preconditioner of conjugate
gradients while the viscosity changes slowly, and refactors when the iteration
counts say the old factor no longer pays (deterministic rules on counts, kept in the
solver's state, so a restarted run repeats the uninterrupted one bit for bit).
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as sla

from convsim.allocator import release_freed_memory
from convsim.errors import SolverError
from convsim.model.choices import FACTOR_REUSE
from convsim.threads import reapply_limit

__all__ = ["FACTORIZERS", "limit_blas_threads", "available_factorizers", "make_factorizer", "solve_spd",
           "LaggedFactorSolver", "SolveReport"]


class SuperLUFactorizer:
    """LU of a symmetric matrix by SuperLU, minimum degree on A^T + A, symmetric mode."""

    name = "superlu"

    def __init__(self):
        self._lu = None

    def factor(self, A: sp.spmatrix) -> None:
        self._lu = sla.splu(sp.csc_matrix(A), permc_spec="MMD_AT_PLUS_A",
                            options=dict(SymmetricMode=True))

    def solve(self, b: np.ndarray) -> np.ndarray:
        return self._lu.solve(b)


class CholmodFactorizer:
    """Supernodal Cholesky (SuiteSparse CHOLMOD, via cvxopt); analysis reused per pattern."""

    name = "cholmod"

    def __init__(self):
        try:
            import cvxopt
            import cvxopt.cholmod
        except ImportError as exc:  # pragma: no cover - depends on the installation
            raise SolverError("stokes_solver = 'cholmod': cvxopt is not installed; "
                              "allowed: 'superlu', or pip install cvxopt") from exc
        self._cvxopt = cvxopt
        self._cholmod = cvxopt.cholmod
        reapply_limit()          # cvxopt loads a BLAS of its own: same limit as the run
        self._cholmod.options["supernodal"] = 2
        self._symbolic = None
        self._pattern = None        # (indptr, indices) of the A the analysis belongs to
        self._upper = None          # positions of A's upper triangle in A.data
        self._matrix = None         # the lower triangle as a cvxopt matrix (values refilled)

    def factor(self, A: sp.spmatrix) -> None:
        """Factor A; the symbolic analysis and the cvxopt matrix are kept per sparsity pattern.

        The lower triangle in compressed-column order is the upper triangle of the
        symmetric A in CSR order, so a refactor only gathers A's values at fixed
        positions into the kept matrix (no triplet lists, no re-sorting).  The pattern
        is recognised by identity first (the Stokes operator hands out the same index
        arrays every time), by value otherwise; the temporaries of a new pattern are
        freed, and the freed heap handed back to the system (``convsim.allocator``), before
        the numeric factorisation, the largest allocation of a run.
        """
        A = sp.csr_matrix(A)
        A.sort_indices()
        if not self._same_pattern(A):
            self._analyse(A)
        else:
            self._matrix.V = self._cvxopt.matrix(A.data[self._upper])
        self._cholmod.numeric(self._matrix, self._symbolic)

    def _same_pattern(self, A: sp.csr_matrix) -> bool:
        if self._pattern is None:
            return False
        indptr, indices = self._pattern
        if _same_memory(A.indptr, indptr) and _same_memory(A.indices, indices):
            return True
        return np.array_equal(A.indptr, indptr) and np.array_equal(A.indices, indices)

    def _analyse(self, A: sp.csr_matrix) -> None:
        """The kept lower-triangle matrix and the symbolic analysis of a new pattern."""
        cvx = self._cvxopt
        self._matrix = self._symbolic = None
        rows = np.repeat(np.arange(A.shape[0], dtype=np.int32), np.diff(A.indptr))
        upper = np.flatnonzero(A.indices >= rows).astype(np.int32)
        columns = cvx.matrix(rows[upper].astype(np.int64))
        del rows
        self._upper = upper
        self._matrix = cvx.spmatrix(cvx.matrix(A.data[upper]),
                                    cvx.matrix(A.indices[upper].astype(np.int64)),
                                    columns, size=A.shape)
        del columns
        self._symbolic = self._cholmod.symbolic(self._matrix, uplo="L")
        self._pattern = (A.indptr, A.indices)
        release_freed_memory()      # this and the build's temporaries, before the factor

    def solve(self, b: np.ndarray) -> np.ndarray:
        x = self._cvxopt.matrix(np.ascontiguousarray(b, dtype=float))
        self._cholmod.solve(self._symbolic, x)
        return np.array(x).ravel()


def _same_memory(a: np.ndarray, b: np.ndarray) -> bool:
    """Whether two arrays are views of the same elements (b is kept alive by the caller, so
    its address cannot have been reused by another array)."""
    return (a.dtype == b.dtype and a.shape == b.shape and a.strides == b.strides
            and a.__array_interface__["data"][0] == b.__array_interface__["data"][0])


def limit_blas_threads(n: int | None = None):
    """Limit every thread pool of this process to n threads (default: ``convsim.threads``).

    cvxopt ships its own OpenBLAS beside numpy's; two spinning thread pools on a
    small machine slow every dense and sparse kernel several times over (measured:
    a 128 x 128 variable-viscosity step went from 190 ms to 29 ms on 2 cores).
    """
    from convsim.threads import limit_threads
    return limit_threads(n)


FACTORIZERS = {"superlu": SuperLUFactorizer, "cholmod": CholmodFactorizer}
#: Iterative-refinement steps at most after a direct solve whose residual is above rtol.
MAX_REFINEMENTS = 3
#: A refactorisation costs about this many triangular solves with the factor (CHOLMOD, contrast
#: 1e5, measured: 20 at 64^2, 10 at 128^2 and 256^2, 12 at 512^2): the budget of the
#: amortised refactor rule of ``LaggedFactorSolver``.
REFACTOR_IN_SOLVES = 10


def available_factorizers() -> list[str]:
    """Names of the back ends that can be created on this installation, fastest first."""
    names = []
    for name in ("cholmod", "superlu"):
        try:
            FACTORIZERS[name]()
        except SolverError:
            continue
        names.append(name)
    return names


def make_factorizer(method: str | type = "superlu"):
    """A factorizer by name (or class); an unknown name lists the valid ones."""
    if isinstance(method, type):
        return method()
    if method not in FACTORIZERS:
        raise SolverError(f"stokes back end {method!r}: unknown; allowed: {', '.join(FACTORIZERS)}")
    return FACTORIZERS[method]()


def solve_spd(A: sp.spmatrix, b: np.ndarray, method: str = "superlu") -> np.ndarray:
    """Solve A x = b for a sparse symmetric positive definite A with the named back end."""
    f = make_factorizer(method)
    f.factor(A)
    return f.solve(b)


@dataclass
class SolveReport:
    """What one Stokes solve did."""

    iterations: int = 0          # CG iterations (0: direct solve with a fresh factor)
    refactored: bool = False
    factor_seconds: float = 0.0
    solve_seconds: float = 0.0
    residual: float = 0.0        # ||b - A x|| / ||b|| of the answer
    refinements: int = 0         # iterative-refinement steps after a direct solve
    nonlinear_iterations: int = 0   # Picard/Newton steps of a strain-rate-dependent law
    nonlinear_residual: float = 0.0  # their final ||R|| / ||b||
    flow_error: float = 0.0      # CG's estimate of the relative dissipation-norm error (0: none)


class LaggedFactorSolver:
    """Solve A(eta) x = b for a sequence of slowly changing matrices.

    With ``policy = 'always'`` every new matrix is factorised.  With ``'adaptive'``
    the last factor preconditions conjugate gradients on the new matrix; the matrix is
    refactorised and solved directly when CG needs more than ``max_iterations``
    iterations, or when the iterations the factor's age has added (each solve's count
    above that of the first solve on the factor, summed) reach the cost of a refactor,
    ``REFACTOR_IN_SOLVES`` (rent or buy: at most twice the best cost in hindsight).  A direct solve is checked: while its relative
    residual exceeds ``rtol`` (a factor that lost digits, at large viscosity contrasts),
    up to ``MAX_REFINEMENTS`` steps of iterative refinement x += A^-1 (b - A x) follow.

    Parameters
    ----------
    factorizer : object with ``factor(A)`` and ``solve(b)``.
    policy : {'adaptive', 'always'}
    rtol : float
        Relative residual ||b - A x|| / ||b|| at which CG stops.
    error_rtol : float
        CG also stops (after one more update) when its estimate of the flow's relative error
        in the dissipation norm, sqrt(r . M^-1 r / b . x), is at most this (``_pcg``); 0: off.
    max_iterations : int
        Iterations beyond which a refactorisation is cheaper (measured in
        benchmarks/stokes_backends.py: one CG iteration costs about a sixth of a
        refactorisation at 128 x 128).
    """

    def __init__(self, factorizer, policy: str = "adaptive", rtol: float = 1e-10,
                 max_iterations: int = 6, error_rtol: float = 0.0):
        if policy not in FACTOR_REUSE:
            raise SolverError(f"factor_reuse = {policy!r}: allowed "
                              + ", ".join(repr(c) for c in FACTOR_REUSE))
        self.factorizer, self.policy = factorizer, policy
        self.rtol, self.max_iterations, self.error_rtol = rtol, max_iterations, error_rtol
        self.factored_weights = None     # the viscosity weights of the current factor
        self.first_iterations = -1       # CG iterations of the first solve on it (-1: none yet)
        self.stale_iterations = 0        # iterations above that, summed over later solves

    def refactor(self, A: sp.spmatrix, weights: np.ndarray | None = None) -> float:
        t0 = time.perf_counter()
        self.factored_weights = None
        self.first_iterations, self.stale_iterations = -1, 0
        self.factorizer.factor(A)       # may raise ArithmeticError (not positive definite)
        self.factored_weights = None if weights is None else weights.copy()
        return time.perf_counter() - t0

    def solve(self, A: sp.spmatrix, b: np.ndarray, x0: np.ndarray | None = None,
              weights: np.ndarray | None = None, error_rtol: float | None = None
              ) -> tuple[np.ndarray, SolveReport]:
        """x with A x = b (see the class docstring); ``error_rtol`` overrides the solver's
        flow-error target for this solve (0: the residual target alone)."""
        report = SolveReport()
        error_rtol = self.error_rtol if error_rtol is None else error_rtol
        if (self.factored_weights is None or self.policy == "always"
                or self.stale_iterations >= REFACTOR_IN_SOLVES):
            report.factor_seconds = self.refactor(A, weights)
            report.refactored = True
        elif weights is not None and np.array_equal(weights, self.factored_weights):
            pass
        else:
            t0 = time.perf_counter()
            run = _pcg(A, b, self.factorizer.solve, x0, self.rtol, self.max_iterations,
                       error_rtol)
            report.solve_seconds = time.perf_counter() - t0
            report.iterations, report.flow_error = run.iterations, run.flow_error
            if run.converged:
                self._count(run.iterations)
                report.residual = _relative_residual(A, b, run.x)   # the true one
                return run.x, report
            report.factor_seconds = self.refactor(A, weights)
            report.refactored = True
        t0 = time.perf_counter()
        x = self.factorizer.solve(b)
        report.residual = _relative_residual(A, b, x)
        while report.residual > self.rtol and report.refinements < MAX_REFINEMENTS:
            x = x + self.factorizer.solve(b - A @ x)
            report.refinements += 1
            report.residual = _relative_residual(A, b, x)
        report.solve_seconds += time.perf_counter() - t0
        return x, report


    def _count(self, iterations: int) -> None:
        """Book a converged CG solve against the factor's age (the amortised refactor rule)."""
        if self.first_iterations < 0:
            self.first_iterations = iterations
        else:
            self.stale_iterations += max(iterations - self.first_iterations, 0)

    def counts(self) -> dict:
        """The refactor rule's counts as plain numbers (for a bit-for-bit restart)."""
        return {"first_iterations": self.first_iterations,
                "stale_iterations": self.stale_iterations}

    def restore_counts(self, counts: dict) -> None:
        self.first_iterations = int(counts.get("first_iterations", -1))
        self.stale_iterations = int(counts.get("stale_iterations", 0))


def _relative_residual(A, b, x) -> float:
    bnorm = float(np.linalg.norm(b))
    return float(np.linalg.norm(b - A @ x)) / bnorm if bnorm > 0.0 else 0.0


@dataclass
class _CGRun:
    """The outcome of ``_pcg``."""

    x: np.ndarray
    iterations: int
    converged: bool
    residual: float          # CG's recursive ||r|| / ||b|| (the true one drifts from it)
    flow_error: float = 0.0  # the last estimate sqrt(r . M^-1 r / b . x) (0: none made)


def _pcg(A, b, precondition, x0, rtol, max_iterations, error_rtol=0.0) -> _CGRun:
    """Preconditioned conjugate gradients from x0 (default M^-1 b).

    Stops when ||r|| <= rtol ||b||, or, with ``error_rtol`` > 0, one update after the
    estimate of the relative error in the A-norm (the dissipation norm of the flow),

        ||x* - x||_A / ||x||_A ~ sqrt(r . M^-1 r / b . x),                       (CG)

    falls to ``error_rtol`` (r . A^-1 r = ||x* - x||_A^2 exactly, and M, a factor of a
    nearby A, makes r . M^-1 r a close estimate; b . x = ||x||_A^2 at the solution).  CG
    minimises the A-norm error over a growing space, so the update after the estimate
    only lowers the error: the check costs no extra solve (common practice; Golub & Van
    Loan 2013, section 11.3, for CG's A-norm minimisation).
    """
    bnorm = np.linalg.norm(b)
    if bnorm == 0.0:
        return _CGRun(np.zeros_like(b), 0, True, 0.0)
    x = precondition(b) if x0 is None else x0.copy()
    r = b - A @ x
    rnorm = np.linalg.norm(r)
    if rnorm <= rtol * bnorm:
        return _CGRun(x, 0, True, rnorm / bnorm)
    z = precondition(r)
    p = z.copy()
    rz = r @ z
    flow_error = 0.0
    for k in range(1, max_iterations + 1):
        bx = b @ x
        if error_rtol > 0.0 and bx > 0.0:
            flow_error = float(np.sqrt(max(rz, 0.0) / bx))
        Ap = A @ p
        alpha = rz / (p @ Ap)
        x += alpha * p
        r -= alpha * Ap
        rnorm = np.linalg.norm(r)
        if rnorm <= rtol * bnorm or 0.0 < flow_error <= error_rtol:
            return _CGRun(x, k, True, rnorm / bnorm, flow_error)
        z = precondition(r)
        rz_new = r @ z
        p = z + (rz_new / rz) * p
        rz = rz_new
    return _CGRun(x, max_iterations, False, rnorm / bnorm, flow_error)
