"""The names of the model's discrete choices, declared once (plain data; imports nothing).

The config's allowed values, the model's checks, the onset solver and ``convsim
rayleigh`` all read these tuples, so a new boundary condition or scheme is named
in one place.  (Viscosity laws and Stokes solvers have their own registries.)
"""

__all__ = ["FLOW_CONDITIONS", "THERMAL_CONDITIONS", "SIDE_CONDITIONS", "ADVECTION_SCHEMES",
           "LIMITERS", "TIME_SCHEMES", "FACTOR_REUSE", "NONLINEAR_METHODS"]

#: Mechanical condition of a horizontal wall.
FLOW_CONDITIONS = ("free-slip", "no-slip")
#: Thermal condition of a horizontal wall: fixed temperature or fixed upward heat flux.
THERMAL_CONDITIONS = ("temperature", "flux")
#: Side walls: free-slip and insulating (reflecting), or periodic.
SIDE_CONDITIONS = ("reflecting", "periodic")
#: Advection scheme: limited second order (TVD) or first-order upwind.
ADVECTION_SCHEMES = ("tvd", "upwind")
#: Flux limiters of the TVD scheme (``model.kernels.LIMITER_CODES`` adds 'upwind'); 'koren'
#: bounds the third-order kappa = 1/3 interpolation; 'unlimited' is that interpolation without a
#: limiter (third order on smooth fields, not TVD: for smooth steady benchmark work).
LIMITERS = ("van-leer", "minmod", "superbee", "mc", "koren", "unlimited")
#: IMEX time integrators.
TIME_SCHEMES = ("sbdf2", "euler")
#: Variable viscosity: reuse the Stokes factor as a CG preconditioner while it pays, or refactor.
FACTOR_REUSE = ("adaptive", "always")
#: Iteration of the nonlinear Stokes problem of a strain-rate-dependent viscosity.
NONLINEAR_METHODS = ("newton", "picard")
