"""`LawFit`: the frozen result every estimator returns, with its text table and JSON form."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np

from .._json import json_safe
from .._types import FloatArray
from ..units import format_measurement, strength_per_h2_unit, strength_unit

NAN = float("nan")


@dataclass(frozen=True)
class Diagnostic:
    """One named check of a fit: passed (True), failed (False) or only informative (None)."""

    passed: bool | None
    message: str


@dataclass(frozen=True, kw_only=True)
class LawFit:
    """Central force per unit mass F(r) = -k r**n r_hat, fitted to one track.

    Every estimator fills every field; a value it cannot compute is nan, with the
    reason in ``diagnostics``.

    Attributes
    ----------
    exponent, exponent_stderr : float
        n (dimensionless) and its standard error.
    strength, strength_stderr : float
        k in length**(1 - n) time**-2; nan without timestamps.
    strength_per_h2, strength_per_h2_stderr : float
        k / h**2 in length**(-3 - n), known from the path's shape alone.
    centre, centre_stderr : (float, float)
        The force centre in the track's length unit.
    method : str
        The estimator: ``"curvature"``, ``"shape"``, ``"acceleration"``, ...
    n_points : int
        Samples used.
    chi2, reduced_chi2 : float
        Weighted sum of squared residuals and that per degree of freedom.
    parameter_names : tuple of str
        Names of the rows and columns of ``covariance``.
    covariance : ndarray
        Covariance of the fitted parameters (in the estimator's parametrisation).
    residuals : ndarray
        Normalised residuals of the fit, one per point used.
    length_unit, time_unit : str
        Units of the track (time_unit None when shape-only).
    reference_radius : float
        A typical radius of the data (their geometric mean), in L.
    force_at_reference, force_at_reference_stderr : float
        |F| = k r**n at ``reference_radius`` (L T**-2): the best-determined number of the
        fit, since n and k correlate; nan without timestamps.
    diagnostics : mapping of str to Diagnostic
        Named checks with a verdict and a sentence.
    alternatives : tuple of LawFit
        Other solutions the data support equally well (e.g. an ellipse without
        timestamps: n = 1 about its centre, n = -2 about a focus).
    details : mapping
        Estimator-specific extras (smoothing level, angular momentum, ...).
    track_name : str
        Name of the track fitted.
    """

    exponent: float
    exponent_stderr: float
    strength: float
    strength_stderr: float
    strength_per_h2: float
    strength_per_h2_stderr: float
    centre: tuple[float, float]
    centre_stderr: tuple[float, float]
    method: str
    n_points: int
    chi2: float
    reduced_chi2: float
    parameter_names: tuple[str, ...]
    covariance: FloatArray
    residuals: FloatArray
    length_unit: str
    time_unit: str | None
    reference_radius: float = NAN
    force_at_reference: float = NAN
    force_at_reference_stderr: float = NAN
    diagnostics: Mapping[str, Diagnostic] = field(default_factory=dict)
    alternatives: tuple[LawFit, ...] = ()
    details: Mapping[str, Any] = field(default_factory=dict)
    track_name: str = "track"

    def __post_init__(self) -> None:
        for name in ("exponent", "exponent_stderr", "strength", "strength_stderr", "strength_per_h2",
                     "strength_per_h2_stderr", "chi2", "reduced_chi2", "reference_radius",
                     "force_at_reference", "force_at_reference_stderr"):
            object.__setattr__(self, name, float(getattr(self, name)))
        for name in ("centre", "centre_stderr"):
            pair = getattr(self, name)
            object.__setattr__(self, name, (float(pair[0]), float(pair[1])))
        object.__setattr__(self, "n_points", int(self.n_points))
        object.__setattr__(self, "diagnostics", MappingProxyType(dict(self.diagnostics)))
        object.__setattr__(self, "details", MappingProxyType(dict(self.details)))

    @property
    def passed(self) -> bool:
        """True when no diagnostic failed."""
        return all(check.passed is not False for check in self.diagnostics.values())

    @property
    def strength_unit(self) -> str:
        """Unit of k for this exponent, e.g. ``"s^-2"`` for n = 1 in any length unit."""
        return strength_unit(self.length_unit, self.time_unit or "T", self.exponent)

    def strength_at_exponent(self, exponent: float) -> tuple[float, float]:
        """The strength k0 of a law with exponent n0 giving the fitted force at the reference
        radius: k0 = F(r_ref) / r_ref**n0, with its standard error.

        This is how to compare with a nominal law: for a pendulum fitted with n = 0.99 in
        pixels, k itself carries a unit px**0.01 and depends on the pixel scale, while
        ``strength_at_exponent(1.0)`` is the omega**2 = g/L the force shows at typical r.
        """
        radius = self.reference_radius
        scale = radius**exponent
        return self.force_at_reference / scale, self.force_at_reference_stderr / scale

    def correlation(self, first: str, second: str) -> float:
        """Correlation coefficient of two fitted parameters (nan if not both fitted)."""
        names = list(self.parameter_names)
        if first not in names or second not in names:
            return NAN
        i, j = names.index(first), names.index(second)
        denominator = math.sqrt(self.covariance[i, i] * self.covariance[j, j])
        return float(self.covariance[i, j] / denominator) if denominator > 0 else NAN

    def summary(self) -> str:
        """A short text table of the fitted law, with units, and the diagnostics."""
        length = self.length_unit
        rows = [
            ("exponent n", format_measurement(self.exponent, self.exponent_stderr)),
            ("strength k", format_measurement(self.strength, self.strength_stderr,
                                              self.strength_unit)
             if math.isfinite(self.strength) else "not determined (no timestamps)"),
            ("k / h^2", format_measurement(self.strength_per_h2, self.strength_per_h2_stderr,
                                           strength_per_h2_unit(length, self.exponent))),
            ("centre x", format_measurement(self.centre[0], self.centre_stderr[0], length)),
            ("centre y", format_measurement(self.centre[1], self.centre_stderr[1], length)),
            ("points used", str(self.n_points)),
            ("reduced chi2", f"{self.reduced_chi2:.3g}"),
        ]
        width = max(len(label) for label, _ in rows)
        lines = [f"{self.track_name} — {self.method} fit of F = -k r^n"]
        lines += [f"  {label:<{width}}  {value}" for label, value in rows]
        for name, check in self.diagnostics.items():
            mark = {True: "ok  ", False: "FAIL", None: "note"}[check.passed]
            lines.append(f"  [{mark}] {name}: {check.message}")
        for other in self.alternatives:
            lines.append(
                f"  also consistent: n = {format_measurement(other.exponent, other.exponent_stderr)}"
                f" about ({other.centre[0]:.6g}, {other.centre[1]:.6g}) {length}"
            )
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form: numbers (nan as None), lists and strings only."""
        return json_safe({
            "track": self.track_name,
            "method": self.method,
            "exponent": self.exponent,
            "exponent_stderr": self.exponent_stderr,
            "strength": self.strength,
            "strength_stderr": self.strength_stderr,
            "strength_unit": self.strength_unit,
            "strength_per_h2": self.strength_per_h2,
            "strength_per_h2_stderr": self.strength_per_h2_stderr,
            "reference_radius": self.reference_radius,
            "force_at_reference": self.force_at_reference,
            "force_at_reference_stderr": self.force_at_reference_stderr,
            "centre": list(self.centre),
            "centre_stderr": list(self.centre_stderr),
            "length_unit": self.length_unit,
            "time_unit": self.time_unit,
            "n_points": self.n_points,
            "chi2": self.chi2,
            "reduced_chi2": self.reduced_chi2,
            "parameter_names": list(self.parameter_names),
            "covariance": np.asarray(self.covariance).tolist(),
            "passed": self.passed,
            "diagnostics": {name: {"passed": check.passed, "message": check.message}
                            for name, check in self.diagnostics.items()},
            "alternatives": [other.to_dict() for other in self.alternatives],
            "details": {key: value for key, value in self.details.items()
                        if isinstance(value, (int, float, str, bool, list, tuple, dict))},
        })
