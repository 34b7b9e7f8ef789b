"""The model state as the flat record a run file's ``restart`` group holds, and back.

The one place that knows which parts of ``ModelState`` a restart needs, so a new
piece of state is added here once.  Records hold arrays and plain numbers; None
(no SBDF2 history yet) is left out by the writer and reads back as None.
"""

from __future__ import annotations

import numpy as np

from convsim.model.timestepping import ModelState

__all__ = ["state_record", "state_from_record", "fresh_state"]


def state_record(state: ModelState) -> dict:
    """What of ``state`` a bit-for-bit restart needs, as a flat dict."""
    return dict(temperature=state.temperature, psi=state.psi,
                previous_temperature=state.previous_temperature,
                previous_tendency=state.previous_tendency,
                factor_weights=state.factor_weights, time=state.time, step=state.step,
                previous_dt=state.previous_dt)


def state_from_record(record: dict) -> ModelState:
    """The ``ModelState`` saved by ``state_record`` (as read back from a run file)."""
    return ModelState(time=float(record["time"]), step=int(record["step"]),
                      temperature=np.array(record["temperature"]), psi=np.array(record["psi"]),
                      previous_temperature=record.get("previous_temperature"),
                      previous_tendency=record.get("previous_tendency"),
                      previous_dt=float(record["previous_dt"]),
                      factor_weights=record.get("factor_weights"))


def fresh_state(model, state: ModelState, temperature: np.ndarray, psi: np.ndarray) -> ModelState:
    """A state at the time and step of ``state`` with new fields and no SBDF2 history
    (after a jump: a Newton finish or a new continuation stage)."""
    return ModelState(time=state.time, step=state.step, temperature=temperature, psi=psi,
                      factor_weights=model.factor_weights)
