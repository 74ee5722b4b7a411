"""The pointwise fits' second-order noise bias (forcefit.geometry.pointwise._noise_bias).

On a near-circular orbit the exponent read from a smoothed path is biased by the noise: a
wiggle that bulges outwards also bends more sharply, which reads as a force growing with r.
The fit removes the bias predicted by the second-order expansion of its estimating equations.
The reference here is independent of that expansion: Monte Carlo over noisy copies of one
exact orbit, each smoothed at the same level and fitted without the correction; their mean
departs from the noise-free fit by the bias itself (common practice: a parametric simulation
of an estimator's bias).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from forcefit import Track
from forcefit.estimators import fit_curvature
from forcefit.geometry.curves import interior, relation_residual
from forcefit.geometry.pointwise import PointwiseFit, fit_pointwise
from forcefit.geometry.smoothing import smooth_track

NOISE = 2e-4           # m per coordinate, against an orbit of radius about 1 m
CENTRE = np.zeros(2)


def _hooke_near_circle(eccentricity_factor: float = 1.01, turns: float = 2.0,
                       per_turn: int = 150) -> tuple[np.ndarray, np.ndarray]:
    """An exact Hooke orbit (k = 1 s^-2) from r = 1 m at 1.01 times the circular speed:
    the radius varies by about 2%."""
    t = np.arange(int(turns * per_turn) + 1) * 2 * math.pi / per_turn

    def rhs(_: float, s: np.ndarray) -> list[float]:
        return [s[2], s[3], -s[0], -s[1]]

    solution = solve_ivp(rhs, (t[0], t[-1]), [1.0, 0.0, 0.0, eccentricity_factor], t_eval=t,
                         method="DOP853", rtol=1e-12, atol=1e-12)
    return t, solution.y[:2].T


def _relation_fit(track: Track, level: float | None, *, correct: bool) -> tuple[PointwiseFit, float]:
    curve = smooth_track(track, level=level)

    def residual(parameters: np.ndarray, value: np.ndarray, first: np.ndarray,
                 second: np.ndarray) -> np.ndarray:
        return relation_residual(parameters, value, first, second, sense=1.0, reference_radius=1.0,
                                 timed=True)

    fit = fit_pointwise(curve, np.flatnonzero(interior(curve)), residual, np.array([1.0, 0.0]),
                        held=CENTRE, correct_noise_bias=correct)
    return fit, curve.level


def test_the_predicted_noise_bias_matches_monte_carlo_on_a_near_circle() -> None:
    t, path = _hooke_near_circle(1.005)
    rng = np.random.default_rng(7)
    sigma = np.full(t.size, NOISE)
    first = Track(t=t, x=path[:, 0] + NOISE * rng.standard_normal(t.size),
                  y=path[:, 1] + NOISE * rng.standard_normal(t.size), sigma=sigma)
    _, level = _relation_fit(first, None, correct=False)
    clean, _ = _relation_fit(Track(t=t, x=path[:, 0], y=path[:, 1], sigma=sigma), level, correct=False)
    departures, predicted, stderr = [], [], []
    for _ in range(40):
        noisy = Track(t=t, x=path[:, 0] + NOISE * rng.standard_normal(t.size),
                      y=path[:, 1] + NOISE * rng.standard_normal(t.size), sigma=sigma)
        raw, _ = _relation_fit(noisy, level, correct=False)
        corrected, _ = _relation_fit(noisy, level, correct=True)
        departures.append(raw.parameters[0] - clean.parameters[0])
        predicted.append(raw.parameters[0] - corrected.parameters[0])
        stderr.append(raw.stderr[0])
    departures_ = np.array(departures)
    monte_carlo = float(departures_.mean())
    monte_carlo_se = float(departures_.std(ddof=1)) / math.sqrt(departures_.size)
    prediction = float(np.mean(predicted))
    # the case is one where the bias matters: several Monte Carlo errors, most of a stated one
    assert monte_carlo > 4 * monte_carlo_se
    assert monte_carlo > 0.4 * float(np.mean(stderr))
    # the expansion's bias agrees with the simulated one, two-sided
    assert abs(prediction - monte_carlo) < 3 * monte_carlo_se
    # and the stated error is the scatter's (two-sided, for 60 draws)
    assert 0.75 < float(departures_.std(ddof=1)) / float(np.mean(stderr)) < 1.3


@pytest.mark.slow
def test_the_curvature_estimator_is_unbiased_on_near_circles() -> None:
    """Over 40 noisy copies of a near-circular Hooke orbit (radius varying by 2%), the
    curvature estimator's z-scores centre on zero (before the correction: +0.8 on average)."""
    t, path = _hooke_near_circle()
    rng = np.random.default_rng(11)
    z = []
    for _ in range(40):
        track = Track(t=t, x=path[:, 0] + NOISE * rng.standard_normal(t.size),
                      y=path[:, 1] + NOISE * rng.standard_normal(t.size))
        fit = fit_curvature(track, centre=(0.0, 0.0))
        z.append((fit.exponent - 1.0) / fit.exponent_stderr)
    z_ = np.array(z)
    assert abs(z_.mean()) < 3 * z_.std(ddof=1) / math.sqrt(z_.size)
    assert 0.75 < z_.std(ddof=1) < 1.3
