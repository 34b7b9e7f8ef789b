"""Grid convergence maths (convsim.analysis.convergence) against analytic sequences and a literature example.

Analytic sequences: f(h) = f0 + C h^p exactly, for which the observed order is p,
the Richardson-extrapolated value is f0 and the coarse/fine GCI ratio is f1/f2
(all three follow from equation (2) of the module docstring by hand algebra).

Literature example: Celik et al. (2008), "Procedure for estimation and reporting of
uncertainty due to discretization in CFD applications", J. Fluids Eng. 130, 078001,
Table 1, first column (quoted from memory): grids of N1 = 18000, N2 = 8000, N3 = 4500
cells in 2D (r21 = 1.5, r32 = 1.333), phi = 6.063, 5.972, 5.863; reported p = 1.53,
phi_ext = 6.1685, e_a = 1.5 %, e_ext = 1.7 %, GCI_fine = 2.2 %.  The reported outputs
and inputs agree with each other under the procedure to the printed digits, which is
why we use them; the analytic tests above carry the exact checks.
"""

import math

import pytest

from convsim.analysis import convergence as conv


def power_law(f0, C, p, hs):
    return tuple(f0 + C * h ** p for h in hs)


def test_hand_worked_constant_ratio():
    # f = 1 + h^2 on h = 0.1, 0.2, 0.4: f = 1.01, 1.04, 1.16; e21 = 0.03, e32 = 0.12,
    # p = ln(0.12/0.03)/ln 2 = 2; f_ext = 1.01 + (1.01 - 1.04)/(4 - 1) = 1.00;
    # GCI_fine = 1.25 * (0.03/1.01) / 3 = 0.0123762376...
    est = conv.estimate((0.1, 0.2, 0.4), (1.01, 1.04, 1.16))
    assert est.behaviour == "monotone"
    assert est.order == pytest.approx(2.0, rel=1e-12)
    assert est.extrapolated == pytest.approx(1.0, rel=1e-12)
    assert est.gci_fine == pytest.approx(1.25 * 0.03 / 1.01 / 3.0, rel=1e-12)
    assert est.ratio == pytest.approx(0.25, rel=1e-12)


@pytest.mark.parametrize("p", [0.7, 1.0, 2.0, 3.3])
@pytest.mark.parametrize("C", [2.5, -0.8])
@pytest.mark.parametrize("hs", [(1 / 128, 1 / 64, 1 / 32),      # constant ratio 2
                                (1 / 32, 1 / 24, 1 / 16),       # ratios 4/3 and 3/2
                                (1 / 48, 1 / 20, 1 / 16)])      # ratios 2.4 and 1.25
def test_power_law_recovered(p, C, hs):
    f0 = 4.2
    f = power_law(f0, C, p, hs)
    est = conv.estimate(hs, f)
    assert est.behaviour == "monotone"
    assert est.order == pytest.approx(p, rel=1e-8)
    assert est.extrapolated == pytest.approx(f0, rel=1e-10)
    # GCI_coarse / (r21^p GCI_fine) = f1 / f2 exactly on a power law
    assert est.asymptotic_ratio == pytest.approx(f[0] / f[1], rel=1e-8)
    # the published value (f0) lies inside the GCI band around f1 when Fs > 1
    assert abs(f0 - f[0]) <= est.gci_fine * abs(f[0])


def test_observed_order_closed_form_and_order_of_arguments():
    hs = (0.05, 0.1, 0.2)
    f = power_law(1.0, 3.0, 1.5, hs)
    assert conv.observed_order(*f, r21=2.0) == pytest.approx(1.5, rel=1e-12)
    shuffled = conv.estimate((hs[2], hs[0], hs[1]), (f[2], f[0], f[1]))
    assert shuffled.order == pytest.approx(1.5, rel=1e-12)


