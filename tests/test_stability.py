"""Tests of convsim.analysis.stability: linear stability of the conductive state.

References
----------
[C61] Chandrasekhar, S. (1961), Hydrodynamic and Hydromagnetic Stability, Oxford,
      ch. II (Rayleigh-Benard problem): free-free Ra_c = 27 pi^4 / 4 = 657.511 at
      k_c = pi / sqrt(2); rigid-rigid 1707.762 at k_c = 3.117; rigid-free 1100.65 at
      k_c = 2.682 (the last quoted from memory).
[FF]  Free-free layer, constant viscosity, heated from below: Theta = sin(n pi z)
      is an exact eigenfunction.  With D^2 -> -n^2 pi^2 the eigenproblem gives
      s_n = -(k^2 + n^2 pi^2) + Ra k^2 / (k^2 + n^2 pi^2)^2, hence the neutral curve
      Ra(k) = (k^2 + pi^2)^3 / k^2 (derived in ``test_free_free_growth_rates``).
[TB]  Textbook tables of onset in layers with mixed thermal conditions, quoted from
      memory (as commonly tabulated in geodynamics texts, e.g. Turcotte & Schubert,
      Geodynamics; the table itself not rechecked): fixed-flux bottom, isothermal top,
      heated from below: free-free 384.69 at k 1.758, rigid-rigid 1295.78 at 2.552,
      rigid bottom / free top 816.75 at 2.215.  Uniform internal heating, insulating
      bottom, isothermal top (Ra_H = Ra H): free-free 867.8 at 1.79, rigid-rigid 2772
      at 2.63.  Internal heating, both boundaries at the same temperature, rigid-rigid:
      Ra_H = 37325 at k = 4.00 (Roberts 1967, quoted from memory).
[FD]  An independent second-order finite-difference discretisation
      (tests/naive_stability.py) with Richardson extrapolation.
"""

from conftest import assert_drawn_png
import json
import math

import numpy as np
import pytest

from convsim import cli
from convsim.errors import ConfigError
from convsim.analysis.stability import (Layer, StabilityProblem, analyse_onset, box_wavenumbers,
                               conductive_gradient, conductive_profile, cutoff_breaks,
                               default_points,
                               growth_rates, neutral_rayleigh, viscosity_law)

from naive_stability import neutral_rayleigh_fd_extrapolated

FREE, RIGID = "free-slip", "no-slip"
RA_FF = 27.0 * math.pi**4 / 4.0          # [C61]
K_FF = math.pi / math.sqrt(2.0)          # [C61]


def free_free_curve(k):
    """[FF] Ra(k) = (k^2 + pi^2)^3 / k^2."""
    return (k * k + math.pi**2) ** 3 / (k * k)


# ---- published critical values ---------------------------------------------------------

@pytest.mark.parametrize("top, bottom, ra_c, k_c, k_tol", [
    (FREE, FREE, RA_FF, K_FF, 1e-4),      # [C61] exact
    (RIGID, RIGID, 1707.762, 3.117, 4e-4),  # [C61] (k_c = 3.116 to 4 figures)
    (FREE, RIGID, 1100.65, 2.682, 4e-4),    # [C61] rigid bottom, free top; quoted from memory
    (RIGID, FREE, 1100.65, 2.682, 4e-4),    # [C61] the same by symmetry z -> 1 - z
])
def test_chandrasekhar_critical_values(top, bottom, ra_c, k_c, k_tol):
    problem = StabilityProblem(Layer(top_flow=top, bottom_flow=bottom), 32)
    ra, k = problem.critical()
    assert ra == pytest.approx(ra_c, rel=1e-4)
    assert k == pytest.approx(k_c, rel=k_tol)


def test_free_free_neutral_curve_is_analytic():
    problem = StabilityProblem(Layer(), 32)
    for k in (0.3, 1.0, K_FF, 3.0, 6.0, 12.0):
        assert problem.neutral_rayleigh(k) == pytest.approx(free_free_curve(k), rel=1e-9)


def test_growth_method_agrees_with_eigen_method():
    problem = StabilityProblem(Layer(top_flow=RIGID), 32)
    for k in (1.0, 2.5, 5.0):
        assert problem.neutral_rayleigh(k, "growth") == pytest.approx(
            problem.neutral_rayleigh(k, "eigen"), rel=1e-9)


