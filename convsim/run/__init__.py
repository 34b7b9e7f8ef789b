"""A run: builds a model from a config, the initial state, the controller (time loop, stop rules, continuation, Newton finish, output schedule).

The package is also the front door's verb: ``convsim.run(config, output=None, ...)``
calls :func:`convsim.api.run` (the package module is callable), so that the name the
README shows and the folder that holds the run loop can be the same.
"""

import sys as _sys
import types as _types


class _CallableModule(_types.ModuleType):
    """``convsim.run(...)`` is ``convsim.api.run(...)``; attributes are the package's."""

    def __call__(self, *args, **kwargs):
        from convsim.api import run
        return run(*args, **kwargs)


_sys.modules[__name__].__class__ = _CallableModule
