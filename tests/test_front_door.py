"""The Python front door, the answers in physical units, the progress display, the xarray views.

Outside references: the README's own Python block (run as written); hand calculations of
the physical scales with handbook values (Turcotte & Schubert, Geodynamics, 2nd ed. 2002,
table of mantle properties: k = 4 W m^-1 K^-1, kappa = 1e-6 m^2 s^-1, quoted from memory)
for an invented body; pint (a reference unit library) for every unit string in a run file.
"""

from __future__ import annotations

import json
import os
import re
from pathlib import Path

import numpy as np
import pytest

from convsim.cli import main

ROOT = Path(__file__).resolve().parents[1]

# An invented body ("Tessaly") with handbook mantle properties (Turcotte & Schubert, quoted
# from memory): k = 4 W m^-1 K^-1, kappa = 1e-6 m^2 s^-1; d = 2000 km, dT = 2000 K, T_s = 300 K.
TESSALY = """
title = "Tessaly mantle (invented planet)"
[domain]
nx = 12
nz = 12
[stop]
max_steps = 30
[body]
depth = "2000 km"
temperature_contrast = 2000.0
surface_temperature = 300.0
gravity = 10.0
density = 4000.0
thermal_expansivity = 3.0e-5
thermal_diffusivity = 1.0e-6
conductivity = 4.0
reference_viscosity = 1.0e22
"""
# By hand: k dT / d = 4 * 2000 / 2e6 W m^-2 = 4 mW m^-2; kappa / d = 5e-13 m s^-1, times
# 3.15576e7 s per Julian year and 100 cm per m = 1.57788e-3 cm yr^-1; d^2 / kappa = 4e18 s
# = 4e18 / 3.15576e13 Myr = 126752.4 Myr.
HEAT_FLOW_MW_M2 = 4.0
VELOCITY_CM_YR = 1.57788e-3
TIME_MYR = 126752.4


def test_readme_python_block_runs_as_written(tmp_path, monkeypatch):
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```python\n(.*?)```", text, re.S)
    assert blocks, "the README shows no Python block"
    monkeypatch.chdir(tmp_path)
    os.symlink(ROOT / "configs", tmp_path / "configs")
    import matplotlib
    matplotlib.use("Agg")
    namespace = {}
    exec(compile(blocks[0], "README.md", "exec"), namespace)
    result, run = namespace["result"], namespace["run"]
    assert result.physical["heat_flow_top"]["units"] == "mW m^-2"
    assert np.allclose(run.nusselt_top.values, result.series["nusselt_top"])


def test_package_exports_the_front_door():
    import convsim
    assert callable(convsim.run) and callable(convsim.load_config) and callable(convsim.open_run)
    import convsim.run.controller   # the folder is still the package
    assert callable(convsim.run)


