"""The nonlinear Stokes problem of a strain-rate-dependent viscosity: Picard and Newton.

With eta = eta(T, z, e_II) the discrete Stokes problem (``convsim.model.stokes``)

    R(x) = A(w(x)) x - b = 0,     w(x) = weights of eta(T, z, e_II(x)),           (1)

is nonlinear in the streamfunction unknowns x.  Strain rate on the staggered grid, the
way A uses the viscosity: A's node rows are L x = psi_zz - psi_xx = 2 e_xz and its cell
rows B x = psi_xz = e_xx (u = psi_z, w = -psi_x, so e_zz = -e_xx).  The invariant
e_II = sqrt(e_ij e_ij / 2) = sqrt(e_xx^2 + e_xz^2) needs both parts at one place:

    at the nodes: e_xz from L x (0 on free-slip walls), e_xx averaged from the cells
                  around (``Grid.cell_to_node``: mirrored at reflecting sides, wrapped
                  when periodic, extrapolated linearly to the top and bottom rows);
    at the cells: e_xx from B x, e_xz averaged from the four corners.

Iterations, from a guess x_0 (the previous step's flow):

- Picard: x_{k+1} solves A(w(x_k)) x = b (linear convergence); each solve goes through
  the lagged factor (the old factor preconditions CG; refactored when CG needs more
  than a few iterations), so it costs little once the viscosity settles.
- Newton: J(x_k) dx = -R(x_k), J v = A(w) v + A(dw/dx v) x (the exact directional
  derivative: dw/dx v from de_II = (e_xx de_xx + e_xz de_xz)/e_II and deta/de_II by a
  central difference of the law, elementwise), solved by GMRES preconditioned with the
  current factor of a Picard matrix; a backtracking line search on ||R|| makes each step
  lower the residual.  The 'newton' method takes Picard steps until the relative
  residual is below ``NEWTON_SWITCH`` and Newton steps after (Newton-Picard).
  ``NEWTON_LINEAR = "direct"`` solves each Newton step with a sparse LU of the assembled
  Jacobian instead (``_Residual.jacobian_matrix``, as the steady solver does).  Measured on
  Tosi et al. (2015) case 4 (same nonlinear iterations and states in both; ms per step,
  GMRES -> direct): from the one-cell start 22.7 -> 29.1 (32 x 32), 46.1 -> 103 (64 x 64);
  in the developed lid-breaking cycle 32.4 -> 30.2 (32) and 102 -> 109 (64).  A hybrid
  (20 GMRES iterations, then the LU) was slower than both.  So GMRES stays the default.
  Its preconditioner is the Picard factor, renewed when the Picard step's CG needs more
  than a few iterations; every solve starts with one Picard step, so it is renewed at least
  once per time step when stale (before that rule, time steps of Newton steps alone kept a
  factor from far back, and GMRES went from ~46 to ~420 iterations per time step as the lid
  of case 4 closed at 64 x 64: 0.55 s per step).

Convergence: ||R(x)|| <= rtol ||b||; rtol should stay above the linear solver's own
tolerance (1e-10 for the lagged-factor CG), where Picard steps stop moving x.  Deterministic throughout, so a restarted run
repeats the uninterrupted one bit for bit.
"""

from __future__ import annotations

import logging
import time
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as sla

from convsim.model.choices import NONLINEAR_METHODS
from convsim.model.linsolve import SolveReport
from convsim.model.stokes import StokesOperator

__all__ = ["METHODS", "NonlinearReport", "LaggedLinear", "strain_rate_invariants",
           "solve_nonlinear"]

log = logging.getLogger(__name__)

METHODS = NONLINEAR_METHODS
NEWTON_SWITCH = 1e-2      # relative residual below which 'newton' takes Newton steps
LINE_SEARCH_STEPS = 6     # halvings of a Newton step at most
DERIVATIVE_STEP = 1e-6    # relative step of the central difference deta/de_II
NEWTON_LINEAR = "gmres"   # Newton steps in a time step: "gmres" or "direct" (module doc)


