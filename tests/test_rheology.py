"""Viscosity laws: values against hand formulas, Frank-Kamenetskii as the linearisation of
Arrhenius, cut-offs, and the contract of the one-declaration registry (convsim.model.laws).

Sources: the Frank-Kamenetskii approximation replaces the Arrhenius exponent
E/(T + T0) by its tangent at the surface temperature, E/T0 - E T/T0^2 (Frank-Kamenetskii
1969, "Diffusion and heat transfer in chemical kinetics"; common practice in convection
studies), so the two laws agree at T = 0 in value and slope and differ by O(T^2) in ln eta.
"""

import math
import subprocess
import sys

import numpy as np
import pytest

from convsim.config import Config, ConfigError, TABLES, parse_config
from convsim.model import laws
from convsim.model.rheology import ViscosityLaw, base_state_viscosity, viscosity

T = np.array([0.0, 0.1, 0.5, 0.9, 1.0])
Z = np.array([1.0, 0.7, 0.5, 0.2, 0.0])


def test_law_values_against_hand_formulas():
    fk = ViscosityLaw("frank-kamenetskii", thermal_contrast=1e5, depth_contrast=10.0)
    for t, z, eta in zip(T, Z, fk(T, Z)):
        assert eta == pytest.approx(math.exp(-math.log(1e5) * t + math.log(10.0) * (1 - z)),
                                    rel=1e-14)
    ar = ViscosityLaw("arrhenius", activation_energy=20.0, activation_volume=3.0,
                      temperature_offset=0.25)
    for t, z, eta in zip(T, Z, ar(T, Z)):
        assert eta == pytest.approx(math.exp((20.0 + 3.0 * (1 - z)) / (t + 0.25) - 20.0 / 0.25),
                                    rel=1e-13)
    assert np.array_equal(ViscosityLaw()(T, Z), np.ones(5))
    # the reference state of Ra: eta = 1 at T = 0, z = 1 for every law
    for law in (fk, ar, ViscosityLaw()):
        assert law(0.0, 1.0) == pytest.approx(1.0, rel=1e-15)


def test_frank_kamenetskii_is_the_linearised_arrhenius_law():
    E, V, T0 = 12.0, 4.0, 0.5
    ar = ViscosityLaw("arrhenius", activation_energy=E, activation_volume=V,
                      temperature_offset=T0)
    # tangent of the exponent at T = 0: b = E / T0^2; depth term at T = 0: c = V / T0
    fk = ViscosityLaw("frank-kamenetskii", thermal_contrast=math.exp(E / T0 ** 2),
                      depth_contrast=math.exp(V / T0))
    z = np.linspace(0.0, 1.0, 11)
    assert np.allclose(np.log(ar(0.0, z)), np.log(fk(0.0, z)), rtol=0, atol=1e-12)
    # away from T = 0 at the surface the misfit of ln eta is E T^2 / T0^3 + O(T^3)
    gaps = [abs(math.log(ar(t, 1.0)) - math.log(fk(t, 1.0))) for t in (1e-2, 5e-3)]
    assert gaps[0] / gaps[1] == pytest.approx(4.0, rel=2e-2)
    assert gaps[0] == pytest.approx(E * 1e-4 / T0 ** 3, rel=3e-2)


def test_cutoffs_clip_to_the_set_bounds_only():
    law = ViscosityLaw("frank-kamenetskii", thermal_contrast=1e6, minimum=1e-4, maximum=0.5)
    t = np.linspace(0.0, 1.0, 21)
    raw = np.exp(-math.log(1e6) * t)
    assert np.array_equal(law(t, 1.0), np.minimum(np.maximum(raw, 1e-4), 0.5))
    only_low = ViscosityLaw("frank-kamenetskii", thermal_contrast=1e6, minimum=1e-4)
    assert only_low(0.0, 1.0) == 1.0 and only_low(1.0, 1.0) == pytest.approx(1e-4)
    assert np.array_equal(viscosity(law, t, 1.0, modifiers=False), raw)


