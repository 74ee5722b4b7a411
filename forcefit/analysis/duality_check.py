"""The duality check: map a fitted track to its dual and refit it.

If a track really follows F = -k r**n about the fitted centre, its image under
w = z**((n + 3)/2), re-timed, must be fitted by the dual exponent A = 4/(n + 3) - 3 (and,
for the orbit method, the dual strength -E (A + 1)). A mismatch says the law, or the
centre, is wrong. Both comparisons enter the verdict, each in the standard errors of the
prediction and of the refit together.

The map is taken with the unit of length as its reference, w = L0 (z / L0)**alpha with
L0 = 1 ``length_unit`` (and tau likewise in ``time_unit``), so the dual track, the dual
strength and their units are all stated in the track's own units.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._json import json_safe
from ..dynamics.duality import dual_exponent, dual_strength, dual_track, specific_energy_at
from ..estimators.registry import ESTIMATORS
from ..estimators.result import LawFit, OrbitFit
from ..formatting import measurement
from ..track import Track
from ..units import strength_unit

#: Agreement limit of each comparison, in standard errors.
LIMIT = 3.0


@dataclass(frozen=True)
class DualityCheck:
    """The dual track's fit against the prediction from the original fit."""

    predicted_exponent: float
    predicted_exponent_stderr: float
    fitted: LawFit
    predicted_strength: float
    predicted_strength_stderr: float = math.nan

    @property
    def z_score(self) -> float:
        """(fitted - predicted dual exponent) in standard errors of both."""
        return _z(self.fitted.exponent, self.fitted.exponent_stderr, self.predicted_exponent,
                  self.predicted_exponent_stderr)

    @property
    def strength_z_score(self) -> float:
        """(fitted - predicted dual strength) in standard errors of both; nan when not predicted."""
        if not (math.isfinite(self.predicted_strength) and math.isfinite(self.fitted.strength)):
            return math.nan
        return _z(self.fitted.strength, self.fitted.strength_stderr, self.predicted_strength,
                  self.predicted_strength_stderr)

    @property
    def strength_unit(self) -> str:
        """Unit of the dual strength, L**(1 - A) T**-2 in the track's units."""
        return strength_unit(self.fitted.length_unit, self.fitted.time_unit or "T",
                             self.predicted_exponent)

    @property
    def passed(self) -> bool:
        """True when the dual exponent, and the dual strength where predicted, agree within
        `LIMIT` standard errors."""
        strength = self.strength_z_score
        return abs(self.z_score) <= LIMIT and not (math.isfinite(strength) and abs(strength) > LIMIT)

    def to_text(self) -> str:
        """Predicted and fitted dual exponent (and strength), and the verdict."""
        verdict = "consistent" if self.passed else "INCONSISTENT"
        predicted = measurement(self.predicted_exponent, self.predicted_exponent_stderr)
        line = (f"duality check: {verdict} (each within {LIMIT:g} standard errors)\n"
                f"    dual exponent  predicted {predicted}, fitted "
                f"{measurement(self.fitted.exponent, self.fitted.exponent_stderr)} "
                f"({self.z_score:+.1f} sigma)")
        if math.isfinite(self.strength_z_score):
            unit = self.strength_unit
            line += (f"\n    dual strength  predicted "
                     f"{measurement(self.predicted_strength, self.predicted_strength_stderr)} {unit}, "
                     f"fitted {measurement(self.fitted.strength, self.fitted.strength_stderr)} {unit} "
                     f"({self.strength_z_score:+.1f} sigma)")
        return line

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form."""
        return json_safe({"predicted_exponent": self.predicted_exponent,
                          "predicted_exponent_stderr": self.predicted_exponent_stderr,
                          "fitted_exponent": self.fitted.exponent,
                          "fitted_exponent_stderr": self.fitted.exponent_stderr,
                          "predicted_strength": self.predicted_strength,
                          "predicted_strength_stderr": self.predicted_strength_stderr,
                          "fitted_strength": self.fitted.strength,
                          "fitted_strength_stderr": self.fitted.strength_stderr,
                          "strength_unit": self.strength_unit, "z_score": self.z_score,
                          "strength_z_score": self.strength_z_score, "passed": self.passed})


def _z(fitted: float, fitted_stderr: float, predicted: float, predicted_stderr: float) -> float:
    spread = math.hypot(fitted_stderr, predicted_stderr)
    if not math.isfinite(spread):
        return math.nan
    if spread > 0:
        return (fitted - predicted) / spread
    # no error at all: any difference is infinitely significant, on its own side
    return math.copysign(math.inf, fitted - predicted) if fitted != predicted else 0.0


def check_duality(track: Track, fit: LawFit, refit: Callable[..., LawFit] | None = None) -> DualityCheck:
    """Map ``track`` by the dual map of ``fit``'s law about its centre and refit the image.

    Parameters
    ----------
    track : Track
        The track that was fitted.
    fit : LawFit
        Its fit (any estimator); its exponent and centre define the map.
    refit : callable, optional
        The estimator to fit the dual track with; default the one that made ``fit``.
    """
    dual = dual_track(track, fit.exponent, fit.centre)
    fitted = (refit or ESTIMATORS[fit.method].function)(dual, centre=(0.0, 0.0))
    slope = 4.0 / (fit.exponent + 3.0) ** 2            # |dA/da|
    strength, strength_stderr = predicted_dual_strength_with_error(fit)
    return DualityCheck(predicted_exponent=dual_exponent(fit.exponent),
                        predicted_exponent_stderr=slope * fit.exponent_stderr, fitted=fitted,
                        predicted_strength=strength, predicted_strength_stderr=strength_stderr)


def predicted_dual_strength(fit: LawFit) -> float:
    """The strength -E (A + 1) the dual law must have, from an orbit fit's energy E.

    nan unless ``fit`` is a single-track `OrbitFit` (only that knows a state, and so E).
    """
    if not isinstance(fit, OrbitFit) or "x0" not in fit.states or not math.isfinite(fit.strength):
        return math.nan
    states = fit.states
    energy = specific_energy_at((states["x0"], states["y0"]), (states["vx0"], states["vy0"]),
                                fit.exponent, fit.strength)
    return dual_strength(fit.exponent, energy)


_STATE = ("x0", "y0", "vx0", "vy0")


def predicted_dual_strength_with_error(fit: LawFit) -> tuple[float, float]:
    """The predicted dual strength and its standard error, propagated from the orbit fit's
    covariance of (n, ln F(r_ref), x0, y0, vx0, vy0) by a central-difference gradient.

    Returns (nan, nan) where `predicted_dual_strength` is nan; the error is nan when the
    covariance does not hold those parameters.
    """
    value = predicted_dual_strength(fit)
    if not math.isfinite(value) or not isinstance(fit, OrbitFit):
        return value, math.nan
    names = list(fit.parameter_names)
    if not all(name in names for name in ("exponent", "log_force", *_STATE)):
        return value, math.nan
    radius = fit.reference_radius
    point = {"exponent": fit.exponent, "log_force": math.log(fit.force_at_reference),
             **{name: float(fit.states[name]) for name in _STATE}}

    def strength_of(parameters: dict[str, float]) -> float:
        strength = math.exp(parameters["log_force"]) / radius ** parameters["exponent"]
        energy = specific_energy_at((parameters["x0"], parameters["y0"]),
                                    (parameters["vx0"], parameters["vy0"]),
                                    parameters["exponent"], strength)
        return dual_strength(parameters["exponent"], energy)

    order = [name for name in names if name in point]
    gradient = np.zeros(len(names))
    for name in order:
        i = names.index(name)
        step = 1e-3 * math.sqrt(max(fit.covariance[i, i], 0.0)) or 1e-8 * max(abs(point[name]), 1.0)
        up, down = dict(point), dict(point)
        up[name] += step
        down[name] -= step
        gradient[i] = (strength_of(up) - strength_of(down)) / (2.0 * step)
    variance = float(gradient @ np.asarray(fit.covariance) @ gradient)
    return value, math.sqrt(variance) if variance >= 0 else math.nan
