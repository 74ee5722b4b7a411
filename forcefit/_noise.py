"""The noise of sampled positions, read from differences of the samples themselves.

One estimate for every part of forcefit that needs the noise before (or without) a fit:
`inspect`'s summary and the loaders (on the reading floor), the orbit fit's weights and
start, the smoothing's error bars (through `forcefit.geometry.noise`).

A 4th difference of the samples annihilates any cubic, so on a smooth, densely sampled
path it is noise alone; normalised by the root sum of squares of its binomial weights it
has the standard deviation of independent noise. Taken between samples ``lag`` apart it
sees the path's 4th derivative ``lag**4`` times more strongly, and noise correlated from
one sample to the next differently: independent noise gives the same spread at every
lag, a smooth path a spread growing as lag**4, noise correlated over a few samples one
that grows by up to a factor 2 (in variance) from lag 1 to lag 2.

References
----------
T. Gasser, L. Sroka & C. Jennen-Steinmetz (1986), Residual variance and residual pattern
in nonlinear regression, Biometrika 73, 625-633 (noise variance from differences of the
samples).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ._types import FloatArray

DIFFERENCE_ORDER = 4
"""Order of the differences that estimate the noise."""

RESOLVED_RATIO = 4.0
"""Variance ratio of lag-2 to lag-1 differences above which the path, not the noise,
dominates the differences (a smooth path gives 256, independent noise 1, correlated
noise at most 2)."""

CORRELATION_SPREAD = 3.2
"""Standard deviation of that ratio for independent noise, times sqrt(n_points)
(measured by simulation: 3.0-3.6 for 60-10 000 samples)."""


def _differences(values: FloatArray, lag: int, parameter: FloatArray | None = None) -> FloatArray:
    """Normalised 4th differences ``lag`` apart (empty when the samples are too few).

    With ``parameter`` (the samples' times or arc length, unevenly spaced), they are divided
    differences: the weights c_j = 1 / prod_(k != j) (s_j - s_k) annihilate any cubic in s
    whatever the spacing, and reduce to the binomial ones when it is even.
    """
    k = DIFFERENCE_ORDER
    values = np.asarray(values, dtype=float)
    size = values.size - k * lag
    if size < 2:
        return np.zeros(0)
    columns = np.stack([values[j * lag: j * lag + size] for j in range(k + 1)])
    if parameter is None:
        weights = np.array([(-1) ** j * math.comb(k, j) for j in range(k + 1)], dtype=float)
        return (weights @ columns) / math.sqrt(float(math.comb(2 * k, k)))
    where = np.asarray(parameter, dtype=float)
    nodes = np.stack([where[j * lag: j * lag + size] for j in range(k + 1)])
    nodes = (nodes - nodes[0]) / np.maximum(np.abs(nodes[-1] - nodes[0]), 1e-300)   # on [0, 1]
    weights = np.ones_like(nodes)
    with np.errstate(divide="ignore", invalid="ignore"):
        for j in range(k + 1):
            for m in range(k + 1):
                if m != j:
                    weights[j] = weights[j] / (nodes[j] - nodes[m])
        out = np.sum(weights * columns, axis=0) / np.sqrt(np.sum(weights**2, axis=0))
    return out[np.isfinite(out)]


def _robust_sd(differences: FloatArray) -> float:
    """1.4826 times the median absolute value; nan when empty."""
    return 1.4826 * float(np.median(np.abs(differences))) if differences.size else math.nan


def _spread(values: FloatArray, lag: int, parameter: FloatArray | None = None) -> float:
    """Robust standard deviation of normalised 4th differences ``lag`` apart."""
    return _robust_sd(_differences(values, lag, parameter))


def normal_noise(x: FloatArray, y: FloatArray, normal: FloatArray, parameter: FloatArray, *,
                 lag: int = 1) -> float:
    """Noise per coordinate (L) from the component across the path of divided 4th
    differences in ``parameter``.

    For a track without times the parameter is an arc length read from the samples
    themselves, which follows their noise along the path where they crowd together; the
    component across the path (``normal``: unit normals at the samples, shape (n, 2)) is
    untouched by that, and for noise alike in every direction has the same spread.
    """
    k = DIFFERENCE_ORDER
    dx, dy = (_differences(values, lag, parameter) for values in (x, y))
    if dx.size != dy.size:
        return math.nan
    middle = np.asarray(normal, dtype=float)[k * lag // 2: k * lag // 2 + np.size(x) - k * lag]
    if middle.shape[0] != dx.size:      # non-finite differences were dropped: no alignment
        return math.nan
    return _robust_sd(dx * middle[:, 0] + dy * middle[:, 1])


def position_noise(x: FloatArray, y: FloatArray, *, lag: int = 1,
                   parameter: FloatArray | None = None) -> float:
    """Noise per coordinate (L) from normalised 4th differences of the samples.

    ``parameter`` (times, or arc length) makes them divided differences in it, for
    samples unevenly spaced; without it the samples are taken as evenly spaced.

    The median absolute value keeps glitches from inflating it; the two coordinates'
    values are combined in quadrature (a coordinate that happens to be noise-free does
    not hide the other's noise). On a noise-free or sparsely sampled path the value is an
    upper bound set by the path's own 4th derivative. 0 for fewer than 7 samples.

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> t = np.linspace(0.0, 20.0, 4001)
    >>> round(position_noise(np.cos(t) + 0.01 * rng.standard_normal(t.size),
    ...                      np.sin(t) + 0.01 * rng.standard_normal(t.size)), 4)
    0.01
    """
    spreads = [_spread(values, lag, parameter) for values in (x, y)]
    if not all(math.isfinite(value) for value in spreads):
        return 0.0
    return math.sqrt(0.5 * (spreads[0] ** 2 + spreads[1] ** 2))


@dataclass(frozen=True)
class NoiseEstimate:
    """The noise of a track's positions as its samples show it.

    Attributes
    ----------
    sd : float
        Noise per coordinate (L): `position_noise`.
    resolved : bool
        False when the samples are too sparse for their differences to see the noise
        (``sd`` is then only an upper bound, set by the path itself).
    lag_ratio : float
        Variance of the lag-2 differences over that of the lag-1 ones (1 for independent
        noise).
    correlated : bool
        True when that ratio shows noise correlated from one sample to the next beyond
        chance (three standard deviations of the ratio for independent noise).
    """

    sd: float
    resolved: bool
    lag_ratio: float
    correlated: bool

    def describe(self, unit: str) -> str:
        """One sentence: the noise, how it was found, and what it may hide."""
        if not self.resolved:
            return (f"at most {self.sd:.3g} {unit} (the samples are too far apart for their "
                    "differences to separate the noise from the path)")
        text = f"{self.sd:.3g} {unit} (from 4th differences of the samples)"
        if self.correlated:
            text += (f"; it is correlated from one sample to the next (lag ratio "
                     f"{self.lag_ratio:.2f}, 1 for independent noise)")
        return text


def estimate_noise(x: FloatArray, y: FloatArray, *, parameter: FloatArray | None = None,
                   normal: FloatArray | None = None) -> NoiseEstimate:
    """The noise per coordinate, whether the samples resolve it and whether it is correlated.

    ``parameter``: the samples' times or arc length, when their spacing is uneven; with
    ``normal`` too (unit normals, shape (n, 2)), only the differences' component across
    the path counts (`normal_noise`).

    Examples
    --------
    >>> rng = np.random.default_rng(2)
    >>> t = np.linspace(0.0, 20.0, 4001)
    >>> noise = estimate_noise(np.cos(t) + 0.01 * rng.standard_normal(t.size),
    ...                        np.sin(t) + 0.01 * rng.standard_normal(t.size))
    >>> round(noise.sd, 4), noise.resolved, noise.correlated
    (0.01, True, False)
    """
    sd = wider = math.nan
    if normal is not None and parameter is not None:
        sd, wider = (normal_noise(x, y, normal, parameter, lag=lag) for lag in (1, 2))
    if not (math.isfinite(sd) and math.isfinite(wider)):
        sd = position_noise(x, y, parameter=parameter)
        wider = position_noise(x, y, lag=2, parameter=parameter)
    ratio = (wider / sd) ** 2 if sd > 0 else math.inf
    resolved = bool(sd > 0 and ratio < RESOLVED_RATIO)
    threshold = 1.0 + max(0.15, 3.0 * CORRELATION_SPREAD / math.sqrt(max(np.size(x), 1)))
    return NoiseEstimate(sd=sd, resolved=resolved, lag_ratio=float(ratio),
                         correlated=bool(resolved and ratio > threshold))
