"""Apsidal angles, precession and the pendulum's finite-amplitude precession."""

import math

import numpy as np
import pytest

from forcefit.analysis.apsides import measure_apsides, precession_budget
from forcefit.dynamics.laws import (
    EARTH_ROTATION_RATE,
    apsidal_angle,
    apsidal_angle_circular,
    circular_speed,
    exponent_from_precession,
    pendulum_precession_rate,
    precession_per_orbit,
)
from forcefit.dynamics.simulate import simulate_orbit, simulate_pendulum
from forcefit.errors import InputError, NotIdentifiable
from forcefit.track import Track


@pytest.mark.parametrize(
    ("exponent", "published"),
    # Values of pi/sqrt(n+3) listed in ../shared/CHECKS.md §4 (verified numerically there).
    [(-1.0, 2.2214414691), (0.0, 1.8137993642), (1.5, 1.4809609794)],
)
def test_near_circular_apsidal_angle_on_simulated_orbits(exponent, published):
    # Source: Goldstein, Poole & Safko (2002), Classical Mechanics 3rd ed., §3.6 (from memory);
    # Bertrand (1873), C. R. Acad. Sci. 77, 849 (from memory): psi = pi / sqrt(n + 3) as e -> 0.
    assert float(apsidal_angle_circular(exponent)) == pytest.approx(published, abs=1e-9)
    speed = 0.998 * float(circular_speed(1.0, exponent, 1.0))
    track = simulate_orbit(exponent=exponent, velocity=(0.0, speed), duration=80.0, rate=40.0,
                           noise=1e-6, rng=1)
    apsides = measure_apsides(track, centre=(0.0, 0.0))
    assert apsides.apsidal_angle == pytest.approx(published, abs=2e-4)   # O(e^2) ~ 1e-5 here
    # and its inverse n = (pi / psi)^2 - 3 gives the exponent back (same sources)
    assert apsides.exponent_near_circular == pytest.approx(exponent, abs=1e-3)


def test_exact_integral_against_the_measured_angle_of_an_eccentric_orbit():
    track = simulate_orbit(exponent=0.5, velocity=(0.0, 0.6), duration=120.0, rate=40.0, noise=1e-5,
                           rng=2)
    apsides = measure_apsides(track, centre=(0.0, 0.0))
    assert apsides.radius_ratio > 1.5
    exact = apsidal_angle(0.5, apsides.radius_ratio)
    assert apsides.apsidal_angle == pytest.approx(exact, abs=3 * apsides.apsidal_angle_stderr + 1e-5)
    assert apsides.exponent == pytest.approx(0.5, abs=3 * apsides.exponent_stderr + 1e-4)
    assert abs(apsides.apsidal_angle - float(apsidal_angle_circular(0.5))) > 1e-3   # eccentricity shows


def test_closed_orbits_have_closed_apsidal_angles():
    # Bertrand (1873): only n = -2 (psi = pi) and n = 1 (psi = pi/2) close for every eccentricity.
    for ratio in (1.5, 4.0, 20.0):
        assert apsidal_angle(-2.0, ratio) == pytest.approx(math.pi, abs=1e-12)
        assert apsidal_angle(1.0, ratio) == pytest.approx(math.pi / 2, abs=1e-12)


def test_halls_hypothesis_for_mercury_both_ways():
    # Hall (1894), Astron. J. 14, 49 (from memory): F proportional to r^-2.00000016 gives Mercury's
    # anomalous perihelion advance of about 43 arcsec per century. Mercury: e = 0.20563593
    # (Standish, JPL approximate elements); 87.9691 d sidereal period -> 415.203 orbits per Julian
    # century (../shared/CHECKS.md §5).
    eccentricity, orbits_per_century = 0.20563593, 36525.0 / 87.9691
    arcsec = 180 / math.pi * 3600
    advance = precession_per_orbit(-2.00000016, eccentricity) * orbits_per_century * arcsec
    assert advance == pytest.approx(43.0, abs=1.0)
    exponent = exponent_from_precession(43.0 / arcsec / orbits_per_century, eccentricity)
    assert exponent == pytest.approx(-2.00000016, abs=1e-8)
    # and the small-delta form 2 pi delta / (1 + sqrt(1 - e^2)) (derived; CHECKS.md §5)
    delta = 1.6e-7
    small = 2 * math.pi * delta / (1 + math.sqrt(1 - eccentricity**2))
    assert precession_per_orbit(-2 - delta, eccentricity) == pytest.approx(small, rel=1e-5)


@pytest.mark.parametrize(("semi_major", "semi_minor"), [(0.3, 0.1), (0.5, 0.25), (0.8, 0.3)])
def test_spherical_pendulum_precesses_at_the_airy_rate(semi_major, semi_minor):
    # Airy (1851); Olsson (1981), Am. J. Phys. 49, 531 (from memory):
    # Omega = (3/8) a b omega / L^2, in the sense of the motion; exact pendulum, L = 7.5 m.
    length, gravity = 7.5, 9.81
    omega = math.sqrt(gravity / length)
    track = simulate_pendulum(length=length, gravity=gravity, start=(semi_major, 0.0),
                              velocity=(0.0, semi_minor * omega), duration=250.0, rate=20.0,
                              noise=1e-4, rng=2)
    apsides = measure_apsides(track)
    expected = pendulum_precession_rate(semi_major, semi_minor, length, gravity)
    assert apsides.precession_rate == pytest.approx(expected, rel=0.05)


