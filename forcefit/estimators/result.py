"""What the estimators return: `LawFit` and a typed subclass for each estimator's extras.

Every result is frozen and complete: arrays are read-only copies, mappings read-only views,
and a value that cannot be computed is nan with the reason in ``diagnostics``. Each result
formats its numbers once, in `rows`, which its text, its report page and the command line show.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import TYPE_CHECKING, Any

import numpy as np

from .._json import json_safe
from .._types import FloatArray, Row, frozen_array
from ..formatting import CHECK_MARKS, matched, measurement
from ..units import strength_per_h2_unit, strength_unit

if TYPE_CHECKING:        # the models' modules load the integrators; a result only holds a model
    from ..dynamics.orbit_model import OrbitModel
    from ..dynamics.sky import ProjectedOrbitModel

NAN = float("nan")


@dataclass(frozen=True)
class Diagnostic:
    """One named check of a fit: passed (True), failed (False) or only informative (None)."""

    passed: bool | None
    message: str


@dataclass(frozen=True)
class CurvaturePoints:
    """The force-curvature relation at the samples that bend towards the fitted centre.

    Attributes
    ----------
    log_radius : ndarray
        ln r, r in the track's length unit L.
    log_force : ndarray
        ln F (F in L T**-2) with timestamps; ln(F / h**2) (in L**-3) without.
    per_h2 : bool
        True when ``log_force`` holds ln(F / h**2) (a shape-only track).
    """

    log_radius: FloatArray
    log_force: FloatArray
    per_h2: bool

    def __post_init__(self) -> None:
        object.__setattr__(self, "log_radius", frozen_array(self.log_radius))
        object.__setattr__(self, "log_force", frozen_array(self.log_force))


def _no_points() -> CurvaturePoints:
    return CurvaturePoints(log_radius=np.empty(0), log_force=np.empty(0), per_h2=True)


@dataclass(frozen=True, kw_only=True)
class LawFit:
    """Central force per unit mass F(r) = -k r**n r_hat, fitted to one track.

    Every estimator fills every field; a value it cannot compute is nan, with the
    reason in ``diagnostics``. Each estimator returns its own subclass, which adds
    typed fields for what only it knows (`OrbitFit`, `ShapeFit`, `CurvatureFit`,
    `AccelerationFit`).

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
    covariance : ndarray, shape (n_parameters, n_parameters)
        Covariance of the fitted parameters (in the estimator's parametrisation); read-only.
    residuals : ndarray
        Normalised residuals of the fit, one per point used; read-only.
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
    relation : CurvaturePoints
        The force-curvature relation of the path about the fitted centre (for the figure).
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
    relation: CurvaturePoints = field(default_factory=_no_points)
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
        object.__setattr__(self, "parameter_names", tuple(self.parameter_names))
        object.__setattr__(self, "covariance", frozen_array(self.covariance))
        object.__setattr__(self, "residuals", frozen_array(self.residuals))
        object.__setattr__(self, "diagnostics", MappingProxyType(dict(self.diagnostics)))
        object.__setattr__(self, "alternatives", tuple(self.alternatives))

    @property
    def passed(self) -> bool:
        """True when no diagnostic failed."""
        return all(check.passed is not False for check in self.diagnostics.values())

    @property
    def strength_unit(self) -> str:
        """Unit of k for this exponent, e.g. ``"s^-2"`` for n = 1 in any length unit; "" for a
        shape-only fit, whose k is not determined."""
        if self.time_unit is None:
            return ""
        return strength_unit(self.length_unit, self.time_unit, self.exponent)

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

    def rows(self) -> list[Row]:
        """The fitted law as table rows with units: the brief ones for the text, all for a report."""
        length, time = self.length_unit, self.time_unit or ""
        strength = (Row("strength k", measurement(self.strength, self.strength_stderr),
                        self.strength_unit) if math.isfinite(self.strength)
                    else Row("strength k", "not determined (no timestamps)"))
        rows = [
            Row("exponent n", measurement(self.exponent, self.exponent_stderr)),
            strength,
            Row("k / h^2", measurement(self.strength_per_h2, self.strength_per_h2_stderr),
                strength_per_h2_unit(length, self.exponent)),
            Row("reference radius r_ref", measurement(self.reference_radius), length, brief=False),
            Row("force |F| at r_ref", measurement(self.force_at_reference,
                                                  self.force_at_reference_stderr),
                f"{length} {time}^-2" if time else "", brief=False),
            Row("centre x", measurement(self.centre[0], self.centre_stderr[0]), length),
            Row("centre y", measurement(self.centre[1], self.centre_stderr[1]), length),
            Row("chi-square", f"{self.chi2:.6g}", brief=False),
            Row("points used", str(self.n_points)),
            Row("reduced chi2", f"{self.reduced_chi2:.3g}"),
        ]
        nominal = round(self.exponent) if math.isfinite(self.exponent) else 0
        if self.time_unit and math.isfinite(self.force_at_reference) and abs(self.exponent - nominal) > 1e-12:
            value, error = self.strength_at_exponent(nominal)
            rows.insert(2, Row(f"k for n = {nominal} (same force at r_ref)",
                               measurement(value, error),
                               strength_unit(length, self.time_unit, nominal), brief=False))
        return rows + self._extra_rows()

    def _extra_rows(self) -> list[Row]:
        """Rows an estimator's result adds to the common ones."""
        return []

    def to_text(self) -> str:
        """A short text table of the fitted law, with units, and the diagnostics."""
        rows = [row for row in self.rows() if row.brief]
        width = max(len(row.label) for row in rows)
        lines = [f"{self.track_name} — {self.method} fit of F = -k r^n"]
        lines += [f"  {row.label:<{width}}  {row.text}" for row in rows]
        if self.diagnostics:
            lines.append(f"  checks ({CHECK_MARKS[True]} holds, {CHECK_MARKS[False]} fails, "
                         f"{CHECK_MARKS[None]} note):")
            name_width = max(len(name) for name in self.diagnostics)
            lines += [f"    {CHECK_MARKS[check.passed]} {name:<{name_width}}  {check.message}"
                      for name, check in self.diagnostics.items()]
        for other in self.alternatives:
            centre = ", ".join(matched(value, error)
                               for value, error in zip(other.centre, other.centre_stderr))
            lines.append(
                f"  also consistent: n = {measurement(other.exponent, other.exponent_stderr)}"
                f" about ({centre}) {self.length_unit}"
            )
        return "\n".join(lines)

    def _details(self) -> dict[str, Any]:
        """The estimator's own numbers, for the ``details`` entry of `to_dict`."""
        return {}

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
            "details": self._details(),
        })


