"""The Newton finish policy and continuation stages, on a small case-1a model."""

from types import SimpleNamespace

import numpy as np

from convsim.config import Config
from convsim.run import newton_finish
from convsim.run.build import build_model
from convsim.run.continuation import Continuation
from convsim.run.newton_finish import FIRST_WAIT, NewtonFinish


def test_newton_waits_then_backs_off_after_a_failure(monkeypatch):
    calls = []

    def failing(model, T, psi, tol):
        calls.append(tol)
        return T, psi, SimpleNamespace(converged=False, iterations=3, residual_evaluations=9)

    monkeypatch.setattr(newton_finish, "newton_steady", failing)
    policy = NewtonFinish(threshold=0.1, tolerance=1e-6)
    state = SimpleNamespace(temperature=None, psi=None, step=0)
    quiet = lambda step: SimpleNamespace(step=step, nusselt_top=4.0, tendency_max=0.01)
    for step in range(1, 400):
        state.step = step
        assert policy.attempt(None, state, quiet(step)) is None
    # tried at 50, then 50 + 100, then 150 + 200 = 350
    assert len(calls) == 3 and calls[0] == 0.1 * 1e-6 * 4.0
    assert (policy.wait, policy.next_step) == (8 * FIRST_WAIT, 350 + 8 * FIRST_WAIT)
    copy = NewtonFinish(0.1, 1e-6)
    copy.restore(policy.restart_state())
    assert (copy.wait, copy.next_step, copy.done) == (policy.wait, policy.next_step, False)


def test_newton_is_not_tried_while_the_run_is_loud():
    policy = NewtonFinish(threshold=0.1, tolerance=1e-6)
    loud = SimpleNamespace(step=500, nusselt_top=4.0, tendency_max=1.0)
    assert not policy.due(loud)
    assert NewtonFinish.from_config(Config().replace(stop__newton=False).stop) is None


def test_continuation_stages_and_the_flow_at_the_new_rayleigh_number():
    cfg = Config().replace(domain__nx=8, domain__nz=8, start__continuation=[1e3, 3e3],
                           physics__rayleigh=1e4)
    stages = Continuation.from_config(cfg)
    assert stages.rayleighs == [1e3, 3e3, 1e4] and stages.has_next
    base = build_model(cfg)
    model = stages.model(base)
    assert model.rayleigh == 1e3
    X, Z = model.grid.cell_mesh()
    T = 1.0 - Z + 0.1 * np.cos(np.pi * X) * np.sin(np.pi * Z)
    state = model.initial_state(T)
    model2, state2 = stages.advance(base, state)
    assert model2.rayleigh == 3e3 and stages.stage == 1
    # the Stokes problem is linear in Ra: the streamfunction scales with it (constant viscosity)
    np.testing.assert_allclose(state2.psi, 3.0 * state.psi, rtol=1e-12, atol=1e-12)
    assert state2.previous is None
    again = Continuation.from_config(cfg)
    again.restore(stages.restart_state())
    assert again.rayleigh == 3e3


def test_newton_is_tried_once_the_transient_has_decayed_to_a_tenth_of_its_peak():
    """The decay trigger (run/newton_finish.py): a transient that rises to a peak of
    max|dT/dt| = 90 and decays; the absolute threshold (0.1 Nu = 0.5) is never met, the
    decay test fires at the first step with a rate <= 9, and the peak survives a restart."""
    policy = NewtonFinish(threshold=0.1, tolerance=1e-6, decay=0.1)
    rates = [90.0 * np.exp(-((s - 200.0) / 80.0) ** 2) + 1.0 for s in range(1000)]
    report = lambda step: SimpleNamespace(step=step, nusselt_top=5.0, tendency_max=rates[step])
    fired = [s for s in range(1, 1000) if policy.due(report(s))]
    first = next(s for s in range(201, 1000) if rates[s] <= 0.1 * max(rates[:s + 1]))
    assert fired[0] == first
    copy = NewtonFinish(0.1, 1e-6, decay=0.1)
    copy.restore(policy.restart_state())
    assert copy.peak == policy.peak == max(rates[1:])
    off = NewtonFinish(0.1, 1e-6, decay=0.0)
    assert not any(off.due(report(s)) for s in range(1, 1000))
