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

Time means with intervals
-------------------------
A sweep table of time-dependent runs holds ``<q>_mean`` and ``<q>_ci95``; the
fits use the mean and weight each point by its interval: the standard error of
ln y_i is taken as

    s_i = sqrt((ci95_i / (1.96 y_i))^2 + f^2),   weight 1 / s_i^2,             (4)

with a floor f = 1e-3 (a steady case has ci95 = 0; the floor stands for its
discretisation error, our choice).  The covariance is still scaled by the
weighted residual variance.  Rows are accepted by their settled word (steady
or statistically-steady) and conductive rows are left out with a note.

Stagnant-lid theory
-------------------
For the stagnant-lid rows, ``stagnant_lid_theory`` fits Nu theta^(4/3) =
a Ra_i^beta and sets beta beside 1/3, the asymptotic stagnant-lid law
Nu ~ theta^(-4/3) Ra_i^(1/3) of Solomatov & Moresi (2000, JGR 105, 21795;
quoted from memory), with theta = d ln eta / dT at the interior temperature and
Ra_i the Rayleigh number with the interior viscosity (sweep table columns).

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
``sluggish``, ``stagnant-lid``, ``episodic`` (the table's ``switches``: the lid
broke and re-formed during the run), ``conductive`` (Nu below 1.01) or
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
    weighted: bool = False     # points weighted by their intervals (eq. 4)

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


