"""Scaling-law fits and regime classification (convsim.analysis.fitting).

References outside the project:
- Blankenbach et al. (1989), Geophys. J. Int. 98, 23-38, Table 9 (quoted from memory):
  steady Nu of cases 1a, 1b, 1c (Ra = 1e4, 1e5, 1e6, constant viscosity, free-slip
  unit square) = 4.884409, 10.534095, 21.972465.  Their log slope over the whole
  range is beta = ln(21.972465 / 4.884409) / ln(100) = 0.3265.
- Boundary-layer theory: Nu ~ Ra^(1/3) (Turcotte & Schubert, Geodynamics, ch. 6).
- scipy.stats.linregress as the reference least-squares line with standard errors;
  the Student t distribution for the coverage of the 95 % intervals.
"""

from conftest import assert_drawn_png
import json
import math

import numpy as np
import pytest
from scipy import stats

from convsim.cli import main
from convsim.errors import ConfigError
from convsim.analysis.fitting import (REFERENCE_SLOPES, RegimeThresholds, classify_regimes,
                             fit_power_law, fit_report)

BLANKENBACH_RA = np.array([1.0e4, 1.0e5, 1.0e6])
BLANKENBACH_NU = np.array([4.884409, 10.534095, 21.972465])   # Table 9, quoted from memory
BLANKENBACH_BETA = math.log(21.972465 / 4.884409) / math.log(100.0)


def test_published_nusselt_numbers_give_their_log_slope():
    assert BLANKENBACH_BETA == pytest.approx(0.3265, abs=1e-4)
    fit = fit_power_law(BLANKENBACH_RA, BLANKENBACH_NU)
    assert fit.exponent == pytest.approx(0.3265, abs=1e-3)
    # three points equally spaced in ln Ra: the least-squares slope is the end-point slope
    assert fit.exponent == pytest.approx(BLANKENBACH_BETA, rel=1e-9)
    lo, hi = fit.exponent_interval
    assert lo < fit.exponent < hi
    # the 1/3 of boundary-layer theory lies inside the 95 % interval of the published points
    assert lo < 1.0 / 3.0 < hi
    assert REFERENCE_SLOPES["nusselt_top"] == pytest.approx(1.0 / 3.0)


def test_fit_matches_linregress_and_t_interval():
    rng = np.random.default_rng(3)
    x = np.geomspace(1e3, 1e7, 9)
    y = 0.27 * x ** 0.31 * np.exp(rng.normal(0.0, 0.03, x.size))
    fit = fit_power_law(x, y)
    ref = stats.linregress(np.log(x), np.log(y))
    assert fit.exponent == pytest.approx(ref.slope, rel=1e-8)
    assert math.log(fit.prefactor) == pytest.approx(ref.intercept, rel=1e-8, abs=1e-10)
    assert fit.exponent_stderr == pytest.approx(ref.stderr, rel=1e-6)
    assert fit.log_prefactor_stderr == pytest.approx(ref.intercept_stderr, rel=1e-6)
    t = stats.t.ppf(0.975, x.size - 2)
    assert fit.exponent_interval[1] - fit.exponent == pytest.approx(t * ref.stderr, rel=1e-6)
    assert fit.r_squared == pytest.approx(ref.rvalue ** 2, rel=1e-9)


def test_exact_power_law_is_recovered():
    x = np.array([2.0, 5.0, 11.0, 40.0])
    fit = fit_power_law(x, 3.5 * x ** -0.75)
    assert fit.exponent == pytest.approx(-0.75, abs=1e-10)
    assert fit.prefactor == pytest.approx(3.5, rel=1e-10)
    assert fit.exponent_interval[1] - fit.exponent_interval[0] < 1e-8
    assert np.allclose(fit.predict(x), 3.5 * x ** -0.75)


def test_intervals_cover_the_true_exponent_at_their_confidence():
    """With n = 5 the t quantile (3.18) differs much from the normal one (1.96): a normal
    interval would cover only about 85 %."""
    rng = np.random.default_rng(11)
    x = np.geomspace(1e4, 1e6, 5)
    trials, hits = 600, 0
    for _ in range(trials):
        y = 0.2 * x ** 0.33 * np.exp(rng.normal(0.0, 0.05, x.size))
        lo, hi = fit_power_law(x, y).exponent_interval
        hits += lo <= 0.33 <= hi
    assert 0.92 <= hits / trials <= 0.98


def test_two_points_are_exact_without_intervals():
    fit = fit_power_law([1e4, 1e6], [4.884409, 21.972465])
    assert fit.exponent == pytest.approx(BLANKENBACH_BETA, rel=1e-12)
    assert fit.dof == 0 and all(math.isnan(v) for v in fit.exponent_interval)


