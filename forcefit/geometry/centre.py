"""Finding the force centre of a path, with its standard error.

With timestamps, the acceleration of a body in a central field points at the centre
at every sample, so the centre is where the acceleration lines meet (weighted least
squares). Without timestamps, the centre is the point about which the force-curvature
relation is most nearly a straight line in log-log (a profile over the centre). A
closed ellipse without timestamps has more than one such point (its centre, n = 1,
and its foci, n = -2: Bertrand's theorem), so every consistent centre is returned.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from .._regression import autocorrelation_time
from .._types import FloatArray
from ..errors import NotIdentifiable
from ..track import Track
from .curves import (
    attractive_points,
    curvature_of,
    curvature_relation,
    interior,
    is_straight,
    polar_about,
)
from .pspline import SmoothedCurve
from .smoothing import smooth_track

MIN_SIGNAL = 3.0
"""Signal-to-noise at which a sample's acceleration counts as significant."""

MIN_SIGNIFICANT_FRACTION = 0.02
"""Fewer samples than this fraction with a significant acceleration: no force is seen (by
chance alone, |a| > 3 sigma happens at about 1e-4 of the samples)."""

AMBIGUITY_FACTOR = 1.5
"""Centres whose reduced chi-square is within this factor of the best are all reported."""


@dataclass(frozen=True)
class CentreEstimate:
    """A force centre (L) with its standard error and how it was found."""

    centre: tuple[float, float]
    stderr: tuple[float, float]
    method: str
    reduced_chi2: float
    alternatives: tuple[CentreEstimate, ...] = ()


def find_centre(track: Track, *, curve: SmoothedCurve | None = None) -> CentreEstimate:
    """Locate the force centre of a track.

    Parameters
    ----------
    track : Track
        Positions (L), with times when known.
    curve : SmoothedCurve, optional
        The track's smoothing, if already computed.

    Returns
    -------
    CentreEstimate
        With ``alternatives`` listing other centres the shape supports equally well
        (only for shape-only tracks).

    Raises
    ------
    NotIdentifiable
        The path is straight (no force), or circular about the candidate centre.

    Examples
    --------
    >>> t = np.linspace(0.0, 8.0, 400)           # Hooke orbit about (2, -1)
    >>> track = Track(t=t, x=2 + np.cos(2 * t), y=-1 + 0.5 * np.sin(2 * t))
    >>> estimate = find_centre(track)
    >>> np.round(estimate.centre, 6) + 0.0, estimate.method
    (array([ 2., -1.]), 'acceleration lines')
    """
    curve = curve if curve is not None else smooth_track(track)
    if track.has_times:
        return _from_accelerations(track, curve)
    return _from_curvature_relation(track, curve)


def _from_accelerations(track: Track, curve: SmoothedCurve) -> CentreEstimate:
    keep = interior(curve)
    accel, value = curve.second[keep], curve.value[keep]
    second_var, value_var = curve.second_var[keep], curve.value_var[keep]
    magnitude = np.hypot(accel[:, 0], accel[:, 1])
    accel_sd = np.sqrt(second_var[:, 0] + second_var[:, 1])
    if np.mean(magnitude > MIN_SIGNAL * accel_sd) < MIN_SIGNIFICANT_FRACTION:
        raise NotIdentifiable(
            f"{track.label}: the acceleration is not significantly different from zero "
            "along the path; it looks straight, so no force (or too weak a force) acts on it. Check "
            "that the body moved under the force (and not only the camera)."
        )
    normal = np.column_stack((-accel[:, 1], accel[:, 0])) / np.maximum(magnitude, 1e-300)[:, None]
    offset = np.sum(normal * value, axis=1)
    angle_var = (normal[:, 0] ** 2 * second_var[:, 0]
                 + normal[:, 1] ** 2 * second_var[:, 1]) / np.maximum(magnitude, 1e-300) ** 2
    position_var = normal[:, 0] ** 2 * value_var[:, 0] + normal[:, 1] ** 2 * value_var[:, 1]
    weight = magnitude**2 / np.maximum(accel_sd, 1e-300) ** 2
    centre = _weighted_intersection(normal, offset, weight)
    for _ in range(4):
        distance = np.hypot(*(value - centre).T)
        variance = distance**2 * angle_var + position_var
        centre = _weighted_intersection(normal, offset, 1.0 / variance)
    residual = (normal @ centre - offset) / np.sqrt(variance)
    reduced = float(residual @ residual) / max(residual.size - 2, 1)
    tau = autocorrelation_time(residual)
    covariance = np.linalg.inv((normal / variance[:, None]).T @ normal) * reduced * tau
    stderr = np.sqrt(np.diag(covariance))
    return CentreEstimate((float(centre[0]), float(centre[1])), (float(stderr[0]), float(stderr[1])),
                          "acceleration lines", reduced)


