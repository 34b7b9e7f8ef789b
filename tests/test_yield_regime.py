"""Diagnostics and regime of a lid that can yield (issue 11, diagnostics half).

Sources beside each check:
- the yielding law of Tosi et al. (2015), Geochem. Geophys. Geosyst. 16, 2175-2196 (quoted
  from memory): eta_plast = eta* + sigma_y / sqrt(e_ij e_ij) = eta* + sigma_y / (sqrt(2) e_II),
  combined with eta_lin by the harmonic mean 2 / (1/eta_lin + 1/eta_plast);
- the surface mobility M = surface vrms / vrms and the plateness of Tackley (2000), Geochem.
  Geophys. Geosyst. 1 (quoted from memory), as ``convsim.model.plates`` computes them;
- the lid decision of ``convsim.model.lid`` (our rule, common practice): a hand-built mobility
  series whose crossings are known exactly (piecewise linear in time);
- measured runs of the case-2-style law: mobile at a low yield stress (case 2 of the benchmark),
  stagnant at a yield stress the flow never reaches;
- case 4 of Tosi et al. (2015) (periodic lid breaking, quoted from memory): a real short run
  whose lid breaks and re-forms must be labelled episodic.
"""

from pathlib import Path

import h5py
import numpy as np
import pytest

from convsim import api
from convsim.config import load_config
from convsim.files.info import describe_run
from convsim.files.reader import read_run
from convsim.files.xdmf import xdmf_text
from convsim.model import lid
from convsim.model.diagnostics import DIAGNOSTICS, applicable
from convsim.model.fields import DERIVED
from convsim.model.grid import Grid
from convsim.model.plates import mobility, plateness, yield_fields
from convsim.model.rheology import ViscosityLaw
from convsim.model.stokes import StokesOperator

ROOT = Path(__file__).resolve().parent.parent
YIELDING = [n for n, d in DIAGNOSTICS.items() if d.needs == "yielding"]


def _yield_run(tmp_path, steps=8, n=12):
    cfg = load_config(ROOT / "configs" / "yield_regimes_base.toml",
                      [f"domain.nx={n}", f"domain.nz={n}", "stop.steady=false",
                       "stop.newton=false", f"stop.max_steps={steps}",
                       "stop.mean_precision=0.0", "output.snapshot_steps=4"])
    path = tmp_path / "yield.h5"
    return cfg, path, api.run(cfg, path)


def test_yielding_diagnostics_reach_the_run_file_as_plates_computes_them(tmp_path):
    """Series, final attributes, --json, info and the derived fields equal convsim.model.plates
    on the saved state (temperature and streamfunction read back), which agrees with the hand
    formula of the law (Tosi et al. 2015) for the stress and the yielded cells."""
    cfg, path, result = _yield_run(tmp_path)
    run = read_run(path)
    T, psi = run.fields["temperature"], run.fields["streamfunction"]
    grid = Grid(cfg.domain.nx, cfg.domain.nz, cfg.domain.aspect)
    law = ViscosityLaw.from_table(cfg.viscosity)
    y = yield_fields(StokesOperator(grid), law, T, grid.cell_mesh()[1], psi)
    expected = dict(yielded_fraction=float(np.mean(y.yielded)), plateness=plateness(grid, psi),
                    stress_max=float(y.stress.max()), viscosity_min=float(y.viscosity.min()),
                    viscosity_max=float(y.viscosity.max()),
                    mobility=mobility(run.series["surface_vrms"][-1], run.series["vrms"][-1]))
    assert 0.0 < expected["yielded_fraction"] < 1.0           # the law does yield here
    summary, info = result.summary(), describe_run(path)
    for name, value in expected.items():
        assert run.series[name][-1] == pytest.approx(value, rel=1e-12), name
        assert run.attrs[f"final_{name}"] == pytest.approx(value, rel=1e-12), name
        assert summary[name] == pytest.approx(value, rel=1e-12), name
        assert info["final"][name] == pytest.approx(value, rel=1e-12), name
    np.testing.assert_allclose(run.fields["strain_rate"], y.strain_rate, rtol=1e-12)
    np.testing.assert_allclose(run.fields["stress"], y.stress, rtol=1e-12)
    np.testing.assert_array_equal(run.fields["yielded"], y.yielded.astype(np.int8))
    np.testing.assert_allclose(run.fields["viscosity"], y.viscosity, rtol=1e-12)
    # hand formulas (Tosi et al. 2015): sigma = 2 eta e_II; yielded where eta_plast < eta_lin
    v = cfg.viscosity
    eta_lin = np.exp(-np.log(v.thermal_contrast) * T)
    e = run.fields["strain_rate"]
    eta_plast = v.plastic_viscosity + v.yield_stress / (np.sqrt(2.0) * e)
    np.testing.assert_allclose(run.fields["viscosity"], 2.0 / (1.0 / eta_lin + 1.0 / eta_plast),
                               rtol=1e-10)
    np.testing.assert_allclose(run.fields["stress"], 2.0 * run.fields["viscosity"] * e,
                               rtol=1e-12)
    np.testing.assert_array_equal(run.fields["yielded"] == 1, eta_plast < eta_lin)
    # every declared yielding diagnostic is a series of the file; the sidecar shows the fields
    with h5py.File(path, "r") as f:
        for name in YIELDING:
            assert f[name].shape == (8,) and np.all(np.isfinite(f[name][:])), name
        assert f["yielded"].dtype == np.int8
        assert list(f["yielded"].attrs["flag_values"]) == [0, 1]
    text = xdmf_text(path)
    for name in DERIVED:
        assert f'Name="{name}"' in text, name


