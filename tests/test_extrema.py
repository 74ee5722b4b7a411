"""Prominent local maxima (the apses' first guesses), checked against scipy's peak finder."""

import numpy as np
import pytest

from forcefit._extrema import local_maxima, prominences, prominent_maxima


def _curves():
    rng = np.random.default_rng(17)
    for _ in range(400):
        n = int(rng.integers(0, 80))
        values = rng.normal(size=n) * rng.choice([1.0, 3.0])
        yield np.round(values, int(rng.integers(0, 2)))             # whole numbers: flat tops
    t = np.linspace(0.0, 40.0, 2600)
    yield 1.0 + 0.3 * np.cos(t) + 1e-3 * rng.normal(size=t.size)   # a swing's radius, noisy
    yield np.r_[0.0, 1.0, 1.0, 1.0, 0.0, 2.0, 2.0]                  # a flat top at the end is none


@pytest.mark.parametrize("threshold", [0.0, 0.1, 0.5, 2.0])
def test_the_prominent_maxima_are_scipys(threshold):
    # Reference: scipy.signal.find_peaks(x, prominence=p) and peak_prominences (SciPy 1.x): a
    # strict maximum, a flat top at its middle (rounded down), prominence >= p.
    from scipy.signal import find_peaks, peak_prominences

    for values in _curves():
        expected, _ = find_peaks(values, prominence=threshold)
        assert np.array_equal(prominent_maxima(values, threshold), expected)
        peaks = local_maxima(values)
        assert np.array_equal(peaks, find_peaks(values)[0])
        if peaks.size:
            assert np.array_equal(prominences(values, peaks), peak_prominences(values, peaks)[0])


def test_a_maximum_on_a_slope_stands_out_by_its_dip():
    # Topographic prominence (common practice): the peak at 2 rises 1 above its higher base (1.0),
    # the summit at 3 stands 2.5 above the higher of its bases (0.5 on the right).
    values = np.array([0.0, 1.0, 2.0, 1.0, 3.0, 0.5])
    assert local_maxima(values).tolist() == [2, 4]
    assert prominences(values, local_maxima(values)).tolist() == [1.0, 2.5]
    assert prominent_maxima(values, 1.5).tolist() == [4]
    assert local_maxima(np.array([1.0, 2.0])).size == 0