def test_free_free_growth_rates():
    """[FF] Theta = sin(n pi z): (D^2 - k^2) Theta = -(k^2 + n^2 pi^2) Theta, and
    L^{-1} Theta = Theta / (k^2 + n^2 pi^2)^2, so with T0' = -1,
    s Theta = (D^2 - k^2) Theta + k^2 Ra L^{-1} Theta gives s_n."""
    for ra, k in ((300.0, 1.5), (657.5, K_FF), (5.0e4, 4.0)):
        q = k * k + (np.arange(1, 6) * math.pi) ** 2
        expected = -q + ra * k * k / q**2
        s = growth_rates(ra, k, Layer(), points=32)
        assert np.isrealobj(s)
        np.testing.assert_allclose(s[:5], expected, rtol=1e-8, atol=1e-8)


def test_spectral_convergence():
    """Error against [FF] falls by orders of magnitude from N = 8 to N = 16."""
    errors = [abs(StabilityProblem(Layer(), n).neutral_rayleigh(K_FF) - RA_FF) / RA_FF
              for n in (8, 12, 16)]
    assert errors[0] > 1e-6
    assert errors[1] < errors[0] / 10.0
    assert errors[2] < errors[0] / 1e4
    assert errors[2] < 1e-10


# ---- mixed thermal conditions and internal heating -------------------------------------

@pytest.mark.parametrize("top, bottom, ra_c, k_c", [
    (FREE, FREE, 384.69, 1.758),          # [TB], quoted from memory
    (RIGID, RIGID, 1295.78, 2.552),       # [TB], quoted from memory
    (FREE, RIGID, 816.75, 2.215),         # [TB], quoted from memory
])
def test_fixed_flux_bottom(top, bottom, ra_c, k_c):
    layer = Layer(top_flow=top, bottom_flow=bottom, bottom_heat="flux", bottom_value=1.0)
    ra, k = StabilityProblem(layer, 32).critical()
    assert ra == pytest.approx(ra_c, rel=1e-4)
    assert k == pytest.approx(k_c, rel=1e-3)


@pytest.mark.parametrize("top, bottom, ra_h, k_c, rel", [
    (FREE, FREE, 867.8, 1.79, 1e-4),       # [TB], quoted from memory
    (RIGID, RIGID, 2772.0, 2.63, 1e-4),    # [TB], quoted from memory
])
def test_internal_heating_insulating_bottom(top, bottom, ra_h, k_c, rel):
    for H in (1.0, 10.0):                  # onset depends on Ra H only (Theta scales with H)
        layer = Layer(top_flow=top, bottom_flow=bottom, bottom_heat="flux", bottom_value=0.0,
                      internal_heating=H)
        ra, k = StabilityProblem(layer, 32).critical()
        assert ra * H == pytest.approx(ra_h, rel=rel)
        assert k == pytest.approx(k_c, abs=0.005)


def test_internal_heating_isothermal_walls_roberts():
    """[TB] Roberts (1967), quoted from memory: Ra_H = 37325, k = 4.00, rigid-rigid."""
    layer = Layer(top_flow=RIGID, bottom_flow=RIGID, bottom_value=0.0, internal_heating=1.0)
    problem = StabilityProblem(layer, 32)
    ra, k = problem.critical()
    assert ra == pytest.approx(37325.0, rel=1e-4)
    assert k == pytest.approx(4.00, abs=0.005)
    # -T0' changes sign here: check that onset is stationary by the growth-rate route
    assert problem.neutral_rayleigh(k, "growth") == pytest.approx(ra, rel=1e-8)


def test_weak_heating_tends_to_chandrasekhar():
    layer = Layer(top_flow=RIGID, bottom_flow=RIGID, internal_heating=1e-9)
    assert StabilityProblem(layer, 32).critical()[0] == pytest.approx(1707.762, rel=1e-4)


