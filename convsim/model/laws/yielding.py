"""Plastic yielding, applied to any law: where the flow is fast the viscosity drops so that
the stress stays near a yield stress (a lid that can break).

    sigma_y   = yield_stress + yield_stress_gradient * (1 - z)     (cohesion + gradient x depth)
    eta_plast = plastic_viscosity + sigma_y / m
    m         = sqrt(e_ij e_ij) = sqrt(2) e_II          ('tensor-norm')
              = 2 e_II                                 ('twice-invariant': with eta* = 0 the
                                                        stress invariant 2 eta e_II is sigma_y)
    eta       = 2 / (1/eta_lin + 1/eta_plast)           ('harmonic', the harmonic mean)
              = min(eta_lin, eta_plast)                ('minimum')

with eta_lin the chosen law and e_II = sqrt(e_ij e_ij / 2) the strain-rate invariant.
The 'tensor-norm' measure and the harmonic mean with its factor 2 are the forms of the
viscoplastic benchmark of Tosi et al. (2015), Geochem. Geophys. Geosyst. 16, 2175-2196
(quoted from memory).  Note the harmonic mean tends to 2 eta_lin where nothing yields; the
minimum gives eta_lin exactly there.  Without flow (e_II = 0) eta_plast is infinite, which
is also how the onset solver sees it.  Stresses in eta_ref kappa / d^2.
"""

from convsim.model.laws.declare import Modifier, Parameter

COMBINATIONS = ("harmonic", "minimum")
MEASURES = ("tensor-norm", "twice-invariant")


def plastic_viscosity(x, p):
    """eta_plast = eta* + sigma_y / m (infinite where the strain rate is zero)."""
    import numpy as np
    rate = np.zeros(np.shape(x.z)) if x.strain_rate is None else np.asarray(x.strain_rate)
    measure = (np.sqrt(2.0) if p.yield_strain_measure == "tensor-norm" else 2.0) * rate
    sigma = p.yield_stress + p.yield_stress_gradient * (1.0 - np.asarray(x.z))
    ratio = np.divide(sigma, measure, out=np.full(np.broadcast(sigma, measure).shape, np.inf),
                      where=measure > 0.0)
    return p.plastic_viscosity + ratio


def yielded(eta_lin, x, p):
    """The law's viscosity eta_lin combined with the plastic one (see the module docstring)."""
    import numpy as np
    plast = plastic_viscosity(x, p)
    if p.yield_combination == "minimum":
        return np.minimum(eta_lin, plast)
    return 2.0 / (1.0 / eta_lin + 1.0 / plast)


def _describe(p) -> str:
    depth = (f" + {p.yield_stress_gradient:g} depth" if p.yield_stress_gradient else "")
    return (f"yield stress {p.yield_stress:g}{depth}, eta* = {p.plastic_viscosity:g}, "
            f"{p.yield_combination} ({p.yield_strain_measure})")


DECLARATION = Modifier(
    name="yielding", doc="eta = mean(eta_lin, eta* + sigma_y / m(strain rate))",
    function=yielded,
    parameters=(
        Parameter("yield_stress", "yield stress sigma_y at the surface, the cohesion "
                  "(0 with a zero gradient: no yielding)", units="eta_ref kappa/d^2",
                  default=0.0, ge=0.0, le=1.0e30),
        Parameter("yield_stress_gradient", "increase of the yield stress with depth: "
                  "sigma_y = yield_stress + gradient (1 - z)", units="eta_ref kappa/d^3",
                  default=0.0, ge=0.0, le=1.0e30),
        Parameter("plastic_viscosity", "eta*, the viscosity of the plastic branch at high "
                  "stress: eta_plast = eta* + sigma_y / m", default=0.0, ge=0.0, le=1.0e30),
        Parameter("yield_combination", "how eta_lin and eta_plast combine: harmonic mean "
                  "2/(1/eta_lin + 1/eta_plast) or their minimum", default="harmonic",
                  choices=COMBINATIONS),
        Parameter("yield_strain_measure", "m in eta_plast: sqrt(e_ij e_ij) (tensor-norm) or "
                  "2 e_II (twice-invariant)", default="tensor-norm", choices=MEASURES),
    ),
    active=lambda p: p.yield_stress > 0.0 or p.yield_stress_gradient > 0.0,
    uniform=lambda p: False, describe=_describe, needs=("strain_rate",), order=50)
