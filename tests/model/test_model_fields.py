"""Advected fields (convsim.model.fields) and the passive dye (convsim.model.dye): the dye is
conserved to round-off in an insulated box, stays within its initial bounds (TVD), restarts bit
for bit, reaches the run file with units and CF attributes, the XDMF sidecar, `info` and the
figures; its starting shapes against exact areas; the expression sandbox."""

import h5py
import numpy as np
import pytest

from convsim import api
from convsim.errors import ConfigError
from convsim.files.info import describe_run
from convsim.files.reader import read_run
from convsim.files.xdmf import xdmf_text
from convsim.model import dye
from convsim.model.energy import ThermalBoundaries
from convsim.model.fields import ADVECTED, declared, dye_field
from convsim.model.grid import Grid
from convsim.model.timestepping import Model


def _dye_model(start, diffusivity=0.0, n=16):
    """Case 1a set-up at Ra = 1e5 (vigorous), with a dye in its insulated box."""
    g = Grid(n, n)
    return Model(g, 1.0e5, ThermalBoundaries(), fields=(dye_field(diffusivity, start),))


def _overturn(model, steps):
    X, Z = model.grid.cell_mesh()
    state = model.initial_state(1.0 - Z + 0.1 * np.cos(np.pi * X) * np.sin(np.pi * Z))
    total0, lo0, hi0 = state.fields["dye"].sum(), state.fields["dye"].min(), state.fields["dye"].max()
    worst_drift, lo, hi = 0.0, lo0, hi0
    for _ in range(steps):
        state, report = model.step(state)
        d = state.fields["dye"]
        worst_drift = max(worst_drift, abs(d.sum() - total0) / total0)
        lo, hi = min(lo, d.min()), max(hi, d.max())
    return state, report, worst_drift, (lo0, hi0), (lo, hi)


@pytest.mark.parametrize("diffusivity", [0.0, 0.05])
def test_dye_is_conserved_to_round_off_over_a_thousand_steps(diffusivity):
    """Insulated walls and conservative fluxes: the total dye cannot change (telescoping sums;
    the implicit diffusion has zero-flux rows), so only round-off may move it."""
    state, report, drift, _, _ = _overturn(_dye_model(dye.layer(0.0, 0.25), diffusivity), 1000)
    assert state.step == 1000 and report.vrms > 50.0          # it really moved
    assert drift < 1e-12, drift


@pytest.mark.parametrize("start", [dye.layer(0.0, 0.25), dye.blob(0.3, 0.6, 0.15)])
def test_dye_stays_within_its_initial_bounds(start):
    """Advection only: limited (TVD) fluxes create no new extrema (Harten 1983)."""
    state, _, _, (lo0, hi0), (lo, hi) = _overturn(_dye_model(start), 1000)
    assert (lo0, hi0) == (0.0, 1.0)
    assert lo >= lo0 - 1e-12 and hi <= hi0 + 1e-12, (lo, hi)
    assert 0.05 < state.fields["dye"].max() < 1.0              # carried and mixed, not frozen


def test_the_temperature_does_not_feel_a_passive_dye():
    """buoyancy = 0: the same run with and without the dye gives the same temperature, bit for bit."""
    g = Grid(12, 12)
    X, Z = g.cell_mesh()
    T0 = 1.0 - Z + 0.1 * np.cos(np.pi * X) * np.sin(np.pi * Z)
    plain = Model(g, 1.0e5, ThermalBoundaries())
    dyed = Model(g, 1.0e5, ThermalBoundaries(), fields=(dye_field(0.0, dye.blob(0.5, 0.5, 0.2)),))
    a, b = plain.initial_state(T0), dyed.initial_state(T0)
    for _ in range(50):
        a, _ = plain.step(a)
        b, _ = dyed.step(b)
    assert np.array_equal(a.temperature, b.temperature) and np.array_equal(a.psi, b.psi)


