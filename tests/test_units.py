"""Physical units: scales, Rayleigh numbers, conversions, quantity parsing, ``convsim rayleigh``.

External references used below
------------------------------
* Mantle-like property values as tabulated in Turcotte & Schubert, Geodynamics (quoted from
  memory): rho = 4000 kg m^-3, g = 10 m s^-2, alpha = 3e-5 K^-1, kappa = 1e-6 m^2 s^-1,
  k = 4 W m^-1 K^-1, eta = 1e21 Pa s, d = 2900 km.  With dT = 2000 K these give Ra of order
  1e7-1e8, the textbook order of magnitude for whole-mantle convection.  Expected numbers are
  worked out by hand in the comments; the test compares the code to that arithmetic.
* Julian year = 365.25 d = 31 557 600 s (IAU definition).
* Onset of a layer heated from below, fixed temperatures, constant viscosity
  (Chandrasekhar 1961, Hydrodynamic and Hydromagnetic Stability, ch. II): free-free
  Ra_c = 27 pi^4 / 4 = 657.511 (Rayleigh 1916), rigid-rigid 1707.762, rigid-free 1100.65
  (the last quoted from memory, given to 6 figures).
* pint (a general units library) as an independent check of the dimensional algebra.

Demo properties: the ice shell of Quellis, an invented icy moon.
"""

import dataclasses
import json
import math
import subprocess
import sys
import tomllib
from pathlib import Path

import numpy as np
import pytest

from convsim import cli
from convsim.config import Body, parse_config
from convsim.errors import ConfigError
from convsim.units import (PROPERTIES, SECONDS_PER_MYR, SECONDS_PER_YEAR, UREG, Scales,
                           critical_rayleigh_for, parse_property, parse_quantity,
                           scales_from_body)

# Chandrasekhar (1961), ch. II: Ra_c for fixed temperatures, heated from below.
RA_C_FREE_FREE = 27.0 * math.pi**4 / 4.0      # = 657.511 (Rayleigh 1916)
RA_C_RIGID_RIGID = 1707.762
RA_C_RIGID_FREE = 1100.65                     # quoted from memory, 6 figures

# Handbook mantle-like values (Turcotte & Schubert, quoted from memory), SI.
MANTLE = dict(depth=2.9e6, temperature_contrast=2000.0, gravity=10.0, density=4000.0,
              expansivity=3.0e-5, diffusivity=1.0e-6, conductivity=4.0,
              reference_viscosity=1.0e21, surface_temperature=300.0, heat_production=5.0e-12)

# Quellis (invented icy moon): a 30 km ice shell, 100 K surface, 270 K base.
QUELLIS_TOML = """
title = "Quellis ice shell (invented moon)"
[body]
depth = 30000.0
temperature_contrast = 170.0
surface_temperature = 100.0
gravity = 1.3
density = 920.0
thermal_expansivity = 1.6e-4
thermal_diffusivity = 1.5e-6
conductivity = 2.3
reference_viscosity = 1.0e14
heat_production = 0.0
"""
# Ra = 920 * 1.3 * 1.6e-4 * 170 * (3e4)^3 / (1.5e-6 * 1e14)
#    = 32.5312 * 2.7e13 / 1.5e8 = 8.783424e14 / 1.5e8 = 5.855616e6
QUELLIS_RA = 5.855616e6


@pytest.fixture
def mantle():
    return Scales(**MANTLE)


# --- numbers of the equations, against hand arithmetic -------------------------------------

def test_rayleigh_number_mantle_values_by_hand(mantle):
    # rho g alpha = 4000 * 10 * 3e-5 = 1.2;  d^3 = 2.9^3 e18 = 24.389e18
    # Ra = 1.2 * 2000 * 2.4389e19 / (1e-6 * 1e21) = 5.85336e22 / 1e15 = 5.85336e7
    assert mantle.rayleigh() == pytest.approx(5.85336e7, rel=1e-12)
    assert 1e7 < mantle.rayleigh() < 1e8


