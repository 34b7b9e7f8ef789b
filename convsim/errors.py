"""Exception types of convsim.

Misuse (a bad config, a missing file) raises one of these; numerical trouble
during a run is reported as a status in the run result instead (see
``convsim.run.controller``).  The command line turns every ``ConvsimError`` into one
line on stderr and exit status 2.
"""

__all__ = ["ConvsimError", "ConfigError", "SolverError", "SnapshotError", "DiskFullError",
           "OutputExistsError"]


class ConvsimError(Exception):
    """Base class of every error convsim raises on purpose."""


class ConfigError(ConvsimError, ValueError):
    """A config value, key or file is not acceptable; the message names key, value and what is allowed."""


class SolverError(ConvsimError, RuntimeError):
    """A linear solver back end is unavailable or cannot handle the problem it was given."""


class SnapshotError(ConvsimError, OSError):
    """A run file cannot be read or written."""


class DiskFullError(SnapshotError):
    """The disk (or the quota) is full: a run file keeps every snapshot committed before.

    The command line exits with status 4 (``EXIT_DISK_FULL``) on it."""


class OutputExistsError(ConvsimError, FileExistsError):
    """An output would overwrite an existing file and overwriting was not asked for."""
