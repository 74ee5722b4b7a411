"""The duality check: the refit of the mapped track against the predicted dual law."""

import math

import pytest

from forcefit.analysis.duality_check import check_duality, predicted_dual_strength
from forcefit.dynamics.simulate import simulate_orbit
from forcefit.estimators import fit_orbit, fit_shape


def test_duality_check_passes_for_the_true_law_and_fails_for_a_wrong_one():
    track = simulate_orbit(exponent=-1.0, duration=25.0, rate=40.0, noise=1e-3, rng=3)
    fit = fit_orbit(track)
    check = check_duality(track, fit, fit_orbit)
    assert check.passed, check.to_text()
    wrong = type(fit)(**{**fit.__dict__, "exponent": 0.0})
    assert not check_duality(track, wrong, fit_orbit).passed


def test_the_dual_strength_comes_from_the_orbit_fits_energy():
    # A Hooke ellipse maps to a Kepler ellipse whose GM is the Hooke energy E = w^2 (a^2 + b^2) / 2
    # (Arnold 1990, Huygens and Barrow, Newton and Hooke, from memory); here a = 1.4, b = 0.8, w = 2.
    track = simulate_orbit(exponent=1.0, strength=4.0, start=(1.4, 0.0), velocity=(0.0, 1.6),
                           duration=10.0, rate=60.0, noise=1e-4, rng=1)
    fit = fit_orbit(track, centre=(0.0, 0.0))
    assert predicted_dual_strength(fit) == pytest.approx(4.0 * (1.4**2 + 0.8**2) / 2, rel=1e-3)
    check = check_duality(track, fit)                       # refitted by the estimator that made fit
    assert check.fitted.method == "orbit" and check.passed
    assert check.fitted.strength == pytest.approx(check.predicted_strength, rel=1e-3)
    assert math.isnan(predicted_dual_strength(fit_shape(track, centre=(0.0, 0.0))))   # no state