def test_internal_heating_numbers_by_hand(mantle):
    # H_vol = rho H = 4000 * 5e-12 = 2e-8 W m^-3
    # H_nd = 2e-8 * (2.9e6)^2 / (4 * 2000) = 2e-8 * 8.41e12 / 8000 = 1.682e5 / 8000 = 21.025
    assert mantle.volumetric_heat_production == pytest.approx(2.0e-8, rel=1e-12)
    assert mantle.internal_heating_number() == pytest.approx(21.025, rel=1e-12)
    # Ra_H = rho g alpha H_vol d^5 / (k kappa eta) = 1.2 * 2e-8 * 2.9^5 e30 / (4 * 1e-6 * 1e21)
    #      = 2.4e-8 * 2.0511149e32 / 4e15 = 1.230668940e9  (and = Ra * H_nd = 5.85336e7 * 21.025)
    assert mantle.internal_heating_rayleigh() == pytest.approx(1.230668940e9, rel=1e-9)
    assert mantle.internal_heating_rayleigh() == pytest.approx(
        mantle.rayleigh() * mantle.internal_heating_number(), rel=1e-12)


def test_rayleigh_number_is_dimensionless_in_pint():
    # The same Ra from pint quantities in mixed units (cgs density and viscosity).
    q = UREG.Quantity
    ra = (q(4, "g/cm^3") * q(10, "m/s^2") * q(3e-5, "1/K") * q(2000, "K") * q(2900, "km") ** 3
          / (q(1, "mm^2/s") * q(1e22, "poise")))
    assert ra.dimensionality == UREG.Quantity(1).dimensionality
    assert ra.to("dimensionless").magnitude == pytest.approx(Scales(**MANTLE).rayleigh(), rel=1e-12)


def test_quellis_rayleigh_by_hand():
    cfg = parse_config(tomllib.loads(QUELLIS_TOML))
    assert scales_from_body(cfg.body).rayleigh() == pytest.approx(QUELLIS_RA, rel=1e-12)


# --- scales and converters -----------------------------------------------------------------

def test_julian_year():
    assert SECONDS_PER_YEAR == 365.25 * 86400.0 == 31557600.0
    assert SECONDS_PER_MYR == 31557600.0e6


def test_time_scale_by_hand(mantle):
    # d^2 / kappa = 8.41e12 / 1e-6 = 8.41e18 s;  / 3.15576e13 s/Myr = 2.664968e5 Myr
    assert mantle.time_to_seconds(1.0) == pytest.approx(8.41e18, rel=1e-12)
    assert mantle.time_to_myr(1.0) == pytest.approx(8.41e18 / 3.15576e13, rel=1e-12)
    assert mantle.time_to_myr(1.0) == pytest.approx(2.664968e5, rel=1e-6)


def test_velocity_scale_by_hand(mantle):
    # kappa / d = 1e-6 / 2.9e6 = 3.4482759e-13 m/s;  * 100 cm/m * 3.15576e7 s/yr = 1.088193e-3 cm/yr
    assert mantle.velocity_to_m_per_s(1.0) == pytest.approx(3.4482759e-13, rel=1e-7)
    assert mantle.velocity_to_cm_per_yr(1.0) == pytest.approx(1.088193e-3, rel=1e-6)
    # a nondimensional rms velocity of 1000 is about 1.09 cm/yr
    assert mantle.velocity_to_cm_per_yr(1000.0) == pytest.approx(1.088193, rel=1e-6)


def test_heat_flux_scale_by_hand(mantle):
    # k dT / d = 4 * 2000 / 2.9e6 = 2.7586207e-3 W m^-2 = 2.7586207 mW m^-2
    # a Nusselt number of 30 -> 82.758621 mW m^-2
    assert mantle.heat_flux_scale == pytest.approx(2.7586207e-3, rel=1e-7)
    assert mantle.heat_flux_to_mw_m2(30.0) == pytest.approx(82.758621, rel=1e-7)