@dataclass
class NonlinearReport:
    """What one nonlinear Stokes solve did."""

    iterations: int = 0                 # Picard and Newton steps taken
    residual: float = 0.0               # ||R(x)|| / ||b|| at the end
    converged: bool = True
    newton_steps: int = 0
    linear_iterations: int = 0          # CG (Picard) and GMRES (Newton) iterations, summed
    refactored: bool = False
    factor_seconds: float = 0.0
    history: list = field(default_factory=list)   # relative residual before each step

    def solve_report(self) -> SolveReport:
        """The linear solver's report, with the nonlinear iterations and residual."""
        return SolveReport(iterations=self.linear_iterations, refactored=self.refactored,
                           factor_seconds=self.factor_seconds,
                           nonlinear_iterations=self.iterations,
                           nonlinear_residual=self.residual, residual=self.residual)


class LaggedLinear:
    """The linear solves of the iteration through a ``LaggedFactorSolver`` (factor reused
    as a CG preconditioner while it pays)."""

    def __init__(self, op: StokesOperator, lagged):
        self.op, self.lagged = op, lagged

    def solve(self, weights, b, x0):
        # the residual target alone: the iteration's own residual test needs its linear solves
        # to that residual, not to the flow-error target of a time-following run
        return self.lagged.solve(self.op.matrix_from_weights(weights), b, x0, weights,
                                 error_rtol=0.0)

    def precondition(self, r):
        return self.lagged.factorizer.solve(r)

    def ensure_factor(self, weights):
        if self.lagged.factored_weights is None:
            self.lagged.refactor(self.op.matrix_from_weights(weights), weights)


def _strain_parts(op: StokesOperator, x: np.ndarray):
    """(e_xx, e_xz) at the nodes and at the cells, each linear in x."""
    shear, stretch = op.strain_parts(x)
    exz_node = 0.5 * shear
    exx_node = op.grid.cell_to_node(stretch)
    exz_cell = 0.125 * (shear[1:, 1:] + shear[1:, :-1] + shear[:-1, 1:] + shear[:-1, :-1])
    return (exx_node, exz_node), (stretch, exz_cell)


