"""The noise level of a track's positions, read from the samples themselves.

One estimate for every part of forcefit that needs the noise before (or without) a fit:
the orbit fit's weights and start, `inspect`'s summary, the smoothing's error bars. The
arithmetic lives on the lowest floor (`forcefit._noise`) so that the reading floor's
`inspect` uses the very same numbers.

References
----------
T. Gasser, L. Sroka & C. Jennen-Steinmetz (1986), Biometrika 73, 625 (noise variance
from differences of the samples).
"""

from __future__ import annotations

from .._noise import NoiseEstimate, estimate_noise, position_noise
from .._types import FloatArray
from ..track import Track


def difference_noise(track: Track) -> float:
    """Noise per coordinate (L) from the spread of normalised 4th differences of the samples.

    A 4th difference annihilates any cubic, so on a smooth, densely sampled path it is
    noise alone; normalised by the root sum of squares of its binomial weights it has
    the standard deviation of the noise. The median absolute value (times 1.4826) keeps
    glitches from inflating it; the two coordinates' values are combined in quadrature (a
    coordinate that happens to be noise-free does not hide the other's noise). On a
    noise-free or sparsely sampled path the value is an upper bound set by the path's own
    4th derivative.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(1)
    >>> t = np.linspace(0.0, 20.0, 4001)
    >>> track = Track(t=t, x=np.cos(t) + 0.01 * rng.standard_normal(t.size),
    ...               y=np.sin(t) + 0.01 * rng.standard_normal(t.size))
    >>> round(difference_noise(track), 3)
    0.01
    """
    return position_noise(track.x, track.y, parameter=track.t)


def track_noise(track: Track, *, arc_length: FloatArray | None = None,
                normal: FloatArray | None = None) -> NoiseEstimate:
    """`difference_noise`, with whether the samples resolve it and whether it is correlated.

    Parameters
    ----------
    track : Track
        The samples; with times, the differences are divided differences in time.
    arc_length : ndarray, shape (n_points,), optional
        For a track without times, the arc length (L) at each sample (from a smoothing):
        the differences are then divided differences in it, which keeps samples spaced
        unevenly along the path from passing their spacing off as noise.
    normal : ndarray, shape (n_points, 2), optional
        With ``arc_length``: unit normals to the path; only the differences' component
        across the path counts (the arc length, read from the samples, follows their
        noise along it).
    """
    if track.t is not None:
        return estimate_noise(track.x, track.y, parameter=track.t)
    return estimate_noise(track.x, track.y, parameter=arc_length,
                          normal=normal if arc_length is not None else None)
