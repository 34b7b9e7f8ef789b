"""Continuation stages: values of one parameter run to steady state, in order, before the target.

The parameter is ``start.continuation_key``: the Rayleigh number (default) or a viscosity
parameter (``viscosity.thermal_contrast``, ``depth_contrast``, ``activation_energy``), e.g.
a viscosity contrast raised in steps towards a planetary one.

The 1c benchmark case, for instance, first converges Ra = 1e5 and continues from
that state at Ra = 1e6 (``start.continuation = [1e5]``): the perturbed conductive
start at 1e6 settles into another, multi-cell state.
"""

from __future__ import annotations

import logging

from convsim.run.restart import fresh_state

__all__ = ["Continuation"]

log = logging.getLogger(__name__)


class Continuation:
    """The stages of a run: ``rayleighs`` (the continuation values, then the target).

    ``stage`` is the index of the current stage; ``advance`` moves to the next one.
    """

    def __init__(self, rayleighs, configs=None):
        self.rayleighs = [float(r) for r in rayleighs]
        self.configs = configs          # one Config per stage when a viscosity key varies
        self.stage = 0

    @classmethod
    def from_config(cls, config) -> "Continuation":
        """The stages of a config, as Ra with the law's reference viscosity (``run.layer``)."""
        from convsim.run.layer import internal_rayleigh
        key = config.start.continuation_key
        if key == "physics.rayleigh":
            return cls([internal_rayleigh(config, ra)
                        for ra in list(config.start.continuation) + [config.physics.rayleigh]])
        section, name = key.split(".")
        configs = [config.replace(**{f"{section}__{name}": v})
                   for v in config.start.continuation] + [config]
        return cls([internal_rayleigh(c) for c in configs], configs)

    @property
    def rayleigh(self) -> float:
        return self.rayleighs[self.stage]

    @property
    def has_next(self) -> bool:
        return self.stage < len(self.rayleighs) - 1

    def model(self, base):
        """The base model at the current stage's Rayleigh number (or viscosity law)."""
        if self.configs is not None and self.stage < len(self.configs) - 1:
            from convsim.run.build import build_model
            return build_model(self.configs[self.stage], base.grid)
        return base.with_rayleigh(self.rayleigh)

    def advance(self, base, state):
        """Move to the next stage: returns its model and the state to continue from
        (same temperature, the flow re-solved at the new Ra, SBDF2 history dropped)."""
        log.info("stage Ra = %g steady at step %d; continuing at Ra = %g",
                 self.rayleigh, state.step, self.rayleighs[self.stage + 1])
        self.stage += 1
        model = self.model(base)
        return model, fresh_state(model, state)

    def restart_state(self) -> dict:
        return dict(stage=self.stage)

    def restore(self, saved: dict) -> None:
        self.stage = int(saved.get("stage", 0))
