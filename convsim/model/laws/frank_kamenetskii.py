"""Frank-Kamenetskii viscosity: eta = exp(-b T + c (1 - z)), the linearised Arrhenius law.

b = ln(thermal_contrast), c = ln(depth_contrast): eta(T = 0)/eta(T = 1) = exp(b) at
fixed depth, eta(z = 0)/eta(z = 1) = exp(c) at fixed temperature (common practice).
"""

from convsim.model.laws.declare import Law, Parameter


def frank_kamenetskii(x, p):
    """eta = exp(-ln(thermal_contrast) T + ln(depth_contrast) (1 - z))."""
    import numpy as np
    b = np.log(p.thermal_contrast)
    c = np.log(p.depth_contrast)
    return np.exp(-b * np.asarray(x.temperature) + c * (1.0 - np.asarray(x.z)))


def _describe(p) -> str:
    text = f"contrast exp(b) = {p.thermal_contrast:g}"
    if p.depth_contrast != 1.0:
        text += f", depth exp(c) = {p.depth_contrast:g}"
    return text


DECLARATION = Law(
    name="frank-kamenetskii", doc="eta = exp(-b T + c (1 - z))", function=frank_kamenetskii,
    parameters=(
        Parameter("thermal_contrast",
                  "eta(T=0)/eta(T=1) = exp(b); eta = exp(-b T + c (1 - z))",
                  default=1.0, ge=1.0, le=1.0e30),
        Parameter("depth_contrast", "eta(z=0)/eta(z=1) = exp(c) at fixed T", default=1.0,
                  ge=1.0e-30, le=1.0e30),
    ),
    uniform=lambda p: p.thermal_contrast == 1.0 and p.depth_contrast == 1.0,
    describe=_describe)
