import math

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


def test_one_year_from_the_astronomical_unit_and_the_suns_gm_in_si():
    # a = 1 au = 149 597 870 700 m exactly (IAU 2012 Resolution B2); GM_sun = 1.32712440041e20
    # m^3 s^-2 (the DE-series value, e.g. Folkner et al. 2014, DE430/431 IPN 42-196, Table 8).
    # Kepler's third law T = 2 pi sqrt(a^3 / GM) then gives the Gaussian year of 365.25690 d
    # (Gauss 1809; IAU 1976): evaluated at r far from 1, where r**((1 - n)/2) matters.
    period = float(circular_period(149_597_870_700.0, -2.0, 1.32712440041e20)) / 86400.0
    assert period == pytest.approx(365.2568983, abs=2e-4)


@pytest.mark.parametrize("radius", [0.01, 7.0, 250.0])
def test_circular_periods_scale_with_radius_as_their_law_says(radius):
    # Hooke: T = 2 pi / sqrt(k) whatever the radius; a constant force k: v^2 / r = k, so
    # T = 2 pi r / v = 2 pi sqrt(r / k) (common practice).
    assert float(circular_period(radius, 1.0, 4.0)) == pytest.approx(np.pi, rel=1e-12)
    assert float(circular_period(radius, 0.0, 4.0)) == pytest.approx(2 * np.pi * np.sqrt(radius / 4.0),
                                                                      rel=1e-12)
    # and the circular speed's orbit closes in that period: 2 pi r / v
    for exponent in (-2.0, -1.0, 0.5):
        speed = float(circular_speed(radius, exponent, 4.0))
        assert float(circular_period(radius, exponent, 4.0)) == pytest.approx(2 * np.pi * radius / speed,
                                                                              rel=1e-12)


@pytest.mark.parametrize("exponent", [-2.0, -1.0, 0.5, 1.0])
def test_the_apsidal_angle_at_equal_radii_is_the_near_circular_limit(exponent):
    # Newton, Principia (1687), Book I, Prop. 45 (from memory): a nearly circular orbit in
    # F = -k r^n turns through pi / sqrt(n + 3) between apsides; r_max / r_min = 1 is allowed,
    # and just above it the exact integral agrees to the orbit's own second order.
    from forcefit.dynamics.laws import apsidal_angle

    limit = math.pi / math.sqrt(exponent + 3.0)
    assert apsidal_angle(exponent, 1.0) == pytest.approx(limit, rel=1e-14)
    assert apsidal_angle(exponent, 1.0 + 1e-4) == pytest.approx(limit, rel=1e-6)
    with pytest.raises(ValueError, match="at least 1"):
        apsidal_angle(exponent, 1.0 - 1e-12)


def test_an_apsidal_angle_beyond_every_bound_orbit_is_refused():
    # As n falls to -3 the apsidal angle grows without bound, and below -3 no power law has a
    # bound orbit (the effective potential k r^(n+1)/(n+1) + h^2/(2 r^2) has no minimum: common
    # practice). An angle beyond that of n = -3 + 1e-6 is refused, not answered with n near -3.
    from forcefit.dynamics.laws import apsidal_angle, exponent_from_apsidal_angle

    steepest = apsidal_angle(-3.0 + 1e-6, 4.0)
    with pytest.raises(ValueError, match="no power law"):
        exponent_from_apsidal_angle(1.5 * steepest, 4.0)
    assert exponent_from_apsidal_angle(apsidal_angle(-2.9, 4.0), 4.0) == pytest.approx(-2.9, abs=1e-9)


@pytest.mark.parametrize("eccentricity", [0.1, 0.5, 0.8])
def test_the_exponent_from_a_precession_finds_the_closed_laws(eccentricity):
    # Newton, Principia (1687), Book I, Prop. X and XI (from memory): the Hooke ellipse (n = 1)
    # is closed about its centre, apsides a quarter turn apart (precession 2 (pi/2) - 2 pi = -pi
    # per radial period); the Kepler ellipse (n = -2) about its focus, half a turn (none).
    from forcefit.dynamics.laws import exponent_from_precession, precession_per_orbit

    assert exponent_from_precession(-math.pi, eccentricity) == pytest.approx(1.0, abs=1e-9)
    assert exponent_from_precession(0.0, eccentricity) == pytest.approx(-2.0, abs=1e-9)
    assert precession_per_orbit(1.0, eccentricity) == pytest.approx(-math.pi, abs=1e-12)


@pytest.mark.parametrize("turned", [0.0, 0.7, 2.5])
def test_the_energy_of_a_kepler_state_is_minus_mu_over_2a_in_any_direction(turned):
    # Vis-viva: E = v^2/2 - mu/r = -mu/(2a) on a Kepler ellipse (Murray & Dermott 1999, Solar
    # System Dynamics, eq. 2.34); here at pericentre, the state turned by `turned` rad so that both
    # velocity components are neither 0 nor 1; h = r_p v_p in every direction.
    from forcefit.dynamics.laws import angular_momentum, specific_energy

    mu, a, e = 2.3, 1.7, 0.4
    r_p = a * (1 - e)
    v_p = math.sqrt(mu / a * (1 + e) / (1 - e))
    c, s = math.cos(turned), math.sin(turned)
    position, velocity = [r_p * c, r_p * s], [-v_p * s, v_p * c]
    assert float(specific_energy(position, velocity, -2.0, mu)) == pytest.approx(-mu / (2 * a), rel=1e-13)
    assert float(angular_momentum(position, velocity)) == pytest.approx(r_p * v_p, rel=1e-13)
