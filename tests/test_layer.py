"""Ra at the reference the user states, [body] driving the run, rayleigh and onset agreeing.

References
----------
[DEF]  Ra = rho g alpha dT d^3 / (kappa eta) is inversely proportional to the viscosity it is
       taken with, so Ra_bottom eta_bottom = Ra_top eta_top (definition).
[FK]   Frank-Kamenetskii law eta = exp(-b T), b = ln(contrast): eta(1) / eta(0) = 1/contrast.
[ARR]  Arrhenius law exp(E*/(R T_abs) - E*/(R T_s)) written in units of dT:
       E = E* / (R dT), T0 = T_s / dT; R = 8.314462618 J mol^-1 K^-1 (CODATA 2018, exact).
"""

import json
import math

import numpy as np
import pytest

from convsim import cli
from convsim.api import run
from convsim.config import Config, parse_config
from convsim.errors import ConfigError
from convsim.run import layer

R_GAS = 8.314462618          # [ARR]

QUELLIS_BODY = dict(depth=30000.0, temperature_contrast=170.0, surface_temperature=100.0,
                    gravity=1.3, density=920.0, thermal_expansivity=1.6e-4,
                    thermal_diffusivity=1.5e-6, conductivity=2.3, reference_viscosity=1.0e14)
# Ra = 920 * 1.3 * 1.6e-4 * 170 * (3e4)^3 / (1.5e-6 * 1e14) = 5.855616e6 (by hand)
QUELLIS_RA = 5.855616e6


def fk(contrast, ra, reference="top", **extra):
    return Config().replace(viscosity__law="frank-kamenetskii",
                            viscosity__thermal_contrast=contrast, physics__rayleigh=ra,
                            physics__rayleigh_reference=reference, **extra)


def test_rayleigh_at_three_references_frank_kamenetskii():
    """[DEF] [FK]: Ra_bottom = contrast Ra_top, Ra_interior = sqrt(contrast) Ra_top."""
    numbers = layer.rayleigh_numbers(fk(1e5, 100.0))
    assert numbers["top"] == pytest.approx(100.0, rel=1e-14)
    assert numbers["bottom"] == pytest.approx(1e7, rel=1e-12)
    assert numbers["interior"] == pytest.approx(100.0 * math.sqrt(1e5), rel=1e-12)
    stated = fk(1e5, 1e7, "bottom")
    assert layer.internal_rayleigh(stated) == pytest.approx(100.0, rel=1e-12)
    interior = fk(1e5, 1e7 / math.sqrt(1e5), "interior")
    assert layer.rayleigh_numbers(interior)["bottom"] == pytest.approx(1e7, rel=1e-12)


def test_basal_and_top_statement_give_the_same_run():
    """[DEF] the same layer (contrast 1e3) stated with Ra_bottom = 1e6 and with Ra_top = 1e3:
    the same run to round-off."""
    common = dict(domain__nx=16, domain__nz=16, stop__steady=False, stop__max_steps=60,
                  start__perturbation="mode", start__amplitude=0.05)
    top = run(fk(1e3, 1e3, "top", **common))
    bottom = run(fk(1e3, 1e6, "bottom", **common))
    assert top.steps == bottom.steps == 60
    assert np.max(np.abs(top.temperature - bottom.temperature)) < 1e-10
    assert bottom.nusselt_top == pytest.approx(top.nusselt_top, rel=1e-10)
    assert bottom.vrms == pytest.approx(top.vrms, rel=1e-9)
    assert bottom.summary()["rayleigh_bottom"] == pytest.approx(1e6, rel=1e-12)
    assert top.summary()["rayleigh_bottom"] == pytest.approx(1e6, rel=1e-12)


def body_config(**physics):
    data = {"body": dict(QUELLIS_BODY)}
    if physics:
        data["physics"] = physics
    return parse_config(data)


def test_body_rayleigh_drives_the_run_or_a_mismatch_is_refused():
    resolved = layer.resolve(body_config())
    assert resolved.physics.rayleigh == pytest.approx(QUELLIS_RA, rel=1e-12)
    agreeing = layer.resolve(body_config(rayleigh=5.856e6))      # within 0.1 %: kept
    assert agreeing.physics.rayleigh == 5.856e6
    with pytest.raises(ConfigError, match=r"physics.rayleigh = 10000.0 disagrees with 5.85562e\+06"
                                          r" from \[body\]"):
        layer.resolve(body_config(rayleigh=1.0e4))


def test_arrhenius_from_kj_per_mol():
    """[ARR] E* = 50 kJ/mol, V* = 10 cm^3/mol, T_s = 100 K, dT = 170 K."""
    cfg = parse_config({"body": dict(QUELLIS_BODY, activation_energy="50 kJ/mol",
                                     activation_volume=10.0)})
    v = layer.resolve(cfg).viscosity
    assert v.law == "arrhenius"
    assert v.activation_energy == pytest.approx(50e3 / (R_GAS * 170.0), rel=1e-9)
    assert v.temperature_offset == pytest.approx(100.0 / 170.0, rel=1e-12)
    # V = rho g d V* / (R dT): 920 * 1.3 * 3e4 * 1e-5 / (R 170)
    assert v.activation_volume == pytest.approx(920 * 1.3 * 3e4 * 1e-5 / (R_GAS * 170.0),
                                                rel=1e-9)
    with pytest.raises(ConfigError, match="viscosity.law = 'frank-kamenetskii'"):
        layer.resolve(cfg.replace(viscosity__law="frank-kamenetskii"))


