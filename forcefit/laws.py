"""The power-law central force and its invariants.

Convention throughout forcefit: the force per unit mass is F(r) = -k r**n r_hat,
attractive for k > 0; n is the exponent (Hooke n = 1, Newton n = -2) and the
strength k has the unit length**(1 - n) time**-2.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ._types import FloatArray

_LOG_CASE = 1e-12
"""|n + 1| below which the potential is taken as logarithmic."""


def radial_force(r: ArrayLike, exponent: float, strength: float) -> FloatArray:
    """Radial component of the force per unit mass, F_r = -k r**n.

    Parameters
    ----------
    r : array_like
        Distance from the centre, in a length unit L.
    exponent : float
        n, dimensionless.
    strength : float
        k, in L**(1 - n) T**-2.

    Returns
    -------
    ndarray
        F_r in L T**-2; negative means towards the centre.

    Examples
    --------
    >>> float(radial_force(2.0, 1.0, 4.0))    # Hooke: -k r
    -8.0
    """
    return -strength * np.power(np.asarray(r, dtype=np.float64), exponent)


def potential(r: ArrayLike, exponent: float, strength: float) -> FloatArray:
    """Potential energy per unit mass, V with F = -dV/dr.

    V = k r**(n+1) / (n+1) for n != -1 and V = k ln r for n = -1 (r in the track's
    length unit, so the constant of the logarithm is fixed by that unit).

    Returns
    -------
    ndarray
        V in L**2 T**-2.

    Examples
    --------
    >>> float(potential(2.0, -2.0, 1.0)), float(potential(np.e, -1.0, 3.0))
    (-0.5, 3.0)
    """
    r = np.asarray(r, dtype=np.float64)
    if abs(exponent + 1.0) < _LOG_CASE:
        return strength * np.log(r)
    return strength * np.power(r, exponent + 1.0) / (exponent + 1.0)


def specific_energy(
    position: ArrayLike, velocity: ArrayLike, exponent: float, strength: float
) -> FloatArray:
    """Energy per unit mass E = v**2/2 + V(r) at each state.

    Parameters
    ----------
    position, velocity : array_like, shape (..., 2)
        Position relative to the centre (L) and velocity (L T**-1).

    Returns
    -------
    ndarray, shape (...)
        E in L**2 T**-2.

    Examples
    --------
    >>> float(specific_energy([1.0, 0.0], [0.0, 1.0], -2.0, 1.0))  # circular Kepler orbit
    -0.5
    """
    position = np.asarray(position, dtype=np.float64)
    velocity = np.asarray(velocity, dtype=np.float64)
    r = np.hypot(position[..., 0], position[..., 1])
    kinetic = 0.5 * (velocity[..., 0] ** 2 + velocity[..., 1] ** 2)
    return kinetic + potential(r, exponent, strength)


def angular_momentum(position: ArrayLike, velocity: ArrayLike) -> FloatArray:
    """Specific angular momentum h = x v_y - y v_x (positive when counter-clockwise).

    Parameters
    ----------
    position, velocity : array_like, shape (..., 2)
        Position relative to the centre (L) and velocity (L T**-1).

    Returns
    -------
    ndarray, shape (...)
        h in L**2 T**-1.

    Examples
    --------
    >>> float(angular_momentum([2.0, 0.0], [0.0, 3.0]))
    6.0
    """
    position = np.asarray(position, dtype=np.float64)
    velocity = np.asarray(velocity, dtype=np.float64)
    return position[..., 0] * velocity[..., 1] - position[..., 1] * velocity[..., 0]


def circular_speed(r: ArrayLike, exponent: float, strength: float) -> FloatArray:
    """Speed of a circular orbit of radius r: v**2 / r = k r**n, so v = sqrt(k r**(n+1)).

    Examples
    --------
    >>> float(circular_speed(1.0, -2.0, 4.0))
    2.0
    """
    r = np.asarray(r, dtype=np.float64)
    return np.sqrt(strength * np.power(r, exponent + 1.0))


def circular_period(r: ArrayLike, exponent: float, strength: float) -> FloatArray:
    """Period of a circular orbit, T = 2 pi r**((1 - n)/2) / sqrt(k).

    Kepler's third law generalised to F = k r**n (for n = -2, T**2 = 4 pi**2 r**3 / k).

    Examples
    --------
    >>> round(float(circular_period(1.0, 1.0, 4.0)), 12)   # Hooke: 2 pi / omega, omega = 2
    3.14159265359
    """
    r = np.asarray(r, dtype=np.float64)
    return 2.0 * np.pi * np.power(r, (1.0 - exponent) / 2.0) / np.sqrt(strength)


EARTH_ROTATION_RATE = 7.292115e-5
"""Earth's sidereal rotation rate, rad/s (IERS Conventions 2010, Table 1.1)."""

STANDARD_GRAVITY = 9.80665
"""Standard acceleration of gravity g_n, m/s**2 (3rd CGPM, 1901); local g differs."""