def test_a_law_without_yielding_writes_no_yielding_columns(tmp_path, case_config):
    """The declared yielding diagnostics apply only to runs whose law yields (the registry's
    ``needs``); the mobility (Tackley 2000) applies to every run."""
    path = tmp_path / "plain.h5"
    result = api.run(case_config("1a", "domain.nx=8", "domain.nz=8", "stop.max_steps=3"), path)
    run = read_run(path)
    assert not set(YIELDING) & set(run.series) and not set(DERIVED) & set(run.fields)
    assert "mobility" in applicable(False) and "mobility" in run.series
    assert run.series["mobility"][-1] == pytest.approx(result.surface_vrms / result.vrms)


def test_a_real_lid_break_of_case_4_is_labelled_episodic():
    """Tosi et al. (2015) case 4 (sigma_y = 4, depth contrast 10; periodic lid breaking, quoted
    from memory) on 12 x 12 cells to t = 0.075: the lid closes (M < 0.1), breaks (M > 0.6)
    and re-forms to M between 0.1 and 0.3, as in every later cycle of the 32 x 32 run (M
    0.12 .. 0.23 between breaks).  The run's own label is episodic with the break at the
    upward crossing of 0.6 read off the series by hand (linear interpolation); a lower bound
    of the lid history at the stagnant 0.1 would miss the re-forming and call it sluggish."""
    cfg = load_config(ROOT / "configs" / "benchmark_viscoplastic_case4.toml",
                      ["domain.nx=12", "domain.nz=12", "stop.end_time=0.075",
                       "output.snapshot_interval=0"])
    result = api.run(cfg)
    t, m = np.asarray(result.series["series_time"]), np.asarray(result.series["mobility"])
    peak = int(np.argmax(m))
    assert m[:peak].min() < 0.1 and m[peak] > 0.6 and 0.1 < m[peak:].min() < 0.3
    up = np.flatnonzero((m[:-1] < 0.6) & (m[1:] >= 0.6))
    assert len(up) == 1
    k = up[0]
    by_hand = t[k] + (0.6 - m[k]) * (t[k + 1] - t[k]) / (m[k + 1] - m[k])
    assert result.lid["regime"] == "episodic", result.lid
    assert result.lid["switches"] == 2
    np.testing.assert_allclose(result.lid["breaking_times"], [by_hand], rtol=1e-12)


def _bursts(times, starts, rise=0.1, hold=0.2, low=0.02, high=0.9):
    """A piecewise-linear M(t): low, a linear rise to high over ``rise`` at each start, high for
    ``hold``, a linear fall back over ``rise``."""
    knots_t, knots_m = [times[0]], [low]
    for s in starts:
        knots_t += [s, s + rise, s + rise + hold, s + 2 * rise + hold]
        knots_m += [low, high, high, low]
    knots_t.append(times[-1])
    knots_m.append(low)
    return np.interp(times, knots_t, knots_m)