def test_richardson_and_gci_formulas():
    # f_ext = f1 + (f1 - f2)/(r^p - 1): 10 + (10 - 9)/(2^2 - 1) = 10.333...
    assert conv.richardson(10.0, 9.0, 2.0, 2.0) == pytest.approx(10.0 + 1.0 / 3.0)
    # GCI = Fs |(f1 - f2)/f1| / (r^p - 1) = 1.25 * 0.1 / 3
    assert conv.grid_convergence_index(10.0, 9.0, 2.0, 2.0) == pytest.approx(1.25 * 0.1 / 3.0)
    assert conv.SAFETY_FACTOR == 1.25           # Roache (1994), three or more grids


def test_celik_2008_worked_example():
    hs = tuple(1.0 / math.sqrt(n) for n in (18000, 8000, 4500))    # 2D: h = (1/N)^(1/2)
    est = conv.estimate(hs, (6.063, 5.972, 5.863))
    assert est.h[1] / est.h[0] == pytest.approx(1.5, rel=1e-12)
    assert est.behaviour == "monotone"
    assert est.order == pytest.approx(1.53, abs=0.005)
    assert est.extrapolated == pytest.approx(6.1685, abs=5e-4)
    assert abs(6.063 - 5.972) / 6.063 == pytest.approx(0.015, abs=5e-4)          # e_a21
    assert abs(est.extrapolated - 6.063) / est.extrapolated == pytest.approx(0.017, abs=5e-4)
    assert est.gci_fine == pytest.approx(0.022, abs=5e-4)


def test_oscillatory_is_reported_not_extrapolated():
    est = conv.estimate((0.1, 0.2, 0.4), (1.0, 1.1, 0.8))      # e21 = 0.1, e32 = -0.3
    assert est.behaviour == "oscillatory"
    assert est.ratio < 0
    assert math.isnan(est.extrapolated) and math.isnan(est.order) and math.isnan(est.gci_fine)
    assert "oscillatory" in est.note


def test_divergent_is_reported_not_extrapolated():
    est = conv.estimate((0.1, 0.2, 0.4), (1.5, 1.2, 1.1))      # differences grow as h shrinks
    assert est.behaviour == "divergent"
    assert est.ratio == pytest.approx(3.0)
    assert math.isnan(est.extrapolated)
    # unequal ratios: e32/e21 = 0.1 is below ln(r32)/ln(r21) = 0.1375 (the p -> 0 limit of
    # equation (2)), so no positive order fits: not extrapolated
    assert math.isnan(conv.observed_order(1.0, 1.1, 1.11, r21=2.0, r32=1.1))
    est = conv.estimate((0.1, 0.2, 0.22), (1.0, 1.1, 1.11))
    assert est.behaviour == "divergent" and math.isnan(est.extrapolated)
    # ... while e32/e21 = 0.5 with the same ratios converges (R = 2 > 1 and yet monotone)
    est = conv.estimate((0.1, 0.2, 0.22), (1.0, 1.1, 1.15))
    assert est.behaviour == "monotone" and est.ratio == pytest.approx(2.0)


def test_exact_and_stagnant_sequences():
    est = conv.estimate((0.1, 0.2, 0.4), (2.0, 2.0, 2.0))
    assert est.behaviour == "exact" and est.extrapolated == 2.0 and est.gci_fine == 0.0
    est = conv.estimate((0.1, 0.2, 0.4), (2.0, 2.0, 2.1))
    assert est.behaviour == "stagnant" and math.isnan(est.extrapolated)


def test_estimate_finest_uses_the_three_finest():
    hs = (1 / 8, 1 / 16, 1 / 32, 1 / 64)
    f = list(power_law(1.0, 1.0, 2.0, hs))
    f[0] += 0.5                                   # spoil the coarsest grid only
    est = conv.estimate_finest(hs, f)
    assert est.order == pytest.approx(2.0, rel=1e-10)
    assert est.h == (1 / 64, 1 / 32, 1 / 16)


@pytest.mark.parametrize("hs, f", [((0.1, 0.2), (1.0, 1.1)), ((0.1, 0.1, 0.2), (1, 2, 3))])
def test_bad_input_raises(hs, f):
    with pytest.raises(ValueError):
        conv.estimate(hs, f)


def test_bad_ratio_raises():
    with pytest.raises(ValueError, match="r21"):
        conv.observed_order(1.0, 1.1, 1.3, r21=0.5)
