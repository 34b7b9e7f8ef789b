"""Cut-offs of any law: eta clipped to [minimum, maximum] where those are set (> 0)."""

from convsim.model.laws.declare import Modifier, Parameter


def clip(eta, x, p):
    """min(max(eta, minimum), maximum), each bound only where it is > 0."""
    import numpy as np
    return np.clip(eta, p.minimum if p.minimum > 0 else None,
                   p.maximum if p.maximum > 0 else None)


def _check(p) -> str | None:
    if p.maximum and p.minimum and p.maximum < p.minimum:
        return (f"viscosity.maximum = {p.maximum!r}: must be >= viscosity.minimum "
                f"= {p.minimum!r}")
    return None


def _describe(p) -> str:
    top = p.maximum if p.maximum > 0 else float("inf")
    return f"cut-offs [{p.minimum:g}, {top:g}]"


DECLARATION = Modifier(
    name="cut-offs", doc="eta -> min(max(eta, minimum), maximum)", function=clip,
    parameters=(
        Parameter("minimum", "lower cut-off of the viscosity", default=0.0, ge=0.0, le=1.0e30),
        Parameter("maximum", "upper cut-off of the viscosity (0: none)", default=0.0, ge=0.0,
                  le=1.0e30),
    ),
    active=lambda p: p.minimum > 0.0 or p.maximum > 0.0,
    uniform=lambda p: p.minimum <= 1.0 and (p.maximum == 0.0 or p.maximum >= 1.0),
    onset="kinks", describe=_describe, check=_check, order=100)