@pytest.mark.parametrize("x, y, words", [
    ([1, 2, 3], [1, -2, 3], "positive"),
    ([1, 1, 1], [1, 2, 3], "distinct"),
    ([1, 2], [1, 2, 3], "equal lengths"),
])
def test_bad_input_is_refused(x, y, words):
    with pytest.raises(ConfigError, match=words):
        fit_power_law(x, y)


def test_regimes_by_mobility_and_contrast():
    surface = [213.6, 20.0, 0.5, 0.5, 5.0, np.nan]
    interior = [192.1, 100.0, 100.0, 100.0, 0.0, 1.0]
    contrast = [1.0, 1e2, 1e5, 10.0, 1e5, 1e5]
    regimes, ratio = classify_regimes(surface, interior, contrast)
    assert list(regimes) == ["mobile", "sluggish", "stagnant-lid", "sluggish",
                             "unclassified", "unclassified"]
    assert ratio[0] == pytest.approx(213.6 / 192.1)
    # thresholds are parameters
    strict = RegimeThresholds(mobile_ratio=1.2, stagnant_ratio=0.3, stagnant_contrast=50.0)
    regimes, _ = classify_regimes(surface, interior, contrast, strict)
    assert list(regimes[:4]) == ["sluggish", "stagnant-lid", "stagnant-lid", "sluggish"]
    # below onset (Nu = 1) there is no lid to classify
    regimes, _ = classify_regimes([1e-3, 50.0], [1e-3, 40.0], [1e3, 1e3], nusselt=[1.0, 5.0])
    assert list(regimes) == ["conductive", "mobile"]
    with pytest.raises(ConfigError, match="stagnant_ratio"):
        RegimeThresholds(mobile_ratio=0.1, stagnant_ratio=0.5)


def _published_table():
    return {"case_id": np.array(["1a", "1b", "1c", "x"], dtype=object),
            "status": np.array(["steady", "steady", "steady", "failed"], dtype=object),
            "rayleigh": np.array([1e4, 1e5, 1e6, 1e7]),
            "nusselt_top": np.r_[BLANKENBACH_NU, np.nan],
            # Blankenbach et al. (1989) Table 9 vrms (quoted from memory): 42.864947, 193.21454,
            # 833.98977
            "vrms": np.array([42.864947, 193.21454, 833.98977, np.nan]),
            "surface_vrms": np.array([40.0, 200.0, 800.0, np.nan]),
            "interior_vrms": np.array([1.0, 1.0, 1.0, np.nan]),
            "viscosity_contrast": np.array([1.0, 1.0, 1.0, 1.0])}


def test_fit_report_skips_unaccepted_rows():
    report = fit_report(_published_table())
    nu, vrms = report["fits"]
    assert nu["case_ids"] == ["1a", "1b", "1c"]
    assert nu["fit"]["exponent"] == pytest.approx(BLANKENBACH_BETA, rel=1e-9)
    # vrms of the published cases rises close to the Ra^(2/3) of boundary-layer theory
    assert vrms["fit"]["exponent"] == pytest.approx(2.0 / 3.0, abs=0.03)
    assert [r["regime"] for r in report["regimes"]] == ["mobile"] * 3 + ["unclassified"]
    with pytest.raises(ConfigError, match="--y"):
        fit_report(_published_table(), ys=("nusselt",))


