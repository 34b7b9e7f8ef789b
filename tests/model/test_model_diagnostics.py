"""Diagnostics (convsim.model.diagnostics): the functions against analytic fields, and the
registry DIAGNOSTICS read by the step report, the series, the run file, --json and info."""

import h5py
import numpy as np
import pint

from convsim import api
from convsim.files.info import describe_run
from convsim.files.runfile import cf_attributes
from convsim.model import diagnostics as diag
from convsim.model.energy import ThermalBoundaries
from convsim.model.grid import Grid
from convsim.model.timestepping import Model, StepReport
from convsim.run.records import SERIES_COLUMNS

UREG = pint.UnitRegistry()


def test_conduction_has_nusselt_one_and_no_imbalance():
    """The linear conductive profile T = 1 - z: wall flux 1, Nu = 1 at both walls (the
    definition of Nu), corner gradients 1, budget balanced (inflow = outflow)."""
    g = Grid(10, 8, 1.5)
    T = 1.0 - g.cell_mesh()[1]
    bc = ThermalBoundaries()
    top, bottom = diag.nusselt_numbers(g, T, bc)
    assert abs(top - 1.0) < 1e-12 and abs(bottom - 1.0) < 1e-12
    np.testing.assert_allclose(diag.corner_gradients(g, T, bc), 1.0, atol=1e-12)
    assert abs(diag.heat_budget(g, 0.0, T, bc, 0.0)[1]) < 1e-12
    # with a source H = 2 the same wall flows leave 2 * area in the box: imbalance
    # (inflow + source - outflow) / largest flow = 2 area / (2 area) = +1
    assert abs(diag.heat_budget(g, 0.0, T, bc, 2.0)[1] - 1.0) < 1e-12


def _cell_mode(n, amplitude=3.0):
    g = Grid(n, n)
    XN, ZN = g.node_mesh()
    return g, amplitude * np.sin(np.pi * XN) * np.sin(np.pi * ZN)


def test_rms_velocities_of_a_single_cell_at_second_order():
    """psi = A sin(pi x) sin(pi z): u = A pi sin(pi x) cos(pi z), w = -A pi cos(pi x) sin(pi z),
    so vrms = A pi / sqrt(2) and the top's rms u = A pi / sqrt(2) (integrals of sin^2, cos^2)."""
    exact = 3.0 * np.pi / np.sqrt(2.0)
    errors = {"vrms": [], "surface": []}
    for n in (16, 32, 64):
        g, psi = _cell_mode(n)
        errors["vrms"].append(abs(diag.rms_velocity(g, psi) / exact - 1.0))
        errors["surface"].append(abs(diag.surface_rms_velocity(g, psi) / exact - 1.0))
    for name, e in errors.items():
        assert e[-1] < 1e-3, (name, e)
        assert np.log2(e[0] / e[1]) > 1.8 and np.log2(e[1] / e[2]) > 1.8, (name, e)


def test_every_diagnostic_is_declared_with_units_and_a_long_name():
    for name, d in diag.DIAGNOSTICS.items():
        assert d.name == name and d.long_name and d.dtype in ("f8", "i8")
        UREG.Unit(d.units)                        # a valid CF/UDUNITS-style unit string
        assert name in StepReport.__dataclass_fields__, name
        assert name in SERIES_COLUMNS, name


def test_the_step_report_carries_every_declared_diagnostic():
    g = Grid(12, 12)
    m = Model(g, 1.0e4, ThermalBoundaries())
    X, Z = g.cell_mesh()
    state = m.initial_state(1.0 - Z + 0.05 * np.cos(np.pi * X) * np.sin(np.pi * Z))
    state, report = m.step(state)
    state, report = m.step(state)
    assert report.nusselt_top == diag.nusselt_numbers(g, state.temperature, m.thermal)[0]
    assert report.vrms == diag.rms_velocity(g, state.psi)
    assert report.tendency_max > 0 and abs(report.energy_residual) < 1e-10
    assert set(m.diagnostics(state)) == {n for n, d in diag.DIAGNOSTICS.items()
                                         if d.of_state and d.needs == ""}   # no yielding law
    assert np.isnan(report.yielded_fraction)         # declared, not applicable: NaN


def test_every_diagnostic_reaches_the_run_file_json_and_info(case_config, tmp_path):
    """heat_imbalance too (it never reached the run file before the registry)."""
    path = tmp_path / "run.h5"
    result = api.run(case_config("1a", "domain.nx=8", "domain.nz=8", "stop.max_steps=12"), path)
    summary = result.summary()
    applicable = diag.applicable(yielding=False)          # constant viscosity
    with h5py.File(path, "r") as f:
        assert not {n for n in diag.DIAGNOSTICS if n not in applicable} & set(f)
        for name in applicable:
            d = diag.DIAGNOSTICS[name]
            assert f[name].shape == (12,), name
            expected = cf_attributes(name, d.units, d.long_name)   # the declared text, CF form
            assert f[name].attrs["units"] == d.units
            assert f[name].attrs["long_name"] == expected["long_name"], name
            assert f[name].dtype == np.dtype(d.dtype), name
            if d.of_state:
                assert name in summary and f.attrs[f"final_{name}"] == summary[name], name
        np.testing.assert_array_equal(f["heat_imbalance"][:], result.series["heat_imbalance"])
    info = describe_run(path)
    assert set(applicable) <= set(info["series"]["names"])
    assert {n for n in applicable if diag.DIAGNOSTICS[n].of_state} <= set(info["final"])
