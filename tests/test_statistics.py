"""Time statistics (convsim.run.statistics) on synthetic series with known answers.

The AR(1) process x_k = phi x_{k-1} + e_k (e_k normal, variance s^2) has mean 0,
variance s^2 / (1 - phi^2) and integrated autocorrelation time
tau = (1 + phi) / (1 - phi) (textbook, e.g. Sokal 1997, eq. 2.20 ff., common
practice).  A 95 % interval of the mean must cover the true mean in about 95 %
of independent series.
"""

import numpy as np
import pytest
from scipy.signal import lfilter

from convsim.run import statistics as st


def ar1(seed, n, phi, mean=3.0, sigma=1.0):
    rng = np.random.default_rng(seed)
    x = lfilter([1.0], [1.0, -phi], rng.normal(0.0, sigma, n))
    x += rng.normal(0.0, sigma / np.sqrt(1.0 - phi ** 2)) * phi ** np.arange(1, n + 1)
    return mean + x


def test_time_mean_weights_each_sample_by_its_time_span():
    # y = t^2 on uneven times: the trapezoid of a quadratic; exact mean over [0, 2] is 4/3
    t = np.sort(np.concatenate([[0.0, 2.0], np.random.default_rng(1).uniform(0, 2, 4000)]))
    assert st.time_mean(t, t ** 2) == pytest.approx(4.0 / 3.0, rel=1e-5)
    # a sample that stands for a long time counts more than one that does not
    assert st.time_mean([0.0, 0.1, 10.0], [1.0, 1.0, 3.0]) == pytest.approx(
        (0.1 * 1.0 + 9.9 * 2.0) / 10.0)


def test_integrated_time_of_ar1_matches_theory():
    # tau = (1 + phi) / (1 - phi): 19 for phi = 0.9, 3 for phi = 0.5
    for phi, tau in ((0.9, 19.0), (0.5, 3.0)):
        got = np.mean([st.integrated_time(ar1(s, 20000, phi)) for s in range(10)])
        assert got == pytest.approx(tau, rel=0.1)


@pytest.mark.parametrize("phi,n", [(0.9, 2000), (0.5, 500)])
def test_interval_covers_the_true_mean_at_close_to_95_percent(phi, n):
    covered = 0
    for seed in range(400):
        m, half, _ = st.mean_interval(ar1(seed, n, phi))
        covered += abs(m - 3.0) <= half
    assert 0.90 <= covered / 400 <= 0.98


def test_interval_on_uneven_times_covers_at_close_to_95_percent():
    covered = 0
    for seed in range(400):
        y = ar1(seed, 3000, 0.9)
        t = np.cumsum(np.random.default_rng(seed + 1000).uniform(0.5, 1.5, y.size))
        e = st.estimate(t, y, from_time=t[0])
        covered += abs(e.mean - 3.0) <= e.ci95
    assert 0.90 <= covered / 400 <= 0.98


def test_spin_up_detector_finds_an_exponential_transient():
    # y = AR(1) noise (sd 2.3) + 20 exp(-t / 2): the transient sinks below the noise
    # at t = 2 ln(20 / 2.3) = 4.3; MSER must cut between 1 and 5 decay times
    t = np.arange(4000) * 0.01
    cuts = [st.spin_up_time(t, ar1(s, t.size, 0.9) + 20.0 * np.exp(-t / 2.0))[0]
            for s in range(100)]
    assert 2.0 <= min(cuts) and max(cuts) <= 10.0
    assert 3.0 <= np.median(cuts) <= 6.0


def test_stationary_series_count_as_settled_and_drifting_ones_not():
    t = np.arange(4000) * 0.01
    settled = [st.spin_up_time(t, ar1(s, t.size, 0.9))[1] for s in range(100)]
    assert np.mean(settled) >= 0.95
    # a transient decaying over half the record (time constant 20 on a span of 40)
    drifting = [st.spin_up_time(t, ar1(s, t.size, 0.9) + 20.0 * np.exp(-t / 20.0))[1]
                for s in range(100)]
    assert np.mean(drifting) <= 0.1


def test_buffer_thins_to_span_the_run_and_restores_bit_for_bit():
    buf = st.SeriesBuffer(2, capacity=8)
    for k in range(1, 101):
        buf.add([k, k * k])
        if k == 37:
            saved = st.SeriesBuffer.from_state(buf.state())
    assert 4 <= buf.rows.shape[0] < 8
    assert buf.rows[-1, 0] > 80 and buf.rows[0, 0] <= 32      # spans the run
    assert np.all(np.diff(buf.rows[:, 0]) == buf.stride)       # evenly thinned
    for k in range(38, 101):
        saved.add([k, k * k])
    assert np.array_equal(saved.rows, buf.rows) and saved.stride == buf.stride