def strain_rate_invariants(op: StokesOperator, psi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """e_II = sqrt(e_xx^2 + e_xz^2) of the streamfunction psi (nz + 1, nx + 1).

    Returns the invariant at the nodes (nz + 1, nx + 1) and at the cells (nz, nx), in
    1/(d^2/kappa) (see the module docstring for where each part is taken).
    """
    nodes, cells = _strain_parts(op, op.from_nodes(psi))
    return np.hypot(*nodes), np.hypot(*cells)


class _Residual:
    """R(x), the weights at x and the Jacobian-vector product of equation (1)."""

    def __init__(self, op: StokesOperator, viscosity: Callable, b: np.ndarray):
        self.op, self.viscosity, self.b = op, viscosity, b

    def at(self, x: np.ndarray):
        nodes, cells = _strain_parts(self.op, x)
        e_node, e_cell = np.hypot(*nodes), np.hypot(*cells)
        eta_node, eta_cell = self.viscosity(e_node, e_cell)
        weights = self.op.viscosity_weights(eta_node, eta_cell)
        r = self.op.matrix_from_weights(weights) @ x - self.b
        return r, weights, (nodes, cells, e_node, e_cell)

    def jacobian(self, x: np.ndarray, weights: np.ndarray, parts) -> sla.LinearOperator:
        nodes, cells, e_node, e_cell = parts
        A = self.op.matrix_from_weights(weights)
        slope_node, slope_cell = self._slopes(e_node, e_cell)

        def change(parts_v, e, pair, slope):
            de = np.divide(pair[0] * parts_v[0] + pair[1] * parts_v[1], e,
                           out=np.zeros_like(e), where=e > 0.0)
            return slope * de

        def jv(v):
            nodes_v, cells_v = _strain_parts(self.op, v)
            dw = self.op.viscosity_weights(change(nodes_v, e_node, nodes, slope_node),
                                           change(cells_v, e_cell, cells, slope_cell))
            return A @ v + self.op.matrix_from_weights(dw) @ x

        n = x.size
        return sla.LinearOperator((n, n), matvec=jv)

    def jacobian_matrix(self, x: np.ndarray, weights: np.ndarray, parts) -> sp.csr_matrix:
        """The Jacobian of ``jacobian`` as a sparse matrix, J = A(w) + R^T diag(R x) G.

        A(w) = R^T diag(w) R with R the rows of L and B (``StokesOperator``), so
        A(dw) x = R^T diag(R x) dw, and dw = G v is linear in v: G holds deta/de_II times
        de_II/d(e_xx, e_xz) (as in ``jacobian``) times the strain parts of v, moved between
        nodes and cells by the same averages as ``_strain_parts`` (``_strain_maps``).
        A direct factor of it gives the exact Newton response in one solve.
        """
        nodes, cells, e_node, e_cell = parts
        L, B, at_rows, cell_to_node, shear_to_cells = _strain_maps(self.op)
        slope_node, slope_cell = self._slopes(e_node, e_cell)

        def ratio(part, e, slope):
            return np.divide(slope * part, e, out=np.zeros_like(e), where=e > 0.0).ravel()

        w_rows = self.op.viscosity_weights(np.ones_like(e_node), np.ones_like(e_cell))
        n_rows = L.shape[0]
        exx_n, exz_n = (at_rows @ ratio(p, e_node, slope_node) for p in nodes)
        exx_c, exz_c = (ratio(p, e_cell, slope_cell) for p in cells)
        G = sp.vstack([sp.diags(w_rows[:n_rows] * exz_n) @ (0.5 * L)
                       + sp.diags(w_rows[:n_rows] * exx_n) @ (at_rows @ cell_to_node @ B),
                       sp.diags(w_rows[n_rows:] * exz_c) @ (0.5 * shear_to_cells @ L)
                       + sp.diags(w_rows[n_rows:] * exx_c) @ B])
        R = sp.vstack([L, B]).tocsr()
        return (self.op.matrix_from_weights(weights) + R.T @ sp.diags(R @ x) @ G).tocsc()

    def _slopes(self, e_node, e_cell):
        """deta/de_II at the nodes and cells, by central differences of the law."""
        h_n = DERIVATIVE_STEP * np.maximum(e_node, 1e-12)
        h_c = DERIVATIVE_STEP * np.maximum(e_cell, 1e-12)
        up_n, up_c = self.viscosity(e_node + h_n, e_cell + h_c)
        dn_n, dn_c = self.viscosity(np.maximum(e_node - h_n, 0.0), np.maximum(e_cell - h_c, 0.0))
        return ((up_n - dn_n) / (e_node + h_n - np.maximum(e_node - h_n, 0.0)),
                (up_c - dn_c) / (e_cell + h_c - np.maximum(e_cell - h_c, 0.0)))


def _strain_maps(op: StokesOperator):
    """Sparse forms of the maps of ``_strain_parts`` (cached on the operator): L and B
    (unknowns -> L rows, cells), the L-row nodes of a node array, the cell-to-node average
    (``Grid.cell_to_node`` without wall values) and L rows -> the four-corner cell average
    (0 on free-slip walls, wrapped when periodic)."""
    maps = getattr(op, "_jacobian_maps", None)
    if maps is not None:
        return maps
    g = op.grid
    op.strain_parts(np.zeros(op.n_unknowns))            # builds the L and B matrices
    L, B = op._strain_matrices
    node = lambda j, i: j * (g.nx + 1) + i           # noqa: E731 (flat node index)
    cell = lambda j, i: j * g.nx + i                 # noqa: E731 (flat cell index)
    jn, in_ = op._L_node
    at_rows = sp.csr_matrix((np.ones(len(jn)), (np.arange(len(jn)), node(jn, in_))),
                            shape=(len(jn), g.node_shape[0] * g.node_shape[1]))
    # cell -> node: across[j, i] = mean of cells (j, i-1), (j, i) (mirrored or wrapped);
    # interior rows the mean of two 'across' rows, the walls extrapolated 1.5 / -0.5
    jj, ii = np.meshgrid(np.arange(g.nz), np.arange(g.nx + 1), indexing="ij")
    left = (ii - 1) % g.nx if g.periodic else np.clip(ii - 1, 0, g.nx - 1)
    right = ii % g.nx if g.periodic else np.clip(ii, 0, g.nx - 1)
    across = sp.csr_matrix((np.full(2 * jj.size, 0.5),
                            (np.tile(np.arange(jj.size), 2),
                             np.concatenate([cell(jj, left).ravel(), cell(jj, right).ravel()]))),
                           shape=(jj.size, g.nz * g.nx))
    rows = np.arange(g.nz + 1)
    mix = sp.lil_matrix((g.nz + 1, g.nz))
    if g.stretched:
        mix = sp.lil_matrix(g.row_to_node_weights())
    else:
        for j in rows[1:-1]:
            mix[j, j - 1] = mix[j, j] = 0.5
        mix[0, 0], mix[0, 1] = 1.5, -0.5
        mix[-1, -1], mix[-1, -2] = 1.5, -0.5
    cell_to_node = (sp.kron(mix.tocsr(), sp.identity(g.nx + 1)) @ across).tocsr()
    # L rows -> node array (the periodic copy of column 0 at column nx) -> four-corner mean
    scatter_rows = [np.arange(len(jn))]
    scatter_nodes = [node(jn, in_)]
    if g.periodic:
        first = in_ == 0
        scatter_rows.append(np.arange(len(jn))[first])
        scatter_nodes.append(node(jn[first], g.nx))
    scatter = sp.csr_matrix((np.ones(sum(len(r) for r in scatter_rows)),
                             (np.concatenate(scatter_nodes), np.concatenate(scatter_rows))),
                            shape=(at_rows.shape[1], len(jn)))
    cj, ci = np.meshgrid(np.arange(g.nz), np.arange(g.nx), indexing="ij")
    corners = [node(cj + a, ci + b).ravel() for a in (0, 1) for b in (0, 1)]
    average = sp.csr_matrix((np.full(4 * cj.size, 0.25),
                             (np.tile(np.arange(cj.size), 4), np.concatenate(corners))),
                            shape=(cj.size, at_rows.shape[1]))
    op._jacobian_maps = (L, B, at_rows, cell_to_node, (average @ scatter).tocsr())
    return op._jacobian_maps


def _newton_direction(problem: _Residual, x, r, weights, parts, precondition, report):
    """dx of J dx = -r (``NEWTON_LINEAR``): GMRES on the matrix-free product preconditioned by
    the Picard factor ('gmres'), or a sparse LU of the assembled Jacobian ('direct')."""
    if NEWTON_LINEAR == "direct":
        return _direct_direction(problem, x, r, weights, parts, report)
    n = x.size
    J = problem.jacobian(x, weights, parts)
    M = sla.LinearOperator((n, n), matvec=precondition)
    count = [0]

    def counted(_):
        count[0] += 1
    dx, _info = sla.gmres(J, -r, rtol=1e-4, atol=0.0, restart=30, maxiter=3, M=M,
                          callback=counted, callback_type="pr_norm")
    report.linear_iterations += count[0]
    return dx


def _direct_direction(problem: _Residual, x, r, weights, parts, report):
    """dx of J dx = -r by a sparse LU of the assembled Jacobian (one 'linear iteration')."""
    report.linear_iterations += 1
    return sla.splu(problem.jacobian_matrix(x, weights, parts),
                    permc_spec="MMD_AT_PLUS_A").solve(-r)


def _newton_step(problem: _Residual, x, r, weights, parts, precondition, report):
    """One Newton step with a backtracking line search; returns the new x (or None)."""
    dx = _newton_direction(problem, x, r, weights, parts, precondition, report)
    norm = np.linalg.norm(r)
    step = 1.0
    for _ in range(LINE_SEARCH_STEPS):
        trial = x + step * dx
        if np.linalg.norm(problem.at(trial)[0]) <= (1.0 - 1e-4 * step) * norm:
            return trial
        step *= 0.5
    return None


def solve_nonlinear(op: StokesOperator, viscosity: Callable, b: np.ndarray, x0,
                    linear, method: str = "picard", rtol: float = 1e-6,
                    max_iterations: int = 100) -> tuple[np.ndarray, NonlinearReport]:
    """Solve equation (1) from x0 by Picard or Newton-Picard iteration.

    The first iteration is always one Picard step, the linear solve from x0 that a law
    without yielding would make: a yield stress nothing reaches then gives the same bits.

    Parameters
    ----------
    op : StokesOperator
    viscosity : callable
        ``(e_node, e_cell) -> (eta_node, eta_cell)``: the law at this temperature as a
        function of the strain-rate invariant at the nodes and the cells.
    b : ndarray
        Right-hand side Ra dT/dx at the unknowns.
    x0 : ndarray or None
        Starting unknowns (the previous flow; None: no flow, and the first linear solve gets
        no guess, exactly as a linear law's solve would).
    linear : object
        ``linear.solve(weights, b, x0) -> (x, SolveReport)`` solves A(weights) x = b (the
        lagged factor); ``linear.precondition(r)`` applies its current factor, which
        ``linear.ensure_factor(weights)`` makes exist.
    method : {'picard', 'newton'}
    rtol : float
        Converged when ||R(x)|| <= rtol ||b||.
    max_iterations : int

    Returns
    -------
    x, NonlinearReport (``converged`` False when max_iterations ran out: the last x is
    returned, and the caller decides).
    """
    problem = _Residual(op, viscosity, b)
    report = NonlinearReport()
    bnorm = float(np.linalg.norm(b))
    x = np.zeros(op.n_unknowns) if x0 is None else x0
    for _ in range(max_iterations + 1):
        r, weights, parts = problem.at(x)
        report.residual = float(np.linalg.norm(r)) / bnorm if bnorm > 0.0 else 0.0
        if bnorm == 0.0 or (report.residual <= rtol and report.iterations > 0):
            return x, report
        if report.iterations == max_iterations:
            break
        report.history.append(report.residual)
        report.iterations += 1
        if method == "newton" and report.residual < NEWTON_SWITCH and report.iterations > 1:
            t0 = time.perf_counter()
            if NEWTON_LINEAR != "direct":      # the GMRES preconditioner
                linear.ensure_factor(weights)
            trial = _newton_step(problem, x, r, weights, parts, linear.precondition, report)
            if trial is not None:
                report.newton_steps += 1
                x = trial
                continue
            log.debug("newton step found no descent; a Picard step instead (%.2g s)",
                      time.perf_counter() - t0)
        previous = x
        x, solve = linear.solve(weights, b, None if x0 is None and report.iterations == 1 else x)
        report.linear_iterations += solve.iterations
        report.refactored |= solve.refactored
        report.factor_seconds += solve.factor_seconds
        if np.array_equal(x, previous):     # the linear solver's tolerance is reached
            report.residual = float(np.linalg.norm(problem.at(x)[0])) / bnorm
            break
    report.converged = report.residual <= rtol
    return x, report


def linearised_flow(op: StokesOperator, viscosity_at: Callable, rhs: Callable, T: np.ndarray,
                    x0, factorizer, rtol: float = 1e-9, max_iterations: int = 100):
    """The flow x(T) of equation (1) and its derivative with respect to T (steady Newton).

    Differentiating R(x(T), T) = 0: J dx = rhs(v) - A(dw/dT v) x, with J the Newton
    Jacobian at the converged x (strain rate moving with x) and dw/dT v the change of the
    weights with T at fixed strain rate (central difference of the law).  Each dx is one
    solve with a sparse LU factor of J (``_Residual.jacobian_matrix``), made once here,
    apart from the time stepper's factor, so restarts stay bit for bit.  (It replaced
    GMRES on the matrix-free J preconditioned by a factor of A(w): case 2 of the
    viscoplastic benchmark at 32 x 32 spent 60 % of its steady Newton time there.)

    Parameters
    ----------
    viscosity_at : callable
        ``T -> ((e_node, e_cell) -> (eta_node, eta_cell))``.
    rhs : callable
        ``T -> Ra dT/dx`` at the unknowns (linear in T).

    Returns
    -------
    x, ``derivative(v) -> dx``, NonlinearReport
    """
    from convsim.model.linsolve import LaggedFactorSolver
    linear = LaggedLinear(op, LaggedFactorSolver(factorizer, "adaptive"))
    b = rhs(T)
    x, report = solve_nonlinear(op, viscosity_at(T), b, x0, linear, "newton", rtol,
                                max_iterations)
    problem = _Residual(op, viscosity_at(T), b)
    _, weights, parts = problem.at(x)
    jacobian = sla.splu(problem.jacobian_matrix(x, weights, parts))
    e_node, e_cell = parts[2], parts[3]

    def derivative(v):
        scale = float(np.abs(v).max())
        if scale == 0.0:
            return np.zeros_like(x)
        h = 1e-5 / scale
        up = viscosity_at(T + h * v)(e_node, e_cell)
        dn = viscosity_at(T - h * v)(e_node, e_cell)
        dw = op.viscosity_weights((up[0] - dn[0]) / (2 * h), (up[1] - dn[1]) / (2 * h))
        return jacobian.solve(rhs(v) - op.matrix_from_weights(dw) @ x)

    return x, derivative, report
