"""Stop rules on their own, fed hand-made step reports (the rule texts in convsim.run.stops)."""

import math
from types import SimpleNamespace

import pytest

from convsim.config import Config
from convsim.run import stops
from convsim.run.stops import (EndTime, Interrupted, SteadyState, StepLimit, StopRule,
                               rules_from_config, runaway)


def report(step, nu=5.0, vrms=40.0, tendency=0.0, imbalance=0.0, time=None):
    return SimpleNamespace(step=step, time=step * 0.01 if time is None else time,
                           nusselt_top=nu, vrms=vrms, tendency_max=tendency,
                           heat_imbalance=imbalance)


def feed(rule, reports):
    """Index of the first report the rule stops at, or None."""
    for i, r in enumerate(reports):
        if rule.observe(r) is not None:
            return i
    return None


def test_steady_needs_settle_quiet_steps_in_a_row():
    rule = SteadyState(1e-6, settle=20)
    assert feed(rule, [report(i) for i in range(1, 40)]) == 19
    decision = SteadyState(1e-6, settle=20)
    for i in range(1, 21):
        d = decision.observe(report(i))
    assert d.status == "steady" and d.ends_stage


@pytest.mark.parametrize("loud", [dict(tendency=1e-4), dict(imbalance=1e-3), dict(nu=5.001)])
def test_one_loud_step_restarts_the_count(loud):
    rule = SteadyState(1e-6, settle=20)
    reports = [report(i) for i in range(1, 11)] + [report(11, **loud)] + \
        [report(i) for i in range(12, 60)]
    # the loud report is number 10; a jump of Nu stays in the 20-step window until number 29,
    # so the 20 quiet steps in a row end at 49 (other quantities: at 30)
    expected = 49 if "nu" in loud else 30
    assert feed(rule, reports) == expected


def test_steady_restart_state_round_trip_gives_the_same_future():
    a = SteadyState(1e-6, settle=20)
    for i in range(1, 15):
        a.observe(report(i, nu=5.0 + 1e-9 * i))
    b = SteadyState(1e-6, settle=20)
    b.restore(a.restart_state())
    future = [report(i, nu=5.0 + 1e-9 * (i % 3)) for i in range(15, 60)]
    assert feed(a, future) == feed(b, future) is not None


def test_reset_forgets_the_history():
    rule = SteadyState(1e-6, settle=5)
    for i in range(1, 5):
        rule.observe(report(i))
    rule.reset()
    assert feed(rule, [report(i) for i in range(5, 20)]) == 4


def test_end_time_lands_and_stops():
    rule = EndTime(0.5)
    assert rule.time_limit() == 0.5
    assert rule.observe(report(1, time=0.49)) is None
    assert rule.observe(report(2, time=0.5)).status == "end-time"


def test_step_limit_and_interrupt():
    assert StepLimit(10).observe(report(9)) is None
    assert StepLimit(10).observe(report(10)).status == "step-limit"
    flag = SimpleNamespace(requested=False)
    rule = Interrupted(flag)
    assert rule.observe(report(3)) is None
    flag.requested = True
    assert rule.observe(report(3)).status == "interrupted"


def test_runaway_flags_non_finite_and_huge_velocities():
    assert runaway(report(1, vrms=40.0), 1e4) is None
    assert runaway(report(1, vrms=float("nan")), 1e4).status == "diverged"
    assert runaway(report(1, nu=float("inf")), 1e4).status == "diverged"
    limit = 100.0 * 1e6 ** (2.0 / 3.0)
    assert runaway(report(1, vrms=1.01 * limit), 1e6).status == "diverged"


def test_rules_follow_the_stop_table():
    names = lambda cfg: [type(r).__name__ for r in rules_from_config(cfg.stop)]
    assert names(Config()) == ["SteadyState", "StepLimit"]
    cfg = Config().replace(stop__steady=False, stop__end_time=2.0)
    assert names(cfg) == ["EndTime", "StepLimit"]


def test_a_new_rule_is_one_registered_class(monkeypatch):
    monkeypatch.setattr(stops, "RULES", list(stops.RULES))

    @stops.register
    class Never(StopRule):
        @classmethod
        def from_config(cls, stop):
            return cls()

    assert isinstance(rules_from_config(Config().stop)[-1], Never)
    assert Never().time_limit() == math.inf and Never().restart_state() == {}


def test_every_status_is_declared_once_by_its_rule():
    assert stops.run_statuses() == ("steady", "mean-precision", "end-time", "step-limit",
                                    "interrupted", "diverged")
    assert all(cls.status for cls in stops.RULES)