def test_temperature_and_length_by_definition(mantle):
    # T_dim = T_s + dT T: top (T = 0) at 300 K, bottom (T = 1) at 2300 K
    assert mantle.temperature_to_kelvin(0.0) == 300.0
    assert mantle.temperature_to_kelvin(1.0) == 2300.0
    assert mantle.temperature_to_kelvin(0.5) == 1300.0
    assert mantle.length_to_km(1.0) == pytest.approx(2900.0, rel=1e-15)
    assert mantle.viscosity_to_pa_s(1e-3) == pytest.approx(1e18, rel=1e-15)


@pytest.mark.parametrize("to, back", [
    ("time_to_seconds", "time_from_seconds"),
    ("time_to_myr", "time_from_myr"),
    ("velocity_to_m_per_s", "velocity_from_m_per_s"),
    ("velocity_to_cm_per_yr", "velocity_from_cm_per_yr"),
    ("heat_flux_to_mw_m2", "heat_flux_from_mw_m2"),
    ("temperature_to_kelvin", "temperature_from_kelvin"),
    ("length_to_km", "length_from_km"),
    ("viscosity_to_pa_s", "viscosity_from_pa_s"),
])
def test_round_trips(mantle, to, back):
    rng = np.random.default_rng(7)
    values = np.concatenate([rng.uniform(0.0, 1.0, 50), 10.0 ** rng.uniform(-6, 6, 50)])
    there = getattr(mantle, to)(values)
    assert not np.allclose(there, values)  # the conversion does something
    again = getattr(mantle, back)(there)
    np.testing.assert_allclose(again, values, rtol=1e-12, atol=1e-12)
    assert getattr(mantle, back)(getattr(mantle, to)(0.25)) == pytest.approx(0.25, rel=1e-12)


def test_converters_match_pint(mantle):
    q = UREG.Quantity
    t = q(mantle.time_scale * 0.01, "s")
    assert mantle.time_to_myr(0.01) == pytest.approx(t.to("megayear").magnitude, rel=1e-12)
    u = q(mantle.velocity_scale * 500.0, "m/s")
    assert mantle.velocity_to_cm_per_yr(500.0) == pytest.approx(u.to("cm/year").magnitude,
                                                               rel=1e-12)
    flux = q(4.0, "W/m/K") * q(2000.0, "K") / q(2900.0, "km") * 7.0
    assert mantle.heat_flux_to_mw_m2(7.0) == pytest.approx(flux.to("mW/m^2").magnitude, rel=1e-12)


# --- parsing user quantities ---------------------------------------------------------------

@pytest.mark.parametrize("text, units, expected", [
    ("2900 km", "m", 2.9e6),
    ("2900km", "m", 2.9e6),
    (2.9e6, "m", 2.9e6),
    ("2.9e6", "m", 2.9e6),
    ("4 g/cm^3", "kg m^-3", 4000.0),
    ("1e22 poise", "Pa s", 1e21),          # 1 P = 0.1 Pa s
    ("1e21 Pa*s", "Pa s", 1e21),
    ("1 mm^2/s", "m^2 s^-1", 1e-6),
    ("3e-5 1/K", "K^-1", 3e-5),
    ("9.8 m/s^2", "m s^-2", 9.8),
    ("5 pW/kg", "W kg^-1", 5e-12),
    ("1 year", "s", 31557600.0),
    ("100 delta_degC", "K", 100.0),
])
def test_parse_quantity_converts(text, units, expected):
    assert parse_quantity("key", text, units) == pytest.approx(expected, rel=1e-12)


def test_absolute_temperature_accepts_celsius():
    assert parse_property("surface_temperature", "15 degC") == pytest.approx(288.15, rel=1e-12)
    with pytest.raises(ConfigError, match=r"--temperature-contrast = '100 degC'.*delta_degC"):
        parse_property("temperature_contrast", "100 degC", key="--temperature-contrast")


@pytest.mark.parametrize("text, units, dim", [
    ("3 kg", "m", r"\[length\]"),
    ("1e21 Pa", "Pa s", r"\[mass\] / \[length\] / \[time\]"),
    ("2500 m", "K", r"\[temperature\]"),
])
def test_wrong_dimension_names_key_value_and_dimension(text, units, dim):
    with pytest.raises(ConfigError, match=rf"depth = '{text}': has dimension .*expected {dim}"):
        parse_quantity("depth", text, units)


