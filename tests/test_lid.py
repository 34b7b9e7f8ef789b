"""Stagnant-lid diagnostics (convsim.model.lid) on profiles and flows with known answers."""

import math

import numpy as np
import pytest

from convsim.model import lid
from convsim.model.grid import Grid
from convsim.model.rheology import ViscosityLaw


def test_lid_thickness_is_where_the_velocity_tangent_crosses_zero():
    # U rises to 1 at z = 0.6, falls linearly to 0 at z = 0.8 and stays ~0 in the lid:
    # the tangent of the linear fall crosses zero at z0 = 0.8, so the lid is 0.2 thick
    z = (np.arange(200) + 0.5) / 200
    u = np.where(z < 0.6, z / 0.6, np.clip((0.8 - z) / 0.2, 0.0, None)) + 1e-4
    assert lid.lid_thickness(z, u) == pytest.approx(0.2, abs=2e-3)
    # a profile that grows to the surface (mobile lid) has no lid
    assert lid.lid_thickness(z, 1.0 + z) == 0.0
    # a Gaussian bump, U = exp(-(z - 0.6)^2 / (2 s^2)): steepest at z = 0.6 + s, where the
    # tangent crosses zero at 0.6 + 2 s (calculus), lid = 0.4 - 2 s
    s = 0.05
    assert lid.lid_thickness(z, np.exp(-(z - 0.6) ** 2 / (2 * s * s))) == \
        pytest.approx(0.4 - 2 * s, abs=3e-3)


def test_interior_temperature_and_lid_contrast_average_the_band_below_the_lid():
    z = (np.arange(100) + 0.5) / 100
    T = np.where(z > 0.7, 0.9 * (1 - z) / 0.3, 0.9)     # isothermal 0.9 under a 0.3 lid
    T[z < 0.1] = 1.0
    assert lid.interior_temperature(z, T, lid=0.3) == pytest.approx(0.9)
    eta = np.exp(-np.log(1e6) * T)                      # Frank-Kamenetskii, contrast 1e6
    assert lid.lid_viscosity_contrast(z, eta, lid=0.3) == pytest.approx(
        math.exp(np.log(1e6) * (0.9 - T[-1])))


def test_rheological_temperature_scale_of_both_laws():
    # Frank-Kamenetskii eta = exp(-ln(c) T): dT_rh = 1 / ln(c); Arrhenius
    # eta = exp(E/(T + T0) - E/T0): dT_rh = (T + T0)^2 / E (calculus)
    fk = ViscosityLaw("frank-kamenetskii", thermal_contrast=1e5)
    assert lid.rheological_temperature_scale(fk, 0.8) == pytest.approx(1 / math.log(1e5),
                                                                          rel=1e-6)
    ar = ViscosityLaw("arrhenius", activation_energy=20.0, temperature_offset=0.5)
    assert lid.rheological_temperature_scale(ar, 0.7) == pytest.approx(1.2 ** 2 / 20.0,
                                                                          rel=1e-6)
    assert lid.rheological_temperature_scale(ViscosityLaw(), 0.5) == math.inf


@pytest.mark.parametrize("periodic,n", [(False, 1), (False, 3), (True, 2), (True, 4)])
def test_cells_and_upwellings_of_a_single_mode_flow(periodic, n):
    # psi = -sin(k x) sin(pi z), k = n pi / a: n cells; w = -dpsi/dx = k cos(k x) sin(pi z)
    # rises fastest where cos(k x) = 1
    g = Grid(96, 32, 2.0, periodic=periodic)
    X, Z = g.node_mesh()
    k = n * np.pi / g.aspect
    psi = -np.sin(k * X) * np.sin(np.pi * Z)
    cells, ups = lid.convection_cells(g, psi)
    assert cells == n
    expected = np.arange(0.0, g.aspect - 1e-9, 2 * np.pi / k)       # cos(k x) = 1
    assert ups.size == expected.size
    gap = np.abs(np.sort(ups)[:, None] - expected[None, :])
    if periodic:                                   # distance around the periodic box
        gap = np.minimum(gap, g.aspect - gap)
    assert np.all(gap.min(axis=1) <= g.dx)


def test_horizontal_velocity_profile_and_mobility():
    # psi = sin(pi x / a) sin(pi z): u = dpsi/dz = pi sin(pi x / a) cos(pi z), rms over x
    # is pi |cos(pi z)| / sqrt(2)
    g = Grid(128, 64, 1.0)
    X, Z = g.node_mesh()
    psi = np.sin(np.pi * X) * np.sin(np.pi * Z)
    U = lid.horizontal_velocity_profile(g, psi)
    assert np.allclose(U, np.pi * np.abs(np.cos(np.pi * g.z_cell)) / np.sqrt(2), rtol=2e-3)
    assert lid.surface_mobility(2.0, 4.0) == 0.5 and math.isnan(lid.surface_mobility(1.0, 0.0))


def test_regime_words_and_thresholds():
    words = lid.regime([1.2, 0.3, 0.01, 0.01, np.nan, 1.0], [1.0, 1e2, 1e5, 10.0, 1e5, 1.0],
                       nusselt=[3.0, 2.0, 2.0, 2.0, 2.0, 1.0])
    assert list(words) == ["mobile", "sluggish", "stagnant-lid", "sluggish", "unclassified",
                           "conductive"]
    assert set(words) <= set(lid.REGIMES)
    with pytest.raises(ValueError, match="stagnant_ratio"):
        lid.RegimeThresholds(mobile_ratio=0.1, stagnant_ratio=0.5)