@dataclass(frozen=True, kw_only=True)
class CurvatureFit(LawFit):
    """A `LawFit` of the curvature estimator, with what its regression used.

    Attributes
    ----------
    angular_momentum, angular_momentum_stderr : float
        Mean specific angular momentum h (L**2/T) and its error; nan without timestamps.
    correlation_time : float
        Integrated autocorrelation time of the relation's residuals, in samples (the errors
        do not rest on it: they are propagated from the samples).
    smoothing_level, smoothing_dof : float
        The smoothing level used and its effective degrees of freedom per coordinate.
    noise : float
        Position noise per coordinate the errors assume (L): the median sigma given, or the
        noise read from the samples.
    """

    angular_momentum: float
    angular_momentum_stderr: float
    correlation_time: float
    smoothing_level: float
    smoothing_dof: float
    noise: float = NAN

    def _extra_rows(self) -> list[Row]:
        return [Row("noise", measurement(self.noise), self.length_unit, brief=False)]

    def _details(self) -> dict[str, Any]:
        return {"angular_momentum": self.angular_momentum,
                "angular_momentum_stderr": self.angular_momentum_stderr,
                "correlation_time": self.correlation_time, "smoothing_level": self.smoothing_level,
                "smoothing_dof": self.smoothing_dof, "noise": self.noise}


@dataclass(frozen=True, kw_only=True)
class ShapeFit(LawFit):
    """A `LawFit` of the shape (Binet) estimator.

    Attributes
    ----------
    reference_angle : float
        The polar angle (rad) about the fitted centre where the Binet solution starts.
    angular_momentum, angular_momentum_stderr : float
        Mean specific angular momentum h (L**2/T) and its error; nan without timestamps.
    evaluations : int
        Integrations of Binet's equation the fit used, its start included.
    noise : float
        Position noise per coordinate (L): the median sigma given, or the one the residuals
        show when none was given (then the reduced chi-square is 1 by construction).
    correlation_time : float
        Integrated autocorrelation time of the residuals in path order (samples); the stated
        errors are the white-noise ones times its square root.
    """

    reference_angle: float
    angular_momentum: float
    angular_momentum_stderr: float
    evaluations: int
    noise: float
    correlation_time: float

    def _extra_rows(self) -> list[Row]:
        return [Row("noise", measurement(self.noise), self.length_unit, brief=False)]

    def _details(self) -> dict[str, Any]:
        return {"reference_angle": self.reference_angle, "angular_momentum": self.angular_momentum,
                "angular_momentum_stderr": self.angular_momentum_stderr, "evaluations": self.evaluations,
                "noise": self.noise, "correlation_time": self.correlation_time}


