"""The model state as the flat record a run file's ``restart`` group holds, and back.

The model owns the layout (``convsim.model.state``: every advected field with its
SBDF2 history, the flow, and the Stokes solver's cache as opaque ``solver_*``
keys); the controller goes through these three functions.  Records hold arrays
and plain numbers; None (no SBDF2 history yet) is left out by the writer and
reads back as missing.
"""

from __future__ import annotations

import numpy as np

from convsim.model.state import ModelState, to_record

__all__ = ["state_record", "state_from_record", "fresh_state"]


def state_record(state: ModelState) -> dict:
    """What of ``state`` a bit-for-bit restart needs, as a flat dict."""
    return to_record(state)


def state_from_record(model, record: dict) -> ModelState:
    """The ``ModelState`` saved by ``state_record``, with the model's Stokes solver cache
    rebuilt from it (so the continued run repeats the uninterrupted one bit for bit)."""
    return model.resume(record)


def fresh_state(model, state: ModelState, temperature: np.ndarray | None = None,
                psi: np.ndarray | None = None) -> ModelState:
    """A state at the time and step of ``state`` with no SBDF2 history (after a jump: a
    Newton finish or a new continuation stage); the other advected fields carried over,
    the flow re-solved unless given."""
    return model.jump(state, temperature, psi)