def _weighted_intersection(normal: FloatArray, offset: FloatArray, weight: FloatArray) -> FloatArray:
    """The point c minimising sum w (n . c - offset)**2."""
    matrix = (normal * weight[:, None]).T @ normal
    return np.linalg.solve(matrix, (normal * weight[:, None]).T @ offset)


def _relation_residuals(
    curve: SmoothedCurve, kappa: FloatArray, kappa_err: FloatArray, used: np.ndarray,
    centre: FloatArray,
) -> FloatArray:
    """Normalised residuals of the best straight line through the curvature relation."""
    points = curvature_relation(curve, kappa, kappa_err, centre, used)
    weight = 1.0 / points.sigma**2
    x, y = points.log_radius, points.log_force_per_h2
    sw, sx, sy = weight.sum(), weight @ x, weight @ y
    sxx, sxy = weight @ (x * x), weight @ (x * y)
    determinant = sw * sxx - sx * sx
    if determinant <= 0:
        return (y - sy / sw) / points.sigma
    slope = (sw * sxy - sx * sy) / determinant
    intercept = (sy - slope * sx) / sw
    return (y - intercept - slope * x) / points.sigma


def _starting_centres(points: FloatArray) -> list[FloatArray]:
    """Middle of the path, its centroid, and the foci of an ellipse of the same extent."""
    middle = 0.5 * (points.min(axis=0) + points.max(axis=0))
    centroid = points.mean(axis=0)
    _, _, axes = np.linalg.svd(points - centroid, full_matrices=False)
    along = (points - centroid) @ axes.T
    half = 0.5 * (along.max(axis=0) - along.min(axis=0))
    focal = math.sqrt(max(half[0] ** 2 - half[1] ** 2, 0.0))
    starts = [middle, centroid]
    if focal > 0.05 * half[0]:
        starts += [centroid + focal * axes[0], centroid - focal * axes[0]]
    return starts


def _from_curvature_relation(track: Track, curve: SmoothedCurve) -> CentreEstimate:
    if is_straight(track.x, track.y, curve.noise):
        raise NotIdentifiable(
            f"{track.label}: the path stays within its noise of a straight line; it looks "
            "straight, so no force can be read from it. Check that the body moved under the force "
            "(and not only the camera)."
        )
    kappa, kappa_err = curvature_of(curve)
    used = attractive_points(curve, kappa, kappa_err)
    if used.sum() < 10:
        raise NotIdentifiable(
            f"{track.label}: the curvature is too noisy to locate the centre from the shape "
            f"({int(used.sum())} of {track.n_points} points bend significantly). Give the centre."
        )
    size = float(np.ptp(curve.value, axis=0).max())
    found: list[CentreEstimate] = []
    for start in _starting_centres(curve.value):
        estimate = _refine_centre(track, curve, kappa, kappa_err, used, start, size)
        if estimate is not None and not any(
            math.dist(estimate.centre, other.centre) < 1e-3 * size for other in found
        ):
            found.append(estimate)
    if not found:
        raise NotIdentifiable(
            f"{track.label}: no point makes the path a power-law orbit without timestamps "
            "(is it circular about its own centre?). Give the centre, or timestamps."
        )
    found.sort(key=lambda estimate: estimate.reduced_chi2)
    best = found[0]
    close = tuple(e for e in found[1:] if e.reduced_chi2 <= AMBIGUITY_FACTOR * best.reduced_chi2)
    return CentreEstimate(best.centre, best.stderr, best.method, best.reduced_chi2, close)


def _refine_centre(
    track: Track, curve: SmoothedCurve, kappa: FloatArray, kappa_err: FloatArray,
    used: np.ndarray, start: FloatArray, size: float,
) -> CentreEstimate | None:
    def residuals(centre: FloatArray) -> FloatArray:
        return _relation_residuals(curve, kappa, kappa_err, used, centre)

    result = least_squares(residuals, start, x_scale=size, method="lm")
    centre = result.x
    radius = polar_about(curve, centre).radius
    if (not result.success or math.dist(centre, start) > 100 * size
            or np.ptp(radius) < 1e-3 * radius.mean()):
        return None
    reduced = 2.0 * float(result.cost) / max(int(used.sum()) - 4, 1)
    tau = autocorrelation_time(result.fun)
    try:
        covariance = np.linalg.inv(result.jac.T @ result.jac) * reduced * tau
    except np.linalg.LinAlgError:
        return None
    stderr = np.sqrt(np.abs(np.diag(covariance)))
    return CentreEstimate((float(centre[0]), float(centre[1])), (float(stderr[0]), float(stderr[1])),
                          "curvature relation", reduced)
