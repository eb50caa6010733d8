"""Error and warning classes shared by every layer of drainplan.

All errors raised on purpose derive from :class:`DrainplanError`. Errors about
inputs also derive from :class:`ValueError` so that generic callers can catch
them the usual way. Each error may carry ``param``: the name of the input it is
about, so a front end (the CLI, the project-file reader) can name the option or
key the user typed.
"""

from __future__ import annotations

__all__ = ["DrainplanError", "InputError", "GeometryError", "ConvergenceWarning"]


class DrainplanError(Exception):
    """Root of all errors raised by drainplan on purpose."""

    def __init__(self, message: str, *, param: str | None = None):
        super().__init__(message)
        self.param = param


class InputError(DrainplanError, ValueError):
    """An input value is outside what the method or the tool accepts."""


class GeometryError(DrainplanError, ValueError):
    """A geometry cannot be used (empty, invalid beyond repair, wrong type)."""


class ConvergenceWarning(UserWarning):
    """An iterative solver did not converge for some cases (their result is NaN)."""
