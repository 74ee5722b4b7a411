"""The one family of exceptions and warnings forcefit raises.

Every exception also inherits the matching builtin, so ``except ValueError``
still catches bad input. Messages say where, what was found, what was expected
and what to do.
"""

from __future__ import annotations

from typing import Any


class ForcefitError(Exception):
    """Base of every error forcefit raises on purpose."""


class InputError(ForcefitError, ValueError):
    """A file, table or array that forcefit cannot use as it stands."""


class GeometryError(ForcefitError, ValueError):
    """A path whose geometry cannot be computed (too few points, no curvature, ...)."""


class FitError(ForcefitError, RuntimeError):
    """A fit that did not succeed.

    Parameters
    ----------
    message : str
        What went wrong and what to try.
    last_params : dict, optional
        The last parameter values the fitter reached, for a restart.
    """

    def __init__(self, message: str, *, last_params: dict[str, Any] | None = None) -> None:
        super().__init__(message)
        self.last_params = dict(last_params or {})


class NotIdentifiable(ForcefitError, ValueError):
    """The data cannot determine the quantity asked for (a circle, a straight line, ...).

    Parameters
    ----------
    message : str
        The reason, in a sentence a user can act on.
    """


class ForcefitWarning(UserWarning):
    """A result or an input that is usable but deserves a second look."""