def test_too_short_a_track_has_too_few_apses():
    track = simulate_orbit(exponent=-2.0, velocity=(0.0, 0.8), duration=2.0, rate=50.0)
    with pytest.raises(NotIdentifiable, match="at least 3 are needed"):
        measure_apsides(track, centre=(0.0, 0.0))


def test_apsides_of_a_clockwise_orbit_are_measured_in_its_sense():
    track = simulate_orbit(exponent=-2.0, velocity=(0.0, -0.8), duration=40.0, rate=50.0)
    apsides = measure_apsides(track, centre=(0.0, 0.0))
    assert apsides.sense == -1 and apsides.apsidal_angle == pytest.approx(math.pi, abs=1e-4)
    assert np.all(np.diff([a.angle for a in apsides.apses]) > 0)


def test_precession_budget_of_a_pendulum_in_a_turning_lab():
    # Airy's rate (as above) plus the Earth's: a lab at latitude phi turns at Omega_E sin(phi)
    # counter-clockwise seen from above, so a counter-clockwise ellipse falls behind by it
    # (Foucault's pendulum; common practice). Nothing anomalous may remain.
    length, gravity, latitude = 7.5, 9.81, 48.0
    omega = math.sqrt(gravity / length)
    track = simulate_pendulum(length=length, gravity=gravity, start=(0.5, 0.0), velocity=(0.0, 0.25 * omega),
                              duration=250.0, rate=20.0, latitude=latitude, noise=1e-4, rng=2)
    budget = precession_budget(measure_apsides(track), pendulum_length=length, gravity=gravity,
                               latitude=latitude)
    assert budget["earth_rotation"] == pytest.approx(-EARTH_ROTATION_RATE * math.sin(math.radians(48.0)))
    assert budget["expected"] == pytest.approx(budget["finite_amplitude"] + budget["earth_rotation"])
    assert abs(budget["anomalous"]) < 3 * budget["anomalous_stderr"]
    with pytest.raises(InputError, match="needs timestamps"):
        precession_budget(measure_apsides(track.shape_only()), latitude=latitude)


def test_a_wide_swing_leaves_no_anomalous_precession():
    # a/L = 0.2, b/a = 0.4 on L = 2.5 m: Airy's small-swing rate (above) is 1% short of the exact
    # pendulum's, which a 40 s record at 0.5 mm sees as 7 standard errors of "anomalous"
    # precession; the budget's finite amplitude is the ideal pendulum of the measured swing.
    length, gravity = 2.5, 9.81
    omega = math.sqrt(gravity / length)
    track = simulate_pendulum(length=length, gravity=gravity, start=(0.5, 0.0), velocity=(0.0, 0.2 * omega),
                              duration=40.0, rate=30.0, noise=5e-4, rng=4)
    apsides = measure_apsides(track)
    budget = precession_budget(apsides, pendulum_length=length, gravity=gravity)
    assert abs(budget["anomalous"]) < 3 * budget["anomalous_stderr"]
    far = np.mean([a.radius for a in apsides.apocentres])
    near = np.mean([a.radius for a in apsides.pericentres])
    airy = pendulum_precession_rate(far, near, length, gravity)
    assert budget["finite_amplitude"] / airy == pytest.approx(1.0104, abs=2e-3)
    assert abs(budget["measured"] - airy) > 5 * budget["anomalous_stderr"]


def test_a_thin_ellipse_about_an_unknown_centre_asks_for_the_centre():
    # axes 1 : 0.02 (a nearly straight swing): the acceleration lines hardly fix the centre along
    # the long axis, and a centre 1% of the swing off turns near apses into far ones: refused,
    # asking for the centre. Given, the near passages (0.02 from it, 20 noise levels) are still
    # too close to locate; at 1 : 0.1 the same swing answers n = 1 within its errors.
    rng = np.random.default_rng(1)
    t = np.arange(0.0, 30.0, 1 / 60)
    track = Track(t=t, x=0.3 + np.cos(2 * t) + 1e-3 * rng.standard_normal(t.size),
                  y=-0.2 + 0.02 * np.sin(2 * t) + 1e-3 * rng.standard_normal(t.size))
    with pytest.raises(NotIdentifiable, match=r"do not alternate.*Give the centre"):
        measure_apsides(track)
    with pytest.raises(NotIdentifiable, match="too close to the centre"):
        measure_apsides(track, centre=(0.3, -0.2))
    wider = Track(t=t, x=track.x, y=-0.2 + 0.1 * np.sin(2 * t) + 1e-3 * rng.standard_normal(t.size))
    apsides = measure_apsides(wider)
    assert abs(apsides.exponent - 1.0) < 3 * apsides.exponent_stderr