def test_conductive_profiles():
    """T0'' = -H with the stated conditions, checked by hand."""
    z = np.linspace(0.0, 1.0, 5)
    np.testing.assert_allclose(conductive_profile(Layer(), z), 1.0 - z)
    heated = Layer(bottom_heat="flux", bottom_value=0.0, internal_heating=2.0)
    np.testing.assert_allclose(conductive_profile(heated, z), 1.0 - z**2)
    top_flux = Layer(top_heat="flux", top_value=3.0, bottom_value=2.0, internal_heating=1.0)
    T = conductive_profile(top_flux, z)
    assert T[0] == pytest.approx(2.0)
    assert -conductive_gradient(top_flux, 1.0) == pytest.approx(3.0)
    assert np.allclose(np.diff(T, 2) / 0.25**2, -1.0)


def test_heated_from_above_is_stable():
    """Rayleigh's criterion: a stably stratified conductive layer has no steady instability."""
    result = analyse_onset(1e4, bottom_value=0.0, top_value=1.0)
    assert math.isinf(result.critical_rayleigh)
    assert math.isinf(result.box_critical_rayleigh)
    assert result.to_dict()["critical_rayleigh"] is None


# ---- variable viscosity ----------------------------------------------------------------

def test_constant_parameters_of_variable_laws_reproduce_chandrasekhar():
    for law, params in (("frank-kamenetskii", {}), ("arrhenius", {"temperature_offset": 0.5}),
                        ("frank-kamenetskii", {"minimum": 0.5, "maximum": 2.0})):
        layer = Layer(top_flow=RIGID, bottom_flow=RIGID, viscosity=viscosity_law(law, **params))
        assert StabilityProblem(layer, 32).critical()[0] == pytest.approx(1707.762, rel=1e-4)


def test_uniform_viscosity_scales_rayleigh():
    """eta -> c eta multiplies L by c: Ra(k) scales by c (Ra uses eta = 1 as reference)."""
    layer = Layer(top_flow=RIGID, viscosity=lambda T, z: 7.0 * np.ones_like(z))
    assert StabilityProblem(layer, 32).critical()[0] == pytest.approx(7.0 * 1100.65, rel=1e-4)


FD_CASES = {
    # name: (Layer kwargs, eta(z) on the conductive profile, T0'(z), k)
    "FK thermal 1e4, free-free": (
        dict(viscosity=viscosity_law("frank-kamenetskii", thermal_contrast=1e4)),
        lambda z: np.exp(-math.log(1e4) * (1.0 - z)), lambda z: -1.0, 3.0),
    "FK depth 100, rigid bottom, flux top": (
        dict(bottom_flow=RIGID, top_heat="flux", top_value=1.0,
             viscosity=viscosity_law("frank-kamenetskii", depth_contrast=100.0)),
        lambda z: np.exp(math.log(100.0) * (1.0 - z)), lambda z: -1.0, 2.5),
    "FK thermal 10, heated within, rigid-rigid, insulating bottom": (
        dict(top_flow=RIGID, bottom_flow=RIGID, bottom_heat="flux", bottom_value=0.0,
             internal_heating=1.0,
             viscosity=viscosity_law("frank-kamenetskii", thermal_contrast=10.0)),
        lambda z: np.exp(-math.log(10.0) * 0.5 * (1.0 - z * z)), lambda z: -z, 2.5),
    "Arrhenius E=5 V=1, rigid top": (
        dict(top_flow=RIGID,
             viscosity=viscosity_law("arrhenius", activation_energy=5.0, activation_volume=1.0,
                                     temperature_offset=1.0)),
        lambda z: np.exp((5.0 + (1.0 - z)) / (2.0 - z) - 5.0), lambda z: -1.0, 3.5),
    "linear eta = 1 + 9 z, free-free": (
        dict(viscosity=lambda T, z: 1.0 + 9.0 * z), lambda z: 1.0 + 9.0 * z, lambda z: -1.0,
        2.0),
}


@pytest.mark.parametrize("name", list(FD_CASES))
def test_variable_viscosity_against_finite_differences(name):
    """[FD] independent discretisation; eta and T0' written out by hand in the case table."""
    kwargs, eta, dT0, k = FD_CASES[name]
    layer = Layer(**kwargs)
    spectral = StabilityProblem(layer, 48).neutral_rayleigh(k)
    fd = neutral_rayleigh_fd_extrapolated(k, eta, lambda z: dT0(z) * np.ones_like(z),
                                          layer.bottom_flow, layer.top_flow,
                                          layer.bottom_heat, layer.top_heat)
    assert spectral == pytest.approx(fd, rel=2e-5)


