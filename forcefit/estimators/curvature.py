"""The curvature estimator: the force-curvature relation fitted along the smoothed path.

For a central force the path's normal acceleration is F cos(gamma), with gamma the angle
between the velocity and the normal to the radius; divided by the squared speed it is the
curvature: kappa = (F / h**2) r**2 cos(gamma)**3. With F = k r**n, n and k / h**2 follow
from the path's shape alone, and k when timestamps give the speed. The relation is fitted
in linear form at every sample away from the ends (`forcefit.geometry.curves.
relation_residual`), weighted by each sample's propagated variance; the errors of n and k
follow from how the fit responds to each raw sample (`forcefit.geometry.pointwise`), the
centre's own uncertainty included, and the smoothing is lightened until n settles
(`forcefit.estimators._smoothed`).

References
----------
I. Newton (1687), Principia, Book I, Prop. VI, Cor. 3-5, and Prop. VII, Cor. 3.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from .._regression import autocorrelation_time
from .._types import FloatArray
from ..errors import GeometryError, NotIdentifiable
from ..geometry.centre import MIN_BENDING, CentreEstimate, find_centre, relation_guide, relation_start
from ..geometry.curves import interior, is_straight, relation_residual
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
from .result import CurvatureFit, CurvaturePoints, Diagnostic


@dataclass(frozen=True)
class _Level:
    """The force-curvature relation fitted at one smoothing level."""

    curve: SmoothedCurve
    estimate: CentreEstimate | None
    law: PointwiseFit
    reference: float
    sense: float

    @property
    def centre(self) -> tuple[float, float]:
        return float(self.law.parameters[2]), float(self.law.parameters[3])


def fit_curvature(
    track: Track,
    *,
    centre: tuple[float, float] | None = None,
    smoothing: Smoothing = "auto",
    path: PathGeometry | None = None,
) -> CurvatureFit:
    """Fit F = -k r**n through the force-curvature relation (time-free).

    Parameters
    ----------
    track : Track
        Positions (L), with times (T) when known.
    centre : (float, float), optional
        The force centre (L); found from the data when not given.
    smoothing : {"auto", "spline", "savgol"}
        How to smooth before differentiating.
    path : PathGeometry, optional
        The track's geometry, if already described: its smoothing and centre are used as
        they are (no search of the smoothing level).

    Returns
    -------
    CurvatureFit
        n and k / h**2 from the shape; k too when the track is timestamped.

    Raises
    ------
    NotIdentifiable
        For a circle about the centre or a straight path.

    Examples
    --------
    >>> t = np.linspace(0.0, 10.0, 2001)                         # s
    >>> track = Track(t=t, x=0.3 * np.cos(2 * t), y=0.1 * np.sin(2 * t))   # m
    >>> fit = fit_curvature(track, centre=(0.0, 0.0))
    >>> round(fit.exponent, 4), round(fit.strength, 4)
    (1.0, 4.0)
    """
    if path is not None:
        centre = path.centre if path.centre_estimate is None else None
    given = None if centre is None else np.asarray(centre, dtype=float)

    def estimate(curve: SmoothedCurve, previous: _Level | None) -> _Level:
        return _at_level(track, curve, given, previous)

    settled = settle(track, smoothing, estimate, _exponent,
                     curve=None if path is None else path.smoothing, watched=_centre)
    best = settled.result
    fit = _result(track, best, settled)
    if best.estimate is None or not best.estimate.alternatives:
        return fit
    others = []
    for other in best.estimate.alternatives:
        try:
            law, reference, sense = _relation(track, best.curve, np.asarray(other.centre),
                                              other.influence)
        except NotIdentifiable:
            continue
        others.append(_result(track, _Level(best.curve, other, law, reference, sense), settled))
    if not others:
        return fit
    checks = {**fit.diagnostics, "centre": _ambiguity(tuple(others))}
    return replace(fit, alternatives=tuple(others), diagnostics=checks)


def _exponent(level: _Level) -> tuple[float, float, FloatArray]:
    return float(level.law.parameters[0]), float(level.law.stderr[0]), level.law.influence[0]


def _centre(level: _Level) -> tuple[FloatArray, FloatArray | None]:
    """The fitted centre and its response to the samples (None when the centre was given)."""
    if level.estimate is None:
        return np.asarray(level.centre), None
    return np.asarray(level.estimate.centre), level.estimate.influence


def _at_level(track: Track, curve: SmoothedCurve, given: FloatArray | None,
              previous: _Level | None) -> _Level:
    """Centre (unless given) and the relation about it, at one smoothing level."""
    if given is not None:
        if previous is None and is_straight(track.x, track.y, curve.noise):
            raise NotIdentifiable(
                f"{track.label}: the path does not bend significantly; a straight path shows no "
                "force, so no exponent can be read from it. Check that the body moved under the "
                "force (and not only the camera).")
        estimate, centre, influence = None, given, None
    else:
        starts = None
        if previous is not None and previous.estimate is not None:
            starts = [previous.centre] + [other.centre for other in previous.estimate.alternatives]
        estimate = find_centre(track, curve=curve, starts=starts)
        centre, influence = np.asarray(estimate.centre), estimate.influence
    if previous is None:
        _require_excursion(track, curve, centre)
    law, reference, sense = _relation(track, curve, centre, influence)
    return _Level(curve, estimate, law, reference, sense)


def _require_excursion(track: Track, curve: SmoothedCurve, centre: FloatArray) -> None:
    keep = interior(curve)
    offset = curve.value[keep] - centre
    radius = np.hypot(offset[:, 0], offset[:, 1])
    unit = offset / np.maximum(radius, 1e-300)[:, None]
    variance = unit[:, 0] ** 2 * curve.value_var[keep, 0] + unit[:, 1] ** 2 * curve.value_var[keep, 1]
    require_resolved_excursion(track, radius, np.sqrt(variance))


def _relation(
    track: Track, curve: SmoothedCurve, centre: FloatArray, centre_influence: FloatArray | None,
    *, bend: bool = False,
) -> tuple[PointwiseFit, float, float]:
    """(n, ln f_ref) of the relation about ``centre`` (held, with its influence), the
    reference radius r_ref and the turning sense. With ``bend``, a third parameter b lets
    the local exponent vary as n + 2 b ln(r / r_ref)."""
    guide, bending = relation_guide(track, curve)
    if bending.sum() < MIN_BENDING:
        raise NotIdentifiable(
            f"{track.label}: only {int(bending.sum())} points bend significantly towards the "
            "centre, even smoothed more heavily; the curvature is too noisy for the curvature "
            "estimator. Try the shape estimator.")
    start, reference, sense = relation_start(guide, bending, centre, track.has_times)
    timed = track.has_times

    def residual(parameters: FloatArray, value: FloatArray, first: FloatArray,
                 second: FloatArray) -> FloatArray:
        if bend:
            exponent, log_force, slope, cx, cy = parameters
            log_r = np.log(np.hypot(value[:, 0] - cx, value[:, 1] - cy) / reference)
            return relation_residual(np.array([exponent, log_force, cx, cy]), value, first, second,
                                     sense=sense, reference_radius=reference, timed=timed,
                                     extra_log_force=slope * log_r**2)
        return relation_residual(parameters, value, first, second, sense=sense,
                                 reference_radius=reference, timed=timed)

    first_guess = np.append(start, 0.0) if bend else start
    try:
        law = fit_pointwise(curve, np.flatnonzero(interior(curve)), residual, first_guess,
                            held=centre, held_influence=centre_influence)
    except GeometryError:
        raise NotIdentifiable(
            f"{track.label}: the force-curvature relation does not determine the exponent about "
            f"({centre[0]:.6g}, {centre[1]:.6g}); check the centre, or try the shape estimator.") from None
    return law, reference, sense


def _ambiguity(others: tuple[CurvatureFit, ...]) -> Diagnostic:
    listed = "; ".join(f"n = {other.exponent:.3f} about ({other.centre[0]:.4g}, {other.centre[1]:.4g})"
                       for other in others)
    return Diagnostic(False, f"the path's shape fits as well about other centres ({listed}). A closed "
                             "ellipse is an orbit of n = 1 about its centre and of n = -2 about a focus; "
                             "give the centre or timestamps to decide.")


def _power_law(track: Track, level: _Level) -> Diagnostic:
    """Does the local exponent change across the radial range? b of F = f (r/r_ref)**(n + b
    ln(r/r_ref)) against its propagated error."""
    influence = None if level.estimate is None else level.estimate.influence
    try:
        law, _, _ = _relation(track, level.curve, np.asarray(level.centre), influence, bend=True)
    except NotIdentifiable:
        return Diagnostic(None, "not checked (the relation with a varying exponent does not fit).")
    offset = level.curve.value[law.used] - np.asarray(level.centre)
    log_r = np.log(np.hypot(offset[:, 0], offset[:, 1]))
    slope, stderr = float(law.parameters[2]), float(law.stderr[2])
    change = 2.0 * slope * float(np.ptp(log_r))
    z = slope / stderr if stderr > 0 else 0.0
    text = (f"the local exponent changes by {change:+.3g} across the radial range "
            f"({abs(z):.1f} standard errors)")
    if abs(z) > BEND_Z:
        return Diagnostic(False, text + ": the force is not a single power law.")
    return Diagnostic(True, text + ": consistent with a power law.")


def _result(track: Track, level: _Level, settled: Settled[_Level]) -> CurvatureFit:
    """The fit's result from the relation at the chosen level."""
    curve, law = level.curve, level.law
    estimate = level.estimate
    stderr = (0.0, 0.0) if estimate is None else estimate.stderr
    path = replace(describe_path(track, centre=level.centre, curve=curve), centre_stderr=stderr,
                   centre_estimate=estimate)
    covariance = law.covariance[:2, :2]
    exponent, log_force = float(law.parameters[0]), float(law.parameters[1])
    reference = level.reference
    # k = F(r_ref) r_ref**-n: ln k = ln f_ref - n ln r_ref.
    gradient = np.array([-math.log(reference), 1.0])
    log_k_se = math.sqrt(max(float(gradient @ covariance @ gradient), 0.0))
    log_level = log_force - exponent * math.log(reference)
    if not (abs(log_level) < 700 and abs(log_force) < 700):
        raise GeometryError(f"the fitted law (n = {exponent:.3g}) puts its strength beyond any "
                            "representable number: the path does not follow a power law about "
                            "this centre.")
    level_value = math.exp(log_level)
    h, h_se, drift = angular_momentum(path)
    force, force_se = math.exp(log_force), math.exp(log_force) * math.sqrt(covariance[1, 1])
    if track.has_times:
        strength, strength_se = level_value, level_value * log_k_se
        ratio = strength / h**2
        ratio_se = ratio * math.hypot(log_k_se, 2 * h_se / h)
    else:
        ratio, ratio_se = level_value, level_value * log_k_se
        strength = strength_se = force = force_se = math.nan
    used = law.used
    offset = curve.value[used] - np.asarray(level.centre)
    radius = np.hypot(offset[:, 0], offset[:, 1])
    unit = track.time_unit if track.has_times else track.length_unit
    diagnostics = {
        "power law": _power_law(track, level),
        "radial range": Diagnostic(None, f"r spans a factor {radius.max() / radius.min():.3g}."),
        "angular momentum": constancy_diagnostic(drift),
        "points used": Diagnostic(None, f"{used.size} of {track.n_points} (those away from the ends)."),
        "smoothing": smoothing_diagnostic(settled, unit),
        "sampling": sampling_diagnostic(curve),
        **noise_diagnostics(track, settled),
    }
    with np.errstate(divide="ignore", invalid="ignore"):
        log_radius, log_points, _ = force_relation(path, level.centre)
    return CurvatureFit(
        exponent=exponent, exponent_stderr=math.sqrt(covariance[0, 0]), strength=strength,
        strength_stderr=strength_se, strength_per_h2=ratio, strength_per_h2_stderr=ratio_se,
        centre=level.centre, centre_stderr=stderr, method="curvature",
        reference_radius=reference, force_at_reference=force, force_at_reference_stderr=force_se,
        n_points=int(used.size), chi2=law.chi2, reduced_chi2=law.reduced_chi2,
        parameter_names=("exponent", "log_force_at_reference" if track.has_times
                         else "log_force_per_h2_at_reference"), covariance=covariance,
        residuals=law.residuals, length_unit=track.length_unit,
        time_unit=track.time_unit if track.has_times else None, diagnostics=diagnostics,
        relation=CurvaturePoints(log_radius=log_radius, log_force=log_points, per_h2=not track.has_times),
        angular_momentum=h, angular_momentum_stderr=h_se,
        correlation_time=autocorrelation_time(law.residuals), smoothing_level=curve.level,
        smoothing_dof=curve.dof, noise=noise_level(settled), track_name=track.name,
    )
