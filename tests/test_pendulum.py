"""The finite-amplitude correction of a pendulum fit, against the exact spherical pendulum."""

import math

import numpy as np
import pytest

from forcefit.analysis.pendulum import pendulum_correction
from forcefit.dynamics.simulate import simulate_pendulum
from forcefit.errors import InputError
from forcefit.estimators import fit_orbit
from forcefit.track import Track

G = 9.81                       # m/s^2, the simulation's g (not standard gravity: CHECKS.md §6)


@pytest.fixture(scope="module")
def swing():
    # a/L = 0.05: a power-law fit reads n ~ 1 - 1.1 (a/L)^2 (CHECKS.md §6, derived) and the
    # Airy precession turns the ellipse (Airy 1851; Olsson 1981, Am. J. Phys. 49, 531).
    velocity = (0.0, 0.5 * 0.1 * math.sqrt(G / 2))
    track = simulate_pendulum(length=2.0, gravity=G, start=(0.1, 0.0), velocity=velocity, duration=30.0,
                              rate=60.0, noise=3e-4, rng=5)
    return track, fit_orbit(track)


@pytest.fixture(scope="module")
def corrected(swing):
    """The swing's correction for its true length, 2 m (computed once: it fits ideal pendulums)."""
    track, fit = swing
    return pendulum_correction(fit, track, length=2.0)


def test_the_raw_fit_is_not_hookes_law_at_face_value(swing):
    _, fit = swing
    assert fit.passed
    assert fit.exponent < 1.0 - 10 * fit.exponent_stderr
    assert fit.exponent == pytest.approx(1 - 1.1 * 0.05**2, abs=2e-3)


def test_the_correction_gives_back_hookes_law_and_g(corrected):
    assert abs(corrected.exponent - 1.0) < 3 * corrected.exponent_stderr
    assert abs(corrected.gravity - G) < 3 * corrected.gravity_stderr
    assert corrected.gravity_stderr < 1e-3 * G                     # and it is a precise test
    assert corrected.omega_squared == pytest.approx(corrected.gravity / 2.0)


def test_a_small_swing_needs_almost_no_correction():
    track = simulate_pendulum(length=10.0, gravity=G, start=(0.02, 0.0), velocity=(0.0, 0.01), duration=40.0,
                              rate=30.0, noise=1e-4, rng=2)
    corrected = pendulum_correction(fit_orbit(track), track, length=10.0)
    assert abs(corrected.ideal_exponent - 1.0) < 1e-5              # (a/L)^2 = 4e-6
    assert corrected.ideal_strength_ratio == pytest.approx(1.0, abs=1e-5)


def test_the_correction_refuses_pixels_and_impossible_lengths(swing):
    track, fit = swing
    with pytest.raises(InputError, match="more than the pendulum length"):
        pendulum_correction(fit, track, length=0.05)
    pixels = Track(t=track.t, x=np.asarray(track.x), y=np.asarray(track.y), length_unit="px")
    with pytest.raises(InputError, match="not pixels"):
        pendulum_correction(fit, pixels, length=2.0)


def test_a_wide_swing_is_corrected_in_full_not_to_first_order():
    # a/L = 0.15: the ideal pendulum started at the raw fit's omega^2 and state corrects only to
    # first order (over 6 seeds g/L came out 12 standard errors high, n 7.6 low); the one whose
    # power-law fit reproduces the data's leaves both within their errors (mean z 0.1 and 0.0)
    length, amplitude = 1.2, 0.18
    track = simulate_pendulum(length=length, gravity=G, start=(amplitude, 0.0),
                              velocity=(0.0, 0.4 * amplitude * math.sqrt(G / length)), duration=30.0,
                              rate=60.0, noise=2e-4, rng=3)
    fit = fit_orbit(track)
    assert fit.exponent < 1.0 - 100 * fit.exponent_stderr          # far from Hooke at face value
    corrected = pendulum_correction(fit, track, length=length)
    assert abs(corrected.omega_squared - G / length) < 3 * corrected.omega_squared_stderr
    assert abs(corrected.exponent - 1.0) < 3 * corrected.exponent_stderr
    assert corrected.omega_squared_stderr < 2e-5 * G / length      # a precise test of g


def test_g_is_printed_in_si_whatever_the_track_units(swing, corrected):
    # the same swing in mm and ms: g/L in s^-2 and g in m/s^2, as for the track in m and s
    track, _ = swing
    scaled = Track(t=np.asarray(track.t) * 1e3, x=np.asarray(track.x) * 1e3, y=np.asarray(track.y) * 1e3,
                   length_unit="mm", time_unit="ms")
    in_mm = pendulum_correction(fit_orbit(scaled), scaled, length=2000.0)
    rows = {row.label: row for row in in_mm.rows()}
    assert rows["g"].unit.startswith("m/s^2") and rows["g / L"].unit == "s^-2"
    assert float(rows["g"].text.split(" ± ")[0]) == pytest.approx(corrected.gravity, rel=1e-5)


def test_notes_say_what_the_user_may_have_got_wrong(swing, corrected):
    track, _ = swing
    # the Earth's rotation (left out here) moves n by up to 4 Omega_E / omega: 1.3e-4 for L = 2 m
    # (a rotating frame turns a Hooke ellipse by Omega P per period; common practice)
    notes = corrected.notes
    assert any("turns with the Earth" in note and "--latitude" in note for note in notes)
    turning = fit_orbit(track, rotation_rate=-5.4e-5)
    assert not any("turns with the Earth" in note
                   for note in pendulum_correction(turning, track, length=2.0).notes)
    # times in ms read as seconds: g comes out a million times too small, and the note says why
    slow = Track(t=np.asarray(track.t) * 1e3, x=track.x, y=track.y, length_unit="m", time_unit="s")
    notes = pendulum_correction(fit_orbit(slow), slow, length=2.0).notes
    assert len(notes) == 1 and "far from the Earth's 9.8 m/s^2" in notes[0] and "ms read as s" in notes[0]
