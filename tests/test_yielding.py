"""Plastic yielding (convsim/model/laws/yielding.py) inside the time step and the steady solver.

Sources: the viscoplastic law of the benchmark of Tosi et al. (2015), Geochem. Geophys.
Geosyst. 16, 2175-2196 (quoted from memory): eta = 2 (1/eta_lin + 1/eta_plast)^-1,
eta_plast = eta* + sigma_y / sqrt(e_ij e_ij); the surface mobility M = surface rms velocity /
rms velocity (Tackley 2000, Geochem. Geophys. Geosyst. 1, quoted from memory): a stagnant lid
has M near 0, a mobile lid M near 1.
"""

import math
from pathlib import Path

import numpy as np
import pytest

from convsim.config import load_config
from convsim.model.energy import ThermalBoundaries
from convsim.model.grid import Grid
from convsim.model.rheology import ViscosityLaw, base_state_viscosity
from convsim.model.timestepping import Model

ROOT = Path(__file__).resolve().parent.parent


def test_yield_law_against_hand_formulas():
    T = np.array([0.0, 0.5, 1.0])
    z = np.array([1.0, 0.5, 0.0])
    e = np.array([0.0, 2.0, 50.0])
    lin = np.exp(-math.log(1e5) * T)
    sigma = 1.0 + 3.0 * (1.0 - z)
    law = ViscosityLaw("frank-kamenetskii", thermal_contrast=1e5, yield_stress=1.0,
                       yield_stress_gradient=3.0, plastic_viscosity=1e-3)
    with np.errstate(divide="ignore"):
        plast = 1e-3 + sigma / (math.sqrt(2.0) * e)          # sqrt(e_ij e_ij) = sqrt(2) e_II
    assert law(T, z, e) == pytest.approx(2.0 / (1.0 / lin + 1.0 / plast), rel=1e-14)
    assert law(T, z, e)[0] == pytest.approx(2.0 * lin[0])   # no flow: twice the linear law
    minimum = ViscosityLaw("frank-kamenetskii", thermal_contrast=1e5, yield_stress=1.0,
                           yield_stress_gradient=3.0, plastic_viscosity=1e-3,
                           yield_combination="minimum", yield_strain_measure="twice-invariant")
    with np.errstate(divide="ignore"):
        plast2 = 1e-3 + sigma / (2.0 * e)
    assert np.array_equal(minimum(T, z, e), np.minimum(lin, plast2))
    assert law.needs_strain_rate and not law.is_constant
    assert not ViscosityLaw("frank-kamenetskii", thermal_contrast=1e5).needs_strain_rate


def test_onset_sees_the_law_without_flow():
    """The conductive base state has no flow: eta_plast is infinite, the harmonic mean is
    2 eta_lin and the minimum eta_lin."""
    T, z = np.linspace(1.0, 0.0, 9), np.linspace(0.0, 1.0, 9)
    lin = ViscosityLaw("frank-kamenetskii", thermal_contrast=1e4)
    for combination, factor in (("harmonic", 2.0), ("minimum", 1.0)):
        law = ViscosityLaw("frank-kamenetskii", thermal_contrast=1e4, yield_stress=0.5,
                           yield_combination=combination)
        assert base_state_viscosity(law, T, z) == pytest.approx(factor * lin(T, z), rel=1e-15)


def _run(law, steps=25, n=16):
    g = Grid(n, n)
    model = Model(g, 1.0e4, ThermalBoundaries("temperature", 0.0, "temperature", 1.0), law,
                  stokes_solver="superlu")
    X, Z = g.cell_mesh()
    state = model.initial_state(1.0 - Z + 0.05 * np.cos(np.pi * X) * np.sin(np.pi * Z))
    reports = []
    for _ in range(steps):
        state, report = model.step(state)
        reports.append(report)
    return state, reports


def test_a_yield_stress_nothing_reaches_gives_the_temperature_case_bit_for_bit():
    base = dict(thermal_contrast=1e3)
    plain, _ = _run(ViscosityLaw("frank-kamenetskii", **base))
    never, reports = _run(ViscosityLaw("frank-kamenetskii", **base, yield_stress=1e30,
                                       yield_combination="minimum"))
    assert np.array_equal(plain.temperature, never.temperature)
    assert np.array_equal(plain.psi, never.psi)
    assert all(r.nonlinear_iterations >= 1 for r in reports)