CUTOFF_CASES = {
    # law parameters, the kink height worked out by hand, eta(z) written out, k
    "FK thermal 1e6, minimum 1e-3, free-free": (
        dict(thermal_contrast=1e6, minimum=1e-3), dict(), 0.5,        # 1 - z = 3/6
        lambda z: np.maximum(np.exp(-math.log(1e6) * (1.0 - z)), 1e-3), 4.0),
    "FK depth 1e4, maximum 10, rigid-rigid": (
        dict(depth_contrast=1e4, maximum=10.0), dict(top_flow=RIGID, bottom_flow=RIGID),
        0.75, lambda z: np.minimum(np.exp(math.log(1e4) * (1.0 - z)), 10.0), 3.0),  # 1 - z = 1/4
}


@pytest.mark.parametrize("name", list(CUTOFF_CASES))
def test_viscosity_cutoff_against_finite_differences(name):
    """A cut-off puts a kink in eta(z): the collocation splits there ([FD] for the value)."""
    params, flows, kink, eta, k = CUTOFF_CASES[name]
    cut = {key: params.pop(key) for key in ("minimum", "maximum") if key in params}
    uncut = viscosity_law("frank-kamenetskii", **params)
    breaks = cutoff_breaks(uncut, Layer(**flows), **cut)
    assert breaks == pytest.approx((kink,), abs=1e-12)
    layer = Layer(viscosity=viscosity_law("frank-kamenetskii", **params, **cut), breaks=breaks,
                  **flows)
    spectral = StabilityProblem(layer, 40).neutral_rayleigh(k)
    fd = neutral_rayleigh_fd_extrapolated(k, eta, lambda z: -np.ones_like(z),
                                          layer.bottom_flow, layer.top_flow)
    assert spectral == pytest.approx(fd, rel=2e-5)
    # and the front door finds the kink itself
    result = analyse_onset(viscosity="frank-kamenetskii", viscosity_parameters={**params, **cut},
                           wavenumbers=[k], **flows)
    assert result.breaks == pytest.approx((kink,), abs=1e-12)
    assert result.neutral_rayleigh[0] == pytest.approx(fd, rel=2e-5)
    assert result.resolution_error < 1e-6


def test_artificial_break_changes_nothing():
    """Splitting a smooth problem at an interface must leave Ra(k) unchanged."""
    law = viscosity_law("frank-kamenetskii", thermal_contrast=1e3)
    whole = StabilityProblem(Layer(top_flow=RIGID, viscosity=law), 40).neutral_rayleigh(3.0)
    split = StabilityProblem(Layer(top_flow=RIGID, viscosity=law, breaks=(0.3, 0.55)),
                             64).neutral_rayleigh(3.0)
    assert split == pytest.approx(whole, rel=1e-8)


def test_fd_twin_reproduces_chandrasekhar():
    """The twin itself against [C61], so that the comparison above means something."""
    one = lambda z: np.ones_like(z)
    minus_one = lambda z: -np.ones_like(z)
    assert neutral_rayleigh_fd_extrapolated(K_FF, one, minus_one, FREE, FREE) == \
        pytest.approx(RA_FF, rel=1e-5)
    assert neutral_rayleigh_fd_extrapolated(3.117, one, minus_one, RIGID, RIGID) == \
        pytest.approx(1707.762, rel=1e-5)


def test_reflection_symmetry_of_depth_dependent_viscosity():
    """z -> 1 - z with Theta -> -Theta maps the layer heated from below onto itself with
    eta(z) -> eta(1 - z) and the mechanical conditions swapped: same Ra(k)."""
    up = Layer(top_flow=RIGID, viscosity=lambda T, z: np.exp(3.0 * z))
    down = Layer(bottom_flow=RIGID, viscosity=lambda T, z: np.exp(3.0 * (1.0 - z)))
    assert StabilityProblem(up, 40).neutral_rayleigh(2.7) == pytest.approx(
        StabilityProblem(down, 40).neutral_rayleigh(2.7), rel=1e-9)


