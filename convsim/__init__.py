"""convsim: 2D finite-volume Boussinesq convection at infinite Prandtl number."""

from convsim.config import Config, load_config, parse_config
from convsim.errors import ConfigError, ConvsimError, OutputExistsError, SnapshotError, SolverError

__version__ = "0.1.0"

__all__ = ["Config", "load_config", "parse_config", "run", "open_run", "ConfigError",
           "ConvsimError", "OutputExistsError", "SnapshotError", "SolverError", "__version__"]


def __getattr__(name):
    """``convsim.open_run``, imported on first use (it brings in xarray).  ``convsim.run`` is
    the callable package ``convsim/run/`` (calling it calls ``convsim.api.run``)."""
    if name == "open_run":
        from convsim.api import open_run
        return open_run
    if name == "run":
        import convsim.run as run_package
        return run_package
    raise AttributeError(f"module 'convsim' has no attribute {name!r}")
