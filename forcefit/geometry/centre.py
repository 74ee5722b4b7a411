"""Finding the force centre of a path, with its standard error.

With timestamps, the acceleration of a body in a central field points at the centre
at every sample, so the centre is where the acceleration lines meet (weighted least
squares). Without timestamps, the centre is the point about which the path's curvature
is that of a power-law orbit: the force-curvature relation fitted with the centre free.
A closed ellipse without timestamps has more than one such point (its centre, n = 1,
and its foci, n = -2: Bertrand's theorem), so every consistent centre is returned.

The centre's covariance comes from how it moves with each raw sample (`PointwiseFit`):
neighbouring smoothed samples share their data, so the scatter of the residuals would
not tell it.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np

from .._regression import fit_line
from .._types import FloatArray
from ..errors import GeometryError, NotIdentifiable
from ..track import Track
from .curves import (
    attractive_points,
    cross,
    curvature_of,
    curvature_relation,
    interior,
    is_straight,
    polar_about,
    relation_residual,
    turning_sense,
)
from .levels import settle
from .pointwise import PointwiseFit, fit_pointwise
from .pspline import SmoothedCurve
from .smoothing import Smoothing, smooth_track

MIN_SIGNAL = 3.0
"""Signal-to-noise at which a sample's acceleration counts as significant."""

MIN_SIGNIFICANT_FRACTION = 0.02
"""Fewer samples than this fraction with a significant acceleration: no force is seen (by
chance alone, |a| > 3 sigma happens at about 1e-4 of the samples)."""

AMBIGUITY_FACTOR = 1.5
"""Centres whose reduced chi-square is within this factor of the best are all reported."""


@dataclass(frozen=True)
class CentreEstimate:
    """A force centre (L) with its standard error and how it was found.

    Attributes
    ----------
    centre, stderr : (float, float)
        The centre and its standard errors (L).
    method : str
        ``"acceleration lines"`` (timestamps) or ``"curvature relation"`` (shape only).
    reduced_chi2 : float
        Of the fit that placed it (ranks the alternatives).
    covariance : ndarray, shape (2, 2)
        Covariance of the centre's coordinates.
    influence : ndarray, shape (2, n_points, 2)
        d centre / d sample (x and y) at every sample: how the centre moves with the data,
        to carry its uncertainty, with its correlations, into what is fitted about it.
    alternatives : tuple of CentreEstimate
        Other centres the shape supports as well (shape-only tracks).
    notes : tuple of str
        What the user should know about the estimate (e.g. errors widened because the centre
        moved with the smoothing level).
    """

    centre: tuple[float, float]
    stderr: tuple[float, float]
    method: str
    reduced_chi2: float
    covariance: FloatArray
    influence: FloatArray
    alternatives: tuple[CentreEstimate, ...] = ()
    notes: tuple[str, ...] = ()


def _estimate(fit: PointwiseFit, rows: slice, method: str) -> CentreEstimate:
    centre = fit.parameters[rows]
    covariance = fit.covariance[rows, rows]
    stderr = np.sqrt(np.maximum(np.diag(covariance), 0.0))
    return CentreEstimate((float(centre[0]), float(centre[1])), (float(stderr[0]), float(stderr[1])),
                          method, fit.reduced_chi2, covariance, fit.influence[rows])


def find_centre(
    track: Track, *, curve: SmoothedCurve | None = None,
    starts: Sequence[tuple[float, float]] | None = None, smoothing: Smoothing = "auto",
) -> CentreEstimate:
    """Locate the force centre of a track.

    Parameters
    ----------
    track : Track
        Positions (L), with times when known.
    curve : SmoothedCurve, optional
        The smoothing to read the centre from. Without it the level is chosen as the
        estimators choose theirs: lightened from generalised cross-validation's until the
        centre settles (Lepski's rule, `settled_centre`); at cross-validation's level alone a
        fast, close passage is rounded off and its acceleration lines meet off the centre by
        several of their errors.
    starts : sequence of (float, float), optional
        Centres to start the search from (e.g. those found at another smoothing level);
        by default they are read from the path.
    smoothing : {"auto", "spline", "savgol"}
        The smoother searched without ``curve`` (as in `smooth_track`).

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
    >>> [round(c, 6) + 0.0 for c in estimate.centre], estimate.method
    ([2.0, -1.0], 'acceleration lines')
    """
    if curve is None:
        return settled_centre(track, smoothing)
    if track.has_times:
        return _from_accelerations(track, curve, None if not starts else starts[0])
    return _from_curvature_relation(track, curve, starts)