@pytest.mark.parametrize("contrast", [1e10, 1e30])
def test_large_viscosity_contrast_is_resolved(contrast):
    """Default resolution converged: Ra_c agrees with twice the degree to 1e-6."""
    layer = Layer(viscosity=viscosity_law("frank-kamenetskii", thermal_contrast=contrast))
    n = default_points(layer)
    coarse = StabilityProblem(layer, n).critical()
    fine = StabilityProblem(layer, 2 * n).critical()
    assert coarse[0] == pytest.approx(fine[0], rel=1e-6)
    assert coarse[1] == pytest.approx(fine[1], rel=1e-4)


# ---- the box ---------------------------------------------------------------------------

def test_box_free_free_sqrt2():
    """[C61]: aspect sqrt(2), reflecting: k_1 = pi / sqrt(2) = k_c."""
    result = analyse_onset(1e4, aspect=math.sqrt(2.0), points=32)
    assert result.box_mode == 1
    assert result.box_critical_rayleigh == pytest.approx(RA_FF, rel=1e-6)
    assert result.critical_rayleigh == pytest.approx(RA_FF, rel=1e-6)
    assert result.supercriticality == pytest.approx(1e4 / RA_FF, rel=1e-6)


def test_box_free_free_unit_aspect():
    """[FF] at k = pi: (2 pi^2)^3 / pi^2 = 8 pi^4 = 779.27."""
    result = analyse_onset(aspect=1.0, points=32)
    assert result.box_mode == 1
    assert result.box_critical_rayleigh == pytest.approx(8.0 * math.pi**4, rel=1e-8)
    assert result.supercriticality is None


@pytest.mark.parametrize("aspect, sides", [(4.0, "reflecting"), (3.3, "periodic"),
                                           (0.5, "reflecting"), (17.0, "periodic")])
def test_box_minimum_over_modes(aspect, sides):
    """[FF] brute force over n = 1..200 of the analytic curve at the admissible k_n."""
    factor = math.pi if sides == "reflecting" else 2.0 * math.pi
    n = np.arange(1, 201)
    ra_n = free_free_curve(factor * n / aspect)
    result = analyse_onset(aspect=aspect, sides=sides, points=32)
    assert result.box_mode == int(n[np.argmin(ra_n)])
    assert result.box_critical_rayleigh == pytest.approx(ra_n.min(), rel=1e-8)
    assert result.box_wavenumber == pytest.approx(factor * result.box_mode / aspect)
    # every marked mode is admissible and on the curve
    np.testing.assert_allclose(result.mode_rayleigh, free_free_curve(result.mode_wavenumbers),
                               rtol=1e-8)


def test_box_wavenumbers():
    np.testing.assert_allclose(box_wavenumbers(2.0, "reflecting", [1, 2]), [math.pi / 2, math.pi])
    np.testing.assert_allclose(box_wavenumbers(2.0, "periodic", [1, 2]), [math.pi, 2 * math.pi])


def test_result_curve_and_json():
    ks = np.linspace(1.0, 6.0, 11)
    result = analyse_onset(2000.0, wavenumbers=ks, top_flow=RIGID, bottom_flow=RIGID)
    np.testing.assert_allclose(result.wavenumbers, ks)
    assert np.all(result.neutral_rayleigh >= result.critical_rayleigh * (1 - 1e-12))
    data = json.loads(json.dumps(result.to_dict()))
    assert data["critical_rayleigh"] == pytest.approx(1707.762, rel=1e-4)
    assert len(data["neutral_curve"]["rayleigh"]) == 11
    assert data["resolution_error"] < 1e-6


# ---- bad input -------------------------------------------------------------------------

@pytest.mark.parametrize("kwargs, words", [
    (dict(top_heat="flux", bottom_heat="flux"), "top_heat"),
    (dict(top_flow="slippery"), "top_flow"),
    (dict(viscosity="plastic"), "plastic"),
    (dict(aspect=-1.0), "aspect"),
    (dict(sides="open"), "sides"),
    (dict(wavenumbers=[1.0, -2.0]), "wavenumbers"),
    (dict(points=4), "points"),
    (dict(viscosity="frank-kamenetskii", viscosity_parameters={"thermal_contrast": 0.0}),
     "thermal_contrast"),
    (dict(viscosity="arrhenius", viscosity_parameters={"temperature_offset": 0.5},
          bottom_value=-1.0), "temperature_offset"),
])
def test_bad_input_names_the_parameter(kwargs, words):
    with pytest.raises(ConfigError, match=words):
        analyse_onset(1e4, **kwargs)


