"""Time statistics of a diagnostic series: spin-up, time means, 95 % intervals.

Pure functions over arrays (plus one small buffer that is plain data); the run
controller uses them for the statistical stop rule and the run summary.

Series sampled at uneven times
------------------------------
A run records its diagnostics once per step (or every ``series_every`` steps),
and steps are of uneven length.  The time mean over [t_0, t_N] is the
trapezoidal integral

    <y> = (1 / (t_N - t_0)) sum_i (t_{i+1} - t_i) (y_i + y_{i+1}) / 2,      (1)

so every sample is weighted by the time it stands for (``time_mean``).  The
estimators that assume equal spacing (spin-up, autocorrelation) work on the
series linearly interpolated to N equally spaced times over the same span
(``uniform_resample``).

Spin-up (``mser_truncation``)
-----------------------------
The MSER rule of White (1997), Simulation 69, 323-334, in its batched form
MSER-5 (White, Cobb & Spratt 2000, Proc. Winter Simulation Conference): with the
series grouped into batch means b_1..b_m of 5 samples, the truncation is the d
that minimises the squared standard error of the truncated mean,

    MSER(d) = sum_{j > d} (b_j - mean_{j > d} b)^2 / (m - d)^2,              (2)

searched over d <= m / 2 (White's rule: a truncation past the middle of the
series is not trusted).  A minimum at m / 2 itself means the series is still
drifting.  The retained part must also pass the drift test of Geweke (1992, in
Bayesian Statistics 4, 169-193): the means of its first 10 % and last 50 %
agree within |z| < 3 (``geweke_z``); otherwise ``settled`` is False.

A drift of allowed size (``spin_up_time(..., drift_rates=)``)
--------------------------------------------------------------
Geweke's test asks for no drift at all, however small.  Some columns may drift
by a known harmless amount: a run's heat content may creep while the wall Nu
means it moves stay well inside the requested precision (the caller derives the
allowed rate r_a, ``convsim.run.averages``).  For such a column the test is
Geweke's, shifted by the drift allowed between the two parts,

    z_a = max(|mean_A - mean_B| - r_a (c_B - c_A), 0) / sqrt(s_A^2 + s_B^2),   (2a)

c_A, c_B the mid times of the two parts: the column passes while its drift cannot
be told from one of rate r_a (|z_a| < 3); r_a = 0 is Geweke's test itself.  A
column with r_a > 0 takes no part in the MSER cut either: a steady creep within
the allowance has its minimum of eq. (2) at the middle of every record.

Interval of the mean (``mean_interval``)
----------------------------------------
The variance of the mean of N correlated samples is (sigma^2 / N) tau, with the
integrated autocorrelation time

    tau = 1 + 2 sum_{k=1}^{M} rho(k),                                          (3)

rho the normalised autocovariance (computed by FFT), summed up to the automatic
window of Sokal (1997, "Monte Carlo methods in statistical mechanics", Cargese
lectures): the smallest M with M >= C tau(M), C = 5 (the choice also made by
the emcee package).  The 95 % half-width is

    h = t_{0.975, n_eff - 1} sqrt(sigma^2 tau / N),   n_eff = N / tau,         (4)

with the Student t quantile (``scipy.special.stdtrit``, the function behind
``scipy.stats.t.ppf``, without the 0.3 s and 44 MiB that importing scipy.stats costs) for the
n_eff effective samples.
tau itself is reliable once N >= 50 tau (emcee's guidance, common practice);
``Estimate.reliable`` says whether that holds.

Everything here is in the units of the series; times in d^2/kappa.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Estimate", "time_mean", "uniform_resample", "autocorrelation",
           "integrated_time", "mean_interval", "mser_truncation", "geweke_z", "geweke_parts",
           "spin_up_time",
           "estimate", "SeriesBuffer", "WINDOW_C", "MIN_TAUS", "MSER_BATCH"]

WINDOW_C = 5.0       # Sokal's window constant, eq. (3)
MIN_TAUS = 50.0      # the series spans at least this many tau for a reliable interval
MSER_BATCH = 5       # MSER-5
GEWEKE_LIMIT = 3.0   # |z| of the drift test below which a series counts as settled


@dataclass(frozen=True)
class Estimate:
    """Time mean of one quantity with its 95 % half-width.

    ``from_time`` and ``to_time`` bound the averaging window, ``tau`` is the
    integrated autocorrelation time in samples of the uniform resample and
    ``tau_time`` the same in time units; ``samples`` the number of samples and
    ``reliable`` whether the window spans at least ``MIN_TAUS`` tau; ``interval`` how the
    half-width was found: "autocorrelation" (eq. 4) or "heat-balance" (the wall Nusselt
    numbers, ``convsim.run.averages.balanced_walls``).
    """

    mean: float
    ci95: float
    from_time: float
    to_time: float
    samples: int
    tau: float
    tau_time: float
    reliable: bool
    interval: str = "autocorrelation"


    @property
    def relative_ci95(self) -> float:
        """ci95 / |mean| (inf where the mean is 0)."""
        return self.ci95 / abs(self.mean) if self.mean != 0 else math.inf

    def to_dict(self) -> dict:
        return dict(mean=self.mean, ci95=self.ci95, from_time=self.from_time,
                    to_time=self.to_time, samples=self.samples, tau_time=self.tau_time,
                    reliable=self.reliable, interval=self.interval)


def time_mean(t, y) -> np.ndarray:
    """Time-weighted (trapezoidal) mean of y over [t_0, t_N], eq. (1).

    Parameters
    ----------
    t : array (N,), increasing
    y : array (N,) or (N, k): one column per quantity

    Returns
    -------
    float array of shape y.shape[1:]; the plain value for a single sample.
    """
    t, y = np.asarray(t, float), np.asarray(y, float)
    if t.size == 1 or t[-1] == t[0]:
        return y.mean(axis=0)
    dt = np.diff(t)
    mid = 0.5 * (y[1:] + y[:-1])
    return np.tensordot(dt, mid, axes=(0, 0)) / (t[-1] - t[0])


def uniform_resample(t, y, n: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """y linearly interpolated to n equally spaced times over [t_0, t_N] (default n = N).

    y may be (N,) or (N, k); returns (times, values).
    """
    t, y = np.asarray(t, float), np.asarray(y, float)
    n = t.size if n is None else int(n)
    tu = np.linspace(t[0], t[-1], n)
    if y.ndim == 1:
        return tu, np.interp(tu, t, y)
    return tu, np.column_stack([np.interp(tu, t, y[:, j]) for j in range(y.shape[1])])


def autocorrelation(y) -> np.ndarray:
    """Normalised autocorrelation rho(k), k = 0..N-1, of an equally spaced series (by FFT).

    The biased estimator (divided by N), common practice; rho(0) = 1 (all zeros
    for a constant series).
    """
    y = np.asarray(y, float)
    n = y.size
    x = y - y.mean()
    size = 1 << (2 * n - 1).bit_length()
    f = np.fft.rfft(x, size)
    acov = np.fft.irfft(f * np.conj(f), size)[:n]
    if acov[0] <= 0.0:
        return np.zeros(n)
    return acov / acov[0]


def integrated_time(y, c: float = WINDOW_C) -> float:
    """Integrated autocorrelation time of an equally spaced series, eq. (3), in samples."""
    rho = autocorrelation(y)
    if rho[0] == 0.0:
        return 1.0
    taus = 2.0 * np.cumsum(rho) - 1.0           # tau(M) = 1 + 2 sum_{1..M} rho
    m = np.arange(taus.size)
    ok = m >= c * taus
    window = int(np.argmax(ok)) if ok.any() else taus.size - 1
    return float(max(taus[window], 1.0))


def mean_interval(y, confidence: float = 0.95) -> tuple[float, float, float]:
    """(mean, half-width, tau) of an equally spaced series, eq. (4)."""
    y = np.asarray(y, float)
    n = y.size
    if n < 2:
        return float(y.mean()) if n else math.nan, math.inf, math.nan
    tau = integrated_time(y)
    var = float(np.var(y, ddof=1))
    n_eff = n / tau
    if var == 0.0:
        return float(y.mean()), 0.0, tau
    if n_eff <= 1.0:
        return float(y.mean()), math.inf, tau
    from scipy import special   # on first use (start-up)
    q = float(special.stdtrit(n_eff - 1.0, 0.5 * (1.0 + confidence)))
    return float(y.mean()), q * math.sqrt(var * tau / n), tau


def mser_truncation(y, batch: int = MSER_BATCH) -> tuple[int, bool]:
    """MSER-``batch`` truncation of an equally spaced series, eq. (2).

    Returns
    -------
    index : int
        First sample of the retained part.
    settled : bool
        False when the minimum lies at the middle of the series, the end of the
        search (the series is still drifting), or the series is too short (fewer
        than 4 batches).
    """
    y = np.asarray(y, float)
    m = y.size // batch
    if m < 4:
        return 0, False
    b = y[y.size - m * batch:].reshape(m, batch).mean(axis=1)   # drop the oldest remainder
    offset = y.size - m * batch
    # suffix sums: mean and sum of squares of b[d:] for every d
    rev = b[::-1]
    count = np.arange(1, m + 1)[::-1].astype(float)
    s1 = np.cumsum(rev)[::-1]
    s2 = np.cumsum(rev * rev)[::-1]
    sse = np.maximum(s2 - s1 * s1 / count, 0.0)
    score = sse / count ** 2
    half = m // 2
    d = int(np.argmin(score[: half + 1]))
    return offset + d * batch, d < half


def geweke_parts(n: int, first: float = 0.1, last: float = 0.5) -> tuple[slice, slice, float]:
    """The two parts of Geweke's test in a series of n samples, and the distance between
    their mid points in samples: (A, B, c_B - c_A)."""
    na, nb = max(int(first * n), 2), max(int(last * n), 2)
    return slice(0, na), slice(n - nb, n), (n - nb + 0.5 * (nb - 1)) - 0.5 * (na - 1)


def geweke_z(y, first: float = 0.1, last: float = 0.5, allowed: float = 0.0) -> float:
    """Geweke's (1992) drift statistic of an equally spaced series.

    z = (mean_A - mean_B) / sqrt(s_A^2 + s_B^2), A the first 10 % and B the last
    50 % of the series, s^2 the variance of each mean with its autocorrelation,
    eq. (3)-(4).  |z| of a stationary series is below 3 with probability 0.997.
    ``allowed`` (units of y): a difference of the means that counts as no drift,
    eq. (2a): |mean_A - mean_B| is reduced by it, not below 0 (sign kept).
    """
    y = np.asarray(y, float)
    part_a, part_b, _ = geweke_parts(y.size, first, last)
    a, b = y[part_a], y[part_b]
    var = 0.0
    for part in (a, b):
        v = float(np.var(part, ddof=1))
        var += v * integrated_time(part) / part.size if v > 0 else 0.0
    diff = float(a.mean() - b.mean())
    diff = math.copysign(max(abs(diff) - max(allowed, 0.0), 0.0), diff)
    if var == 0.0:
        return 0.0 if diff == 0.0 else math.inf
    return diff / math.sqrt(var)


def spin_up_time(t, y, batch: int = MSER_BATCH, drift_rates=None) -> tuple[float, bool]:
    """End of the spin-up of a series sampled at times t, and whether it has settled.

    The truncation is MSER (eq. 2) on the uniform resample; y may hold several
    columns, and the latest truncation over the columns counts.  The series has
    settled when every column's truncation lies in the first half and the kept
    part passes Geweke's test, |z| < ``GEWEKE_LIMIT`` (``geweke_z``).
    ``drift_rates``: one allowed rate |dy/dt| per column (units of y per unit of t;
    None or 0: no drift allowed); a column with a positive rate is left out of the cut
    and tested by eq. (2a).  Returns (time, settled).
    """
    tu, yu = uniform_resample(t, y)
    cols = yu.reshape(yu.shape[0], -1)
    rates = np.zeros(cols.shape[1]) if drift_rates is None else np.asarray(drift_rates, float)
    index, settled = 0, True
    for j in np.flatnonzero(~(rates > 0)):
        d, ok = mser_truncation(cols[:, j], batch)
        index, settled = max(index, d), settled and ok
    index = min(index, tu.size - 1)
    if settled and tu.size - index >= 20:
        spacing = (tu[-1] - tu[0]) / (tu.size - 1)
        apart = geweke_parts(tu.size - index)[2] * spacing
        settled = all(abs(geweke_z(cols[index:, j], allowed=max(rates[j], 0.0) * apart))
                      < GEWEKE_LIMIT for j in range(cols.shape[1]))
    return float(tu[index]), settled


def estimate(t, y, from_time: float | None = None, confidence: float = 0.95) -> Estimate:
    """Time mean and 95 % half-width of y over t >= from_time (default: after the MSER spin-up).

    The mean is eq. (1) over the window, the half-width eq. (4) on the uniform
    resample of the window.
    """
    t, y = np.asarray(t, float), np.asarray(y, float)
    if from_time is None:
        from_time, _ = spin_up_time(t, y)
    keep = t >= from_time
    tw, yw = t[keep], y[keep]
    if tw.size == 0:
        return Estimate(math.nan, math.inf, float(from_time), float(from_time), 0, math.nan,
                        math.nan, False)
    mean = float(time_mean(tw, yw))
    if tw.size < 2 or tw[-1] == tw[0]:
        return Estimate(mean, math.inf, float(tw[0]), float(tw[-1]), int(tw.size), math.nan,
                        math.nan, False)
    tu, yu = uniform_resample(tw, yw)
    _, half, tau = mean_interval(yu, confidence)
    spacing = (tu[-1] - tu[0]) / (tu.size - 1)
    return Estimate(mean, half, float(tw[0]), float(tw[-1]), int(tw.size), tau, tau * spacing,
                    bool(tu.size >= MIN_TAUS * tau))


class SeriesBuffer:
    """A bounded record of rows (time first), thinned by two whenever it fills.

    Rows arrive every step; every ``stride``-th is kept.  When ``capacity`` rows
    are held, every second one is dropped and the stride doubles, so the buffer
    always spans the whole run with between capacity/2 and capacity rows.  The
    state is plain data (``state()`` / ``from_state``) so that a restart
    continues bit for bit.
    """

    def __init__(self, width: int, capacity: int = 2048):
        if capacity < 4 or capacity % 2:
            raise ValueError(f"capacity = {capacity!r}: expected an even number >= 4")
        self.capacity = int(capacity)
        self._data = np.zeros((self.capacity, int(width)))
        self.size = 0
        self.stride = 1
        self.count = 0

    @property
    def rows(self) -> np.ndarray:
        """The kept rows, oldest first (a view)."""
        return self._data[: self.size]

    def wants_next(self) -> bool:
        """Whether the next row offered will be kept (compute it only then)."""
        return (self.count + 1) % self.stride == 0

    def skip(self) -> None:
        """Count a row that is not offered (``wants_next`` was False)."""
        self.count += 1

    def add(self, row) -> bool:
        """Offer one row; returns True when it was kept."""
        self.count += 1
        if self.count % self.stride:
            return False
        self._data[self.size] = row
        self.size += 1
        if self.size >= self.capacity:
            half = self._data[1::2].copy()
            self._data[: half.shape[0]] = half
            self.size = half.shape[0]
            self.stride *= 2
        return True

    def clear(self) -> None:
        self.size, self.stride, self.count = 0, 1, 0

    def state(self) -> dict:
        return dict(rows=self.rows.copy(), stride=self.stride, count=self.count,
                    capacity=self.capacity)

    @classmethod
    def from_state(cls, state: dict) -> "SeriesBuffer":
        rows = np.asarray(state["rows"], float)
        buf = cls(rows.shape[1], int(state["capacity"]))
        buf._data[: rows.shape[0]] = rows
        buf.size, buf.stride, buf.count = rows.shape[0], int(state["stride"]), int(state["count"])
        return buf
