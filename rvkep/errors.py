"""Exception classes for mistakes a user can make.

Every error a user can cause is one of these; the command line catches
:class:`RvkepError` once and prints its message as a single line (exit status 2).
"""

__all__ = ["RvkepError", "DataError", "ModelFileError", "OptionError", "FolderBusyError"]


class RvkepError(Exception):
    """Base class of all user-facing rvkep errors."""


class DataError(RvkepError, ValueError):
    """An RV data file is missing, unreadable or invalid.

    The message names the file, the line (where a row is at fault) and the problem.
    """


class ModelFileError(RvkepError, ValueError):
    """A model file (TOML) is invalid; the message names the key and the problem."""


class OptionError(RvkepError, ValueError):
    """An option or argument combination is invalid."""


class FolderBusyError(RvkepError):
    """Another rvkep run holds the output folder (the message names the folder and it)."""
