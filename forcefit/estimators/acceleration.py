"""The acceleration estimator: radial acceleration against distance, from timestamps.

The smoothed second derivative of the timestamped positions gives the acceleration;
its component along the radius is a_r = -k r**n for a central power law. A weighted
least-squares fit of that model at every sample away from the ends gives n and k, with
errors propagated from the raw samples (the centre's own uncertainty included) and the
smoothing lightened until n settles (`forcefit.estimators._smoothed`). The transverse
component, zero for a central force, is checked for drag.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from .._regression import autocorrelation_time, fit_line
from .._types import FloatArray
from ..errors import GeometryError, NotIdentifiable
from ..geometry.centre import CentreEstimate, find_centre
from ..geometry.curves import cross, interior, is_straight
from ..geometry.levels import Settled, settle
from ..geometry.path import PathGeometry, describe_path, force_relation
from ..geometry.pointwise import PointwiseFit, fit_pointwise
from ..geometry.pspline import SmoothedCurve
from ..geometry.smoothing import Smoothing
from ..track import Track
from ._checks import angular_momentum, constancy_diagnostic
from ._smoothed import (
    BEND_Z,
    noise_diagnostics,
    noise_level,
    require_resolved_excursion,
    sampling_diagnostic,
    smoothing_diagnostic,
)
from .result import AccelerationFit, CurvaturePoints, Diagnostic


@dataclass(frozen=True)
class _Level:
    """The radial-acceleration law fitted at one smoothing level."""

    curve: SmoothedCurve
    estimate: CentreEstimate | None
    law: PointwiseFit
    reference: float

    @property
    def centre(self) -> tuple[float, float]:
        return float(self.law.parameters[2]), float(self.law.parameters[3])

    @property
    def centre_influence(self) -> FloatArray | None:
        return None if self.estimate is None else self.estimate.influence


def fit_acceleration(
    track: Track,
    *,
    centre: tuple[float, float] | None = None,
    smoothing: Smoothing = "auto",
    path: PathGeometry | None = None,
) -> AccelerationFit:
    """Fit a_r = -k r**n to the radial acceleration of a timestamped track.

    Parameters
    ----------
    track : Track
        Timestamped positions (L, T).
    centre : (float, float), optional
        The force centre (L); found from the accelerations when not given.
    smoothing : {"auto", "spline", "savgol"}
        How to smooth before differentiating twice.
    path : PathGeometry, optional
        The track's geometry, if already described: its smoothing and centre are used as
        they are (no search of the smoothing level).

    Returns
    -------
    AccelerationFit

    Raises
    ------
    NotIdentifiable
        Without timestamps, for a circle about the centre, or for a straight path.

    Examples
    --------
    >>> t = np.linspace(0.0, 10.0, 2001)                                   # s
    >>> track = Track(t=t, x=0.3 * np.cos(2 * t), y=0.1 * np.sin(2 * t))   # m
    >>> fit = fit_acceleration(track, centre=(0.0, 0.0))
    >>> round(fit.exponent, 4), round(fit.strength, 4)
    (1.0, 4.0)
    """
    if not track.has_times:
        raise NotIdentifiable(
            f"{track.label}: the acceleration estimator needs timestamps; use the "
            "curvature or shape estimator for a shape-only path."
        )
    if path is not None:
        centre = path.centre if path.centre_estimate is None else None
    given = None if centre is None else np.asarray(centre, dtype=float)

    def estimate(curve: SmoothedCurve, previous: _Level | None) -> _Level:
        return _at_level(track, curve, given, previous)

    settled = settle(track, smoothing, estimate, _exponent,
                     curve=None if path is None else path.smoothing, watched=_centre)
    return _result(track, settled.result, settled)


def _exponent(level: _Level) -> tuple[float, float, FloatArray]:
    return float(level.law.parameters[0]), float(level.law.stderr[0]), level.law.influence[0]


def _centre(level: _Level) -> tuple[FloatArray, FloatArray | None]:
    """The fitted centre and its response to the samples (None when the centre was given)."""
    if level.estimate is None:
        return np.asarray(level.centre), None
    return np.asarray(level.estimate.centre), level.estimate.influence


def _at_level(track: Track, curve: SmoothedCurve, given: FloatArray | None,
              previous: _Level | None) -> _Level:
    if given is not None:
        if previous is None and is_straight(track.x, track.y, curve.noise):
            raise NotIdentifiable(
                f"{track.label}: the path does not bend significantly; a straight path shows no "
                "force, so no exponent can be read from it. Check that the body moved under the "
                "force (and not only the camera).")
        estimate, centre = None, given
    else:
        starts = None if previous is None else [previous.centre]
        estimate = find_centre(track, curve=curve, starts=starts)
        centre = np.asarray(estimate.centre)
    keep = interior(curve)
    offset = curve.value[keep] - centre
    radius = np.hypot(offset[:, 0], offset[:, 1])
    if previous is None:
        unit = offset / np.maximum(radius, 1e-300)[:, None]
        variance = (unit[:, 0] ** 2 * curve.value_var[keep, 0]
                    + unit[:, 1] ** 2 * curve.value_var[keep, 1])
        require_resolved_excursion(track, radius, np.sqrt(variance))
    reference = float(np.exp(np.mean(np.log(radius))))     # where k r**n is best determined
    influence = None if estimate is None else estimate.influence
    law = _law(track, curve, centre, influence, reference, previous)
    return _Level(curve, estimate, law, reference)


def _start(track: Track, curve: SmoothedCurve, centre: FloatArray, reference: float) -> FloatArray:
    """(n, ln F(r_ref)) from a straight line through ln(-a_r) against ln r where a_r
    points significantly inwards."""
    keep = interior(curve)
    offset = curve.value[keep] - centre
    radius = np.hypot(offset[:, 0], offset[:, 1])
    unit = offset / radius[:, None]
    radial = np.sum(curve.second[keep] * unit, axis=1)
    sigma = np.sqrt(unit[:, 0] ** 2 * curve.second_var[keep, 0] + unit[:, 1] ** 2 * curve.second_var[keep, 1])
    inward = radial < -2.0 * sigma
    if inward.sum() < 10:
        raise NotIdentifiable(f"{track.label}: the radial acceleration is not significantly "
                              "inward anywhere; no attractive central force is seen.")
    line = fit_line(np.log(radius[inward] / reference), np.log(-radial[inward]),
                    sigma[inward] / -radial[inward])
    return np.array([line.slope, line.intercept])


def _law(track: Track, curve: SmoothedCurve, centre: FloatArray, influence: FloatArray | None,
         reference: float, previous: _Level | None, *, bend: bool = False) -> PointwiseFit:
    """(n, ln F(r_ref)) [, b] of a_r = -F(r_ref) (r / r_ref)**(n + b ln(r / r_ref)) about
    ``centre`` (held, with its influence on the samples)."""
    start = (previous.law.parameters[:2] if previous is not None and not bend
             else _start(track, curve, centre, reference))

    def residual(parameters: FloatArray, value: FloatArray, _first: FloatArray,
                 second: FloatArray) -> FloatArray:
        exponent, log_force = parameters[0], parameters[1]
        slope = parameters[2] if bend else 0.0
        cx, cy = parameters[-2], parameters[-1]
        offset = value - np.array([cx, cy])
        radius = np.hypot(offset[:, 0], offset[:, 1])
        log_r = np.log(radius / reference)
        radial = np.sum(second * offset, axis=1) / radius
        return radial + np.exp(log_force + exponent * log_r + slope * log_r**2)

    first_guess = np.append(start, 0.0) if bend else np.asarray(start)
    try:
        return fit_pointwise(curve, np.flatnonzero(interior(curve)), residual, first_guess,
                             held=centre, held_influence=influence)
    except GeometryError:
        raise NotIdentifiable(
            f"{track.label}: the radial acceleration does not determine the exponent about "
            f"({centre[0]:.6g}, {centre[1]:.6g}); check the centre.") from None


def _power_law(track: Track, level: _Level) -> Diagnostic:
    """Does the local exponent change across the radial range? b of a_r = -F(r_ref)
    (r/r_ref)**(n + b ln(r/r_ref)) against its propagated error."""
    try:
        law = _law(track, level.curve, np.asarray(level.centre), level.centre_influence,
                   level.reference, None, bend=True)
    except NotIdentifiable:
        return Diagnostic(None, "not checked (the law with a varying exponent does not fit).")
    offset = level.curve.value[law.used] - np.asarray(level.centre)
    span = float(np.ptp(np.log(np.hypot(offset[:, 0], offset[:, 1]))))
    slope, stderr = float(law.parameters[2]), float(law.stderr[2])
    z = slope / stderr if stderr > 0 else 0.0
    text = (f"the local exponent changes by {2.0 * slope * span:+.3g} across the radial range "
            f"({abs(z):.1f} standard errors)")
    if abs(z) > BEND_Z:
        return Diagnostic(False, text + ": the force is not a single power law.")
    return Diagnostic(True, text + ": consistent with a power law.")


def _transverse(track: Track, level: _Level) -> Diagnostic:
    """Mean transverse acceleration (across the radius, signed along the motion) against its
    propagated error: a central force has none, so a significant one means torque (drag, or
    the wrong centre)."""
    curve = level.curve
    used = np.flatnonzero(interior(curve))
    offset = curve.value[used] - np.asarray(level.centre)
    sense = float(np.sign(np.sum(cross(offset, curve.first[used])))) or 1.0

    def residual(parameters: FloatArray, value: FloatArray, _first: FloatArray,
                 second: FloatArray) -> FloatArray:
        mean, cx, cy = parameters
        offset = value - np.array([cx, cy])
        return sense * cross(offset, second) / np.hypot(offset[:, 0], offset[:, 1]) - mean

    try:
        fit = fit_pointwise(curve, used, residual, np.zeros(1), held=np.asarray(level.centre),
                            held_influence=level.centre_influence, rounds=1)
    except GeometryError:
        return Diagnostic(None, "not checked (the transverse acceleration could not be averaged).")
    mean, stderr = float(fit.parameters[0]), float(fit.stderr[0])
    typical = float(np.median(np.hypot(curve.second[used, 0], curve.second[used, 1])))
    text = (f"mean acceleration across the radius {mean:.3g} ± {stderr:.2g} "
            f"{track.length_unit} {track.time_unit}^-2 ({abs(mean) / typical:.2%} of the "
            "typical acceleration)")
    if abs(mean) > 3.0 * stderr and abs(mean) > 0.005 * typical:
        sense_text = "against" if mean < 0 else "along"
        return Diagnostic(False, text + f": a torque {sense_text} the motion (drag?) acts too.")
    return Diagnostic(True, text + ".")


def _result(track: Track, level: _Level, settled: Settled[_Level]) -> AccelerationFit:
    curve, law = level.curve, level.law
    estimate = level.estimate
    stderr = (0.0, 0.0) if estimate is None else estimate.stderr
    path = replace(describe_path(track, centre=level.centre, curve=curve), centre_stderr=stderr,
                   centre_estimate=estimate)
    covariance = law.covariance[:2, :2]
    exponent, log_force = float(law.parameters[0]), float(law.parameters[1])
    scale = level.reference
    strength = math.exp(log_force) * scale ** (-exponent)
    # k = F(scale) scale**-n: propagate the covariance of (n, ln F(scale)).
    gradient = np.array([-math.log(scale) * strength, strength])
    strength_se = math.sqrt(max(float(gradient @ covariance @ gradient), 0.0))
    h, h_se, drift = angular_momentum(path)
    ratio = strength / h**2
    ratio_se = abs(ratio) * math.hypot(strength_se / strength, 2 * h_se / h)
    offset = curve.value[law.used] - np.asarray(level.centre)
    radius = np.hypot(offset[:, 0], offset[:, 1])
    diagnostics = {
        "power law": _power_law(track, level),
        "radial range": Diagnostic(None, f"r spans a factor {radius.max() / radius.min():.3g}."),
        "angular momentum": constancy_diagnostic(drift),
        "transverse acceleration": _transverse(track, level),
        "smoothing": smoothing_diagnostic(settled, track.time_unit),
        "sampling": sampling_diagnostic(curve),
        **noise_diagnostics(track, settled),
    }
    with np.errstate(divide="ignore", invalid="ignore"):
        relation = force_relation(path, path.centre)
    return AccelerationFit(
        exponent=exponent, exponent_stderr=math.sqrt(covariance[0, 0]), strength=strength,
        strength_stderr=strength_se, strength_per_h2=ratio, strength_per_h2_stderr=ratio_se,
        centre=level.centre, centre_stderr=stderr, method="acceleration",
        reference_radius=scale, force_at_reference=math.exp(log_force),
        force_at_reference_stderr=math.exp(log_force) * math.sqrt(covariance[1, 1]),
        n_points=int(law.used.size), chi2=law.chi2, reduced_chi2=law.reduced_chi2,
        parameter_names=("exponent", "log_force_at_scale"), covariance=covariance,
        residuals=law.residuals, length_unit=track.length_unit, time_unit=track.time_unit,
        diagnostics=diagnostics,
        relation=CurvaturePoints(log_radius=relation[0], log_force=relation[1], per_h2=False),
        angular_momentum=h, angular_momentum_stderr=h_se,
        correlation_time=autocorrelation_time(law.residuals), noise=noise_level(settled),
        track_name=track.name,
    )
