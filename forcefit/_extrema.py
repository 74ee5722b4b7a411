"""Local maxima of a sampled curve that stand out by a given prominence.

Plain numpy: the apsides need nothing more, and scipy's signal package (which loads its
statistics package with it) takes longer to import than the whole measurement on a few
thousand samples.
"""

from __future__ import annotations

import numpy as np

from ._types import FloatArray


def local_maxima(values: FloatArray) -> np.ndarray:
    """Indices of the strict local maxima of ``values``; a flat top counts once, at its middle.

    A maximum needs a lower sample on each side, so the first and last samples (and a flat
    stretch that reaches either end) are never one. A flat top of samples ``i..j`` is reported
    at ``(i + j) // 2``.

    Parameters
    ----------
    values : array of float, shape (n,)

    Returns
    -------
    array of int
        The maxima's indices, ascending.

    Examples
    --------
    >>> local_maxima(np.array([0.0, 2.0, 1.0, 3.0, 3.0, 3.0, 0.0, 4.0]))
    array([1, 4])
    """
    x = np.asarray(values, dtype=float)
    if x.size < 3:
        return np.zeros(0, dtype=np.intp)
    starts = np.flatnonzero(np.concatenate(([True], x[1:] != x[:-1])))   # each run of equal samples
    ends = np.concatenate((starts[1:] - 1, [x.size - 1]))
    level = x[starts]
    top = np.flatnonzero((level[1:-1] > level[:-2]) & (level[1:-1] > level[2:])) + 1
    return (starts[top] + ends[top]) // 2


def prominences(values: FloatArray, peaks: np.ndarray) -> FloatArray:
    """How far each peak stands above the higher of its two bases.

    A peak's base on one side is the lowest sample between it and the first sample beyond it
    that is higher than the peak (or the end of the curve) -- the usual topographic prominence
    (common practice).

    Parameters
    ----------
    values : array of float, shape (n,)
    peaks : array of int
        Indices of local maxima of ``values``.

    Returns
    -------
    array of float
        One prominence per peak, in the unit of ``values``.

    Examples
    --------
    >>> prominences(np.array([0.0, 2.0, 1.0, 3.0, 0.5]), np.array([1, 3]))
    array([1. , 2.5])
    """
    x = np.asarray(values, dtype=float)
    result = np.empty(len(peaks))
    for number, peak in enumerate(np.asarray(peaks, dtype=np.intp)):
        height = x[peak]
        higher_left = np.flatnonzero(x[:peak] > height)
        higher_right = np.flatnonzero(x[peak + 1:] > height)
        left = int(higher_left[-1]) + 1 if higher_left.size else 0
        right = peak + 1 + int(higher_right[0]) if higher_right.size else x.size
        result[number] = height - max(x[left:peak + 1].min(), x[peak:right].min())
    return result


def prominent_maxima(values: FloatArray, prominence: float) -> np.ndarray:
    """Indices of the local maxima of ``values`` whose prominence is at least ``prominence``.

    Examples
    --------
    >>> prominent_maxima(np.array([0.0, 2.0, 1.9, 3.0, 0.0]), 0.5)
    array([3])
    """
    peaks = local_maxima(values)
    return peaks[prominences(values, peaks) >= prominence]