def settled_centre(track: Track, smoothing: Smoothing = "auto", start: SmoothedCurve | None = None
                   ) -> CentreEstimate:
    """The force centre of a track at the smoothing level Lepski's rule settles on
    (`forcefit.geometry.levels.settle`, the centre's two coordinates watched): what
    `find_centre` returns when it is not handed a smoothing.

    At the level generalised cross-validation picks, a fast, close passage is rounded off and
    the acceleration lines meet off the centre: on 24 simulated flybys (speeds 1.2-2 where
    escape needs 1.4, noise 0.2-0.5% of the size) that centre lay more than 3 of its errors off
    in 71% of the coordinates. Where no level settles (lighter levels keep moving the centre:
    nearly parallel acceleration lines, as on a narrow ellipse, whose noise bias grows as the
    smoothing lightens), the errors are widened by the largest move of the centre over the
    levels tried, and a note says so. ``start``: the cross-validated smoothing, when already
    computed.
    """
    seen: list[CentreEstimate] = []

    def estimate(curve: SmoothedCurve, previous: CentreEstimate | None) -> CentreEstimate:
        starts = None if previous is None else [previous.centre, *(a.centre for a in previous.alternatives)]
        found = find_centre(track, curve=curve, starts=starts)
        seen.append(found)
        return found

    def x(found: CentreEstimate) -> tuple[float, float, FloatArray]:
        return found.centre[0], found.stderr[0], found.influence[0]

    def y(found: CentreEstimate) -> tuple[FloatArray, FloatArray | None]:
        return np.array([found.centre[1]]), found.influence[1:2]

    settled = settle(track, smoothing, estimate, x, watched=y, start=start)
    found = settled.result
    if settled.settled or len(seen) < 2:
        return found
    moves = np.max(np.abs(np.array([one.centre for one in seen]) - np.asarray(found.centre)), axis=0)
    covariance = np.asarray(found.covariance) + np.diag(moves**2)
    stderr = np.sqrt(np.diag(covariance))
    note = (f"the centre did not settle as the smoothing was lightened ({len(seen)} levels; it moved by "
            f"up to {float(np.max(moves)):.3g} {track.length_unit}): its errors include that move")
    return replace(found, stderr=(float(stderr[0]), float(stderr[1])), covariance=covariance,
                   notes=(*found.notes, note))


def _from_accelerations(
    track: Track, curve: SmoothedCurve, start: tuple[float, float] | None
) -> CentreEstimate:
    """Where the lines of the accelerations meet: least squares of a x (c - p) over the
    samples, each weighted by its propagated variance."""
    keep = interior(curve)
    accel = curve.second[keep]
    magnitude = np.hypot(accel[:, 0], accel[:, 1])
    accel_sd = np.sqrt(curve.second_var[keep, 0] + curve.second_var[keep, 1])
    if np.mean(magnitude > MIN_SIGNAL * accel_sd) < MIN_SIGNIFICANT_FRACTION:
        raise NotIdentifiable(
            f"{track.label}: the acceleration is not significantly different from zero "
            "along the path; it looks straight, so no force (or too weak a force) acts on it. Check "
            "that the body moved under the force (and not only the camera)."
        )
    first = np.asarray(start, dtype=float) if start is not None else _first_intersection(
        curve.value[keep], accel, magnitude, accel_sd)

    def residual(centre: FloatArray, value: FloatArray, _first: FloatArray,
                 second: FloatArray) -> FloatArray:
        return cross(second, centre - value)

    try:
        fit = fit_pointwise(curve, np.flatnonzero(keep), residual, first)
    except GeometryError:
        raise NotIdentifiable(
            f"{track.label}: the lines of the accelerations do not meet in one point; no force "
            "centre can be found. Give the centre.") from None
    return _estimate(fit, slice(0, 2), "acceleration lines")


def _first_intersection(value: FloatArray, accel: FloatArray, magnitude: FloatArray,
                        accel_sd: FloatArray) -> FloatArray:
    """A first centre: the point nearest (in the weighted sense) to every acceleration line."""
    normal = np.column_stack((-accel[:, 1], accel[:, 0])) / np.maximum(magnitude, 1e-300)[:, None]
    offset = np.sum(normal * value, axis=1)
    weight = magnitude**2 / np.maximum(accel_sd, 1e-300) ** 2
    matrix = (normal * weight[:, None]).T @ normal
    return np.linalg.solve(matrix, (normal * weight[:, None]).T @ offset)


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


