"""Tests of convsim.model.stepsize: the time-step rule.

References
----------
[EXP] For A(t) = A0 e^{s t} sampled dt apart, ||A^n - A^{n-1}|| / ||A^n|| = |1 - e^{-s dt}|
      exactly, so tau = dt / |1 - e^{-s dt}| -> 1/|s| as dt -> 0 (calculus).
[CFL] Courant limit dt = C / (max|u|/dx + max|w|/dz) (common practice).
"""

import math

import numpy as np
import pytest

from convsim.model.stepsize import CONDUCTIVE_TIME, StepSizeRule, courant_limit, time_scale


def test_time_scale_of_an_exponential():
    """[EXP] tau of a growing and of a decaying mode."""
    shape = np.sin(np.linspace(0.0, 3.0, 50))
    for s in (14.8, -3.0):
        dt = 1e-3
        tau = time_scale(shape * math.exp(s * dt), shape, dt)
        assert tau == pytest.approx(dt / abs(1.0 - math.exp(-s * dt)), rel=1e-12)
        assert abs(tau) == pytest.approx(1.0 / abs(s), rel=0.01)


def test_no_time_scale_when_nothing_changes():
    a = np.ones((4, 4))
    assert time_scale(a, a.copy(), 1e-3) == math.inf
    assert time_scale(np.zeros((4, 4)), np.zeros((4, 4)), 1e-3) == math.inf


def test_courant_limit():
    """[CFL]"""
    u = np.array([[0.0, -2.0]])
    w = np.array([[1.0, 0.5]])
    assert courant_limit(u, w, 0.1, 0.05, 0.4) == pytest.approx(0.4 / (2.0 / 0.1 + 1.0 / 0.05))
    assert courant_limit(0 * u, 0 * w, 0.1, 0.05, 0.4) == math.inf


def test_rule_takes_the_smallest_limit():
    rule = StepSizeRule(cfl=0.4, max_dt=1e-2, time_scale_fraction=0.04)
    rest = np.zeros((2, 2))
    shape = np.arange(1.0, 5.0)
    # at rest, first step: max_dt
    assert rule.choose(rest, rest, 0.1, 0.1) == 1e-2
    # growth limit over the previous step
    assert rule.choose(rest, rest, 0.1, 0.1, shape, shape, 1e-3) == pytest.approx(1.25e-3)
    # a mode growing at s = 100: dt <= 0.04 tau ~ 0.04 / 100
    s, dt0 = 100.0, 4e-4
    dt = rule.choose(rest, rest, 0.1, 0.1, shape * math.exp(s * dt0), shape, dt0)
    assert dt == pytest.approx(0.04 * dt0 / (1.0 - math.exp(-s * dt0)), rel=1e-12)
    # a slow mode: the conductive time 1/pi^2 caps tau
    dt = rule.choose(rest, rest, 0.1, 0.1, shape * 1.0001, shape, 9e-3)
    assert dt == pytest.approx(0.04 * CONDUCTIVE_TIME, rel=1e-12)
    # switched off: only Courant, max_dt and growth
    off = StepSizeRule(cfl=0.4, max_dt=1e-2, time_scale_fraction=0.0)
    assert off.choose(rest, rest, 0.1, 0.1, shape * 2.0, shape, 9e-3) == 1e-2
