"""The power-law central force and its invariants.

Convention throughout forcefit: the force per unit mass is F(r) = -k r**n r_hat,
attractive for k > 0; n is the exponent (Hooke n = 1, Newton n = -2) and the
strength k has the unit length**(1 - n) time**-2.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike

from .._types import FloatArray
from ..units import time_factor

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

def lab_rotation_rate(latitude: float, time_unit: str = "s") -> float:
    """Rotation rate of a laboratory frame seen from above, Omega_E sin(latitude), counter-clockwise
    in the northern hemisphere, in rad per ``time_unit``.

    A camera fixed to the building turns with the Earth about the local vertical at this rate
    (Foucault's pendulum; common practice).

    Examples
    --------
    >>> round(lab_rotation_rate(90.0) / EARTH_ROTATION_RATE, 12), round(lab_rotation_rate(30.0, "h"), 6)
    (1.0, 0.131258)
    """
    return EARTH_ROTATION_RATE * math.sin(math.radians(latitude)) * time_factor(time_unit, "s")


def apsidal_angle_circular(exponent: ArrayLike) -> FloatArray:
    """Apsidal angle of a near-circular orbit in F proportional to r**n: pi / sqrt(n + 3).

    The angle (rad) swept between a pericentre and the next apocentre, in the limit of
    small eccentricity; only n > -3 has stable circular orbits.

    References
    ----------
    H. Goldstein, C. Poole and J. Safko (2002), Classical Mechanics, 3rd ed., section 3.6;
    J. Bertrand (1873), C. R. Acad. Sci. 77, 849.

    Examples
    --------
    >>> round(float(apsidal_angle_circular(-2.0)), 12), round(float(apsidal_angle_circular(1.0)), 12)
    (3.14159265359, 1.570796326795)
    """
    return np.pi / np.sqrt(np.asarray(exponent, dtype=np.float64) + 3.0)


_GAUSS_NODES, _GAUSS_WEIGHTS = np.polynomial.legendre.leggauss(96)


def _potential_step(step: FloatArray, reference: float, exponent: float) -> FloatArray:
    """V(1/u) - V(1/reference) for k = 1 and u = reference + step, accurate for small steps."""
    log_ratio = np.log1p(step / reference)
    if abs(exponent + 1.0) < _LOG_CASE:
        return -log_ratio
    power = -(exponent + 1.0)
    return reference**power * np.expm1(power * log_ratio) / (exponent + 1.0)


def apsidal_angle(exponent: float, radius_ratio: float) -> float:
    """Exact apsidal angle (rad) of an orbit in F = -k r**n between r_min and r_max.

    psi = integral from u2 to u1 of du / sqrt(f(u)), f = 2 (E - V(1/u)) / h**2 - u**2,
    u = 1/r, with E and h fixed by the two turning points u1 = 1/r_min, u2 = 1/r_max.
    Independent of k and of the scale (a power law has no length of its own), so only n
    and r_max / r_min enter. With u = (u1 + u2)/2 + (u1 - u2)/2 cos(chi),
    psi = integral over chi in [0, pi] of d(chi) / sqrt(f / ((u1 - u)(u - u2))), whose
    integrand is smooth; f is evaluated from the nearer turning point with expm1 and log1p,
    and u1 - u, u - u2 from sin**2 and cos**2 of chi/2, so no difference of nearly equal
    numbers is ever taken. 96-point Gauss-Legendre quadrature then gives about 1e-15, enough
    for exponents within 1e-9 of a closed law (Mercury's perihelion).

    Parameters
    ----------
    exponent : float
        n (> -3 for bound orbits of every eccentricity to exist).
    radius_ratio : float
        r_max / r_min >= 1; at 1 the near-circular limit pi / sqrt(n + 3) is returned.

    Examples
    --------
    >>> round(apsidal_angle(-2.0, 3.0), 12), round(apsidal_angle(1.0, 5.0), 12)   # closed orbits
    (3.14159265359, 1.570796326795)
    """
    if radius_ratio < 1.0:
        raise ValueError("radius_ratio is r_max / r_min and must be at least 1.")
    if radius_ratio - 1.0 < 1e-9:
        return float(apsidal_angle_circular(exponent))
    u1, u2 = 1.0, 1.0 / radius_ratio                      # r_min = 1, r_max = ratio
    width = u1 - u2
    h2 = 2.0 * float(_potential_step(np.array([-width]), u1, exponent)[0]) / (width * (u1 + u2))
    chi = 0.5 * np.pi * (_GAUSS_NODES + 1.0)
    below_u1 = width * np.sin(0.5 * chi) ** 2              # u1 - u
    above_u2 = width * np.cos(0.5 * chi) ** 2              # u - u2
    u = u1 - below_u1
    near_u1 = chi < 0.5 * np.pi
    ratio = np.empty_like(chi)
    a, b = below_u1[near_u1], above_u2[near_u1]
    ratio[near_u1] = (-(2.0 / h2) * _potential_step(-a, u1, exponent) / a + (u[near_u1] + u1)) / b
    a, b = below_u1[~near_u1], above_u2[~near_u1]
    ratio[~near_u1] = (-(2.0 / h2) * _potential_step(b, u2, exponent) / b - (u[~near_u1] + u2)) / a
    return float(0.5 * np.pi * np.sum(_GAUSS_WEIGHTS / np.sqrt(ratio)))


def exponent_from_apsidal_angle(angle: float, radius_ratio: float) -> float:
    """The exponent n whose orbit with this r_max / r_min has the apsidal angle ``angle`` (rad).

    Inverts `apsidal_angle` by Brent's method on n in (-3, 30); the angle falls as n grows.

    Examples
    --------
    >>> round(exponent_from_apsidal_angle(np.pi / 2, 4.0), 9)
    1.0
    """
    from scipy.optimize import brentq

    def mismatch(n: float) -> float:
        with np.errstate(divide="ignore", invalid="ignore"):
            value = apsidal_angle(n, radius_ratio) - angle
        return value if math.isfinite(value) else 1e3          # no such orbit: angle unbounded

    low, high = -3.0 + 1e-6, 30.0
    if mismatch(low) * mismatch(high) > 0:
        raise ValueError(f"no power law with -3 < n < 30 has apsidal angle {angle:.6g} rad at "
                         f"r_max / r_min = {radius_ratio:.6g}.")
    return float(brentq(mismatch, low, high, xtol=1e-14, rtol=1e-15, maxiter=200))


def precession_per_orbit(exponent: float, eccentricity: float) -> float:
    """Advance of the pericentre per radial period (rad) of a near-inverse-square orbit.

    2 psi - 2 pi with psi the exact apsidal angle at r_max / r_min = (1 + e) / (1 - e).
    For F proportional to r**-(2 + delta) this is about 2 pi delta / (1 + sqrt(1 - e**2)).

    Examples
    --------
    >>> round(precession_per_orbit(-2.0, 0.3), 12)
    0.0
    """
    ratio = (1.0 + eccentricity) / (1.0 - eccentricity)
    return 2.0 * apsidal_angle(exponent, ratio) - 2.0 * np.pi


def exponent_from_precession(precession: float, eccentricity: float) -> float:
    """The exponent whose orbit of this eccentricity advances by ``precession`` rad per orbit."""
    ratio = (1.0 + eccentricity) / (1.0 - eccentricity)
    return exponent_from_apsidal_angle(np.pi + 0.5 * precession, ratio)


def pendulum_precession_rate(semi_major: float, semi_minor: float, length: float,
                             gravity: float) -> float:
    """Finite-amplitude (Airy) precession rate of a spherical pendulum's ellipse, rad/s.

    Omega = (3/8) a b omega / L**2 with omega = sqrt(g / L), in the sense of the motion.

    References
    ----------
    G. B. Airy (1851); M. G. Olsson (1981), Am. J. Phys. 49, 531.

    Examples
    --------
    >>> round(pendulum_precession_rate(0.5, 0.25, 7.5, 9.81), 9)
    0.000953065
    """
    return 0.375 * semi_major * semi_minor * math.sqrt(gravity / length) / length**2
