"""The duality check: map a fitted track to its dual and refit it.

If a track really follows F = -k r**n about the fitted centre, its image under
w = z**((n + 3)/2), re-timed, must be fitted by the dual exponent A = 4/(n + 3) - 3 (and,
for the orbit method, the dual strength -E (A + 1)). A mismatch says the law, or the
centre, is wrong.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from .._json import json_safe
from ..dynamics.duality import dual_exponent, dual_strength, dual_track, specific_energy_at
from ..estimators.registry import ESTIMATORS
from ..estimators.result import LawFit, OrbitFit
from ..track import Track


@dataclass(frozen=True)
class DualityCheck:
    """The dual track's fit against the prediction from the original fit."""

    predicted_exponent: float
    predicted_exponent_stderr: float
    fitted: LawFit
    predicted_strength: float

    @property
    def z_score(self) -> float:
        """(fitted - predicted dual exponent) in standard errors of both."""
        spread = math.hypot(self.fitted.exponent_stderr, self.predicted_exponent_stderr)
        return (self.fitted.exponent - self.predicted_exponent) / spread if spread > 0 else math.inf

    @property
    def passed(self) -> bool:
        """True when the dual exponent agrees within 3 standard errors."""
        return abs(self.z_score) <= 3.0

    def to_text(self) -> str:
        """One line: predicted and fitted dual exponent, and the verdict."""
        verdict = "consistent" if self.passed else "INCONSISTENT"
        line = (f"duality check: dual exponent predicted {self.predicted_exponent:.6g} ± "
                f"{self.predicted_exponent_stderr:.2g}, fitted {self.fitted.exponent:.6g} ± "
                f"{self.fitted.exponent_stderr:.2g} ({self.z_score:+.1f} sigma): {verdict}")
        if math.isfinite(self.predicted_strength) and math.isfinite(self.fitted.strength):
            line += (f"; dual strength predicted {self.predicted_strength:.6g}, fitted "
                     f"{self.fitted.strength:.6g}")
        return line

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form."""
        return json_safe({"predicted_exponent": self.predicted_exponent,
                          "predicted_exponent_stderr": self.predicted_exponent_stderr,
                          "fitted_exponent": self.fitted.exponent,
                          "fitted_exponent_stderr": self.fitted.exponent_stderr,
                          "predicted_strength": self.predicted_strength,
                          "fitted_strength": self.fitted.strength, "z_score": self.z_score,
                          "passed": self.passed})


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
    return DualityCheck(predicted_exponent=dual_exponent(fit.exponent),
                        predicted_exponent_stderr=slope * fit.exponent_stderr, fitted=fitted,
                        predicted_strength=predicted_dual_strength(fit))


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