@pytest.mark.parametrize("bad", ["three km", "", "1e3 m/", "inf m", "nan", True, None, [1.0]])
def test_unreadable_values_rejected(bad):
    with pytest.raises(ConfigError, match=r"^body\.depth = "):
        parse_quantity("body.depth", bad, "m")


@pytest.mark.parametrize("name, value", [
    ("depth", 0.0), ("depth", -1.0), ("reference_viscosity", "-1e21 Pa s"),
    ("conductivity", float("nan")), ("heat_production", -1e-12), ("surface_temperature", -1.0),
])
def test_sign_checked_with_key(name, value):
    allowed = ">= 0" if name in ("heat_production", "surface_temperature") else "positive"
    with pytest.raises(ConfigError, match=rf"^--x = .*({allowed}|finite)"):
        parse_property(name, value, key="--x")
    values = dict(MANTLE, **{name: -1.0 if isinstance(value, str) else value})
    with pytest.raises(ConfigError, match=rf"^{name} = "):
        Scales(**values)


# --- from a [body] table ---------------------------------------------------------------------

def test_property_table_matches_body_declaration():
    fields = {f.name: f for f in dataclasses.fields(Body)}
    assert {p.body_key for p in PROPERTIES} == set(fields)
    for p in PROPERTIES:
        declared = UREG.Quantity(1.0, fields[p.body_key].metadata["units"])
        assert declared.dimensionality == UREG.Quantity(1.0, p.units).dimensionality, p.name
    flags = {row[0]: row[3] for row in cli.rayleigh._RAYLEIGH_FLAGS}
    assert flags == {p.name: p.units for p in PROPERTIES}


def test_scales_from_body_and_overrides():
    body = Body(depth=2.9e6, temperature_contrast=2000.0, gravity=10.0, density=4000.0,
                thermal_expansivity=3e-5, thermal_diffusivity=1e-6, conductivity=4.0,
                reference_viscosity=1e21)
    assert scales_from_body(body).rayleigh() == pytest.approx(5.85336e7, rel=1e-12)
    # viscosity ten times lower on the command line: Ra ten times higher
    faster = scales_from_body(body, {"reference_viscosity": 1e20})
    assert faster.rayleigh() == pytest.approx(5.85336e8, rel=1e-12)
    assert faster.heat_production == 0.0 and faster.surface_temperature == 0.0


def test_missing_property_named():
    body = Body(depth=2.9e6, temperature_contrast=2000.0)
    with pytest.raises(ConfigError, match=r"not given: body\.gravity or --gravity;.*"
                                          r"body\.reference_viscosity or --viscosity"):
        scales_from_body(body, options={"gravity": "--gravity",
                                        "reference_viscosity": "--viscosity"})
    with pytest.raises(ConfigError, match="unknown physical property"):
        scales_from_body(None, {"viscosity": 1e21})


# --- onset: the linear-stability solver against published values -------------------------------

@pytest.mark.parametrize("top, bottom, published, rel", [
    ("free-slip", "free-slip", RA_C_FREE_FREE, 1e-7),
    ("no-slip", "no-slip", RA_C_RIGID_RIGID, 1e-6),
    ("free-slip", "no-slip", RA_C_RIGID_FREE, 1e-5),     # 6 figures given
    ("no-slip", "free-slip", RA_C_RIGID_FREE, 1e-5),     # the same, by symmetry z -> 1 - z
])
def test_critical_rayleigh_chandrasekhar(top, bottom, published, rel):
    assert critical_rayleigh_for(top, bottom) == pytest.approx(published, rel=rel)


def test_critical_rayleigh_bad_condition():
    with pytest.raises(ConfigError, match=r"bottom_flow = 'rigid'"):
        critical_rayleigh_for("free-slip", "rigid")


# --- the command line --------------------------------------------------------------------------