def fit_power_law(x, y, confidence: float = 0.95, rel_sigma=None) -> PowerLawFit:
    """Least-squares fit of y = a x^beta in log space, eqs. (1)-(2) of the module doc.

    Parameters
    ----------
    x, y : array_like, positive and finite, same length (>= 2, two distinct x at least)
    confidence : float in (0, 1)
    rel_sigma : array_like, optional
        Relative standard error of each y (the standard error of ln y): each point is
        weighted by 1 / rel_sigma^2 (eq. 4).  The covariance is still scaled by the
        weighted residual variance: the weights are relative.

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
    sigma = None if rel_sigma is None else np.asarray(rel_sigma, float).ravel()
    if dof > 0:
        popt, pcov = optimize.curve_fit(_line, lx, ly, p0=(slope0[1], slope0[0]), sigma=sigma)
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
        r_squared=1.0 - ss_res / ss_tot if ss_tot > 0 else 1.0, weighted=sigma is not None)


def classify_regimes(surface_velocity, interior_velocity, viscosity_contrast,
                     thresholds: RegimeThresholds = RegimeThresholds(), nusselt=None,
                     switches=None):
    """Regime of each case from M = v_surface / v_rms and the viscosity contrast, eq. (3).

    ``nusselt`` (optional, one per case) marks the cases with Nu below
    ``thresholds.conductive_nusselt`` as conductive; ``switches`` (optional, the
    table's column: changes of the lid decision along each run's mobility series,
    counted with the run's default bounds) marks two or more as episodic
    (``convsim.model.lid.regime``).

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
    regimes = regime(ratio, dc, thresholds=thresholds, switches=switches)
    if nusselt is not None:
        nu = np.broadcast_to(np.atleast_1d(np.asarray(nusselt, float)), vs.shape)
        regimes[ok & np.isfinite(nu) & (nu < thresholds.conductive_nusselt)] = "conductive"
    return regimes, ratio


SETTLED_OK = ("steady", "statistically-steady")
REL_FLOOR = 1.0e-3         # relative error floor of a point (steady: interval 0); our choice
STAGNANT_LID_THEORY = {
    "equation": "Nu = a theta^(-4/3) Ra_i^(1/3)",
    "exponent": 1.0 / 3.0,
    "theta_exponent": -4.0 / 3.0,
    "source": ("Solomatov & Moresi (2000), J. Geophys. Res. 105, 21795-21817: the asymptotic "
               "stagnant-lid scaling of bottom-heated convection, theta = d ln eta / dT at "
               "the interior temperature (1 / rheological_temperature_scale), Ra_i with the "
               "interior viscosity. Exponents quoted from memory; we do not recall their "
               "prefactor a reliably, so only the Ra_i exponent is compared (theta's -4/3 is "
               "imposed by the fit)"),
}


def select_rows(table: dict, statuses=("steady",)) -> np.ndarray:
    """Boolean mask of the table rows whose status is one of ``statuses`` (None: all)."""
    n = len(next(iter(table.values()))) if table else 0
    if statuses is None:
        return np.ones(n, bool)
    if "status" not in table:
        raise ConfigError("table: no 'status' column; is this a sweep table?")
    return np.isin(np.asarray(table["status"], dtype=object), list(statuses))


def accepted_rows(table: dict, statuses=None, settled=SETTLED_OK) -> np.ndarray:
    """Rows with an accepted status and settled word (tables without a ``settled`` column,
    from before the time means: status steady)."""
    mask = select_rows(table, statuses)
    if settled is None:
        return mask
    if "settled" in table:
        return mask & np.isin(np.asarray(table["settled"], dtype=object), list(settled))
    return mask & select_rows(table, ("steady",))


def _column(table: dict, name: str, option: str) -> np.ndarray:
    if name not in table:
        raise ConfigError(f"{option} = {name!r}: not a column of the table; columns: "
                          f"{', '.join(table)}")
    values = table[name]
    try:
        return np.asarray(values, float)
    except (TypeError, ValueError):
        raise ConfigError(f"{option} = {name!r}: the column is not numeric") from None


def value_column(table: dict, name: str, option: str) -> tuple[str, np.ndarray, np.ndarray]:
    """(column used, values, relative standard errors) of a quantity: its time mean
    ``<name>_mean`` with ``<name>_ci95`` where the table has them, else the column itself
    (errors NaN).  Relative error = ci95 / (1.96 |mean|), floored at ``REL_FLOOR``."""
    if f"{name}_mean" in table and f"{name}_ci95" in table:
        values = _column(table, f"{name}_mean", option)
        ci = _column(table, f"{name}_ci95", option)
        rel = np.hypot(np.where(np.isfinite(ci), ci, np.inf) / (1.96 * np.abs(values)),
                       REL_FLOOR)
        return f"{name}_mean", values, rel
    values = _column(table, name, option)
    return name, values, np.full(values.shape, np.nan)


def fit_table(table: dict, x: str = "rayleigh", y: str = "nusselt_top", *,
              mask=None, confidence: float = 0.95) -> tuple[PowerLawFit, np.ndarray]:
    """Fit y = a x^beta over the table rows in ``mask`` with positive finite x and y.

    y is the time mean ``<y>_mean`` where the table has it, each point weighted by
    its interval (``value_column``).  Returns the fit and the mask of the rows used.
    """
    xs = _column(table, x, "--x")
    _, ys, rel = value_column(table, y, "--y")
    use = np.ones(xs.shape, bool) if mask is None else np.asarray(mask, bool).copy()
    use &= np.isfinite(xs) & np.isfinite(ys) & (xs > 0) & (ys > 0)
    if use.sum() < 2:
        raise ConfigError(f"fit {y} against {x}: {int(use.sum())} usable rows (positive, finite, "
                          f"with an accepted status); need at least 2")
    weights = rel[use] if np.all(np.isfinite(rel[use])) else None
    return fit_power_law(xs[use], ys[use], confidence, weights), use


def _distinct(values) -> list:
    out = []
    for v in values:
        if not any((v == o) or (isinstance(v, float) and isinstance(o, float)
                                and math.isnan(v) and math.isnan(o)) for o in out):
            out.append(v)
    return out


def _fit_entry(table, x, y, sel, ids, confidence, entry, strict) -> dict:
    try:
        fit, used = fit_table(table, x, y, mask=sel, confidence=confidence)
    except ConfigError as exc:
        if strict:
            raise
        entry["error"] = str(exc)
        return entry
    name, yv, _ = value_column(table, y, "--y")
    xs = np.asarray(table[x], float)
    entry.update(fit=fit.to_dict(), column=name, case_ids=list(ids[used]),
                 x_values=xs[used].tolist(), y_values=yv[used].tolist())
    return entry


def stagnant_lid_theory(table: dict, mask, ids, confidence: float = 0.95) -> dict:
    """Fit Nu theta^(4/3) = a Ra_i^beta over the stagnant-lid rows in ``mask`` and set
    beta beside the theory's 1/3 (``STAGNANT_LID_THEORY``)."""
    entry = dict(STAGNANT_LID_THEORY)
    needed = ("rayleigh_mean_interior", "rheological_temperature_scale")
    if not all(k in table for k in needed):
        entry["error"] = ("the table has no rayleigh_mean_interior / "
                          "rheological_temperature_scale")
        return entry
    _, nu, rel = value_column(table, "nusselt_top", "nusselt_top")
    theta = 1.0 / _column(table, "rheological_temperature_scale", "theta")
    ra_i = _column(table, "rayleigh_mean_interior", "rayleigh_mean_interior")
    sel = np.asarray(mask, bool) & np.isfinite(theta) & (theta > 0) & np.isfinite(ra_i)
    sel &= np.isfinite(nu) & (nu > 0) & (ra_i > 0)
    if sel.sum() < 2:
        entry["error"] = f"{int(sel.sum())} statistically steady stagnant-lid rows; need 2"
        return entry
    w = rel[sel] if np.all(np.isfinite(rel[sel])) else None
    fit = fit_power_law(ra_i[sel], nu[sel] * theta[sel] ** (4.0 / 3.0), confidence, w)
    lo, hi = fit.exponent_interval
    entry.update(fit=fit.to_dict(), case_ids=list(ids[sel]),
                 theory_within_interval=bool(lo <= entry["exponent"] <= hi))
    return entry


def fit_report(table: dict, x: str = "rayleigh", ys=("nusselt_top", "vrms"), *,
               statuses=None, settled=SETTLED_OK, group: str | None = None,
               confidence: float = 0.95, thresholds: RegimeThresholds = RegimeThresholds(),
               surface: str = "surface_vrms", interior: str = "vrms",
               contrast: str = "viscosity_contrast") -> dict:
    """Fits of every ``y`` against ``x`` (per ``group`` value), the regime of every row and
    the stagnant-lid theory comparison.

    Rows fitted: an accepted status and settled word (``accepted_rows``), not
    conductive (listed under ``excluded`` with the reason).  y is the time mean
    with its interval as weight where the table has them (``value_column``).
    Returns a JSON-ready dict: ``fits``, ``excluded``, ``regimes`` (one per row),
    ``stagnant_lid`` and the settings.
    """
    ids = np.asarray(table.get("case_id", np.arange(len(next(iter(table.values()))))
                               .astype(str)), dtype=object)
    _, vs, _ = value_column(table, surface, "--surface-column")
    _, vi, _ = value_column(table, interior, "--interior-column")
    dc = _column(table, contrast, "--contrast-column")
    nu = value_column(table, "nusselt_top", "nusselt_top")[1] if "nusselt_top" in table \
        else None
    switches = _column(table, "switches", "switches") if "switches" in table else None
    regimes, ratio = classify_regimes(vs, vi, dc, thresholds, nu, switches)
    accepted = accepted_rows(table, statuses, settled)
    conductive = accepted & (regimes == "conductive")
    mask = accepted & ~conductive
    excluded = [{"case_id": str(ids[i]), "reason": f"conductive (Nu < "
                 f"{thresholds.conductive_nusselt:g}): no convection to fit"}
                for i in np.flatnonzero(conductive)]
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
            fits.append(_fit_entry(table, x, y, sel, ids, confidence, entry, group is None))
    n = len(ids)
    ra = _column(table, "rayleigh", "rayleigh") if "rayleigh" in table else np.full(n, np.nan)
    ra_b = _column(table, "rayleigh_bottom", "x") if "rayleigh_bottom" in table else ra
    ys_ = _column(table, "yield_stress", "yield_stress") if "yield_stress" in table \
        else np.zeros(n)
    status = table.get("status", np.full(n, "", dtype=object))
    settled_col = table.get("settled", np.full(n, "", dtype=object))
    rows = [{"case_id": str(ids[i]), "status": str(status[i]), "settled": str(settled_col[i]),
             "rayleigh": float(ra[i]), "rayleigh_bottom": float(ra_b[i]),
             "viscosity_contrast": float(dc[i]), "mobility": float(ratio[i]),
             "yield_stress": float(ys_[i]), "regime": str(regimes[i])} for i in range(n)]
    theory = stagnant_lid_theory(table, mask & (regimes == "stagnant-lid"), ids, confidence)
    return {"statuses": None if statuses is None else list(statuses),
            "settled": None if settled is None else list(settled), "confidence": confidence,
            "fits": fits, "excluded": excluded, "regimes": rows, "stagnant_lid": theory,
            "regime_rule": {"mobility": f"{surface} / {interior}", "contrast": contrast,
                            **asdict(thresholds)}}