def test_fit_command_writes_report_and_figures(tmp_path, capsys):
    table = _published_table()
    path = tmp_path / "table.csv"
    names = list(table)
    lines = [",".join(names)] + [",".join(str(table[n][i]) for n in names) for i in range(4)]
    path.write_text("\n".join(lines) + "\n")
    assert main(["fit", str(path), "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["fits"][0]["fit"]["exponent"] == pytest.approx(0.3265, abs=1e-3)
    out = tmp_path / "fit"
    saved = json.loads((out / "fit.json").read_text())
    assert saved["fits"][0]["fit"]["exponent"] == pytest.approx(report["fits"][0]["fit"]["exponent"])
    rows = (out / "regimes.csv").read_text().strip().splitlines()
    assert len(rows) == 1 + 4 and "regime" in rows[0]
    for name in ("nusselt_top_against_rayleigh.png", "vrms_against_rayleigh.png"):
        assert_drawn_png(out / name)
    # the published cases are isoviscous: a regime map would say nothing, none is drawn
    assert not (out / "regime_map.png").exists()
    assert not any(p.endswith("regime_map.png") for p in report["outputs"])
    assert main(["fit", str(path)]) == 2          # outputs exist: refused
    assert "exists" in capsys.readouterr().err
    assert main(["fit", str(path), "--overwrite", "--y", "nusselt_top"]) == 0
    assert main(["fit", str(path), "--x", "ra"]) == 2
    assert "--x = 'ra'" in capsys.readouterr().err


# -- time means, weights, conductive rows, stagnant-lid theory ---------------------------------
def _means_table():
    """Nu = 0.3 Ra^0.3 at five Rayleigh numbers, plus an outlier (twice the law) whose wide
    interval says it is poorly known, and a conductive row (Nu = 1)."""
    ra = np.array([1e4, 3e4, 1e5, 3e5, 1e6, 2e5, 1e3])
    nu = 0.3 * ra ** 0.3 * np.array([1.0, 1.01, 0.99, 1.0, 1.005, 2.0, 1.0])
    nu[-1] = 1.0
    ci = np.array([0.01, 0.01, 0.02, 0.02, 0.03, 5.0, 0.0]) * nu
    n = ra.size
    return {"case_id": np.array([f"c{i}" for i in range(n)], dtype=object),
            "status": np.array(["mean-precision"] * 5 + ["end-time", "steady"], dtype=object),
            "settled": np.array(["statistically-steady"] * 6 + ["steady"], dtype=object),
            "rayleigh": ra, "nusselt_top_mean": nu, "nusselt_top_ci95": ci, "nusselt_top": nu,
            "surface_vrms_mean": np.full(n, 50.0), "vrms_mean": np.full(n, 40.0),
            "surface_vrms": np.full(n, 50.0), "vrms": np.full(n, 40.0),
            "viscosity_contrast": np.ones(n)}


def test_fit_weights_each_mean_by_its_interval_and_leaves_conductive_rows_out():
    table = _means_table()
    report = fit_report(table, ys=("nusselt_top",))
    (entry,) = report["fits"]
    assert entry["column"] == "nusselt_top_mean" and entry["fit"]["weighted"]
    assert [x["case_id"] for x in report["excluded"]] == ["c6"]
    assert "c6" not in entry["case_ids"] and len(entry["case_ids"]) == 6
    # the same weighted least squares by numpy (sigma of ln y: ci / (1.96 y) with the floor)
    used = np.arange(6)
    sigma = np.hypot(table["nusselt_top_ci95"][used] / (1.96 * table["nusselt_top_mean"][used]),
                     1e-3)
    beta, _ = np.polyfit(np.log(table["rayleigh"][used]),
                         np.log(table["nusselt_top_mean"][used]), 1, w=1.0 / sigma)
    assert entry["fit"]["exponent"] == pytest.approx(beta, rel=1e-8)
    assert entry["fit"]["exponent"] == pytest.approx(0.3, abs=0.01)   # the outlier hardly counts
    unweighted = np.polyfit(np.log(table["rayleigh"][used]),
                            np.log(table["nusselt_top_mean"][used]), 1)[0]
    assert abs(unweighted - 0.3) > 0.03


def test_stagnant_lid_fit_is_compared_with_the_one_third_law():
    # Nu = 0.5 theta^(-4/3) Ra_i^(1/3) (Solomatov & Moresi 2000, quoted from memory), with
    # small deterministic scatter; the fit must recover 1/3 and say it lies in its interval
    ra_i = np.array([1e5, 3e5, 1e6, 3e6, 1e7])
    theta = np.array([9.2, 11.5, 13.8, 9.2, 13.8])
    nu = 0.5 * theta ** (-4.0 / 3.0) * ra_i ** (1.0 / 3.0) * np.array([1, 1.01, 0.99, 1.005, 1])
    n = ra_i.size
    table = {"case_id": np.array([f"s{i}" for i in range(n)], dtype=object),
             "status": np.array(["steady"] * n, dtype=object),
             "settled": np.array(["steady"] * n, dtype=object),
             "rayleigh": ra_i / 10, "nusselt_top": nu, "surface_vrms": np.full(n, 0.1),
             "vrms": np.full(n, 100.0), "viscosity_contrast": np.exp(theta),
             "rayleigh_mean_interior": ra_i, "rheological_temperature_scale": 1.0 / theta}
    lid = fit_report(table, ys=("nusselt_top",))["stagnant_lid"]
    assert lid["case_ids"] == list(table["case_id"])
    assert lid["fit"]["exponent"] == pytest.approx(1.0 / 3.0, abs=0.01)
    assert lid["theory_within_interval"] and lid["fit"]["prefactor"] == pytest.approx(0.5, rel=0.1)
