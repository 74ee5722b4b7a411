"""The Kasner-Arnold duality between power laws: w = z**alpha turns orbits into orbits.

An orbit of F = -k r**a r_hat (energy E, angular momentum h), mapped by the complex power
w = z**alpha with alpha = (a + 3)/2 about the centre, and re-timed by
d(tau) = alpha |z|**(2 alpha - 2) dt, is an orbit of F' = -k' |w|**A w_hat with
(a + 3)(A + 3) = 4. Energy and force constant swap roles: k' = -E (A + 1) and
E' = -k / (a + 1); h' = h. Hooke's centred ellipse (a = 1) becomes Kepler's ellipse about a
focus (A = -2); the inverse fifth power (a = -5) is its own dual under w = 1/z.

References
----------
E. Kasner (1913), Differential-geometric aspects of dynamics, AMS Colloquium Publications 3;
V. I. Arnold (1990), Huygens and Barrow, Newton and Hooke, Birkhauser, Appendix 1;
T. Needham (1993), Newton and the transmutation of force, Amer. Math. Monthly 100, 119;
D. Hall and K. Josic (2000), Planetary motion and the duality of force laws, SIAM Review 42, 115.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from scipy.integrate import cumulative_simpson

from ..errors import InputError
from ..track import Track
from .laws import potential


def map_power(exponent: float) -> float:
    """alpha = (a + 3) / 2, the power of the map w = z**alpha for the law with exponent a.

    Examples
    --------
    >>> map_power(1.0), map_power(-5.0)
    (2.0, -1.0)
    """
    alpha = (exponent + 3.0) / 2.0
    if abs(alpha) < 1e-12:
        raise InputError("the exponent -3 has no dual: the map w = z**0 collapses the plane.")
    return alpha


def dual_exponent(exponent: float) -> float:
    """The exponent A of the dual law, (a + 3)(A + 3) = 4.

    Examples
    --------
    >>> dual_exponent(1.0), dual_exponent(-5.0), round(dual_exponent(0.5), 9)
    (-2.0, -5.0, -1.857142857)
    """
    return 4.0 / (exponent + 3.0) - 3.0


def dual_strength(exponent: float, energy: float) -> float:
    """k' = -E (A + 1): the dual force constant from the original orbit's energy per unit mass."""
    return -energy * (dual_exponent(exponent) + 1.0)


def dual_energy(exponent: float, strength: float) -> float:
    """E' = -k / (a + 1): the dual orbit's energy from the original force constant."""
    if abs(exponent + 1.0) < 1e-12:
        raise InputError("for a = -1 the map is the identity (alpha = 1); there is no separate dual.")
    return -strength / (exponent + 1.0)


def specific_energy_at(position: Sequence[float], velocity: Sequence[float], exponent: float,
                       strength: float) -> float:
    """E = v**2/2 + V(r) of a state relative to the centre (per unit mass)."""
    r = math.hypot(*position)
    return 0.5 * (velocity[0] ** 2 + velocity[1] ** 2) + float(potential(r, exponent, strength))


def dual_track(track: Track, exponent: float, centre: Sequence[float] = (0.0, 0.0)) -> Track:
    """Map a track by w = z**alpha about ``centre`` (continuous branch), re-timing it.

    Parameters
    ----------
    track : Track
        Positions (L) and, when known, times (T) of an orbit of F = -k r**a.
    exponent : float
        a, the exponent of the law the track follows.
    centre : (float, float)
        The force centre (L); z is measured from it.

    Returns
    -------
    Track
        The dual path w = L0 (z / L0)**alpha, with the reference length L0 one unit of the
        track's length (so positions stay in the track's length unit, the centre at the
        origin) and, for a timestamped track, the new time
        tau = integral of alpha (|z| / L0)**(2 alpha - 2) dt (cumulative Simpson rule), in
        the track's time unit. Its metadata
        record alpha and the predicted dual exponent. A shape-only track keeps its sigma,
        mapped by |dw/dz|; a re-timed one drops it (noise in z also perturbs the new times)
        so that a fit estimates the noise.

    Examples
    --------
    >>> t = np.linspace(0.0, 2 * np.pi, 400)           # Hooke ellipse, a = 1
    >>> dual = dual_track(Track(t=t, x=2 * np.cos(t), y=np.sin(t)), 1.0)
    >>> dual.metadata["dual_exponent"], round(float(np.hypot(dual.x, dual.y).max()), 9)
    (-2.0, 4.0)
    """
    alpha = map_power(exponent)
    dx, dy = track.x - centre[0], track.y - centre[1]
    radius = np.hypot(dx, dy)
    if np.any(radius == 0.0):
        raise InputError(f"{track.label} passes through the centre, where w = z**alpha is "
                         "singular; give the right centre.")
    theta = np.unwrap(np.arctan2(dy, dx))
    modulus = radius**alpha
    x, y = modulus * np.cos(alpha * theta), modulus * np.sin(alpha * theta)
    # sigma maps with |dw/dz|; but noise in z also perturbs the new times, an error the
    # positions' sigma cannot carry, so a re-timed track leaves its noise to be fitted.
    sigma = None if track.sigma is None or track.t is not None else (
        track.sigma * abs(alpha) * radius ** (alpha - 1.0))
    tau = None
    if track.t is not None:
        rate = alpha * radius ** (2.0 * alpha - 2.0)
        tau = cumulative_simpson(rate, x=np.asarray(track.t), initial=0.0) + float(track.t[0])
        if alpha < 0:
            raise InputError("re-timing with a negative map power runs time backwards; map the "
                             "shape only (drop the times) for a < -3.")
    return Track(
        t=tau, x=x, y=y, sigma=sigma, length_unit=track.length_unit, time_unit=track.time_unit,
        name=f"{track.name} (dual, w = z^{alpha:g})",
        metadata={"dual_of": track.name, "map_power": alpha, "exponent": exponent,
                  "dual_exponent": dual_exponent(exponent), "centre": [float(c) for c in centre],
                  "units_note": f"w = L0 (z/L0)^{alpha:g} and tau from d(tau)/dt = "
                                f"{alpha:g} (|z|/L0)^{2 * alpha - 2:g}, with L0 = 1 "
                                f"{track.length_unit}: positions in {track.length_unit}, times in "
                                f"{track.time_unit}"},
    )
