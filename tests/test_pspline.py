"""The penalised-spline smoother: exactness, the selected inverse, GCV, error bars."""

import numpy as np
import pytest

from forcefit.errors import GeometryError
from forcefit.geometry.pspline import (
    DEGREE,
    _band_to_dense,
    _selected_inverse,
    smooth_curve,
)


def test_selected_inverse_matches_the_dense_inverse():
    # Takahashi recursion: the band of M^-1 from M's Cholesky factor, checked against inv(M).
    rng = np.random.default_rng(0)
    size = 40
    band = np.zeros((DEGREE + 1, size))
    band[DEGREE] = 10.0 + rng.uniform(0, 1, size)
    for offset in range(1, DEGREE + 1):
        band[DEGREE - offset, offset:] = rng.uniform(-1, 1, size - offset)
    from scipy.linalg import cholesky_banded

    upper = cholesky_banded(band, lower=False)
    inverse = np.linalg.inv(_band_to_dense(band))
    selected = _selected_inverse(upper)
    for offset in range(DEGREE + 1):
        np.testing.assert_allclose(selected[: size - offset, offset], np.diag(inverse, offset), rtol=1e-10)


def test_noise_free_circle_derivatives():
    s = np.linspace(0.0, 2 * np.pi, 500)
    curve = smooth_curve(s, 2 * np.cos(s), 2 * np.sin(s))
    inner = slice(25, -25)
    velocity = np.column_stack((-2 * np.sin(s), 2 * np.cos(s)))
    np.testing.assert_allclose(curve.first[inner], velocity[inner], atol=1e-7)
    np.testing.assert_allclose(curve.second[inner], -curve.value[inner], atol=1e-6)


def test_error_bars_match_the_scatter_of_values():
    # Bayesian (Wahba 1983) standard errors of the smoothed values match the actual error.
    rng = np.random.default_rng(3)
    s = np.linspace(0.0, 6 * np.pi, 1500)
    truth = np.column_stack((np.cos(s), 0.5 * np.sin(s)))
    noisy = truth + 0.002 * rng.standard_normal(truth.shape)
    curve = smooth_curve(s, noisy[:, 0], noisy[:, 1])
    assert curve.noise[0] == pytest.approx(0.002, rel=0.1)
    actual = np.sqrt(np.mean((curve.value - truth)[100:-100] ** 2))
    predicted = np.sqrt(np.mean(curve.value_var[100:-100]))
    assert actual == pytest.approx(predicted, rel=0.3)


def test_window_level_matches_full_gcv_at_equal_density(monkeypatch):
    # The level chosen on a window transfers: a 2000-point track (longer than the 1200-sample
    # window) gives at least the same second-derivative accuracy as GCV on all of it (ratio
    # 0.65-0.78 over seeds 4-6; 0.56-0.73 at 3600 points and the same density, 5x slower).
    import forcefit.geometry.pspline as pspline

    rng = np.random.default_rng(4)
    s = np.linspace(0.0, 2000 / 180 * np.pi, 2000)
    x = np.cos(s) + 0.002 * rng.standard_normal(s.size)
    y = 0.5 * np.sin(s) + 0.002 * rng.standard_normal(s.size)
    windowed = smooth_curve(s, x, y)
    monkeypatch.setattr(pspline, "GCV_WINDOW", 10_000)
    full = smooth_curve(s, x, y)
    error = [np.sqrt(np.mean((c.second[:, 0] + np.cos(s))[200:-200] ** 2)) for c in (windowed, full)]
    assert "samples" in windowed.method and full.method == "GCV on all samples"
    assert error[0] < 1.5 * error[1]


def test_too_few_points_refused():
    with pytest.raises(GeometryError, match="too few"):
        smooth_curve(np.arange(5.0), np.arange(5.0), np.arange(5.0))


def test_local_covariance_on_the_coefficients_is_the_one_from_the_influences(monkeypatch):
    # The spline's covariance of quantities read off single samples is computed on its
    # coefficients (S^T G S); the generic one builds each quantity's influence on every sample
    # and sums var_j |u_j|^2. Two routes to the same numbers, on an unevenly sampled track with
    # its own noise per sample, random gradients on x and y, and groups built in chunks of one.
    from forcefit.geometry import pspline

    rng = np.random.default_rng(11)
    s = np.sort(rng.uniform(0.0, 4 * np.pi, 700))
    sigma = 0.002 * (1.0 + rng.uniform(0, 1, s.size))
    curve = smooth_curve(s, np.cos(s) + sigma * rng.standard_normal(s.size),
                         0.5 * np.sin(s) + sigma * rng.standard_normal(s.size), sigma=sigma)
    samples = np.array([0, 3, 350, 351, 699])
    gradient = rng.standard_normal((samples.size, 3, 3, 2))
    fast = curve.response.local_covariance(samples, gradient)
    monkeypatch.setattr(pspline, "LOCAL_CHUNK_VALUES", 1)
    generic = pspline.LinearResponse.local_covariance(curve.response, samples, gradient)
    np.testing.assert_allclose(fast, generic, rtol=1e-8, atol=1e-12 * np.abs(generic).max())
    assert np.all(np.linalg.eigvalsh(fast) > 0)