def test_buffer_asks_only_for_the_rows_it_keeps():
    kept, offered = st.SeriesBuffer(1, capacity=8), st.SeriesBuffer(1, capacity=8)
    for k in range(1, 200):
        offered.add([k])
        if kept.wants_next():
            kept.add([k])
        else:
            kept.skip()
    assert np.array_equal(kept.rows, offered.rows) and kept.count == offered.count


def test_wall_interval_through_the_heat_balance_covers_the_long_run_mean():
    # Two walls with one long-run mean mu = 3 (H = 0, a bounded heat content: energy
    # conservation): the bottom a fast AR(1) (tau 3 samples: 2000 samples are reliable), the
    # top a slow one (tau 399: the window spans 5 tau; its estimated tau, median 124, may
    # even pass as "reliable"; its own interval covers mu in ~70 %), as below a stagnant lid.
    # The top's interval through the balance, |gap| + ci95_bottom (triangle inequality,
    # convsim.run.averages), is a bound: it must cover mu in at least the nominal 95 % of the
    # seeds (AR(1) theory as above; 400 seeds: +- 1.1 % sampling sd).
    from convsim.run.averages import balanced_walls
    t = np.arange(2000) * 1e-3
    covered = 0
    for seed in range(400):
        est = {"nusselt_top": st.estimate(t, ar1(seed + 10**6, t.size, 0.995, sigma=0.01), 0.0),
               "nusselt_bottom": st.estimate(t, ar1(seed, t.size, 0.5, sigma=0.1), 0.0)}
        assert est["nusselt_bottom"].reliable
        top = balanced_walls(est, 0.0, 1.0)["nusselt_top"]
        assert top.reliable and top.interval == "heat-balance" and top.mean == est[
            "nusselt_top"].mean
        covered += abs(top.mean - 3.0) <= top.ci95
    assert covered / 400 >= 0.93
    # with internal heating the long-run means differ by H / dT: the same bound around it
    est = {"nusselt_top": st.estimate(t, ar1(1, t.size, 0.995, sigma=0.01) + 0.5, 0.0),
           "nusselt_bottom": st.estimate(t, ar1(2, t.size, 0.5, sigma=0.1), 0.0)}
    top = balanced_walls(est, 1.0, 2.0)["nusselt_top"]
    gap = est["nusselt_top"].mean - est["nusselt_bottom"].mean - 0.5
    assert top.ci95 == pytest.approx(abs(gap) + est["nusselt_bottom"].ci95, rel=1e-12)
    # a reliable interval of its own is kept; no balance with a fixed-flux wall (dT NaN)
    assert balanced_walls(est, 1.0, 2.0)["nusselt_bottom"] == est["nusselt_bottom"]
    assert balanced_walls(est, 0.0, float("nan")) == est


def test_a_drift_within_the_allowed_rate_passes_and_a_faster_one_does_not():
    # Two columns over t = 0..40: a stationary AR(1) (tau 19) and a "heat content" of small
    # AR(1) noise (sd of the segment means ~1e-3) plus a planted linear drift r t.  With an
    # allowed rate r_a for the second column (eq. 2a of convsim.run.statistics: Geweke's
    # difference of the first 10 % and last 50 % reduced by r_a times the distance of their
    # mid times, ~0.7 x 40 = 28 here), a drift at r_a / 2 (difference 0.5 r_a 28 = 0.014,
    # 13 sd) passes, where Geweke's own test (no drift allowed) fails it; a drift at 2 r_a
    # (excess 0.028, 25 sd) fails.  The drift is planted, so its rate is known exactly.
    t = np.arange(4000) * 0.01
    r_a = 1e-3

    def verdicts(rate, rates):
        out = []
        for s in range(40):
            y = np.column_stack([ar1(s, t.size, 0.9),
                                 ar1(s + 500, t.size, 0.9, mean=0.8, sigma=0.002) + rate * t])
            out.append(st.spin_up_time(t, y, drift_rates=rates)[1])
        return np.mean(out)

    assert verdicts(0.0, [0.0, r_a]) >= 0.95 and verdicts(0.0, None) >= 0.95
    assert verdicts(0.5 * r_a, [0.0, r_a]) >= 0.95
    assert verdicts(0.5 * r_a, None) <= 0.05            # the strict test: any drift fails
    assert verdicts(2.0 * r_a, [0.0, r_a]) <= 0.05
    assert verdicts(-2.0 * r_a, [0.0, r_a]) <= 0.05     # a fall as well as a rise
    # a drift allowed to one column is not allowed to another
    y = np.column_stack([ar1(1, t.size, 0.9, mean=0.8, sigma=0.002) + 0.5 * r_a * t,
                         ar1(2, t.size, 0.9)])
    assert not st.spin_up_time(t, y, drift_rates=[0.0, r_a])[1]
    # the mid points of Geweke's parts: A = samples 0..9 (mid 4.5), B = 50..99 (mid 74.5)
    part_a, part_b, apart = st.geweke_parts(100)
    assert (part_a, part_b, apart) == (slice(0, 10), slice(50, 100), 70.0)
