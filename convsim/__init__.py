"""convsim: 2D finite-volume Boussinesq convection at infinite Prandtl number."""

from convsim.config import Config, load_config, parse_config
from convsim.errors import ConfigError, ConvsimError, OutputExistsError, SnapshotError, SolverError

__version__ = "0.1.0"

__all__ = ["Config", "load_config", "parse_config", "run", "open_run", "ConfigError",
           "ConvsimError", "OutputExistsError", "SnapshotError", "SolverError", "__version__"]


import types as _types

import convsim.run as _run_package  # the folder run/ (its __init__ imports nothing)


class _CallableModule(_types.ModuleType):
    """The package ``convsim.run``, callable: ``convsim.run(...)`` is ``convsim.api.run(...)``."""

    def __call__(self, *args, **kwargs):
        from convsim.api import run
        return run(*args, **kwargs)


_run_package.__class__ = _CallableModule


def __getattr__(name):
    """``convsim.open_run``, imported on first use (it brings in xarray)."""
    if name == "open_run":
        from convsim.api import open_run
        return open_run
    raise AttributeError(f"module 'convsim' has no attribute {name!r}")