def test_json_physical_block_matches_a_hand_calculation(tmp_path, capsys):
    config = tmp_path / "tessaly.toml"
    config.write_text(TESSALY, encoding="utf-8")
    assert main(["run", str(config), "--out", str(tmp_path), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    phys = out["physical"]
    assert phys["heat_flow_top"]["units"] == "mW m^-2"
    assert phys["heat_flow_top"]["value"] == pytest.approx(out["nusselt_top"] * HEAT_FLOW_MW_M2,
                                                           rel=1e-12)
    assert phys["heat_flow_bottom"]["value"] == pytest.approx(
        out["nusselt_bottom"] * HEAT_FLOW_MW_M2, rel=1e-12)
    assert phys["vrms"]["units"] == "cm yr^-1"
    assert phys["vrms"]["value"] == pytest.approx(out["vrms"] * VELOCITY_CM_YR, rel=1e-5)
    assert phys["time"]["value"] == pytest.approx(out["time"] * TIME_MYR, rel=1e-6)
    assert phys["mean_temperature"]["value"] == pytest.approx(
        300.0 + 2000.0 * out["mean_temperature"], rel=1e-12)
    # the same block from the run file (`convsim info --json`, with -v after the command)
    assert main(["info", str(tmp_path / "tessaly.h5"), "--json", "-v"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert info["physical"]["heat_flow_top"]["value"] == pytest.approx(
        phys["heat_flow_top"]["value"], rel=1e-12)


def test_run_file_units_parse_with_pint_and_series_plot_against_time(body_run):
    import pint
    import xarray as xr
    import matplotlib
    matplotlib.use("Agg")
    ureg = pint.UnitRegistry()
    with xr.open_dataset(body_run, engine="h5netcdf") as ds:
        for name, var in ds.variables.items():
            assert "units" in var.attrs, name
            ureg.Unit(var.attrs["units"])        # raises on a string pint cannot read
            assert "units " not in var.attrs.get("long_name", ""), name
        assert ds["series_time"].attrs["axis"] == "T" and ds["time"].attrs["axis"] == "T"
        assert ds["vrms"].attrs["nondimensional_scale"] == "kappa/d"
        (line,) = ds.nusselt_top.plot()
        assert np.array_equal(line.get_xdata(), ds.series_time.values)
        assert ds["time_myr"].attrs["units"] == "Myr" and ds["x_km"].attrs["units"] == "km"
        scale = ds.attrs["time_scale_myr"]
        assert np.allclose(ds["series_time_myr"].values, ds["series_time"].values * scale)


def test_open_run_and_result_views_carry_physical_units(body_run):
    import convsim
    ds = convsim.open_run(body_run)
    assert ds["heat_flow_top"].attrs["units"] == "mW m^-2"
    assert ds["x_km"].values[-1] == pytest.approx(ds["x"].values[-1] * 30.0)   # Quellis: 30 km


def test_restart_takes_the_config_from_the_run_file(tmp_path, capsys):
    config = tmp_path / "tessaly.toml"
    config.write_text(TESSALY, encoding="utf-8")
    assert main(["run", str(config), "--out", str(tmp_path), "--json"]) == 0
    first = json.loads(capsys.readouterr().out)
    assert main(["run", "--restart", str(tmp_path / "tessaly.h5"), "--set",
                 "stop.max_steps=40", "--json"]) == 0
    second = json.loads(capsys.readouterr().out)
    assert second["steps"] == 40 and first["steps"] == 30


def test_xdmf_refusal_names_no_option_it_lacks(constant_run, capsys):
    from convsim.files.xdmf import write_xdmf
    write_xdmf(constant_run, overwrite=True)
    assert main(["xdmf", str(constant_run)]) == 2
    err = capsys.readouterr().err
    assert "--overwrite" in err and "--out" not in err


class _Report:
    def __init__(self, step, time, residual):
        self.step, self.time, self.nusselt_top = step, time, 2.0
        self.tendency_max = residual * 2.0


def test_progress_measures_time_or_decades_of_residual():
    from convsim.config import parse_config
    from convsim.run.progress import ProgressDisplay
    timed = ProgressDisplay(parse_config({"stop": {"end_time": 0.5}}), always=True)
    timed.on_start(None, False)
    timed.on_step(_Report(10, 0.2, 1.0))
    assert timed.bar.total == 0.5 and timed.bar.n == pytest.approx(0.2)
    timed.on_finish(None)
    steady = ProgressDisplay(parse_config({"stop": {"steady_tolerance": 1e-6}}), always=True)
    steady.on_start(None, False)
    steady.on_step(_Report(1, 0.0, 1e-1))     # five decades to go
    steady.on_step(_Report(2, 0.0, 1e-3))
    assert steady.bar.total == pytest.approx(5.0) and steady.bar.n == pytest.approx(2.0)
    steady.on_finish(None)


class _Stream:
    def __init__(self, terminal):
        self.terminal, self.text = terminal, []

    def isatty(self):
        return self.terminal

    def write(self, text):
        self.text.append(text)

    def flush(self):
        pass


@pytest.mark.parametrize("terminal", [False, True])
def test_progress_silent_off_a_terminal_as_tqdm_would_be(monkeypatch, terminal):
    """Without ``always``, the bar follows tqdm's documented rule for ``disable=None`` (no
    bar when the stream is not a terminal), decided without building a bar (nor importing
    tqdm) off a terminal; on a terminal the bar is drawn as before."""
    from convsim.config import parse_config
    from convsim.run.progress import ProgressDisplay
    stream = _Stream(terminal)
    monkeypatch.setattr("sys.stderr", stream)
    display = ProgressDisplay(parse_config({"stop": {"steady_tolerance": 1e-6}}))
    display.on_start(None, False)
    display.on_step(_Report(50, 0.0, 1e-3))
    assert (display.bar is not None) == terminal
    display.on_finish(None)
    assert bool("".join(stream.text)) == terminal


def test_time_dependent_answers_are_time_means_with_intervals():
    """A statistically steady run: the physical answers are its time means, the half-widths
    scaled by the same factors (hand calculation with TESSALY's scales)."""
    from convsim.physical import physical_quantities
    from convsim.units import Scales
    scales = Scales(depth=2.0e6, temperature_contrast=2000.0, gravity=10.0, density=4000.0,
                    expansivity=3e-5, diffusivity=1e-6, conductivity=4.0,
                    reference_viscosity=1e22, surface_temperature=300.0)
    values = {"nusselt_top": 9.0, "nusselt_bottom": 9.5, "vrms": 100.0, "time": 0.2,
              "settled": "statistically-steady",
              "statistics": {"nusselt_top": {"mean": 10.0, "ci95": 0.5, "from_time": 0.1},
                             "vrms": {"mean": 120.0, "ci95": 4.0, "from_time": 0.1}}}
    phys = physical_quantities(values, scales)
    assert phys["heat_flow_top"]["value"] == pytest.approx(10.0 * HEAT_FLOW_MW_M2)
    assert phys["heat_flow_top"]["ci95"] == pytest.approx(0.5 * HEAT_FLOW_MW_M2)
    assert phys["vrms"]["value"] == pytest.approx(120.0 * VELOCITY_CM_YR, rel=1e-5)
    assert phys["vrms"]["ci95"] == pytest.approx(4.0 * VELOCITY_CM_YR, rel=1e-5)
    assert "ci95" not in phys["heat_flow_bottom"]          # no statistics for it: final value
    assert phys["heat_flow_bottom"]["value"] == pytest.approx(9.5 * HEAT_FLOW_MW_M2)
    values["settled"] = "steady"
    assert physical_quantities(values, scales)["heat_flow_top"]["value"] == pytest.approx(
        9.0 * HEAT_FLOW_MW_M2)


@pytest.mark.parametrize("status", ["interrupted", "diverged"])
def test_an_interrupted_or_diverged_run_prints_its_restart_command(tmp_path, capsys,
                                                                   monkeypatch, status):
    from convsim import api
    config = tmp_path / "tessaly.toml"
    config.write_text(TESSALY, encoding="utf-8")
    real_run = api.run

    def stopped(cfg, output, **kwargs):
        result = real_run(cfg, output, **kwargs)
        result.status, result.message = status, f"{status} at step {result.steps}"
        return result
    monkeypatch.setattr(api, "run", stopped)
    main(["run", str(config), "--out", str(tmp_path)])
    err = capsys.readouterr().err
    assert f"convsim run --restart {tmp_path / 'tessaly.h5'}" in err