def test_cli_run_refuses_a_body_mismatch_in_one_line(tmp_path, capsys):
    path = tmp_path / "shell.toml"
    body = "\n".join(f"{k} = {v!r}" for k, v in QUELLIS_BODY.items())
    path.write_text(f"[physics]\nrayleigh = 1e4\n[body]\n{body}\n", encoding="utf-8")
    assert cli.main(["run", str(path), "--out", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "physics.rayleigh" in err and "[body]" in err


def _json(capsys, argv):
    assert cli.main(argv) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("viscosity, ra_bottom", [
    ('law = "frank-kamenetskii"\nthermal_contrast = 1e4', 3e4),
    ('law = "frank-kamenetskii"\nthermal_contrast = 1e4', 3e6),
    ('law = "arrhenius"\nactivation_energy = 20.0\ntemperature_offset = 1.0', 1e5),
])
def test_rayleigh_and_onset_agree(tmp_path, capsys, viscosity, ra_bottom):
    """One answer: ``convsim rayleigh`` and ``convsim onset`` give the same critical Ra (at
    the stated reference) and the same verdict, for a Frank-Kamenetskii layer below and
    above onset and an Arrhenius layer.  The body's Ra is stated at the bottom."""
    eta_ref = 920 * 1.3 * 1.6e-4 * 170 * 3e4**3 / (1.5e-6 * ra_bottom)
    body = "\n".join(f"{k} = {v!r}" for k, v in dict(QUELLIS_BODY,
                                                     reference_viscosity=eta_ref).items())
    path = tmp_path / "layer.toml"
    path.write_text(f'[physics]\nrayleigh_reference = "bottom"\n[viscosity]\n{viscosity}\n'
                    f"[body]\n{body}\n", encoding="utf-8")
    ray = _json(capsys, ["rayleigh", str(path), "--json"])
    ons = _json(capsys, ["onset", str(path), "--json"])
    assert ray["rayleigh"] == pytest.approx(ra_bottom, rel=1e-12)
    assert ray["onset"]["critical_rayleigh"] == pytest.approx(
        ons["stated"]["box_critical_rayleigh"], rel=1e-9)
    assert ray["onset"]["above_onset"] == ons["stated"]["above_onset"]
    assert ray["onset"]["ratio"] == pytest.approx(ons["supercriticality"], rel=1e-9)
    assert ray["rayleigh_numbers"] == pytest.approx(ons["stated"]["rayleigh_numbers"], rel=1e-12)


# ---- planetary contrasts: no false divergence ------------------------------------------------

def test_runaway_velocity_scale_by_hand():
    """Boundary-layer scaling vrms ~ Ra^(2/3) (common practice) with the Ra of the least
    viscous fluid: FK contrast 1e8, Ra_top = 1 -> Ra_max = 1e8, 100 x 1e8^(2/3) = 2.154e7;
    constant viscosity keeps the former max(1e3, 100 Ra^(2/3))."""
    cfg = fk(1e8, 1.0)
    eta_min = layer.smallest_viscosity(cfg)
    assert eta_min == pytest.approx(1e-8, rel=1e-12)
    assert layer.runaway_velocity(1.0, eta_min, 100.0) == pytest.approx(100 * 1e8 ** (2 / 3),
                                                                      rel=1e-12)
    assert layer.runaway_velocity(1.0, 1.0, 100.0) == pytest.approx(1e3)
    assert layer.runaway_velocity(1e6, 1.0, 100.0) == pytest.approx(100 * 1e4, rel=1e-12)


def test_contrast_1e8_runs_to_its_end_time():
    """Issue 10 item 4: an Arrhenius layer with a viscosity contrast of 1e8 (E = ln(1e8) /
    (1/T0 - 1/(1 + T0)), T0 = 0.25) at Ra_bottom = 1e8, 16 x 16, to t = 0.002: the first
    overturn reaches vrms ~ 4e3, above the former guard max(1e3, 100 Ra_top^(2/3)) = 1e3
    (Ra_top = 1), which called such runs diverged.  It ends at its end time, finite, with
    the temperature within the wall values (a bounded TVD scheme)."""
    t0 = 0.25
    energy = math.log(1e8) / (1.0 / t0 - 1.0 / (1.0 + t0))
    cfg = Config().replace(domain__nx=16, domain__nz=16, physics__rayleigh=1e8,
                           physics__rayleigh_reference="bottom", viscosity__law="arrhenius",
                           viscosity__activation_energy=energy, viscosity__temperature_offset=t0,
                           start__kind="one-cell", stop__steady=False, stop__end_time=0.002)
    assert layer.rayleigh_numbers(cfg)["top"] == pytest.approx(1.0, rel=1e-9)
    result = run(cfg)
    assert result.status == "end-time", result.message
    assert np.all(np.isfinite(result.temperature)) and np.all(np.isfinite(result.psi))
    assert result.series["vrms"].max() > 1e3          # the former guard would have stopped it
    assert -1e-6 <= result.temperature.min() and result.temperature.max() <= 1 + 1e-6
    assert 1.0 < result.nusselt_top < 30.0
