"""Scaling laws and convective regimes from the table of a sweep.

Power law
---------
``fit_power_law`` fits y = a x^beta by linear least squares in log space,

    ln y_i = ln a + beta ln x_i + e_i,                                         (1)

with ``scipy.optimize.curve_fit``.  The covariance of (ln a, beta) is scaled by
the residual variance s^2 = sum e_i^2 / (n - 2) (no measurement errors are
assumed), and the intervals at confidence c are

    p +- t_{(1 + c)/2, n - 2} sqrt(C_pp)                                       (2)

with the Student t quantile (``scipy.stats.t``).  The interval of a is
exp of the interval of ln a (so it is not symmetric about a).  With two
points the fit is exact and the intervals are undefined (NaN).

Boundary-layer theory for an isoviscous layer heated from below gives
Nu ~ Ra^(1/3) and u ~ Ra^(2/3) (Turcotte & Schubert, Geodynamics, ch. 6, quoted
from memory); ``REFERENCE_SLOPES`` holds these for the figures.

Regimes
-------
``classify_regimes`` gives each case the regime word of ``convsim.model.lid.regime``
(one rule for single runs, sweeps, ``fit`` and the figures; the thresholds and
their sources are in that module's doc) from its surface mobility

    M = v_surface / v_rms                                                      (3)

(surface rms velocity over the rms velocity of the whole layer, Tackley 2000)
and the viscosity contrast Delta eta of the law over the layer: ``mobile``,
``sluggish``, ``stagnant-lid``, ``conductive`` (Nu below 1.01) or
``unclassified`` (missing or non-positive velocities, a failed case).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np
from scipy import optimize, stats

from convsim.errors import ConfigError
from convsim.model.lid import REGIMES, RegimeThresholds, regime

__all__ = ["PowerLawFit", "fit_power_law", "RegimeThresholds", "REGIMES", "classify_regimes",
           "select_rows", "fit_table", "fit_report", "REFERENCE_SLOPES"]

REFERENCE_SLOPES = {"nusselt_top": 1.0 / 3.0, "nusselt_bottom": 1.0 / 3.0, "vrms": 2.0 / 3.0,
                    "surface_vrms": 2.0 / 3.0, "interior_vrms": 2.0 / 3.0}


@dataclass(frozen=True)
class PowerLawFit:
    """y = prefactor x^exponent, fitted in log space, with intervals at ``confidence``."""

    prefactor: float
    exponent: float
    prefactor_interval: tuple
    exponent_interval: tuple
    exponent_stderr: float
    log_prefactor_stderr: float
    covariance: tuple          # 2x2 of (ln a, beta), row-major
    confidence: float
    n: int
    dof: int
    residual_rms: float        # rms of the ln-space residuals
    r_squared: float

    def predict(self, x) -> np.ndarray:
        """a x^beta."""
        return self.prefactor * np.asarray(x, float) ** self.exponent

    def to_dict(self) -> dict:
        d = asdict(self)
        for k, v in d.items():
            if isinstance(v, tuple):
                d[k] = [list(r) if isinstance(r, tuple) else r for r in v]
        return d


def _line(lx, log_a, beta):
    return log_a + beta * lx


def fit_power_law(x, y, confidence: float = 0.95) -> PowerLawFit:
    """Least-squares fit of y = a x^beta in log space, eqs. (1)-(2) of the module doc.

    Parameters
    ----------
    x, y : array_like, positive and finite, same length (>= 2, two distinct x at least)
    confidence : float in (0, 1)

    Returns
    -------
    PowerLawFit
    """
    x, y = np.asarray(x, float).ravel(), np.asarray(y, float).ravel()
    if x.shape != y.shape:
        raise ConfigError(f"fit: x has {x.size} values and y {y.size}; expected equal lengths")
    if not 0.0 < confidence < 1.0:
        raise ConfigError(f"confidence = {confidence!r}: expected a number between 0 and 1")
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y)) and np.all(x > 0)
            and np.all(y > 0)):
        raise ConfigError("fit: x and y must be positive and finite for a log-space fit")
    if x.size < 2 or np.unique(x).size < 2:
        raise ConfigError(f"fit: {x.size} points with {np.unique(x).size} distinct x; "
                          f"a power law needs at least 2 distinct x")
    lx, ly = np.log(x), np.log(y)
    slope0 = np.polyfit(lx, ly, 1)
    n, dof = x.size, x.size - 2
    if dof > 0:
        popt, pcov = optimize.curve_fit(_line, lx, ly, p0=(slope0[1], slope0[0]))
    else:
        popt, pcov = np.array([slope0[1], slope0[0]]), np.full((2, 2), np.nan)
    log_a, beta = (float(v) for v in popt)
    resid = ly - _line(lx, log_a, beta)
    ss_res = float(np.sum(resid ** 2))
    ss_tot = float(np.sum((ly - ly.mean()) ** 2))
    se = np.sqrt(np.diag(pcov)) if dof > 0 else np.array([np.nan, np.nan])
    t = float(stats.t.ppf(0.5 * (1.0 + confidence), dof)) if dof > 0 else math.nan
    beta_iv = (beta - t * se[1], beta + t * se[1])
    log_a_iv = (log_a - t * se[0], log_a + t * se[0])
    return PowerLawFit(
        prefactor=math.exp(log_a), exponent=beta,
        prefactor_interval=(math.exp(log_a_iv[0]), math.exp(log_a_iv[1])),
        exponent_interval=(float(beta_iv[0]), float(beta_iv[1])),
        exponent_stderr=float(se[1]), log_prefactor_stderr=float(se[0]),
        covariance=tuple(tuple(float(v) for v in row) for row in pcov),
        confidence=confidence, n=n, dof=dof, residual_rms=math.sqrt(ss_res / n),
        r_squared=1.0 - ss_res / ss_tot if ss_tot > 0 else 1.0)


def classify_regimes(surface_velocity, interior_velocity, viscosity_contrast,
                     thresholds: RegimeThresholds = RegimeThresholds(), nusselt=None):
    """Regime of each case from M = v_surface / v_rms and the viscosity contrast, eq. (3).

    ``nusselt`` (optional, one per case) marks the cases with Nu below
    ``thresholds.conductive_nusselt`` as conductive.

    Returns
    -------
    regimes : ndarray of str, one of ``REGIMES``
    ratio : ndarray of float, M (NaN where undefined)
    """
    vs = np.atleast_1d(np.asarray(surface_velocity, float))
    vi = np.atleast_1d(np.asarray(interior_velocity, float))
    dc = np.atleast_1d(np.asarray(viscosity_contrast, float))
    vs, vi, dc = np.broadcast_arrays(vs, vi, dc)
    ok = np.isfinite(vs) & np.isfinite(vi) & (vi > 0) & (vs >= 0)
    ratio = np.full(vs.shape, np.nan)
    ratio[ok] = vs[ok] / vi[ok]
    regimes = regime(ratio, dc, thresholds=thresholds)
    if nusselt is not None:
        nu = np.broadcast_to(np.atleast_1d(np.asarray(nusselt, float)), vs.shape)
        regimes[ok & np.isfinite(nu) & (nu < thresholds.conductive_nusselt)] = "conductive"
    return regimes, ratio


def select_rows(table: dict, statuses=("steady",)) -> np.ndarray:
    """Boolean mask of the table rows whose status is one of ``statuses`` (None: all)."""
    n = len(next(iter(table.values()))) if table else 0
    if statuses is None:
        return np.ones(n, bool)
    if "status" not in table:
        raise ConfigError("table: no 'status' column; is this a sweep table?")
    return np.isin(np.asarray(table["status"], dtype=object), list(statuses))


def _column(table: dict, name: str, option: str) -> np.ndarray:
    if name not in table:
        raise ConfigError(f"{option} = {name!r}: not a column of the table; columns: "
                          f"{', '.join(table)}")
    values = table[name]
    try:
        return np.asarray(values, float)
    except (TypeError, ValueError):
        raise ConfigError(f"{option} = {name!r}: the column is not numeric") from None


def fit_table(table: dict, x: str = "rayleigh", y: str = "nusselt_top", *,
              mask=None, confidence: float = 0.95) -> tuple[PowerLawFit, np.ndarray]:
    """Fit y = a x^beta over the table rows in ``mask`` with positive finite x and y.

    Returns the fit and the boolean mask of the rows it used.
    """
    xs, ys = _column(table, x, "--x"), _column(table, y, "--y")
    use = np.ones(xs.shape, bool) if mask is None else np.asarray(mask, bool).copy()
    use &= np.isfinite(xs) & np.isfinite(ys) & (xs > 0) & (ys > 0)
    if use.sum() < 2:
        raise ConfigError(f"fit {y} against {x}: {int(use.sum())} usable rows (positive, finite, "
                          f"with an accepted status); need at least 2")
    return fit_power_law(xs[use], ys[use], confidence), use


def _distinct(values) -> list:
    out = []
    for v in values:
        if not any((v == o) or (isinstance(v, float) and isinstance(o, float)
                                and math.isnan(v) and math.isnan(o)) for o in out):
            out.append(v)
    return out


def fit_report(table: dict, x: str = "rayleigh", ys=("nusselt_top", "vrms"), *,
               statuses=("steady",), group: str | None = None, confidence: float = 0.95,
               thresholds: RegimeThresholds = RegimeThresholds(),
               surface: str = "surface_vrms", interior: str = "vrms",
               contrast: str = "viscosity_contrast") -> dict:
    """Fits of every ``y`` against ``x`` (per ``group`` value) and the regime of every row.

    Returns a JSON-ready dict: ``fits`` (one entry per y and group, with the fit
    or an ``error``, and the x, y, case_id of the rows used) and ``regimes``
    (one entry per row), plus the settings.
    """
    mask = select_rows(table, statuses)
    ids = np.asarray(table.get("case_id", np.arange(len(mask)).astype(str)), dtype=object)
    if group is not None and group not in table:
        raise ConfigError(f"--group = {group!r}: not a column of the table; columns: "
                          f"{', '.join(table)}")
    groups = [None] if group is None else _distinct(list(np.asarray(table[group])[mask]))
    fits = []
    for y in ys:
        for g in groups:
            sel = mask if g is None else mask & (np.asarray(table[group]) == g)
            entry = {"x": x, "y": y, "group": group, "group_value": g,
                     "reference_slope": REFERENCE_SLOPES.get(y)}
            try:
                fit, used = fit_table(table, x, y, mask=sel, confidence=confidence)
            except ConfigError as exc:
                if group is None:
                    raise
                entry["error"] = str(exc)
                fits.append(entry)
                continue
            xs, yv = np.asarray(table[x], float), np.asarray(table[y], float)
            entry.update(fit=fit.to_dict(), case_ids=list(ids[used]),
                         x_values=xs[used].tolist(), y_values=yv[used].tolist())
            fits.append(entry)
    vs, vi = _column(table, surface, "--surface-column"), _column(table, interior,
                                                                   "--interior-column")
    dc = _column(table, contrast, "--contrast-column")
    nu = _column(table, "nusselt_top", "nusselt_top") if "nusselt_top" in table else None
    regimes, ratio = classify_regimes(vs, vi, dc, thresholds, nu)
    ra = _column(table, "rayleigh", "rayleigh") if "rayleigh" in table else np.full(len(vs), np.nan)
    status = table.get("status", np.full(len(vs), "", dtype=object))
    rows = [{"case_id": str(ids[i]), "status": str(status[i]), "rayleigh": float(ra[i]),
             "viscosity_contrast": float(dc[i]), "mobility": float(ratio[i]),
             "regime": str(regimes[i])} for i in range(len(vs))]
    return {"statuses": None if statuses is None else list(statuses), "confidence": confidence,
            "fits": fits, "regimes": rows,
            "regime_rule": {"mobility": f"{surface} / {interior}", "contrast": contrast,
                            **asdict(thresholds)}}
