"""The run file as netCDF-4 / CF: xarray and h5netcdf open it without options.

References: the CF conventions 1.8 (cfconventions.org, quoted from memory):
sec. 1.3 and 2.6.1 (``Conventions`` attribute), 3.1 (``units``; "1" for
dimensionless quantities), 3.2 (``long_name``), 4 (``axis`` X/Y/Z/T on
coordinate variables), 4.3 (a vertical coordinate without pressure units needs
``positive``), 5 (coordinate variables share their dimension's name; the
``coordinates`` attribute names auxiliary coordinates).  Units strings are
checked with pint (a general unit library, standing in for UDUNITS).
"""

from __future__ import annotations

import json

import h5py
import numpy as np
import pytest

import h5netcdf  # noqa: F401  (the engine xarray uses below; a test extra)
import xarray as xr

from convsim.cli import main  # noqa: E402
from convsim.files.runfile import FIELDS, SERIES  # noqa: E402
from convsim.files.reader import read_run  # noqa: E402
from convsim.units import UREG  # noqa: E402


@pytest.fixture(scope="module")
def dataset(constant_run):
    with xr.open_dataset(constant_run, engine="h5netcdf") as ds:
        yield ds.load()


def test_xarray_opens_the_run_file_with_dimensions_and_coordinates(constant_run, dataset):
    run = read_run(constant_run)
    ds = dataset
    assert ds.attrs["Conventions"].startswith("CF-")
    for name in ("x", "z", "x_node", "z_node", "time"):
        assert name in ds.coords and ds[name].dims == (name,)
    np.testing.assert_array_equal(ds["x"], run.x)
    np.testing.assert_array_equal(ds["z_node"], run.z_node)
    np.testing.assert_array_equal(ds["time"], run.times)
    assert ds["time"].dtype == np.float64  # nondimensional time: not decoded as dates
    assert set(run.fields) == set(FIELDS) - {"dye"}        # the dye only where [tracer] is on
    for name in run.fields:
        assert ds[name].dims == ("time",) + FIELDS[name][0], name
    np.testing.assert_array_equal(ds["temperature"].isel(time=-1), run.fields["temperature"])
    np.testing.assert_array_equal(ds["streamfunction"].isel(time=-1),
                                  run.fields["streamfunction"])
    np.testing.assert_array_equal(ds["nusselt_top"], run.series["nusselt_top"])


def test_every_variable_carries_units_and_long_name(dataset):
    for name, var in dataset.variables.items():
        units = var.attrs.get("units")
        assert isinstance(units, str) and units, name
        UREG.Unit(units)  # a valid unit string
        assert var.attrs.get("long_name"), name


def test_coordinates_carry_axis_and_vertical_direction(dataset):
    axes = {name: dataset[name].attrs.get("axis") for name in ("x", "x_node", "z", "z_node",
                                                                "time")}
    assert axes == {"x": "X", "x_node": "X", "z": "Z", "z_node": "Z", "time": "T"}
    for name in ("z", "z_node"):
        assert dataset[name].attrs.get("positive") == "up"
    assert np.all(np.diff(dataset["z"]) > 0)  # height grows upwards


def test_series_use_series_time_as_auxiliary_coordinate(dataset):
    for name in SERIES:
        if name == "series_time":
            continue
        assert "series_time" in dataset[name].coords, name
    nu = dataset["nusselt_top"]
    np.testing.assert_array_equal(nu["series_time"], dataset["series_time"])


def test_h5netcdf_sees_dimensions_and_h5py_a_plain_file(constant_run):
    with h5netcdf.File(constant_run, "r") as f:
        dims = {name: len(d) for name, d in f.dimensions.items()}
        assert dims["x"] + 1 == dims["x_node"] and dims["z"] + 1 == dims["z_node"]
        assert f.dimensions["time"].isunlimited()
        assert f.variables["temperature"].dimensions == ("time", "z", "x")
    with h5py.File(constant_run, "r") as f:
        assert f["temperature"].shape == (dims["time"], dims["z"], dims["x"])


def test_info_json_shape(constant_run, capsys):
    assert main(["info", str(constant_run), "--json"]) == 0
    info = json.loads(capsys.readouterr().out)
    assert set(info) >= {"file", "status", "provenance", "grid", "snapshots", "series",
                         "fields", "final", "config"}
    run = read_run(constant_run)
    assert info["grid"]["nx"] == 12 and info["grid"]["nz"] == 12
    assert info["snapshots"]["count"] == len(run.times)
    np.testing.assert_array_equal(info["snapshots"]["times"], run.times)
    assert info["series"]["records"] == 200
    assert info["status"] == run.attrs["status"]
    assert info["final"]["nusselt_top"] == pytest.approx(run.attrs["final_nusselt_top"])
    assert info["config"]["domain"]["nx"] == 12
    assert info["config"]["physics"]["rayleigh"] == 1e4
    assert info["provenance"]["convsim_version"]
    assert info["fields"]["temperature"]["dims"] == ["time", "z", "x"]
    assert main(["info", str(constant_run)]) == 0
    text = capsys.readouterr().out
    assert "12 x 12 cells" in text and "snapshots" in text
