"""Constant viscosity: eta = 1 (the isoviscous reference case)."""

from convsim.model.laws.declare import Law


def constant(x, p):
    """eta = 1 at every point of the inputs' shape."""
    import numpy as np
    return np.ones(np.broadcast(x.temperature, x.z).shape)


DECLARATION = Law(
    name="constant", doc="eta = 1", function=constant,
    uniform=lambda p: True)
