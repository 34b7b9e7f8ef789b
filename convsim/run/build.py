"""Every translation of a Config into the model: the one place a Config becomes numbers.

``convsim.model`` takes numbers, arrays and declarations, never a Config; this
module reads the config's tables and builds the grid, the thermal conditions,
the viscosity law and the ``Model`` (with its Stokes back end and stepper).
"""

from __future__ import annotations

from convsim.config import Config
from convsim.errors import ConfigError
from convsim.model import dye
from convsim.model.fields import dye_field
from convsim.model.energy import ThermalBoundaries
from convsim.model.grid import Grid
from convsim.model.rheology import ViscosityLaw
from convsim.model.timestepping import Model
from convsim.run import layer

__all__ = ["build_model", "build_grid", "build_thermal", "build_law", "build_tracers"]


def build_grid(config: Config) -> Grid:
    """The grid of [domain] (periodic when [boundaries] sides = 'periodic'; refined towards
    the walls by domain.wall_refinement)."""
    d = config.domain
    return Grid(d.nx, d.nz, d.aspect, periodic=(config.boundaries.sides == "periodic"),
                wall_refinement=d.wall_refinement)


def build_thermal(config: Config) -> ThermalBoundaries:
    """The thermal conditions of [boundaries] at z = 1 and z = 0."""
    b = config.boundaries
    return ThermalBoundaries(b.top_heat, b.top_value, b.bottom_heat, b.bottom_value)


def build_law(config: Config) -> ViscosityLaw:
    """The viscosity law of [viscosity]."""
    return ViscosityLaw.from_table(config.viscosity)


#: The automatic flow-solve tolerance (numerics.stokes_tolerance = 0): tight where the steady
#: test reads max|dT/dt| to 1e-6 of Nu, looser for a run that follows the flow in time.
STEADY_RUN_STOKES_TOLERANCE = 1e-10
TIME_DEPENDENT_STOKES_TOLERANCE = 1e-6


def stokes_tolerance(config: Config) -> float:
    """numerics.stokes_tolerance, or the automatic choice when it is 0."""
    if config.numerics.stokes_tolerance > 0.0:
        return config.numerics.stokes_tolerance
    return STEADY_RUN_STOKES_TOLERANCE if config.stop.steady else TIME_DEPENDENT_STOKES_TOLERANCE


#: The automatic flow-error target (numerics.flow_error_tolerance = 0) of a run that follows the
#: flow in time: each step's flow to 1e-5 of its dissipation norm, as CG estimates it (Nu and vrms
#: after 40 steps at contrast 1e5 within 6e-10 of the 1e-10 solve, far below the step's own error;
#: DEVELOPERS.md, "Flow-solve targets").  A run that stops
#: at steady state keeps the residual target alone (its steady test wants the tight flow).
TIME_DEPENDENT_FLOW_ERROR = 1e-5


def flow_error_tolerance(config: Config) -> float:
    """numerics.flow_error_tolerance, or the automatic choice when it is 0 (off for a run that
    stops at steady state)."""
    if config.numerics.flow_error_tolerance > 0.0:
        return config.numerics.flow_error_tolerance
    return 0.0 if config.stop.steady else TIME_DEPENDENT_FLOW_ERROR


def build_model(config: Config, grid: Grid | None = None) -> Model:
    """The ``Model`` a config describes (``grid`` overrides [domain], for convergence studies)."""
    b, n = config.boundaries, config.numerics
    limiter = "upwind" if n.advection == "upwind" else n.limiter
    grid = grid or build_grid(config)
    # Ra with the law's reference viscosity, from Ra at the stated reference (run.layer)
    return Model(grid, layer.internal_rayleigh(config), build_thermal(config),
                 build_law(config), config.physics.internal_heating, b.top_flow, b.bottom_flow,
                 limiter, n.time_scheme, n.cfl, n.max_dt, n.stokes_solver, n.factor_reuse,
                 n.time_scale_fraction,
                 (n.nonlinear_solver, n.nonlinear_tolerance, n.nonlinear_max_iterations),
                 fields=build_tracers(config, grid), stokes_tolerance=stokes_tolerance(config),
                 flow_error_tolerance=flow_error_tolerance(config))


def build_tracers(config: Config, grid: Grid) -> tuple:
    """The dye's declaration from [tracer] (none when it is not enabled); an expression is
    checked and tried on the grid here, so a bad one is a config error naming the key."""
    t = config.tracer
    if not t.enabled:
        return ()
    if t.kind == "layer":
        start = dye.layer(t.layer_bottom, t.layer_top)
    elif t.kind == "blob":
        start = dye.blob(t.blob_x, t.blob_z, t.blob_radius)
    else:
        try:
            start = dye.expression(t.expression)
            start(grid)
        except ValueError as exc:
            raise ConfigError(f"tracer.expression = {t.expression!r}: {exc}") from None
    return (dye_field(t.diffusivity, start),)
