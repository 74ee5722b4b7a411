"""The trust-region least squares shared by the orbit and projected-orbit fits.

A named parameter vector with some entries held (`ParameterVector`) is handed to scipy's
trust-region-reflective least squares (`scipy.optimize.least_squares`) with only the varying
entries free, a Jacobian of those columns, a robust loss on request and a budget of model
evaluations; where it stops comes back as a typed `Optimum`, the residuals evaluated afresh
there.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace
from typing import Literal

import numpy as np
from scipy.optimize import least_squares

from .._types import FloatArray, frozen_array
from ..errors import FitError

Loss = Literal["linear", "soft_l1", "huber"]

TOLERANCE = 1e-8
"""Relative tolerance on the cost's fall, on the step and on the gradient at which the fit stops."""

STOPS = {
    0: "the budget of model evaluations ran out before the fit settled",
    1: "the gradient of the cost vanished to within its tolerance",
    2: "the cost stopped falling to within its tolerance",
    3: "the step shrank below its tolerance",
    4: "the cost stopped falling and the step shrank below their tolerances",
}
"""Why the optimiser stopped, by its termination status, in our words."""


@dataclass(frozen=True, eq=False)
class ParameterVector:
    """Every parameter of a model by name, with the held ones kept out of the fit.

    Attributes
    ----------
    names : tuple of str
        The parameters in the model's order.
    values : ndarray, shape (n_parameters,)
        Their values, each in its own unit (a read-only copy).
    held : ndarray of bool, shape (n_parameters,)
        True where a parameter is held at its value.
    lower, upper : ndarray, shape (n_parameters,)
        Bounds of each parameter (-inf and inf, the default, when free to go anywhere).
    """

    names: tuple[str, ...]
    values: FloatArray
    held: np.ndarray
    lower: FloatArray = field(default_factory=lambda: np.empty(0))
    upper: FloatArray = field(default_factory=lambda: np.empty(0))

    def __post_init__(self) -> None:
        count = len(self.names)
        held = np.array(self.held, dtype=bool)
        held.flags.writeable = False
        object.__setattr__(self, "values", frozen_array(self.values))
        object.__setattr__(self, "held", held)
        for side, default in (("lower", -math.inf), ("upper", math.inf)):
            bound = np.asarray(getattr(self, side), dtype=float)
            bound = np.full(count, default) if bound.size == 0 else bound
            object.__setattr__(self, side, frozen_array(bound))
        if not all(array.shape == (count,) for array in (self.values, self.held, self.lower, self.upper)):
            raise ValueError("a parameter vector needs one value, hold flag and bound pair per name.")

    @classmethod
    def of(cls, names: tuple[str, ...], vector: FloatArray, held: Callable[[str], bool]) -> ParameterVector:
        """The parameters ``names`` at ``vector``, those for which ``held(name)`` is true held."""
        return cls(names=tuple(names), values=np.asarray(vector, dtype=float),
                   held=np.array([held(name) for name in names], dtype=bool))

    @property
    def varying(self) -> tuple[str, ...]:
        """The names of the varying parameters, in the model's order."""
        return tuple(name for name, fixed in zip(self.names, self.held) if not fixed)

    @property
    def columns(self) -> list[int]:
        """The positions of the varying parameters in the full vector."""
        return [int(i) for i in np.flatnonzero(~self.held)]

    def full(self, free: FloatArray) -> FloatArray:
        """The whole vector with the varying entries set to ``free``."""
        vector = self.values.copy()
        vector[~self.held] = free
        return vector

    def at(self, vector: FloatArray) -> ParameterVector:
        """The same parameters (held ones the same) at ``vector``."""
        return replace(self, values=np.asarray(vector, dtype=float))

    def as_dict(self) -> dict[str, float]:
        """Every parameter's value by name."""
        return {name: float(value) for name, value in zip(self.names, self.values)}


@dataclass(frozen=True, eq=False)
class Optimum:
    """Where the least squares stopped.

    Attributes
    ----------
    parameters : ParameterVector
        The parameters there (held ones unchanged).
    residual : ndarray
        The normalised residuals there, evaluated afresh.
    evaluations : int
        Evaluations of the residuals the optimiser used (not counting the fresh one).
    success : bool
        Whether it settled (False when the budget ran out).
    message : str
        Why it stopped.
    """

    parameters: ParameterVector
    residual: FloatArray
    evaluations: int
    success: bool
    message: str

    @property
    def values(self) -> Mapping[str, float]:
        """Every parameter's value by name."""
        return self.parameters.as_dict()


class _NotFinite(Exception):
    """The residuals at a trial point are not all finite."""


def run_least_squares(
    residual: Callable[[FloatArray], FloatArray],
    jacobian: Callable[[FloatArray, list[int]], FloatArray],
    start: ParameterVector,
    loss: Loss,
    max_evaluations: int,
    what: str = "the orbit fit",
) -> Optimum:
    """Trust-region least squares of normalised residuals (the loss's scale is 1: one standard
    error), each step scaled by the Jacobian's columns.

    Parameters
    ----------
    residual : callable
        The normalised residuals at a whole parameter vector.
    jacobian : callable
        d(residual)/d(parameter) at a whole vector for the given columns, shape
        (n_residuals, n_columns); it must be finite.
    start : ParameterVector
        Where to start, with the held parameters and any bounds.
    loss : {"linear", "soft_l1", "huber"}
        Least squares or a robust loss.
    max_evaluations : int
        Most evaluations of the residuals the optimiser may use.
    what : str
        The fit's name, for the messages.

    Returns
    -------
    Optimum

    Raises
    ------
    FitError
        When the residuals at a trial point are not finite, or a step's linear algebra fails.
    """
    columns = start.columns
    evaluations = 0

    def free_residual(free: FloatArray) -> FloatArray:
        nonlocal evaluations
        evaluations += 1
        values = np.asarray(residual(start.full(free)), dtype=float).ravel()
        if not np.all(np.isfinite(values)):
            raise _NotFinite
        return values

    def free_jacobian(free: FloatArray) -> FloatArray:
        return np.asarray(jacobian(start.full(free), columns), dtype=float)

    held = start.held
    try:
        solved = least_squares(free_residual, start.values[~held], jac=free_jacobian,
                               bounds=(start.lower[~held], start.upper[~held]), method="trf",
                               ftol=TOLERANCE, xtol=TOLERANCE, gtol=TOLERANCE, x_scale="jac",
                               loss=loss, f_scale=1.0, max_nfev=max_evaluations)
    except _NotFinite:
        raise FitError(f"{what} failed: the model's residuals are not finite at a trial step "
                       f"(after {evaluations} evaluations); check the data for missing values, "
                       "the units and the start.", last_params=start.as_dict()) from None
    except np.linalg.LinAlgError:
        raise FitError(f"{what} failed: the linear algebra of a step broke down after {evaluations} "
                       "evaluations (the Jacobian is probably degenerate).",
                       last_params=start.as_dict()) from None
    except ValueError:
        raise FitError(f"{what} failed: the optimiser could not start from the given parameters "
                       "(a start outside its bounds, or a Jacobian of the wrong shape).",
                       last_params=start.as_dict()) from None
    used = evaluations
    best = start.full(solved.x)
    again = np.asarray(residual(best), dtype=float).ravel()     # afresh, at the point kept
    return Optimum(parameters=start.at(best), residual=again, evaluations=used,
                   success=bool(solved.status > 0),
                   message=STOPS.get(int(solved.status), f"stopped with status {int(solved.status)}"))
