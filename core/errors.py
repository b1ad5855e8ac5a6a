"""Typed errors raised by Wellscape's core library.

Every error a user can provoke derives from :class:`WellscapeError`, so a
front end can catch that one class, show ``str(error)`` and never a traceback.
"""
from __future__ import annotations


class WellscapeError(Exception):
    """Base class of every error that reports a problem with the user's input or request."""


class InputError(WellscapeError, ValueError):
    """A value given to the library is invalid (bad shape, NaN, non-positive mass, ...)."""


class MemoryLimitError(WellscapeError, MemoryError):
    """A request would need more memory than this machine has available."""


class Cancelled(WellscapeError):
    """Long work stopped because ``should_stop()`` returned True.

    ``partial`` holds whatever result existed when the work stopped (may be None).
    """

    def __init__(self, message: str = "cancelled", partial=None):
        super().__init__(message)
        self.partial = partial


class NotConverged(WellscapeError):
    """An iterative method did not reach its tolerance; ``partial`` carries the best result so far."""

    def __init__(self, message: str, partial=None):
        super().__init__(message)
        self.partial = partial


class FormulaError(InputError):
    """A formula could not be parsed or evaluated.

    ``column`` is the 1-based column of the offending character when known.
    """

    def __init__(self, message: str, *, formula: str = "", column: int | None = None):
        super().__init__(message)
        self.formula = formula
        self.column = column


class ProjectError(InputError):
    """A project file is malformed; ``path`` names the offending field (e.g. ``grid.points[1]``)."""

    def __init__(self, message: str, *, path: str = ""):
        super().__init__(f"{path}: {message}" if path else message)
        self.path = path
        self.reason = message
