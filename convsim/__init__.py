"""convsim: 2D finite-volume Boussinesq convection at infinite Prandtl number."""

from convsim.config import Config, load_config, parse_config
from convsim.errors import ConfigError, ConvsimError, OutputExistsError, SnapshotError, SolverError

__version__ = "0.1.0"

__all__ = ["Config", "load_config", "parse_config", "ConfigError", "ConvsimError",
           "OutputExistsError", "SnapshotError", "SolverError", "__version__"]