def test_episodic_label_on_a_series_with_known_switches():
    """Three bursts of M from 0.02 to 0.9: three lid breaks where M crosses 0.6 upward,
    at s + 0.1 (0.6 - 0.02) / (0.9 - 0.02) exactly (linear pieces), six switches, episodic;
    a lid that breaks once and stays open is not episodic; a series wandering between the two
    bounds of the history (0.35 .. 0.65, closed below 0.3) never closes, so it breaks at most
    once (hysteresis)."""
    t = np.linspace(0.0, 10.0, 2001)
    starts = [1.0, 4.0, 7.5]
    history = lid.lid_history(t, _bursts(t, starts))
    crossing = 0.1 * (0.6 - 0.02) / (0.9 - 0.02)
    np.testing.assert_allclose(history.breaking_times, [s + crossing for s in starts],
                               atol=1e-12)
    assert history.switches == 6
    closed = lid.RegimeThresholds().closed_ratio
    assert closed == pytest.approx(0.3)                  # half the mobile bound (module doc)
    open_time = 3 * (0.2 + 2 * 0.1 * (0.9 - 0.6) / (0.9 - 0.02) + 0.1 * (0.6 - closed) / 0.88)
    assert history.open_fraction == pytest.approx(open_time / 10.0, abs=2 * 0.005)
    words = lid.regime([0.3, 0.3, 0.3], 1e5, switches=[history.switches, 1, 6])
    assert list(words) == ["episodic", "sluggish", "episodic"]
    assert lid.regime(0.3, 1.0, switches=6)[0] == "sluggish"      # no contrast, no lid
    once = np.where(t < 2.0, 0.02, 0.9)
    assert lid.lid_history(t, once).switches == 1
    wander = 0.5 + 0.15 * np.sin(7.0 * t)             # 0.35 .. 0.65, never below 0.3
    h = lid.lid_history(t, wander)
    assert h.switches == 0 and h.breaking_times == ()
    assert h.open_fraction > 0.9                     # open from the first crossing of 0.6
    # counted from start = 3.0 (an averaging window): the first burst is before it; the lid is
    # closed when the window opens, so the burst at 4 still counts, and the window's share
    window = lid.lid_history(t, _bursts(t, starts), start=3.0)
    np.testing.assert_allclose(window.breaking_times, [s + crossing for s in starts[1:]],
                               atol=1e-12)
    assert window.switches == 4
    assert window.open_fraction == pytest.approx(open_time * 2 / 3 / 7.0, abs=2 * 0.005)
    # a window that opens between the bounds on the way up: the break counts only when the
    # samples before it say the lid was closed
    cut = t >= 4.05
    assert lid.lid_history(t[cut], _bursts(t, [4.0])[cut]).breaking_times == ()
    assert len(lid.lid_history(t, _bursts(t, [4.0]), start=4.05).breaking_times) == 1


def test_yield_stress_diagram_classifies_a_tiny_sweep(tmp_path):
    """Two cases of the sweep config's law (case 2 of Tosi et al. 2015), 16 x 16:
    sigma_y = 1 at Ra = 200 is measured mobile (M 0.88; at Ra = 100 this coarse grid lands on
    the partly stagnant branch, M 0.34, see DEVELOPERS.md), sigma_y = 1e4 (never reached) at
    Ra = 120 stagnant-lid; fit draws the yield stress / Ra diagram with those words."""
    from convsim.cli import main
    from convsim.studies.sweep import load_sweep, run_sweep
    from convsim.studies.sweep_table import read_table
    sweep = tmp_path / "sweep.toml"
    sweep.write_text(f'''title = "tiny yield sweep"
base = "{ROOT / 'configs' / 'yield_regimes_base.toml'}"
combine = "zip"
[fixed]
domain.nx = 16
domain.nz = 16
[[axis]]
key = "viscosity.yield_stress"
values = [1.0, 1.0e4]
[[axis]]
key = "physics.rayleigh"
values = [200.0, 120.0]
''')
    outcome = run_sweep(load_sweep(sweep), tmp_path / "out", jobs=1)
    table = read_table(outcome.table_csv)
    assert list(table["yield_stress"]) == [1.0, 1.0e4]
    assert list(table["status"]) == ["steady", "steady"]
    assert list(table["regime"]) == ["mobile", "stagnant-lid"]
    assert table["mobility"][0] > 0.6 and table["mobility"][1] < 0.1
    assert table["yielded_fraction"][0] > 0.0 and table["yielded_fraction"][1] == 0.0
    assert main(["fit", str(outcome.table_csv), "--out", str(tmp_path / "fit")]) == 0
    assert (tmp_path / "fit" / "regime_map_yield_stress.png").is_file()
    rows = (tmp_path / "fit" / "regimes.csv").read_text().splitlines()
    assert [r.split(",")[-1] for r in rows[1:]] == ["mobile", "stagnant-lid"]


