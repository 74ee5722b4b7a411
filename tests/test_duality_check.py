"""The duality check: the refit of the mapped track against the predicted dual law."""

import dataclasses
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
    with pytest.raises(dataclasses.FrozenInstanceError):        # a result is not changed after the fact
        check.predicted_exponent = 0.0                          # type: ignore[misc]
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


@pytest.fixture(scope="module")
def hooke_check():
    # The Hooke orbit of issue 13's failure mode 7, shortened: k = 3 s^-2 from (0.3, 0) m at (0, 0.19) m/s.
    track = simulate_orbit(exponent=1.0, strength=3.0, start=(0.3, 0.0), velocity=(0.0, 0.19),
                           duration=12.0, rate=60.0, noise=5e-4, rng=5)
    fit = fit_orbit(track)
    return track, fit, check_duality(track, fit)


def test_the_dual_strength_is_compared_in_its_errors_and_unit(hooke_check):
    _, _, check = hooke_check
    # The dual of a Hooke orbit is a Kepler orbit with GM equal to the Hooke energy,
    # E = v^2/2 + k r^2/2 (Arnold 1990, Huygens and Barrow, Newton and Hooke, from memory).
    energy = 0.19**2 / 2 + 3.0 * 0.3**2 / 2
    assert abs(check.predicted_strength - energy) < 3 * check.predicted_strength_stderr
    assert abs(check.fitted.strength - energy) < 3 * check.fitted.strength_stderr
    assert 0 < check.predicted_strength_stderr < 1e-3 * energy          # not inflated to pass
    assert check.strength_unit == "m^3 s^-2" and check.passed
    text = check.to_text()
    assert "dual strength  predicted" in text and "m^3 s^-2" in text and "consistent" in text


def test_a_wrong_strength_fails_the_duality_check(hooke_check):
    track, fit, check = hooke_check
    # 2% too strong a law predicts a dual GM about 2% off: far beyond both errors.
    wrong = type(fit)(**{**fit.__dict__, "strength": 1.02 * fit.strength,
                         "force_at_reference": 1.02 * fit.force_at_reference})
    broken = check_duality(track, wrong)
    assert abs(broken.z_score) < 3                       # the exponent alone cannot see it
    assert broken.predicted_strength > check.predicted_strength       # a deeper well, a larger E
    assert broken.strength_z_score < -3 and not broken.passed          # the refit sees the old E
    assert "INCONSISTENT" in broken.to_text()


def test_the_predicted_dual_exponent_carries_the_fits_error(hooke_check):
    # Dual exponents obey (a + 3)(A + 3) = 4 (Arnold 1990, Huygens and Barrow, Newton and Hooke,
    # from memory), so dA/da = -4 / (a + 3)^2: a quarter at Hooke's a = 1, and the predicted
    # exponent's error is that factor times the fit's. Checked by a central difference.
    _, fit, check = hooke_check
    a, step = fit.exponent, 1e-6
    slope = ((4 / (a + step + 3) - 3) - (4 / (a - step + 3) - 3)) / (2 * step)
    assert check.predicted_exponent == pytest.approx(4 / (a + 3) - 3, rel=1e-12)
    assert check.predicted_exponent_stderr == pytest.approx(abs(slope) * fit.exponent_stderr, rel=1e-6)
    assert check.predicted_exponent_stderr == pytest.approx(0.25 * fit.exponent_stderr, rel=1e-3)


@pytest.mark.parametrize("sign", [-1.0, 1.0])
def test_the_z_score_is_the_difference_in_the_combined_error(sign):
    # z = (fitted - predicted) / sqrt(s_f^2 + s_p^2) for independent errors (common practice);
    # with no error on either side a difference is infinitely significant, and an unknown error
    # leaves z unknown.
    from forcefit.analysis.duality_check import _z

    assert _z(1.0 + sign * 0.5, 0.3, 1.0, 0.4) == pytest.approx(sign * 0.5 / 0.5, rel=1e-15)
    assert _z(1.0 + sign * 0.5, 0.0, 1.0, 0.0) == sign * math.inf     # no error: the side is kept
    assert _z(1.0, 0.0, 1.0, 0.0) == 0.0
    assert math.isnan(_z(1.5, math.nan, 1.0, 0.4)) and math.isnan(_z(1.5, 0.3, 1.0, math.inf))
