"""`convsim scenario` (starting configs) and `convsim compare` (two runs side by side).

Outside references: the Rayleigh number of the ice-shell scenario by hand,
Ra = rho g alpha dT d^3 / (kappa eta) = 920 * 1.3 * 1.6e-4 * 170 * (2e4)^3 / (1.5e-6 * 1e18)
= 173.4997 (ice values: common practice); a run compared with itself differs by zero.
"""

from __future__ import annotations

import json
import tomllib

import numpy as np
import pytest

from convsim.cli import main


def test_ice_shell_scenario_is_a_valid_config_with_its_rayleigh_number(tmp_path, capsys):
    from convsim.config import load_config
    out = tmp_path / "ice.toml"
    assert main(["scenario", "ice-shell", "--out", str(out)]) == 0
    cfg = load_config(out)
    assert cfg.physics.rayleigh == pytest.approx(173.4997, rel=1e-5)
    assert cfg.body is not None and "Quellis" in cfg.title
    assert "# Ra = rho g alpha dT d^3" in out.read_text()
    assert main(["scenario", "ice-shell", "--out", str(out)]) == 2       # exists
    assert "--overwrite" in capsys.readouterr().err


@pytest.mark.parametrize("name", ["rocky-mantle", "case-1a", "case-2a"])
def test_every_scenario_parses(name, capsys):
    from convsim.config import parse_config
    assert main(["scenario", name]) == 0
    cfg = parse_config(tomllib.loads(capsys.readouterr().out))
    if name.startswith("case"):
        assert cfg.body is None and "Blankenbach" in cfg.title
    else:
        from convsim.units import scales_from_body
        assert cfg.physics.rayleigh == pytest.approx(scales_from_body(cfg.body).rayleigh(),
                                                     rel=1e-5)


def test_unknown_scenario_is_one_line_exit_2(capsys):
    assert main(["scenario", "mars"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "ice-shell" in err[0]


def test_a_run_compared_with_itself_differs_by_nothing(constant_run, capsys):
    assert main(["compare", str(constant_run), str(constant_run), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["temperature_difference"]["max_abs"] == 0.0
    assert all(d["relative_difference"] in (0.0, None) for d in data["diagnostics"].values())


def test_compare_across_grids_interpolates_and_draws_the_difference(constant_run, tmp_path,
                                                                    capsys):
    from convsim import api
    from convsim.analysis.compare import compare_runs
    from convsim.config import load_config
    from convsim.figures.compare import comparison_figure
    from conftest import CONFIGS
    other = tmp_path / "other.h5"
    api.run(load_config(CONFIGS / "benchmark_case_1a.toml",
                        ["domain.nx=16", "domain.nz=16", "stop.max_steps=200"]), other)
    comparison = compare_runs(constant_run, other)
    assert comparison.interpolated and comparison.difference.shape == (12, 12)
    fig = comparison_figure(comparison)
    (image,) = [im for ax in fig.axes for im in ax.images
                if im.get_label() == "temperature difference"]
    np.testing.assert_array_equal(np.asarray(image.get_array()), comparison.difference)
    out = tmp_path / "cmp.png"
    assert main(["compare", str(constant_run), str(other), "--out", str(out)]) == 0
    assert out.is_file() and "Nu top" in capsys.readouterr().out


def test_sweep_given_a_run_config_says_so(capsys):
    from conftest import CONFIGS
    assert main(["sweep", str(CONFIGS / "benchmark_case_1a.toml")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "a run config" in err[0] and "convsim run" in err[0]


def test_bench_with_two_grids_judges_the_finest_and_does_not_fail_for_the_order(capsys):
    """Two grids cannot give an order (common practice: three are needed for p)."""
    from convsim.studies import bench, bench_report
    rows = [_row(n, err) for n, err in ((16, -0.0059), (32, -0.00085))]
    summary = bench.analyse_case("1a", rows, bench.case_config_path("1a"))
    assert summary.passed
    result = bench.BenchResult([summary], (16, 32), 1, (), 1.0, bench.provenance())
    table = bench_report.terminal_table(bench_report.jsonable(result.as_dict()))
    assert "not measurable with 2 grid(s)" in table and "FAIL" not in table


def _row(n, err):
    from test_bench import _rows
    (row,) = _rows("1a", (n,), lambda f0, h, i: f0 * (1.0 + err))
    return row


def test_fit_legend_reads_ra_and_the_group_not_raw_keys():
    from convsim.analysis.fitting import fit_power_law
    from convsim.figures import sweep as figures_sweep
    ra = np.array([1e4, 3e4, 1e5])
    nu = 0.27 * ra ** 0.31
    series = [(figures_sweep.group_label("viscosity.thermal_contrast", 1000.0), ra, nu,
               fit_power_law(ra, nu)),
              (figures_sweep.group_label("viscosity.thermal_contrast", 1.0), ra[:2], nu[:2],
               fit_power_law(ra[:2], nu[:2]))]
    fig = figures_sweep.scaling_plot(series, x_label="Ra", y_label="Nu", x_symbol="Ra")
    texts = [t.get_text() for t in fig.legends[0].get_texts()]
    assert all("viscosity.thermal_contrast" not in t and "x^" not in t for t in texts)
    assert "Delta" in texts[0] and "1000" in texts[0] and "Ra" in texts[0]
    assert "no interval" in texts[1]
    assert not figures_sweep.varies([1.0, 1.0]) and figures_sweep.varies([1.0, 100.0])