def test_the_lid_history_reaches_the_report_and_the_statistics_group(tmp_path):
    """The bursts series above, recorded row by row into the run's averages (vrms 50, surface
    vrms 50 M), gives the same events as lid_history on the series itself; the lid report
    calls the run episodic and the run file's group statistics/lid keeps the events."""
    from convsim.files.statistics_group import read_statistics, write_statistics
    from convsim.run.averages import RunAverages, lid_report
    t = np.linspace(0.0, 10.0, 1001)
    m = _bursts(t, [1.0, 4.0, 7.5])
    averages = RunAverages(nz=4)
    for when, value in zip(t, m):
        averages.record(when, lambda v=value: dict(
            nusselt_top=3.0, nusselt_bottom=3.0, vrms=50.0, surface_vrms=50.0 * v,
            mean_temperature=0.5, interior_temperature=0.6, lid_thickness=0.1,
            temperature_profile=np.full(4, 0.5), viscosity_profile=np.ones(4)))
    history = averages.lid_history(0.0)
    assert history == lid.lid_history(t, m)
    stats = {name: dict(mean=value, ci95=0.0, from_time=0.0) for name, value in dict(
        nusselt_top=3.0, vrms=50.0, surface_vrms=50.0 * float(np.mean(m)),
        interior_temperature=0.6, lid_thickness=0.1).items()}
    stats["viscosity_profile"] = dict(mean=[1.0] * 4, ci95=[0.0] * 4, from_time=0.0)
    law = ViscosityLaw("frank-kamenetskii", thermal_contrast=1e5)
    grid = Grid(4, 4)
    report = lid_report(stats, law, grid, np.zeros(grid.node_shape), 1e5, history=history)
    assert report["regime"] == "episodic" and report["breaking_events"] == 3
    with h5py.File(tmp_path / "s.h5", "w") as f:
        f.create_dataset("z", data=grid.z_cell)
        write_statistics(f, dict(settled="unfinished", statistics={}, lid=report))
        back = read_statistics(f)["lid"]
    np.testing.assert_array_equal(back["breaking_times"], history.breaking_times)
    assert back["regime"] == "episodic" and back["switches"] == 6


def test_the_yielding_figures_draw_the_saved_fields(tmp_path):
    """The figures of a yielding run (convsim.figures.plates) draw the file's own values: the
    yielded panel the 0/1 flag, the strain-rate panel e_II, the surface velocity the one-sided
    second-order u = (3 psi_n - 4 psi_n-1 + psi_n-2) / (2 dz) of the saved streamfunction
    (hand formula), the mobility panel the series M = surface_vrms / vrms (Tackley 2000);
    ``plot_run`` writes both files."""
    from convsim.figures.fields import plot_run
    from convsim.figures.plates import mobility_figure, yielding_figure
    _, path, _ = _yield_run(tmp_path)
    run = read_run(path)
    fig = yielding_figure(run)
    meshes = {a.get_label(): a for ax in fig.axes for a in ax.get_children()
              if hasattr(a, "get_array") and a.get_label() in ("strain_rate", "yielded")}
    np.testing.assert_array_equal(np.asarray(meshes["yielded"].get_array()).reshape(
        run.fields["yielded"].shape), run.fields["yielded"])
    np.testing.assert_allclose(np.asarray(meshes["strain_rate"].get_array()),
                               run.fields["strain_rate"], rtol=1e-12)
    psi, dz = run.fields["streamfunction"], run.z_node[1] - run.z_node[0]
    u = (3.0 * psi[-1] - 4.0 * psi[-2] + psi[-3]) / (2.0 * dz)
    lines = [line for ax in fig.axes for line in ax.get_lines() if len(line.get_ydata()) == u.size]
    np.testing.assert_allclose(lines[0].get_ydata(), u, rtol=1e-12)
    m = mobility_figure(run).axes[0].get_lines()[0].get_ydata()
    np.testing.assert_allclose(m, run.series["surface_vrms"] / run.series["vrms"], rtol=1e-12)
    written = plot_run(path, out_dir=tmp_path / "fig", formats=("png",))
    assert {p.name for p in written} >= {"yield_yielding.png", "yield_mobility.png"}
