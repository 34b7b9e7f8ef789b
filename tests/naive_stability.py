"""Slow, obviously correct twin of convsim.analysis.stability: second-order finite differences.

A different discretisation of the same linear problem, written from the equations
alone (nothing of convsim is imported):

    L Phi = k Ra Theta,  L = (D^2 + k^2)[eta (D^2 + k^2)] - 4 k^2 D[eta D],
    0 = (D^2 - k^2) Theta - k T0'(z) Phi          (steady neutral mode),

on the uniform nodes z_j = j h, h = 1/M.  Conditions by ghost nodes: free-slip
Phi_{-1} = -Phi_1 (Phi'' = 0), no-slip Phi_{-1} = Phi_1 (Phi' = 0); fixed
temperature Theta = 0, fixed flux Theta_{-1} = Theta_1.  The product eta D[...]
is differenced in conservation form with eta at the half nodes.
"""

import numpy as np


def neutral_rayleigh_fd(k, eta, dT0, bottom_flow, top_flow, bottom_heat="temperature",
                        top_heat="temperature", m=128):
    """Neutral Ra at wavenumber k; eta(z) and dT0(z) are callables of z only."""
    h = 1.0 / m
    z = np.arange(m + 1) * h
    n_in = m - 1                                   # Phi unknowns: nodes 1..m-1
    eta_n = eta(z)
    eta_h = eta(z[:-1] + 0.5 * h)                  # eta_{j+1/2}, j = 0..m-1

    # q_j = eta_j (Phi'' + k^2 Phi) at nodes 0..m, as a matrix on the Phi unknowns
    Q = np.zeros((m + 1, n_in))
    for j in range(1, m):
        c = j - 1
        Q[j, c] = eta_n[j] * (-2.0 / h**2 + k**2)
        if j - 1 >= 1:
            Q[j, c - 1] = eta_n[j] / h**2
        if j + 1 <= m - 1:
            Q[j, c + 1] = eta_n[j] / h**2
    if bottom_flow == "no-slip":                   # Phi''(0) = 2 Phi_1 / h^2
        Q[0, 0] = eta_n[0] * 2.0 / h**2
    if top_flow == "no-slip":
        Q[m, n_in - 1] = eta_n[m] * 2.0 / h**2

    L = np.zeros((n_in, n_in))
    for j in range(1, m):
        r = j - 1
        L[r] = (Q[j + 1] - 2.0 * Q[j] + Q[j - 1]) / h**2 + k**2 * Q[j]
        # -4 k^2 D[eta D Phi] in conservation form
        if j + 1 <= m - 1:
            L[r, r + 1] -= 4.0 * k**2 * eta_h[j] / h**2
        if j - 1 >= 1:
            L[r, r - 1] -= 4.0 * k**2 * eta_h[j - 1] / h**2
        L[r, r] += 4.0 * k**2 * (eta_h[j] + eta_h[j - 1]) / h**2

    # Theta unknowns: interior nodes, plus an end with fixed flux
    nodes = list(range(1, m))
    if bottom_heat == "flux":
        nodes = [0] + nodes
    if top_heat == "flux":
        nodes = nodes + [m]
    index = {j: i for i, j in enumerate(nodes)}
    A = np.zeros((len(nodes), len(nodes)))
    for j, i in index.items():
        A[i, i] = -2.0 / h**2 - k**2
        for nb in (j - 1, j + 1):
            if nb < 0 or nb > m:                   # ghost of a flux end: mirror
                nb = 2 * j - nb
            if nb in index:
                A[i, index[nb]] += 1.0 / h**2
    # Theta = k A^{-1} (T0' Phi);  L Phi = k Ra Theta  ->  (1/Ra) Phi = k^2 L^{-1} R A^{-1} T0' P Phi
    P = np.zeros((len(nodes), n_in))
    for j, i in index.items():
        if 1 <= j <= m - 1:
            P[i, j - 1] = dT0(z[j])
    R = np.zeros((n_in, len(nodes)))
    for j in range(1, m):
        R[j - 1, index[j]] = 1.0
    C = k**2 * np.linalg.solve(L, R @ np.linalg.solve(A, P))
    mu = np.linalg.eigvals(C)
    mu = mu[(np.abs(mu.imag) <= 1e-8 * np.abs(mu)) & (mu.real > 0)].real
    return 1.0 / mu.max()


def neutral_rayleigh_fd_extrapolated(k, eta, dT0, bottom_flow, top_flow,
                                     bottom_heat="temperature", top_heat="temperature", m=64):
    """Richardson extrapolation (error h^2) from m and 2m nodes."""
    coarse = neutral_rayleigh_fd(k, eta, dT0, bottom_flow, top_flow, bottom_heat, top_heat, m)
    fine = neutral_rayleigh_fd(k, eta, dT0, bottom_flow, top_flow, bottom_heat, top_heat, 2 * m)
    return (4.0 * fine - coarse) / 3.0