@dataclass(frozen=True, kw_only=True)
class AccelerationFit(LawFit):
    """A `LawFit` of the acceleration estimator.

    Attributes
    ----------
    angular_momentum, angular_momentum_stderr : float
        Mean specific angular momentum h (L**2/T) and its error.
    correlation_time : float
        Integrated autocorrelation time of the residuals, in samples (the errors do not rest
        on it: they are propagated from the samples).
    noise : float
        Position noise per coordinate the errors assume (L): the median sigma given, or the
        noise read from the samples.
    """

    angular_momentum: float
    angular_momentum_stderr: float
    correlation_time: float
    noise: float = NAN

    def _extra_rows(self) -> list[Row]:
        return [Row("noise", measurement(self.noise), self.length_unit, brief=False)]

    def _details(self) -> dict[str, Any]:
        return {"angular_momentum": self.angular_momentum,
                "angular_momentum_stderr": self.angular_momentum_stderr,
                "correlation_time": self.correlation_time, "noise": self.noise}


@dataclass(frozen=True, kw_only=True)
class OrbitFit(LawFit):
    """A `LawFit` of the orbit estimator: the model, the solution and the noise it assumed.

    Attributes
    ----------
    model : OrbitModel
        The model fitted (tracks, epochs, reference radius, drag kind, frame rotation).
    values, stderrs : mapping of str to float
        Every parameter of ``model.names`` where the fit ended, and its standard error
        (0 for a parameter held fixed, nan when not estimable). The varying ones are
        ``parameter_names``, in the order of ``covariance``.
    sigma : ndarray, shape (n_points,)
        Position noise per coordinate at each sample (L): as given, or the smoothing's
        estimate; read-only.
    sigma_known : bool
        Whether sigma was given with the data (else the covariance is scaled by the fit).
    noise : float
        The noise level the fit implies (L): median sigma, times sqrt(reduced chi2) when
        sigma was not given.
    loss : str
        The loss minimised: ``"linear"`` (least squares), ``"soft_l1"`` or ``"huber"``.
    evaluations : int
        Model evaluations the optimiser used.
    converged : bool
        Whether the optimiser met its convergence criteria.
    turns : float
        Turns the data sweep about the centre (all tracks together).
    angular_momentum : float
        Specific angular momentum h = x0 vy0 - y0 vx0 of the first track's state (L**2/T).
    drag, drag_stderr : float
        The drag coefficient (1/T linear, 1/L quadratic) and its error; nan when not fitted.
    rotation_rate, rotation_rate_stderr : float
        The observer frame's fitted rotation rate (rad/T) and its error; nan when not fitted.
    fitted_positions : ndarray, shape (n_points, 2)
        The fitted orbit at the samples, all tracks stacked (L); nan where it could not be
        integrated; read-only.
    yukawa_strength, yukawa_strength_stderr : float
        alpha of a Yukawa term of the model's given range, and its error; nan when none.
    correlation_time : float
        Integrated autocorrelation time of the residuals (samples; 1 when independent): the
        stated errors are the white-noise ones times its square root.
    white_stderrs : mapping of str to float
        Every parameter's standard error as if the residuals were independent.
    """

    model: OrbitModel
    values: Mapping[str, float]
    stderrs: Mapping[str, float]
    sigma: FloatArray
    sigma_known: bool
    noise: float
    loss: str
    evaluations: int
    converged: bool
    turns: float
    angular_momentum: float
    fitted_positions: FloatArray
    drag: float = NAN
    drag_stderr: float = NAN
    rotation_rate: float = NAN
    rotation_rate_stderr: float = NAN
    yukawa_strength: float = NAN
    yukawa_strength_stderr: float = NAN
    correlation_time: float = 1.0
    white_stderrs: Mapping[str, float] = field(default_factory=dict)

    def __post_init__(self) -> None:
        super().__post_init__()
        object.__setattr__(self, "white_stderrs",
                           MappingProxyType({k: float(v) for k, v in self.white_stderrs.items()}))
        object.__setattr__(self, "values", MappingProxyType({k: float(v) for k, v in self.values.items()}))
        object.__setattr__(self, "stderrs", MappingProxyType({k: float(v) for k, v in self.stderrs.items()}))
        object.__setattr__(self, "sigma", frozen_array(self.sigma))
        object.__setattr__(self, "fitted_positions", frozen_array(self.fitted_positions))

    @property
    def vector(self) -> FloatArray:
        """The fitted parameter vector, in the order of ``model.names``."""
        return np.array([self.values[name] for name in self.model.names])

    @property
    def epochs(self) -> tuple[float, ...]:
        """Each track's epoch (T), where its state is defined."""
        return self.model.epochs

    @property
    def n_tracks(self) -> int:
        """Tracks fitted together."""
        return len(self.model.tracks)

    @property
    def states(self) -> Mapping[str, float]:
        """Each track's fitted state at its epoch: ``x0``, ``y0`` (L), ``vx0``, ``vy0`` (L/T),
        with a ``_j`` suffix per track when several were fitted."""
        return MappingProxyType({name: value for name, value in self.values.items()
                                 if name.startswith(("x0", "y0", "vx0", "vy0"))})

    def predict(self, vector: FloatArray | None = None) -> FloatArray:
        """Positions the model predicts at the samples, all tracks stacked, shape (n_points, 2).

        Parameters
        ----------
        vector : ndarray, optional
            A parameter vector in the order of ``model.names``; default the fitted one.

        Returns
        -------
        ndarray
            In the tracks' length unit; nan where the orbit could not be integrated.
        """
        chosen = self.vector if vector is None else np.asarray(vector, dtype=float)
        predictions, ok = self.model.predict(chosen[None, :])
        stacked = np.concatenate([prediction[0] for prediction in predictions])
        return stacked if ok[0] else np.full_like(stacked, np.nan)

    def _extra_rows(self) -> list[Row]:
        time, length = self.time_unit or "", self.length_unit
        rows = []
        if self.model.drag is not None:
            unit = f"1/{time}" if self.model.drag == "linear" else f"1/{length}"
            rows.append(Row("drag", _measurement(self.drag, self.drag_stderr), unit, brief=False))
        if self.model.fit_rotation:
            rows.append(Row("rotation rate", _measurement(self.rotation_rate, self.rotation_rate_stderr),
                            f"rad/{time}", brief=False))
        if self.model.extra is not None:
            rows.append(Row("known forces added", self.model.extra.describe()))
            if self.model.extra.yukawa is not None:
                label = f"Yukawa strength alpha (range {self.model.extra.yukawa.length:.6g} {length})"
                rows.append(Row(label, _measurement(self.yukawa_strength, self.yukawa_strength_stderr)))
        rows.append(Row("noise", measurement(self.noise), length, brief=False))
        if self.correlation_time > 1.0:
            white = self.white_stderrs.get("exponent", NAN)
            rows.append(Row("errors widened", f"x{math.sqrt(self.correlation_time):.3g}: the residuals stay "
                                              f"alike over {self.correlation_time:.3g} samples (n's error "
                                              f"for independent residuals: {white:.2g})"))
        return rows

    def _details(self) -> dict[str, Any]:
        fitted: dict[str, float | str] = {}
        if self.model.drag is not None:
            fitted.update(drag=self.drag, drag_stderr=self.drag_stderr)
        if self.model.fit_rotation:
            fitted.update(rotation_rate=self.rotation_rate, rotation_rate_stderr=self.rotation_rate_stderr)
        if self.model.extra is not None:
            fitted.update(extra_forces=self.model.extra.describe())
            if self.model.extra.yukawa is not None:
                fitted.update(yukawa_strength=self.yukawa_strength,
                              yukawa_strength_stderr=self.yukawa_strength_stderr)
        return {"evaluations": self.evaluations, "noise": self.noise, "loss": self.loss, "turns": self.turns,
                "correlation_time": self.correlation_time,
                "exponent_stderr_white": self.white_stderrs.get("exponent", NAN),
                "sigma_known": self.sigma_known, "epochs": list(self.epochs), "n_tracks": self.n_tracks,
                "angular_momentum": self.angular_momentum, "states": dict(self.states), **fitted}


