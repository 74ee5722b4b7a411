"""The noise level of a track's positions, read from the samples themselves.

One estimate for every part of forcefit that needs the noise before (or without) a fit:
the orbit fit's weights and start, `inspect`'s summary, the smoothing's first guess.

References
----------
T. Gasser, L. Sroka & C. Jennen-Steinmetz (1986), Biometrika 73, 625 (noise variance
from differences of the samples).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import comb

from ..track import Track

DIFFERENCE_ORDER = 4
"""Order of the differences that estimate the noise."""


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
    >>> rng = np.random.default_rng(1)
    >>> t = np.linspace(0.0, 20.0, 4001)
    >>> track = Track(t=t, x=np.cos(t) + 0.01 * rng.standard_normal(t.size),
    ...               y=np.sin(t) + 0.01 * rng.standard_normal(t.size))
    >>> round(difference_noise(track), 3)
    0.01
    """
    k = DIFFERENCE_ORDER
    if track.n_points <= k + 2:
        return 0.0
    weights = np.array([(-1) ** j * comb(k, j) for j in range(k + 1)])
    norm = math.sqrt(float(comb(2 * k, k)))
    spreads = [1.4826 * float(np.median(np.abs(np.convolve(np.asarray(values), weights, mode="valid"))))
               / norm for values in (track.x, track.y)]
    return math.sqrt(0.5 * (spreads[0] ** 2 + spreads[1] ** 2))
