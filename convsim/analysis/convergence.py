"""Grid convergence: observed order, Richardson extrapolation, grid convergence index.

A quantity f computed on grids of spacing h1 < h2 < h3 (finest first) is
modelled in the asymptotic range as

    f(h) = f_exact + C h^p.                                                     (1)

With r21 = h2 / h1, r32 = h3 / h2, e21 = f2 - f1, e32 = f3 - f2, (1) gives

    e32 / e21 = r21^p (r32^p - 1) / (r21^p - 1),                                 (2)

which for a constant ratio r = r21 = r32 reduces to the closed form

    p = ln(e32 / e21) / ln(r) = ln((f3 - f2) / (f2 - f1)) / ln(r).               (3)

For unequal ratios (2) is solved for p numerically (``observed_order`` shows
that the positive root is unique when it exists).
The Richardson-extrapolated value is

    f_ext = f1 + (f1 - f2) / (r21^p - 1),                                        (4)

and the grid convergence index of the finest grid (Roache 1994) is

    GCI_fine = Fs |(f1 - f2) / f1| / (r21^p - 1),   Fs = 1.25 for three grids,    (5)

a relative uncertainty band around f1.  With the coarser pair,
GCI_coarse = Fs |(f2 - f3) / f2| / (r32^p - 1), and
GCI_coarse / (r21^p GCI_fine) close to 1 says the three grids are in the
asymptotic range (Roache 1994).

The convergence ratio R = e21 / e32 classifies the sequence (after Celik et al.
2008): R < 0 is oscillatory (reported, not extrapolated); R > 0 is monotone
convergence when (2) has a positive root p (for a constant ratio: 0 < R < 1) and
monotone divergence otherwise (reported, not extrapolated).  With unequal ratios
R may exceed 1 for a converging sequence (r21 much larger than r32), which is
why the test is the root of (2) and not R < 1.

References
----------
Roache, P. J. (1994), Perspective: a method for uniform reporting of grid
refinement studies, J. Fluids Eng. 116, 405-413.
Celik, I. B., Ghia, U., Roache, P. J., Freitas, C. J., Coleman, H. and Raad,
P. E. (2008), Procedure for estimation and reporting of uncertainty due to
discretization in CFD applications, J. Fluids Eng. 130, 078001.

Pure functions of numbers; nothing of convsim is imported.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

__all__ = ["SAFETY_FACTOR", "ConvergenceEstimate", "observed_order", "richardson",
           "grid_convergence_index", "estimate", "estimate_finest"]

SAFETY_FACTOR = 1.25   # Fs of Roache (1994) for a study of three or more grids

MONOTONE, OSCILLATORY, DIVERGENT, EXACT, STAGNANT = (
    "monotone", "oscillatory", "divergent", "exact", "stagnant")


@dataclass(frozen=True)
class ConvergenceEstimate:
    """The grid-convergence analysis of one quantity from three grids (finest first).

    Attributes
    ----------
    behaviour : str
        monotone | oscillatory | divergent | exact (all three equal) |
        stagnant (f1 = f2 but f3 differs).
    ratio : float
        Convergence ratio R = e21 / e32 (nan when e32 = 0).
    order : float
        Observed order p (nan unless monotone).
    extrapolated : float
        Richardson-extrapolated value f_ext, equation (4) (nan unless monotone or exact).
    gci_fine : float
        Relative grid convergence index of the finest grid, equation (5) (nan unless monotone).
    gci_coarse : float
        The same for the coarser pair.
    asymptotic_ratio : float
        GCI_coarse / (r21^p GCI_fine); near 1 in the asymptotic range.
    note : str
        Plain-language reason when no extrapolation is made.
    """

    behaviour: str
    ratio: float
    order: float
    extrapolated: float
    gci_fine: float
    gci_coarse: float
    asymptotic_ratio: float
    h: tuple
    values: tuple
    note: str = ""

    def as_dict(self) -> dict:
        return asdict(self)


def observed_order(f1: float, f2: float, f3: float, r21: float, r32: float | None = None) -> float:
    """Observed order p from three grids, equations (2) and (3).

    Parameters
    ----------
    f1, f2, f3 : float
        The quantity on the fine, medium and coarse grid.
    r21, r32 : float
        Refinement ratios h2 / h1 and h3 / h2 (> 1); r32 defaults to r21.

    Returns
    -------
    float
        p > 0, or nan when the sequence does not converge monotonically
        (e32 / e21 <= 0, or no positive root of (2)).

    Notes
    -----
    Write g(p) = p ln r21 + ln(r32^p - 1) - ln(r21^p - 1).  Its derivative is
    [y3 e^y3 / (e^y3 - 1) - y1 / (e^y1 - 1)] / p with y = p ln r > 0, positive
    because y e^y / (e^y - 1) > 1 > y / (e^y - 1); g rises from
    ln(ln r32 / ln r21) at p -> 0 without bound, so g(p) = ln(e32 / e21) has at
    most one root, found by bisection (Brent's method).
    """
    r32 = r21 if r32 is None else r32
    if not (r21 > 1.0 and r32 > 1.0):
        raise ValueError(f"refinement ratios r21 = {r21!r}, r32 = {r32!r}: both must be > 1 "
                         "(grids ordered finest first)")
    e21, e32 = f2 - f1, f3 - f2
    if e21 == 0.0 or e32 == 0.0 or (e32 / e21) <= 0.0:
        return math.nan
    target = math.log(e32 / e21)
    if math.isclose(r21, r32, rel_tol=1e-12):
        p = target / math.log(r21)
        return p if p > 0.0 else math.nan

    def g(p):
        return p * math.log(r21) + math.log(math.expm1(p * math.log(r32))) \
            - math.log(math.expm1(p * math.log(r21))) - target

    lo = 1e-9
    if g(lo) >= 0.0:
        return math.nan          # the root, if any, is not positive: no convergence
    hi = 1.0
    while g(hi) < 0.0:
        hi *= 2.0
        if hi > 1e3:
            return math.nan
    from scipy.optimize import brentq
    return float(brentq(g, lo, hi, xtol=1e-14, rtol=1e-14, maxiter=500))


def richardson(f1: float, f2: float, r21: float, order: float) -> float:
    """Richardson-extrapolated value f_ext = f1 + (f1 - f2) / (r21^p - 1), equation (4)."""
    return f1 + (f1 - f2) / math.expm1(order * math.log(r21))


def grid_convergence_index(f1: float, f2: float, r21: float, order: float,
                           safety_factor: float = SAFETY_FACTOR) -> float:
    """Relative GCI of the finer grid of a pair, Fs |(f1 - f2) / f1| / (r21^p - 1), eq. (5).

    Multiply by |f1| for the absolute band.  Fs = 1.25 is Roache's (1994) factor for
    a study of three or more grids (3 for two grids).
    """
    return safety_factor * abs((f1 - f2) / f1) / math.expm1(order * math.log(r21))


def estimate(h: tuple, f: tuple, safety_factor: float = SAFETY_FACTOR) -> ConvergenceEstimate:
    """Classify, find the order, extrapolate and bound one quantity from three grids.

    Parameters
    ----------
    h : three grid spacings, any order (they are sorted finest first with ``f``).
    f : the quantity on those grids.
    safety_factor : Fs of the GCI.

    Returns
    -------
    ConvergenceEstimate
    """
    if len(h) != 3 or len(f) != 3:
        raise ValueError(f"need exactly three grids, got h = {h!r}, f = {f!r}")
    pairs = sorted(zip(h, f))
    (h1, f1), (h2, f2), (h3, f3) = pairs
    if not (h1 < h2 < h3):
        raise ValueError(f"grid spacings {h!r}: must be three distinct values")
    if not all(math.isfinite(v) for v in (f1, f2, f3)):
        nan = math.nan
        return ConvergenceEstimate("divergent", nan, nan, nan, nan, nan, nan, (h1, h2, h3),
                                   (f1, f2, f3), "a value is not finite")
    r21, r32 = h2 / h1, h3 / h2
    e21, e32 = f2 - f1, f3 - f2
    nan = math.nan
    common = dict(h=(h1, h2, h3), values=(f1, f2, f3))
    if e21 == 0.0 and e32 == 0.0:
        return ConvergenceEstimate(EXACT, nan, nan, f1, 0.0, 0.0, nan,
                                   note="identical on all three grids", **common)
    if e32 == 0.0:
        return ConvergenceEstimate(DIVERGENT, nan, nan, nan, nan, nan, nan,
                                   note="f2 = f3 but f1 differs: no convergence", **common)
    R = e21 / e32
    if e21 == 0.0:
        return ConvergenceEstimate(STAGNANT, R, nan, nan, nan, nan, nan,
                                   note="f1 = f2 but f3 differs: order undefined", **common)
    if R < 0.0:
        return ConvergenceEstimate(OSCILLATORY, R, nan, nan, nan, nan, nan,
                                   note=f"oscillatory convergence (R = e21/e32 = {R:.3g} < 0): "
                                        "not extrapolated", **common)
    p = observed_order(f1, f2, f3, r21, r32)
    if not math.isfinite(p):
        return ConvergenceEstimate(DIVERGENT, R, nan, nan, nan, nan, nan,
                                   note=f"differences do not shrink with the grid (R = {R:.3g}): "
                                        "not extrapolated", **common)
    gci21 = grid_convergence_index(f1, f2, r21, p, safety_factor)
    gci32 = grid_convergence_index(f2, f3, r32, p, safety_factor)
    asym = gci32 / (r21 ** p * gci21) if gci21 > 0.0 else nan
    return ConvergenceEstimate(MONOTONE, R, p, richardson(f1, f2, r21, p), gci21, gci32, asym,
                               **common)


def estimate_finest(h, f, safety_factor: float = SAFETY_FACTOR) -> ConvergenceEstimate:
    """``estimate`` on the three finest of three or more grids."""
    if len(h) < 3:
        raise ValueError(f"need three or more grids for an observed order, got {len(h)}")
    pairs = sorted(zip(h, f))[:3]
    return estimate(tuple(p[0] for p in pairs), tuple(p[1] for p in pairs), safety_factor)