MANTLE_ARGS = ["--depth", "2900 km", "--temperature-contrast", "2000 K", "--gravity", "10",
               "--density", "4 g/cm^3", "--expansivity", "3e-5 1/K", "--diffusivity", "1e-6",
               "--conductivity", "4 W/m/K", "--viscosity", "1e21 Pa s",
               "--heat-production", "5e-12 W/kg"]


def _run(capsys, argv):
    code = cli.main(argv)
    out, err = capsys.readouterr()
    return code, out, err


def test_cli_json_shape(capsys):
    code, out, err = _run(capsys, ["rayleigh", *MANTLE_ARGS, "--json"])
    assert code == 0 and err == ""
    data = json.loads(out)
    assert set(data) == {"rayleigh", "rayleigh_reference", "rayleigh_numbers", "viscosity",
                         "internal_heating_number", "internal_heating_rayleigh",
                         "properties", "scales", "onset", "caution"}
    assert data["rayleigh"] == pytest.approx(5.85336e7, rel=1e-12)
    assert data["internal_heating_number"] == pytest.approx(21.025, rel=1e-12)
    assert data["scales"]["velocity_cm_per_yr"] == pytest.approx(1.088193e-3, rel=1e-6)
    assert data["scales"]["time_myr"] == pytest.approx(2.664968e5, rel=1e-6)
    assert data["scales"]["heat_flux_mw_m2"] == pytest.approx(2.7586207, rel=1e-7)
    density = data["properties"]["density"]
    assert density["value"] == pytest.approx(4000.0, rel=1e-12)  # from "4 g/cm^3"
    assert (density["units"], density["from"]) == ("kg m^-3", "command line")
    assert data["onset"]["critical_rayleigh"] == pytest.approx(RA_C_FREE_FREE, rel=1e-7)
    assert data["onset"]["above_onset"] is True
    assert "viscosity" in data["caution"]


def test_cli_config_body_and_command_line_wins(capsys, tmp_path):
    path = tmp_path / "quellis.toml"
    path.write_text(QUELLIS_TOML + "[boundaries]\ntop_flow = 'no-slip'\nbottom_flow = 'no-slip'\n")
    code, out, _ = _run(capsys, ["rayleigh", str(path), "--json"])
    data = json.loads(out)
    assert code == 0
    assert data["rayleigh"] == pytest.approx(QUELLIS_RA, rel=1e-12)
    assert data["onset"]["layer_critical_rayleigh"] == pytest.approx(RA_C_RIGID_RIGID, rel=1e-6)
    assert data["properties"]["depth"]["from"] == "config"
    # a shell twice as thick: Ra grows by 2^3 = 8; --boundaries overrides the config
    code, out, _ = _run(capsys, ["rayleigh", str(path), "--depth", "60 km", "--boundaries",
                                 "free-slip,no-slip", "--json"])
    data = json.loads(out)
    assert data["rayleigh"] == pytest.approx(8 * QUELLIS_RA, rel=1e-12)
    assert data["properties"]["depth"]["from"] == "command line"
    assert (data["onset"]["top_flow"], data["onset"]["bottom_flow"]) == ("free-slip", "no-slip")
    assert data["onset"]["layer_critical_rayleigh"] == pytest.approx(RA_C_RIGID_FREE, rel=1e-5)


def test_cli_text_output(capsys):
    code, out, _ = _run(capsys, ["rayleigh", *MANTLE_ARGS, "--boundaries", "no-slip"])
    assert code == 0
    assert "Ra   = 5.853e+07" in out and "1707.76" in out and "caution:" in out


@pytest.mark.parametrize("argv, needle", [
    (["--depth", "3 kg"], "--depth = '3 kg'"),
    (["--viscosity", "-1e21 Pa s"], "--viscosity = '-1e21 Pa s'"),
    (["--boundaries", "sticky"], "--boundaries = 'sticky'"),
    (["--temperature-contrast", "2000 degC"], "--temperature-contrast = '2000 degC'"),
])
def test_cli_bad_input_one_line_exit_2(capsys, argv, needle):
    code, out, err = _run(capsys, ["rayleigh", *MANTLE_ARGS, *argv])
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and err.startswith("convsim: error: ") and needle in err