def _measurement(value: float, stderr: float) -> str:
    return measurement(value, stderr if math.isfinite(stderr) else None)


@dataclass(frozen=True, kw_only=True)
class ProjectedFit(LawFit):
    """A `LawFit` of the projected-orbit estimator: the law of an orbit seen at an angle, and the
    orbit's orientation.

    The common fields hold the true law in the orbit's plane (k in the sky's length unit, e.g.
    arcsec**(1-n) yr**-2) and the force centre on the sky. Angles follow the sky's convention:
    x north, y east, position angles from x towards y (`forcefit.astrometry`).

    Attributes
    ----------
    model : ProjectedOrbitModel
        The model fitted (epochs, canonical frame, radial velocities, branch).
    values, stderrs : mapping of str to float
        Every parameter of ``model.names`` where the fit ended and its standard error (0 when
        held fixed); the varying ones are ``parameter_names``, in the order of ``covariance``.
    inclination, inclination_stderr : float
        i in degrees, 0 to 180: below 90 the position angle increases (direct motion); nan when
        the orbit is seen nearly face-on (see ``inclination_limit``).
    inclination_limit : float
        When seen nearly face-on: the 95% upper limit (deg) of the plane's tilt from the sky, i
        below it (direct) or 180 minus i below it (retrograde); nan otherwise.
    node, node_stderr : float
        Position angle of the ascending node, degrees: in [0, 180) when ``node_ambiguous``
        (without radial velocities the node 180 deg on fits as well), else in [0, 360); nan when
        seen nearly face-on.
    node_ambiguous : bool
        True without radial velocities.
    sense : str
        ``"direct"`` (position angle increasing) or ``"retrograde"``.
    branch_chi2 : tuple of float
        With radial velocities: the chi-square of the node reported and of the node 180 deg on
        (nan, nan without).
    parallax, parallax_stderr : float
        The parallax in the positions' angle unit, from the radial velocities; nan without
        (or when the positions are lengths).
    elements, elements_stderr : mapping of str to float
        The derived numbers and their errors (delta method over ``covariance``): the angles, the
        scale from canonical to true lengths, and, with the exponent held at -2, the osculating
        Kepler elements ``semi_major_axis`` (L), ``eccentricity``, ``periastron_argument`` (deg),
        ``period`` (T) and ``periastron_time`` (T, nearest the epoch).
    sigma_known : bool
        Whether the positions came with their errors (else their scale is fitted).
    noise : float
        The typical position error (L): as given, or as the residuals show it.
    loss, evaluations, converged, turns, angular_momentum, correlation_time, white_stderrs
        As in `OrbitFit` (``angular_momentum`` is the true h, L**2/T).
    fitted_positions : ndarray, shape (n_points, 2)
        The fitted orbit on the sky at the epochs (L); read-only.
    fitted_velocities : ndarray, shape (n_velocities,)
        The fitted radial velocities (empty without); read-only.
    observed : ndarray, shape (n_observations,)
        What was fitted, in ``model.observe``'s order: x, y of each epoch, then the radial
        velocities (L, and the velocities' unit); read-only.
    whitening : ndarray, shape (n_points, 2, 2)
        Each position's inverse Cholesky factor of its error ellipse at the fit's noise scale
        (as given, or as the residuals showed it; 1/L): W (observed - predicted) is in units
        of the errors; read-only.
    velocity_sigma : ndarray, shape (n_velocities,)
        The radial velocities' errors (their unit); read-only.
    branch : float
        +1 when the node is the one in [0, 180) deg, -1 when radial velocities chose the one
        180 deg on (`forcefit.dynamics.sky.plane_state`).
    """

    model: ProjectedOrbitModel
    values: Mapping[str, float]
    stderrs: Mapping[str, float]
    inclination: float
    inclination_stderr: float
    node: float
    node_stderr: float
    node_ambiguous: bool
    sense: str
    elements: Mapping[str, float]
    elements_stderr: Mapping[str, float]
    sigma_known: bool
    noise: float
    loss: str
    evaluations: int
    converged: bool
    turns: float
    angular_momentum: float
    fitted_positions: FloatArray
    fitted_velocities: FloatArray
    branch_chi2: tuple[float, float] = (NAN, NAN)
    inclination_limit: float = NAN
    parallax: float = NAN
    parallax_stderr: float = NAN
    correlation_time: float = 1.0
    white_stderrs: Mapping[str, float] = field(default_factory=dict)
    observed: FloatArray = field(default_factory=lambda: np.empty(0))
    whitening: FloatArray = field(default_factory=lambda: np.empty((0, 2, 2)))
    velocity_sigma: FloatArray = field(default_factory=lambda: np.empty(0))
    branch: float = 1.0

    def __post_init__(self) -> None:
        super().__post_init__()
        for name in ("values", "stderrs", "elements", "elements_stderr", "white_stderrs"):
            frozen = {k: float(v) for k, v in getattr(self, name).items()}
            object.__setattr__(self, name, MappingProxyType(frozen))
        for name in ("inclination", "inclination_stderr", "inclination_limit", "node", "node_stderr",
                     "parallax",
                     "parallax_stderr",
                     "noise", "turns", "angular_momentum", "correlation_time"):
            object.__setattr__(self, name, float(getattr(self, name)))
        object.__setattr__(self, "branch_chi2", tuple(float(v) for v in self.branch_chi2))
        object.__setattr__(self, "fitted_positions", frozen_array(self.fitted_positions))
        object.__setattr__(self, "fitted_velocities", frozen_array(self.fitted_velocities))
        for name in ("observed", "whitening", "velocity_sigma"):
            object.__setattr__(self, name, frozen_array(getattr(self, name)))
        object.__setattr__(self, "branch", float(self.branch))

    @property
    def vector(self) -> FloatArray:
        """The fitted parameter vector, in the order of ``model.names``."""
        return np.array([self.values[name] for name in self.model.names])

    def _extra_rows(self) -> list[Row]:
        length, time = self.length_unit, self.time_unit or ""
        node_note = " (or +180: no radial velocities)" if self.node_ambiguous else ""
        if math.isfinite(self.inclination_limit):
            bound = (f"< {self.inclination_limit:.3g}" if self.sense == "direct"
                     else f"> {180.0 - self.inclination_limit:.3g}")
            rows = [Row("inclination i", bound, f"deg (95%), {self.sense}; seen nearly face-on"),
                    Row("node", "undetermined", "seen nearly face-on")]
        else:
            rows = [Row("inclination i", _measurement(self.inclination, self.inclination_stderr),
                        f"deg, {self.sense}"),
                    Row("node", _measurement(self.node, self.node_stderr), f"deg{node_note}")]
        if math.isfinite(self.parallax):
            rows.append(Row("parallax", _measurement(self.parallax, self.parallax_stderr), length))
        units = {"semi_major_axis": length, "eccentricity": "", "periastron_argument": "deg",
                 "period": time, "periastron_time": time}
        for name, unit in units.items():
            if math.isfinite(self.elements.get(name, NAN)):
                rows.append(Row(name.replace("_", " "),
                                _measurement(self.elements[name], self.elements_stderr.get(name, NAN)), unit))
        rows.append(Row("noise", measurement(self.noise), length, brief=False))
        if self.correlation_time > 1.0:
            white = self.white_stderrs.get("exponent", NAN)
            rows.append(Row("errors widened", f"x{math.sqrt(self.correlation_time):.3g}: the residuals stay "
                                              f"alike over {self.correlation_time:.3g} samples (n's error "
                                              f"for independent residuals: {white:.2g})"))
        return rows

    def _details(self) -> dict[str, Any]:
        return {"inclination": self.inclination, "inclination_stderr": self.inclination_stderr,
                "inclination_limit": self.inclination_limit, "node": self.node,
                "node_stderr": self.node_stderr,
                "node_ambiguous": self.node_ambiguous,
                "sense": self.sense, "parallax": self.parallax, "parallax_stderr": self.parallax_stderr,
                "branch_chi2": list(self.branch_chi2), "elements": dict(self.elements),
                "elements_stderr": dict(self.elements_stderr), "evaluations": self.evaluations,
                "noise": self.noise, "loss": self.loss, "turns": self.turns,
                "correlation_time": self.correlation_time, "sigma_known": self.sigma_known,
                "epoch": self.model.epoch, "angular_momentum": self.angular_momentum,
                "n_velocities": int(self.fitted_velocities.size)}

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form: the common fields, and ``inclination`` and ``node`` (degrees) with their
        standard errors beside them."""
        report = super().to_dict()
        extra = json_safe({"inclination": self.inclination, "inclination_stderr": self.inclination_stderr,
                           "inclination_limit": self.inclination_limit, "node": self.node,
                           "node_stderr": self.node_stderr, "node_ambiguous": self.node_ambiguous,
                           "sense": self.sense})
        return {**report, **extra}