def test_neutral_rayleigh_rejects_bad_wavenumber():
    with pytest.raises(ConfigError, match="wavenumber"):
        neutral_rayleigh(0.0)


# ---- command line ----------------------------------------------------------------------

CONFIG = """
title = "onset test"
[domain]
aspect = 1.0
[physics]
rayleigh = 1.0e4
[boundaries]
top_flow = "no-slip"
bottom_flow = "no-slip"
"""


def _write_config(tmp_path, text=CONFIG):
    path = tmp_path / "layer.toml"
    path.write_text(text, encoding="utf-8")
    return str(path)


def test_cli_json(tmp_path, capsys):
    path = _write_config(tmp_path)
    assert cli.main(["onset", path, "--json", "--wavenumbers", "2:4:5"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["critical_rayleigh"] == pytest.approx(1707.762, rel=1e-4)
    assert data["critical_wavenumber"] == pytest.approx(3.117, rel=4e-4)
    assert data["box_mode"] == 1                   # k_1 = pi is next to k_c = 3.117
    assert data["rayleigh"] == 1.0e4
    assert data["supercriticality"] == pytest.approx(1e4 / data["box_critical_rayleigh"])
    assert data["neutral_curve"]["wavenumber"] == pytest.approx([2.0, 2.5, 3.0, 3.5, 4.0])


def test_cli_table_and_out(tmp_path, capsys):
    path = _write_config(tmp_path)
    out = tmp_path / "onset"
    assert cli.main(["onset", path, "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "1707.76" in text and "supercriticality" in text
    assert json.loads((out / "onset.json").read_text())["box_mode"] == 1
    assert_drawn_png(out / "onset_neutral_curve.png")
    # refuses to overwrite, then overwrites when asked
    assert cli.main(["onset", path, "--out", str(out)]) == 2
    assert "--overwrite" in capsys.readouterr().err
    assert cli.main(["onset", path, "--out", str(out), "--overwrite", "--json"]) == 0


@pytest.mark.parametrize("args, words", [
    (["--wavenumbers", "3:1:5"], "--wavenumbers"),
    (["--wavenumbers", "1,x"], "--wavenumbers"),
    (["--points", "2"], "--points"),
])
def test_cli_bad_arguments(tmp_path, capsys, args, words):
    path = _write_config(tmp_path)
    assert cli.main(["onset", path] + args) == 2
    err = capsys.readouterr().err
    assert words in err and len(err.strip().splitlines()) == 1


def test_cli_rejects_flux_on_both_sides(tmp_path, capsys):
    path = _write_config(tmp_path, CONFIG + 'top_heat = "flux"\nbottom_heat = "flux"\n')
    assert cli.main(["onset", path]) == 2
    assert "flux" in capsys.readouterr().err


def test_laws_are_the_simulators_own():
    """One place for a law: the stability analysis evaluates convsim.model.rheology's laws, here
    against the formulas of the module docstring written out by hand."""
    from convsim.model import rheology
    from convsim.analysis.stability import VISCOSITY_LAWS
    assert VISCOSITY_LAWS is rheology.LAWS
    T = np.linspace(0.0, 1.0, 7)
    z = np.linspace(1.0, 0.0, 7)
    fk = viscosity_law("frank-kamenetskii", thermal_contrast=1e4, depth_contrast=10.0,
                       minimum=1e-3)
    assert fk(T, z) == pytest.approx(np.maximum(np.exp(-math.log(1e4) * T
                                                       + math.log(10.0) * (1.0 - z)), 1e-3),
                                     rel=1e-13)
    ar = viscosity_law("arrhenius", activation_energy=5.0, activation_volume=2.0,
                       temperature_offset=0.5)
    assert ar(T, z) == pytest.approx(np.exp((5.0 + 2.0 * (1.0 - z)) / (T + 0.5) - 5.0 / 0.5),
                                     rel=1e-13)
    with pytest.raises(ConfigError, match="temperature_offset"):
        ar(np.array([-0.6]), np.array([0.5]))