def test_uniform_means_one_everywhere():
    """``is_constant`` selects the transform solver, which assumes eta = 1: it must be true
    exactly when the evaluated field is 1 everywhere."""
    tt, zz = np.meshgrid(np.linspace(-0.2, 1.2, 15), np.linspace(0.0, 1.0, 15))
    cases = [ViscosityLaw(), ViscosityLaw("frank-kamenetskii"), ViscosityLaw("arrhenius"),
             ViscosityLaw("frank-kamenetskii", thermal_contrast=10.0),
             ViscosityLaw("frank-kamenetskii", depth_contrast=2.0),
             ViscosityLaw("arrhenius", activation_volume=1.0),
             ViscosityLaw(minimum=0.5, maximum=2.0), ViscosityLaw(minimum=2.0),
             ViscosityLaw(maximum=0.5)]
    for law in cases:
        assert law.is_constant == bool(np.all(law(tt, zz) == 1.0)), law


def test_config_table_is_the_registry():
    """Every declared parameter is a [viscosity] key with its declared default and range,
    and the law choices are the declared laws."""
    table = TABLES["viscosity"]
    fields = {f.name: f for f in __import__("dataclasses").fields(table)}
    assert fields["law"].metadata["choices"] == tuple(laws.LAWS)
    assert set(fields) == {"law"} | set(laws.PARAMETERS)
    for key, p in laws.PARAMETERS.items():
        meta = fields[key].metadata
        assert (fields[key].default, meta["ge"], meta["gt"], meta["le"], meta["units"]) == \
            (p.default, p.ge, p.gt, p.le, p.units)


def test_no_config_key_is_dropped_on_the_way_to_the_model():
    from convsim.run.build import build_model
    for key, p in laws.PARAMETERS.items():
        if p.choices:
            value = next(c for c in p.choices if c != p.default)
        else:
            value = (p.gt or p.ge or 0.0) + 0.5 if p.le is None or p.le > 1.0 else p.le / 2
        cfg = Config().replace(viscosity__law="frank-kamenetskii", **{f"viscosity__{key}": value})
        law = ViscosityLaw.from_table(cfg.viscosity)
        assert getattr(law, key) == value != p.default, key
    cfg = Config().replace(viscosity__law="arrhenius", viscosity__activation_energy=3.0)
    assert build_model(cfg).law == ViscosityLaw("arrhenius", activation_energy=3.0)


def test_cross_key_rules_come_from_the_declarations():
    with pytest.raises(ConfigError, match="viscosity.maximum"):
        parse_config({"viscosity": {"minimum": 2.0, "maximum": 1.0}})
    with pytest.raises(ConfigError, match="viscosity.law"):
        parse_config({"viscosity": {"law": "frank-kamenetski"}})


def test_declarations_are_complete():
    for decl in (*laws.LAWS.values(), *laws.MODIFIERS.values()):
        assert decl.doc and decl.onset in laws.ONSET_USES
        for p in decl.parameters:
            assert p.doc and p.units and p.problem(p.default) is None, p
    assert laws.describe("frank-kamenetskii", ViscosityLaw(
        "frank-kamenetskii", thermal_contrast=1e3, maximum=10.0)) == \
        "frank-kamenetskii, contrast exp(b) = 1000, cut-offs [0, 10]"


def test_onset_uses_the_base_state_viscosity():
    law = ViscosityLaw("frank-kamenetskii", thermal_contrast=1e3, minimum=1e-2)
    assert np.array_equal(base_state_viscosity(law, T, Z), law(T, Z))


def test_config_imports_no_numpy():
    """The config (and so the law declarations) must load without numpy: law files import
    it inside their functions."""
    code = "import sys, convsim.config; sys.exit('numpy' in sys.modules)"
    assert subprocess.run([sys.executable, "-c", code]).returncode == 0