def test_cli_missing_property_and_config(capsys, tmp_path):
    code, _, err = _run(capsys, ["rayleigh", "--depth", "30 km"])
    assert code == 2 and err.count("\n") == 1 and "--viscosity" in err
    code, _, err = _run(capsys, ["rayleigh", str(tmp_path / "none.toml")])
    assert code == 2 and "not found" in err


def test_cli_subprocess_no_traceback():
    root = Path(__file__).resolve().parents[1]
    proc = subprocess.run([sys.executable, "-m", "convsim.cli", "rayleigh", "--depth", "3 kg"],
                          capture_output=True, text=True, cwd=root, timeout=60)
    assert proc.returncode == 2
    assert len(proc.stderr.splitlines()) == 1 and "Traceback" not in proc.stderr
    assert "[length]" in proc.stderr


def test_example_config_runs(capsys):
    """The Quellis config states Ra with the viscosity of the base (same shell as QUELLIS_TOML)
    and an Arrhenius law capped at 1e22 Pa s (1e8 x the base's 1e14 Pa s)."""
    path = Path(__file__).resolve().parents[1] / "configs" / "quellis_ice_shell.toml"
    code, out, _ = _run(capsys, ["rayleigh", str(path), "--json"])
    data = json.loads(out)
    assert code == 0
    assert data["rayleigh_reference"] == "bottom"
    assert data["rayleigh"] == pytest.approx(QUELLIS_RA, rel=1e-12)
    assert data["rayleigh_numbers"]["bottom"] == pytest.approx(QUELLIS_RA, rel=1e-12)
    assert data["rayleigh_numbers"]["top"] == pytest.approx(QUELLIS_RA * 1e-8, rel=1e-12)
    assert data["viscosity"]["law"] == "arrhenius"
    assert data["onset"]["above_onset"] is True


def test_body_table_takes_quantity_strings_and_rejects_wrong_dimensions(tmp_path):
    """[body] values may carry units; the same layer in SI numbers gives the same Ra, and a
    length given in kilograms stops a run with one line naming body.depth (exit status 2)."""
    import subprocess
    import sys
    from convsim.config import load_config
    from convsim.units import scales_from_body
    si = tmp_path / "si.toml"
    si.write_text("[body]\ndepth = 1.5e6\ntemperature_contrast = 1200.0\ngravity = 6.0\n"
                  "density = 3700.0\nthermal_expansivity = 2.5e-5\nthermal_diffusivity = 1e-6\n"
                  "conductivity = 3.5\nreference_viscosity = 2.248e22\n")
    text = tmp_path / "text.toml"
    text.write_text('[body]\ndepth = "1500 km"\ntemperature_contrast = "1200 K"\ngravity = 6.0\n'
                    'density = "3.7 g/cm^3"\nthermal_expansivity = "2.5e-5 1/K"\n'
                    'thermal_diffusivity = "1 mm^2/s"\nconductivity = 3.5\n'
                    'reference_viscosity = "2.248e23 poise"\n')
    ra_si = scales_from_body(load_config(si).body).rayleigh()
    ra_text = scales_from_body(load_config(text).body).rayleigh()
    # hand value: 3700 * 6 * 2.5e-5 * 1200 = 666; * (1.5e6)^3 = 2.24775e21; / 2.248e16 = 9.99889e4
    assert ra_si == pytest.approx(9.99889e4, rel=1e-5)
    assert ra_text == pytest.approx(ra_si, rel=1e-12)
    bad = tmp_path / "bad.toml"
    bad.write_text(text.read_text().replace('"1500 km"', '"3 kg"'))
    result = subprocess.run([sys.executable, "-m", "convsim.cli", "run", str(bad), "--out",
                             str(tmp_path / "out")], capture_output=True, text=True)
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "body.depth" in lines[0] and "[length]" in lines[0]
