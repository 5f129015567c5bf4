"""Project exception types.

Every error a user can cause (a bad file, a bad spec key, a bad bundle) is raised as a
``LabbenchError`` subclass whose message is one line naming the file, column, row or key and the
fix. The command line prints ``str(err)`` and exits 2; the window shows it in a dialog as-is.
"""

from __future__ import annotations


class LabbenchError(Exception):
    """Base class: a problem the user can fix. ``str(err)`` is a complete one-line message."""


class DataError(LabbenchError):
    """A table that cannot be used as given (file, column or row named in the message)."""


class SpecError(LabbenchError):
    """A spec file or search-space entry that is not valid (file, key, value and what is allowed)."""


class BundleError(LabbenchError):
    """A model bundle that is corrupt, foreign, or does not fit the data it is asked to predict."""


class DivergenceError(LabbenchError):
    """Training produced a NaN or infinite loss. ``epoch`` is 1-based, ``member`` the stacked model."""

    def __init__(self, message: str, *, epoch: int | None = None, member: int | None = None):
        super().__init__(message)
        self.epoch = epoch
        self.member = member
