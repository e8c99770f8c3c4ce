"""The package's own exception and warning classes.

Every user mistake raises :class:`AssuranceInputError` (a ``ValueError``) with a message
that names the parameter, the function, what is allowed and the value received. Results
that a planner must not miss (a target above the ceiling, a Monte Carlo estimate with a
large standard error) are reported with :class:`AssuranceWarning`.
"""

from __future__ import annotations

__all__ = ["AssuranceInputError", "AssuranceWarning", "DesignFileError"]


class AssuranceInputError(ValueError):
    """A user-facing parameter is outside what the function allows."""


class DesignFileError(AssuranceInputError):
    """A design file cannot be read or describes an invalid design."""


class AssuranceWarning(UserWarning):
    """A result is valid but needs the planner's attention."""
