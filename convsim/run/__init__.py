"""A run: builds a model from a config, the initial state, the controller (time loop, stop rules, continuation, Newton finish, output schedule).

The package is also the front door's verb: ``convsim.run(config, output=None, ...)``
calls :func:`convsim.api.run` (``convsim/__init__.py`` makes this package module
callable), so that the name the README shows and the folder that holds the run loop
can be the same.
"""
