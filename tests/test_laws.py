import numpy as np
import pytest

from forcefit.dynamics.laws import circular_period, circular_speed, potential, radial_force


@pytest.mark.parametrize("exponent", [-2.5, -2.0, -1.0, 0.0, 0.5, 1.0, 2.0])
def test_force_is_minus_the_gradient_of_the_potential(exponent):
    r = np.linspace(0.5, 3.0, 11)
    step = 1e-6
    gradient = (potential(r + step, exponent, 1.7) - potential(r - step, exponent, 1.7)) / (2 * step)
    np.testing.assert_allclose(-gradient, radial_force(r, exponent, 1.7), rtol=1e-7)


def test_gaussian_constant_gives_the_sidereal_year():
    # Gauss 1809 (Theoria Motus): with k_G = 0.01720209895 au^1.5/d, a circular orbit of
    # radius 1 au has period 2 pi / k_G = 365.2568983 d (IAU 1976 system).
    period = float(circular_period(1.0, -2.0, 0.01720209895**2))
    assert period == pytest.approx(365.2568983, abs=1e-6)


def test_circular_speed_balances_the_force():
    r = 2.0
    for exponent in (-2.0, 1.0, 0.5):
        assert float(circular_speed(r, exponent, 3.0)) ** 2 / r == pytest.approx(3.0 * r**exponent)