def _tosi(case_extra, n=16):
    from convsim import api
    cfg = load_config(ROOT / "configs" / "benchmark_viscoplastic_case1.toml",
                      [f"domain.nx={n}", f"domain.nz={n}"] + case_extra)
    return api.run(cfg, None)


def test_yielding_breaks_the_stagnant_lid():
    """Case 1 (temperature only) has a stagnant lid; with a yield stress of 1 and the depth
    dependence of case 3 of the benchmark the lid moves with the flow.  16 x 16 cells, steady
    states by Newton.  (Case 2 itself needs 24 cells or more for its mobile steady state: at
    16 its run settles on a partly stagnant one, mobility 0.34.)"""
    stagnant = _tosi([])
    mobile = _tosi(["viscosity.yield_stress=1.0", "viscosity.plastic_viscosity=1e-3",
                    "viscosity.depth_contrast=10"])
    assert stagnant.status == mobile.status == "steady"
    assert stagnant.surface_vrms / stagnant.vrms < 0.05
    assert mobile.surface_vrms / mobile.vrms > 0.9


def test_rayleigh_number_of_a_yielding_layer_is_that_of_its_linear_law():
    """Tosi et al. (2015) state Ra = 100 with eta_lin = 1 at the cold surface (set-up quoted
    from memory); the harmonic mean gives 2 eta_lin where nothing flows, which must not halve
    the viscosity scale: the model runs at the stated Ra, with or without a yield stress,
    and the [body] maximum viscosity is scaled by eta_lin too."""
    from convsim.run import layer
    for case in (1, 2, 3, 4):
        cfg = load_config(ROOT / "configs" / f"benchmark_viscoplastic_case{case}.toml")
        assert layer.internal_rayleigh(cfg) == pytest.approx(100.0, rel=1e-12)
        # Ra at the hot bottom: 100 x eta_lin(T=0, z=1) / eta_lin(T=1, z=0), by hand
        contrast = 1e5 / cfg.viscosity.depth_contrast
        assert layer.rayleigh_numbers(cfg)["bottom"] == pytest.approx(100.0 * contrast, rel=1e-9)


def test_plate_diagnostics_of_known_surfaces():
    """Plateness (Tackley 2000, quoted from memory): a surface moving as two rigid plates with
    one narrow boundary has f80 of one cell, P near 1; uniform shearing of the surface (u
    linear in x) spreads deformation evenly: f80 = 0.8, P = 1 - 0.8/0.6 < 0."""
    from convsim.model.plates import mobility, plateness, surface_velocity, yielded_mask
    g = Grid(40, 20)
    z = g.z_node[:, None]
    x = g.x_node[None, :]
    plates = np.where(x < 0.5, -1.0, 1.0) * z ** 2 / 2.0        # u = dpsi/dz = +-z
    assert surface_velocity(g, plates) == pytest.approx(np.where(g.x_node < 0.5, -1, 1))
    assert plateness(g, plates) == pytest.approx(1.0 - (1 / 40) / 0.6)
    shear = (x - 0.5) * z ** 2 / 2.0
    assert plateness(g, shear) == pytest.approx(1.0 - 0.8 / 0.6, abs=1.0 / 40)
    assert mobility(1.0, 2.0) == 0.5
    law = ViscosityLaw("frank-kamenetskii", thermal_contrast=1e5, yield_stress=1.0,
                       yield_combination="minimum")
    # eta_lin = 1 at T = 0; eta_plast = 1 / (sqrt(2) e) < 1 exactly when e > 1/sqrt(2)
    mask = yielded_mask(law, np.zeros(3), np.ones(3), np.array([0.5, 0.70, 0.72]))
    assert mask.tolist() == [False, False, True]


def test_restart_with_yielding_continues_bit_for_bit(tmp_path):
    """The nonlinear iteration starts from the saved flow with the saved factor: a restarted
    yielding run repeats the uninterrupted one bit for bit."""
    from convsim import api

    def cfg(steps):
        return load_config(ROOT / "configs" / "benchmark_viscoplastic_case2.toml",
                           ["domain.nx=12", "domain.nz=12", "stop.steady=false",
                            "stop.newton=false", "output.snapshot_steps=8",
                            f"stop.max_steps={steps}"])
    full = api.run(cfg(16), tmp_path / "full.h5")
    api.run(cfg(8), tmp_path / "part.h5")
    resumed = api.run(cfg(16), restart=tmp_path / "part.h5")
    assert resumed.steps == full.steps == 16
    assert np.array_equal(resumed.temperature, full.temperature)
    assert np.array_equal(resumed.psi, full.psi)
