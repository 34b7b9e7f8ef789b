"""The initial temperature and the one conductive profile (analytic), and build_model."""

import numpy as np
import pytest

from convsim.analysis._stability_operator import Layer, conductive_profile as layer_profile
from convsim.config import Config
from convsim.model.energy import ThermalBoundaries, conductive_profile
from convsim.run.build import build_model
from convsim.run.initial import initial_temperature


@pytest.mark.parametrize("top, bottom, H", [(("temperature", 0.0), ("temperature", 1.0), 0.0),
                                            (("temperature", 0.2), ("temperature", 1.0), 3.0),
                                            (("flux", 2.0), ("temperature", 1.0), 1.5),
                                            (("temperature", 0.0), ("flux", 1.0), 2.0)])
def test_conductive_profile_solves_the_conduction_problem(top, bottom, H):
    """T'' = -H with the wall conditions (analytic), and the stability layer uses the same one."""
    bc = ThermalBoundaries(top[0], top[1], bottom[0], bottom[1])
    z = np.linspace(0.0, 1.0, 11)
    T = conductive_profile(z, bc, H)
    h = 1e-4
    curvature = (conductive_profile(z + h, bc, H) - 2 * T + conductive_profile(z - h, bc, H)) / h**2
    np.testing.assert_allclose(curvature, -H, atol=1e-5)
    slope = lambda at: (conductive_profile(at + h, bc, H) - conductive_profile(at - h, bc, H)) / (2 * h)
    for value, kind, at in ((top[1], top[0], 1.0), (bottom[1], bottom[0], 0.0)):
        got = conductive_profile(at, bc, H) if kind == "temperature" else -slope(at)
        assert got == pytest.approx(value, abs=1e-8)
    layer = Layer(top_heat=top[0], top_value=top[1], bottom_heat=bottom[0],
                  bottom_value=bottom[1], internal_heating=H)
    np.testing.assert_allclose(layer_profile(layer, z), T, rtol=0, atol=1e-14)


def test_initial_cell_means_are_exact_for_the_quadratic_profile():
    cfg = Config().replace(domain__nx=4, domain__nz=8, physics__internal_heating=3.0,
                           start__perturbation="none")
    model = build_model(cfg)
    T = initial_temperature(model.grid, model.thermal, 3.0, cfg.start, 1e4)
    edges = np.linspace(0.0, 1.0, 9)
    # T(z) = 1 + (H/2 - 1) z - H z^2/2; F is its antiderivative, the cell mean (F(z1) - F(z0)) / dz
    F = lambda z: z + (1.5 - 1.0) * z**2 / 2 - 3.0 * z**3 / 6
    means = (F(edges[1:]) - F(edges[:-1])) / (1.0 / 8)
    np.testing.assert_allclose(T[:, 0], means, rtol=0, atol=1e-14)


def test_perturbations_and_the_one_cell_guess():
    cfg = Config().replace(domain__nx=16, domain__nz=8, start__amplitude=0.1)
    model = build_model(cfg)
    base = initial_temperature(model.grid, model.thermal, 0.0,
                               cfg.replace(start__perturbation="none").start, 1e4)
    mode = initial_temperature(model.grid, model.thermal, 0.0, cfg.start, 1e4) - base
    X, Z = model.grid.cell_mesh()
    np.testing.assert_allclose(mode, 0.1 * np.cos(np.pi * X) * np.sin(np.pi * Z), atol=1e-15)
    noise = cfg.replace(start__perturbation="noise", start__seed=3).start
    a = initial_temperature(model.grid, model.thermal, 0.0, noise, 1e4)
    assert np.array_equal(a, initial_temperature(model.grid, model.thermal, 0.0, noise, 1e4))
    assert np.abs(a - base).max() <= 0.1
    cell = initial_temperature(model.grid, model.thermal, 0.0,
                               cfg.replace(start__kind="one-cell").start, 1e6)
    assert 0.45 < cell[model.grid.nz // 2].mean() < 0.55          # isothermal core


def test_build_model_reads_every_table():
    cfg = Config().replace(domain__nx=12, domain__nz=6, domain__aspect=2.0,
                           boundaries__sides="periodic", boundaries__top_heat="flux",
                           boundaries__top_value=1.0, numerics__advection="upwind",
                           physics__rayleigh=2e4, viscosity__law="frank-kamenetskii",
                           viscosity__thermal_contrast=10.0, numerics__cfl=0.3)
    m = build_model(cfg)
    assert (m.grid.nx, m.grid.nz, m.grid.aspect, m.grid.periodic) == (12, 6, 2.0, True)
    assert m.rayleigh == 2e4 and m.limiter == "upwind" and m.cfl == 0.3
    assert m.thermal.top_value == 1.0 and m.law.thermal_contrast == 10.0