def test_layer_start_holds_the_exact_area():
    """Each cell holds the covered fraction of its height: total = aspect (top - bottom)
    on any grid, also for edges between cell faces."""
    for n in (7, 10, 33):
        g = Grid(n, n, 1.5)
        values = dye.layer(0.13, 0.58)(g)
        assert abs(values.sum() * g.dx * g.dz - 1.5 * 0.45) < 1e-13
        assert values.min() == 0.0 and values.max() == 1.0


def test_expression_start_equals_numpy():
    g = Grid(8, 6, 2.0)
    X, Z = g.cell_mesh()
    got = dye.expression("0.5 * (1 + tanh((z - 0.8) / 0.05)) + where(x > aspect / 2, 0.1, 0)")(g)
    np.testing.assert_array_equal(
        got, 0.5 * (1 + np.tanh((Z - 0.8) / 0.05)) + np.where(X > 1.0, 0.1, 0))


@pytest.mark.parametrize("text", [
    "__import__('os').system('true')", "x.__class__", "open('f')", "(lambda: 1)()",
    "[x for x in z]", "z if z else x", "sin(x=z)", "y + 1", "'a'", "9**9**9", "log(x - 5)",
    "np.sin(x)", ""])
def test_expression_sandbox_refuses(text):
    with pytest.raises(ValueError):
        dye.expression(text)(Grid(4, 4))


def _run_dye(case_config, path, *extra, **kw):
    cfg = case_config("1a", "domain.nx=12", "domain.nz=12", "stop.steady=false",
                      "output.snapshot_steps=40", "tracer.enabled=true", 'tracer.kind="blob"',
                      "tracer.blob_x=0.3", "tracer.blob_z=0.7", "tracer.blob_radius=0.2", *extra)
    return api.run(cfg, path, **kw)


def test_restart_with_the_dye_is_bit_for_bit(case_config, tmp_path):
    full = _run_dye(case_config, tmp_path / "full.h5", "stop.max_steps=120")
    _run_dye(case_config, tmp_path / "part.h5", "stop.max_steps=80")
    resumed = _run_dye(case_config, None, "stop.max_steps=120", restart=tmp_path / "part.h5")
    assert resumed.steps == full.steps == 120
    a, b = read_run(tmp_path / "full.h5"), read_run(tmp_path / "part.h5")
    assert np.array_equal(a.fields["dye"], b.fields["dye"])
    assert np.array_equal(a.fields["temperature"], b.fields["temperature"])


def test_the_dye_reaches_the_run_file_xdmf_and_info(case_config, tmp_path):
    path = tmp_path / "dye.h5"
    _run_dye(case_config, path, "stop.max_steps=40")
    with h5py.File(path, "r") as f:
        assert f["dye"].attrs["units"] == ADVECTED["dye"].units
        assert f["dye"].attrs["long_name"] == ADVECTED["dye"].long_name
        assert f["dye"].attrs["comment"] == ADVECTED["dye"].cf["comment"]
        assert f["dye"].shape[1:] == f["temperature"].shape[1:]
    assert 'Name="dye"' in xdmf_text(path)
    assert describe_run(path)["fields"]["dye"]["units"] == "1"
    from convsim.figures.fields import plot_run
    written = plot_run(path, out_dir=tmp_path / "figures", formats="png")
    assert (tmp_path / "figures" / "dye_dye.png") in written
    plain = tmp_path / "plain.h5"
    api.run(case_config("1a", "domain.nx=8", "domain.nz=8", "stop.max_steps=5"), plain)
    with h5py.File(plain, "r") as f:
        assert "dye" not in f                                  # only where [tracer] is enabled


def test_bad_expression_is_a_config_error_naming_the_key(case_config):
    cfg = case_config("1a", "tracer.enabled=true", 'tracer.kind="expression"',
                      'tracer.expression="__import__(1)"')
    with pytest.raises(ConfigError, match="tracer.expression"):
        api.run(cfg)


def test_declarations_are_complete():
    for name, d in ADVECTED.items():
        assert declared(name) is d and d.name == name and d.units and d.long_name
        assert d.diffusivity >= 0.0 and d.location == "cell"
    with pytest.raises(KeyError, match="temperature"):
        declared("salinity")
