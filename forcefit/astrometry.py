"""`Astrometry`: positions of a body projected on the sky (or on any image plane), with their
error ellipses and, when measured, the line-of-sight velocities.

A projected orbit is read from relative positions at epochs. On the sky these are the
separation rho and position angle theta (counted from north through east, the IAU
convention) or the offsets Delta dec and Delta RA cos dec of the body from a reference (the
primary star, or a fixed point). forcefit keeps them as a `Track` whose x is north and y east:

    x = rho cos theta = Delta dec,      y = rho sin theta = Delta RA cos dec,

so that angles counted from x towards y are position angles and counter-clockwise motion in
(x, y) is an increasing position angle. (A plot with east to the left, as the sky is seen,
shows x up and y to the left.) Any other image plane works the same way with its own x and y.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from types import MappingProxyType
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from ._types import FloatArray, frozen_array
from .errors import InputError
from .track import Track


def polar_covariance(separation: ArrayLike, angle: ArrayLike, separation_error: ArrayLike,
                     angle_error: ArrayLike) -> FloatArray:
    """Covariance of (x, y) = rho (cos theta, sin theta) from the errors of rho and theta.

    First-order propagation (common practice): the error of rho lies along the radius and
    rho sigma_theta across it.

    Parameters
    ----------
    separation, angle : array_like, shape (n,)
        rho (L) and theta (rad).
    separation_error, angle_error : array_like, shape (n,)
        sigma_rho (L) and sigma_theta (rad).

    Returns
    -------
    ndarray, shape (n, 2, 2)
        In L**2.

    Examples
    --------
    >>> polar_covariance([2.0], [0.0], [0.1], [0.01])[0]
    array([[0.01  , 0.    ],
           [0.    , 0.0004]])
    """
    rho, theta = np.asarray(separation, dtype=float), np.asarray(angle, dtype=float)
    radial = np.stack((np.cos(theta), np.sin(theta)), axis=-1)
    across = np.stack((-np.sin(theta), np.cos(theta)), axis=-1)
    along = np.asarray(separation_error, dtype=float) ** 2
    side = (rho * np.asarray(angle_error, dtype=float)) ** 2
    return (along[:, None, None] * radial[:, :, None] * radial[:, None, :]
            + side[:, None, None] * across[:, :, None] * across[:, None, :])


def offset_covariance(x_error: ArrayLike, y_error: ArrayLike, correlation: ArrayLike = 0.0) -> FloatArray:
    """Covariance (n, 2, 2) of offsets from their standard errors and correlation coefficient."""
    sx, sy = np.asarray(x_error, dtype=float), np.asarray(y_error, dtype=float)
    rho = np.broadcast_to(np.asarray(correlation, dtype=float), sx.shape)
    return np.stack((np.stack((sx * sx, rho * sx * sy), axis=-1),
                     np.stack((rho * sx * sy, sy * sy), axis=-1)), axis=-2)


@dataclass(frozen=True, eq=False, kw_only=True)
class RadialVelocities:
    """Line-of-sight velocities of the body relative to the force centre, positive receding.

    Parameters
    ----------
    t : array_like, shape (n,)
        Increasing epochs, in the positions' time unit.
    velocity, sigma : array_like, shape (n,)
        The velocities and their standard errors, in ``unit``.
    unit : str
        A velocity unit such as ``"km/s"``.
    """

    t: FloatArray
    velocity: FloatArray
    sigma: FloatArray
    unit: str = "km/s"

    def __post_init__(self) -> None:
        t, velocity = frozen_array(self.t), frozen_array(self.velocity)
        sigma = frozen_array(np.broadcast_to(np.asarray(self.sigma, dtype=float), velocity.shape))
        if not (t.ndim == velocity.ndim == 1 and t.size == velocity.size):
            raise InputError(f"radial velocities: {t.size} epochs but {velocity.size} velocities; "
                             "give one epoch per velocity.")
        for name, values in (("epoch", t), ("velocity", velocity), ("sigma", sigma)):
            if not np.all(np.isfinite(values)):
                index = int(np.argmax(~np.isfinite(values)))
                raise InputError(f"radial velocities: {name} {index} is {values[index]!r}, expected a "
                                 "finite number. Correct it or remove the measurement.")
        if (sigma <= 0).any():
            index = int(np.argmax(sigma <= 0))
            raise InputError(f"radial velocities: sigma {index} is {sigma[index]!r}, expected a positive "
                             "standard error. The fit weighs the velocities by their errors: give them.")
        if (np.diff(t) <= 0).any():
            raise InputError("radial velocities: the epochs must increase; sort them and merge "
                             "repeated epochs.")
        object.__setattr__(self, "t", t)
        object.__setattr__(self, "velocity", velocity)
        object.__setattr__(self, "sigma", sigma)

    @property
    def n_points(self) -> int:
        """Number of velocities."""
        return int(self.velocity.size)


@dataclass(frozen=True, eq=False, kw_only=True)
class Astrometry:
    """Projected positions of one body with their error ellipses and optional radial velocities.

    Parameters
    ----------
    track : Track
        The positions: x north, y east on the sky (see the module's note), with times; its
        sigma, when given, is an isotropic error per coordinate.
    covariance : array_like, shape (n_points, 2, 2), optional
        Each position's error covariance (L**2), e.g. from `polar_covariance`; overrides the
        track's sigma. None: the track's sigma, or unknown.
    velocities : RadialVelocities, optional
        Line-of-sight velocities: they tell the ascending node from the descending one and
        give the distance when the positions are angles.
    relative : bool
        True when the positions are offsets from the body the force pulls towards (a
        companion measured from its primary): the centre is then the origin.
    metadata : mapping
        Anything worth keeping (the file, its columns, the epoch convention).

    Examples
    --------
    >>> t = np.linspace(2000.0, 2010.0, 30)
    >>> data = Astrometry.from_polar(t=t, separation=np.full(30, 1.2), position_angle=np.linspace(10, 80, 30),
    ...                              separation_error=0.01, angle_error=0.5, length_unit="arcsec")
    >>> round(float(data.separation[0]), 6), round(float(data.position_angle[0]), 6)
    (1.2, 10.0)
    """

    track: Track
    covariance: FloatArray | None = None
    velocities: RadialVelocities | None = None
    relative: bool = True
    metadata: Any = field(default_factory=dict)

    def __post_init__(self) -> None:
        if self.track.t is None:
            raise InputError(f"{self.track.label}: projected positions need their epochs; give a time "
                             "column (Julian or Besselian years, or Julian dates).")
        if self.covariance is not None:
            covariance = frozen_array(self.covariance)
            n = self.track.n_points
            if covariance.shape != (n, 2, 2):
                raise InputError(f"{self.track.label}: the error covariance has shape {covariance.shape}, "
                                 f"expected ({n}, 2, 2): one 2 x 2 matrix per position.")
            determinant = covariance[:, 0, 0] * covariance[:, 1, 1] - covariance[:, 0, 1] ** 2
            bad = ~np.isfinite(determinant) | (determinant <= 0) | (covariance[:, 0, 0] <= 0)
            if bad.any():
                index = int(np.argmax(bad))
                raise InputError(f"{self.track.label}: the errors of position {index} do not form a "
                                 "positive error ellipse; give positive standard errors (and a "
                                 "correlation between -1 and 1).")
            object.__setattr__(self, "covariance", covariance)
        object.__setattr__(self, "metadata", MappingProxyType(dict(self.metadata)))

    @classmethod
    def from_polar(cls, *, t: ArrayLike, separation: ArrayLike, position_angle: ArrayLike,
                   separation_error: ArrayLike | None = None, angle_error: ArrayLike | None = None,
                   length_unit: str = "arcsec", time_unit: str = "yr", name: str = "track",
                   velocities: RadialVelocities | None = None, metadata: Any = None) -> Astrometry:
        """Astrometry from separations (L) and position angles (deg, north through east), with
        optional errors sigma_rho (L) and sigma_theta (deg), given together."""
        rho = np.asarray(separation, dtype=float)
        theta = np.radians(np.asarray(position_angle, dtype=float))
        if (separation_error is None) != (angle_error is None):
            raise InputError("give the errors of both the separation and the position angle, or neither.")
        track = Track(t=np.asarray(t, dtype=float), x=rho * np.cos(theta), y=rho * np.sin(theta),
                      length_unit=length_unit,
                      time_unit=time_unit, name=name)
        covariance = None
        if separation_error is not None and angle_error is not None:
            shape = rho.shape
            covariance = polar_covariance(rho, theta, np.broadcast_to(separation_error, shape),
                                          np.radians(np.broadcast_to(angle_error, shape)))
        return cls(track=track, covariance=covariance, velocities=velocities, relative=True,
                   metadata=metadata or {})

    @property
    def separation(self) -> FloatArray:
        """rho = |(x, y)| (L)."""
        return np.hypot(self.track.x, self.track.y)

    @property
    def position_angle(self) -> FloatArray:
        """theta in degrees from north (x) through east (y), in [0, 360)."""
        return np.degrees(np.arctan2(self.track.y, self.track.x)) % 360.0

    @property
    def errors_known(self) -> bool:
        """Whether every position comes with its error."""
        return self.covariance is not None or self.track.sigma is not None

    def position_covariance(self) -> FloatArray | None:
        """Each position's error covariance (n, 2, 2) in L**2, or None when unknown."""
        if self.covariance is not None:
            return np.array(self.covariance)
        if self.track.sigma is not None:
            variance = np.asarray(self.track.sigma, dtype=float) ** 2
            return variance[:, None, None] * np.eye(2)[None]
        return None

    def typical_error(self) -> FloatArray | None:
        """An isotropic error per position (L): the root mean square of its ellipse's axes."""
        covariance = self.position_covariance()
        if covariance is None:
            return None
        return np.sqrt(0.5 * (covariance[:, 0, 0] + covariance[:, 1, 1]))

    def with_track(self, track: Track) -> Astrometry:
        """The same data with another track of the same samples (a new name, say)."""
        return replace(self, track=track)


def as_astrometry(data: Track | Astrometry) -> Astrometry:
    """An `Astrometry` of a track (isotropic sigma, no velocities, the centre not assumed at
    the origin), or the astrometry itself."""
    if isinstance(data, Astrometry):
        return data
    if not isinstance(data, Track):
        raise InputError(f"expected a Track or Astrometry, got {type(data).__name__}.")
    return Astrometry(track=data, relative=False)

