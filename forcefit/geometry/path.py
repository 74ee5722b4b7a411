"""The geometry of a path: smoothed position, derivatives, curvature, radius, angle γ, h.

For a central force the path's geometry alone fixes the law up to one constant:
F = h**2 kappa / (r**2 cos(gamma)**3), with kappa the curvature, r the distance from
the centre and gamma the angle between the velocity and the normal to the radius.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, replace

import numpy as np

from .._types import FloatArray
from ..errors import ForcefitWarning, GeometryError
from ..track import Track
from .centre import CentreEstimate, find_centre, settled_centre
from .curves import attractive_points, curvature_of, curvature_relation, polar_about
from .pspline import SmoothedCurve
from .smoothing import Smoothing, smooth_track

MIN_POINTS_PER_TURN = 20
"""Fewer samples per revolution than this and the curvature is poorly resolved."""


@dataclass(frozen=True)
class PathGeometry:
    """A track's smoothed path and its geometry about a force centre.

    Arrays have shape (n_points,) unless stated. Lengths are in the track's length
    unit (L), times in its time unit (T); derivatives are with respect to time when
    the track is timestamped, else with respect to arc length.

    Attributes
    ----------
    track : Track
        The samples described.
    parameter : ndarray
        Time (T), or cumulative chord length (L) for a shape-only track.
    position, velocity, acceleration : ndarray, shape (n_points, 2)
        Smoothed position (L) and its first and second derivatives.
    speed : ndarray
        |velocity| (L/T; 1 for a shape-only track).
    tangent_angle : ndarray
        Direction of motion (rad), unwrapped.
    curvature, curvature_stderr : ndarray
        Signed curvature kappa (1/L), positive when turning counter-clockwise.
    centre, centre_stderr : (float, float)
        The force centre used (L).
    radius, radius_stderr : ndarray
        Distance r from the centre (L).
    polar_angle : ndarray
        Angle theta of the position about the centre (rad), unwrapped.
    gamma, gamma_stderr : ndarray
        Angle between the velocity and the normal to the radius (rad), in
        [-pi/2, pi/2]; cos(gamma) = |h| / (r v).
    angular_momentum, angular_momentum_stderr : ndarray
        h = (r x v)_z (L**2/T); nan for a shape-only track.
    smoothing : SmoothedCurve
        The smoothed curve, with the level and degrees of freedom used.
    warnings : tuple of str
        What deserves a second look.
    centre_estimate : CentreEstimate or None
        How the centre was found (None when it was given), with any other centres
        the data support equally well.
    """

    track: Track
    parameter: FloatArray
    position: FloatArray
    velocity: FloatArray
    acceleration: FloatArray
    speed: FloatArray
    tangent_angle: FloatArray
    curvature: FloatArray
    curvature_stderr: FloatArray
    centre: tuple[float, float]
    centre_stderr: tuple[float, float]
    radius: FloatArray
    radius_stderr: FloatArray
    polar_angle: FloatArray
    gamma: FloatArray
    gamma_stderr: FloatArray
    angular_momentum: FloatArray
    angular_momentum_stderr: FloatArray
    smoothing: SmoothedCurve
    warnings: tuple[str, ...] = ()
    centre_estimate: CentreEstimate | None = None

    @property
    def revolutions(self) -> float:
        """Turns swept about the centre."""
        return float(abs(self.polar_angle[-1] - self.polar_angle[0]) / (2.0 * math.pi))

    @property
    def radius_of_curvature(self) -> FloatArray:
        """1/|kappa| (L); inf where the path is straight."""
        with np.errstate(divide="ignore"):
            return 1.0 / np.abs(self.curvature)


def describe_path(
    track: Track,
    *,
    centre: tuple[float, float] | None = None,
    smoothing: Smoothing = "auto",
    level: float | None = None,
    curve: SmoothedCurve | None = None,
) -> PathGeometry:
    """Smooth a track and compute its geometry about a force centre.

    Parameters
    ----------
    track : Track
        Positions (L), with times (T) when known.
    centre : (float, float), optional
        The force centre (L); found with `find_centre` when not given (at the level it
        settles on, unless a ``curve`` or ``level`` is given: then on that smoothing).
    smoothing, level
        As in `smooth_track`.
    curve : SmoothedCurve, optional
        A smoothing already computed for this track, to reuse.

    Returns
    -------
    PathGeometry

    Examples
    --------
    >>> t = np.linspace(0.0, 4 * np.pi, 801)                  # an ellipse about its centre
    >>> path = describe_path(Track(t=t, x=3 * np.cos(t), y=np.sin(t)), centre=(0.0, 0.0))
    >>> exact = 3.0 / (9 * np.sin(t) ** 2 + np.cos(t) ** 2) ** 1.5
    >>> bool(np.allclose(path.curvature[100:-100], exact[100:-100], rtol=1e-6))
    True
    """
    searched = curve is None and level is None        # the centre's own level search (find_centre)
    curve = curve if curve is not None else smooth_track(track, smoothing=smoothing, level=level)
    if centre is not None:
        return _about(track, curve, (float(centre[0]), float(centre[1])), (0.0, 0.0))
    estimate = (settled_centre(track, smoothing, start=curve) if searched
                else find_centre(track, curve=curve))
    return replace(_about(track, curve, estimate.centre, estimate.stderr), centre_estimate=estimate)


def _about(
    track: Track, curve: SmoothedCurve, centre: tuple[float, float],
    centre_stderr: tuple[float, float],
) -> PathGeometry:
    offset = curve.value - np.asarray(centre)
    if np.any(np.hypot(offset[:, 0], offset[:, 1]) == 0.0):
        raise GeometryError(f"{track.label}: the path passes through the centre {centre}.")
    polar = polar_about(curve, np.asarray(centre))
    velocity = curve.first
    kappa, kappa_err = curvature_of(curve)
    if track.has_times:
        h = offset[:, 0] * velocity[:, 1] - offset[:, 1] * velocity[:, 0]
        h_err = np.sqrt(offset[:, 0] ** 2 * curve.first_var[:, 1] + offset[:, 1] ** 2 * curve.first_var[:, 0]
                        + velocity[:, 1] ** 2 * curve.value_var[:, 0]
                        + velocity[:, 0] ** 2 * curve.value_var[:, 1])
        speed = np.hypot(velocity[:, 0], velocity[:, 1])
    else:
        h = h_err = np.full(track.n_points, np.nan)
        speed = np.ones(track.n_points)
    notes = []
    turns = abs(polar.polar_angle[-1] - polar.polar_angle[0]) / (2 * math.pi)
    if turns > 0.5 and track.n_points / turns < MIN_POINTS_PER_TURN:
        notes.append(f"only {track.n_points / turns:.0f} samples per revolution; at least "
                     f"{MIN_POINTS_PER_TURN} resolve the curvature well.")
    for note in notes:
        warnings.warn(f"{track.label}: {note}", ForcefitWarning, stacklevel=3)
    return PathGeometry(
        track=track, parameter=curve.parameter, position=curve.value, velocity=velocity,
        acceleration=curve.second, speed=speed,
        tangent_angle=np.unwrap(np.arctan2(velocity[:, 1], velocity[:, 0])),
        curvature=kappa, curvature_stderr=kappa_err, centre=centre, centre_stderr=centre_stderr,
        radius=polar.radius, radius_stderr=polar.radius_stderr, polar_angle=polar.polar_angle,
        gamma=polar.gamma, gamma_stderr=polar.gamma_stderr,
        angular_momentum=h, angular_momentum_stderr=h_err, smoothing=curve, warnings=tuple(notes),
    )


def force_relation(
    path: PathGeometry, centre: tuple[float, float], used: np.ndarray | None = None
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """ln r, ln F (ln F/h**2 for a shape-only track) and its standard error at the ``used``
    samples (default: those that bend significantly towards the centre), about ``centre``.

    F/h**2 = kappa / (r**2 cos(gamma)**3). With timestamps each point's own h = (r x v)
    enters: F = h**2 kappa / (r**2 cos**3 gamma) holds for the central part of the force even
    when a drag along the motion makes h change, because such a force has no component across
    the path.

    References
    ----------
    I. Newton (1687), Principia, Book I, Prop. VI, Cor. 3-5, and Prop. VII, Cor. 3.
    """
    curve = path.smoothing
    if used is None:
        used = attractive_points(curve, path.curvature, path.curvature_stderr)
    points = curvature_relation(curve, path.curvature, path.curvature_stderr, np.asarray(centre), used)
    y, variance = points.log_force_per_h2, points.sigma**2
    if path.track.has_times:
        offset = curve.value[used] - np.asarray(centre)
        velocity = curve.first[used]
        h = np.abs(offset[:, 0] * velocity[:, 1] - offset[:, 1] * velocity[:, 0])
        h_var = (offset[:, 0] ** 2 * curve.first_var[used, 1]
                 + offset[:, 1] ** 2 * curve.first_var[used, 0]
                 + velocity[:, 1] ** 2 * curve.value_var[used, 0]
                 + velocity[:, 0] ** 2 * curve.value_var[used, 1])
        y = y + 2.0 * np.log(h)
        variance = variance + 4.0 * h_var / h**2
    return points.log_radius, y, np.sqrt(variance)