def _from_curvature_relation(
    track: Track, curve: SmoothedCurve, starts: Sequence[tuple[float, float]] | None
) -> CentreEstimate:
    """The point about which the path's curvature is that of a power-law orbit: the
    force-curvature relation fitted with the centre free, from several starts."""
    if is_straight(track.x, track.y, curve.noise):
        raise NotIdentifiable(
            f"{track.label}: the path stays within its noise of a straight line; it looks "
            "straight, so no force can be read from it. Check that the body moved under the force "
            "(and not only the camera)."
        )
    guide, bending = relation_guide(track, curve)
    if bending.sum() < MIN_BENDING:
        heavier = (f", even smoothed {guide.level / curve.level:.3g} times more heavily"
                   if guide is not curve else "")
        raise NotIdentifiable(
            f"{track.label}: the curvature is too noisy to locate the centre from the shape "
            f"({int(bending.sum())} of {track.n_points} points bend significantly{heavier}). "
            "Give the centre."
        )
    size = float(np.ptp(curve.value, axis=0).max())
    candidates = ([np.asarray(c, dtype=float) for c in starts] if starts
                  else _starting_centres(curve.value))
    found: list[CentreEstimate] = []
    for start in candidates:
        estimate = _refine_centre(curve, guide, bending, start, size)
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
    return replace(best, alternatives=close)


def relation_start(curve: SmoothedCurve, used: np.ndarray, centre: FloatArray,
                   timed: bool) -> tuple[FloatArray, float, float]:
    """Starting (n, ln f_ref), the reference radius and the turning sense for the
    force-curvature relation about ``centre``, from a straight line through
    log(kappa / (r**2 cos(gamma)**3)) against log r at the samples that bend."""
    sense = turning_sense(curve)
    kappa, kappa_err = curvature_of(curve)
    points = curvature_relation(curve, kappa, kappa_err, centre, used)
    y = points.log_force_per_h2
    if timed:
        h = np.abs(cross(curve.value[used] - centre, curve.first[used]))
        y = y + 2.0 * np.log(np.maximum(h, 1e-300))
    reference = float(np.exp(np.mean(points.log_radius)))
    line = fit_line(points.log_radius - math.log(reference), y, points.sigma)
    return np.array([line.slope, line.intercept]), reference, sense


MIN_BENDING = 10
"""Fewest samples that must bend significantly for a first line through the relation."""

HEAVIER, HEAVIER_STEPS = 8.0, 3
"""When too few samples bend significantly at the fit's smoothing level, the first line
is drawn on a smoothing HEAVIER times heavier, up to HEAVIER_STEPS times."""


def relation_guide(track: Track, curve: SmoothedCurve) -> tuple[SmoothedCurve, np.ndarray]:
    """A smoothing on which enough samples bend significantly to start the relation (the
    curve itself, or a heavier one of the same parameter), and those samples.

    Lightly smoothed, unevenly spaced or noisy samples may each bend insignificantly
    although together they define the path's bending well; only the start needs
    individually significant points, the fit itself weighs every sample.
    """
    guide = curve
    kappa, kappa_err = curvature_of(guide)
    bending = attractive_points(guide, kappa, kappa_err)
    for _ in range(HEAVIER_STEPS):
        if bending.sum() >= MIN_BENDING or curve.response is None:
            break
        try:
            guide = smooth_track(track, level=guide.level * HEAVIER,
                                 parameter=None if track.has_times else curve.parameter)
        except GeometryError:
            break
        kappa, kappa_err = curvature_of(guide)
        bending = attractive_points(guide, kappa, kappa_err)
    return guide, bending


def _refine_centre(curve: SmoothedCurve, guide: SmoothedCurve, bending: np.ndarray,
                   start: FloatArray, size: float) -> CentreEstimate | None:
    """The relation fitted with the centre free, from one start (a first line drawn on
    ``guide`` through its ``bending`` samples); None if it wanders off."""
    try:
        law, reference, sense = relation_start(guide, bending, start, timed=False)
    except (np.linalg.LinAlgError, ValueError):
        return None
    if not np.all(np.isfinite(law)):
        return None
    used = np.flatnonzero(interior(curve))

    def residual(parameters: FloatArray, value: FloatArray, first: FloatArray,
                 second: FloatArray) -> FloatArray:
        return relation_residual(parameters, value, first, second, sense=sense,
                                 reference_radius=reference, timed=False)

    try:
        fit = fit_pointwise(curve, used, residual, np.concatenate((law, start)))
    except GeometryError:
        return None
    centre = fit.parameters[2:4]
    radius = polar_about(curve, centre).radius
    if (not np.all(np.isfinite(fit.parameters)) or math.dist(centre, start) > 100 * size
            or np.ptp(radius) < 1e-3 * radius.mean()):
        return None
    return _estimate(fit, slice(2, 4), "curvature relation")
