"""Smoothing a track: chord length, spline derivatives in time and in arc length, the
Savitzky-Golay option and its refusals."""

import numpy as np
import pytest

from forcefit.errors import GeometryError
from forcefit.geometry.smoothing import chord_length, smooth_track
from forcefit.track import Track


def test_chord_length_is_the_distance_walked_and_keeps_increasing():
    x, y = np.array([0.0, 3.0, 3.0, 3.0]), np.array([0.0, 4.0, 4.0, 10.0])
    chord = chord_length(x, y)
    assert chord[1] == 5.0 and chord[-1] == pytest.approx(11.0, rel=1e-5)    # 3-4-5 triangle
    assert np.all(np.diff(chord) > 0)                                         # a repeated point too


def test_spline_derivatives_of_a_circle_in_time():
    # x = R cos(wt), y = R sin(wt): velocity R w (-sin, cos), acceleration -w^2 (x, y)
    # (uniform circular motion, common practice).
    t = np.linspace(0.0, 12.0, 1201)
    radius, omega = 2.0, 1.3
    track = Track(t=t, x=radius * np.cos(omega * t), y=radius * np.sin(omega * t))
    curve = smooth_track(track)
    middle = slice(100, -100)
    np.testing.assert_allclose(curve.first[middle, 0], -radius * omega * np.sin(omega * t[middle]),
                               atol=1e-5)
    np.testing.assert_allclose(curve.second[middle], -omega**2 * curve.value[middle], atol=1e-4)
    assert curve.method and curve.dof > 0 and curve.span > 0


def test_shape_only_derivatives_are_with_respect_to_arc_length():
    # With respect to arc length the tangent has unit length (common practice).
    s = np.linspace(0.0, 4 * np.pi, 1600)
    curve = smooth_track(Track(x=np.cos(s), y=0.5 * np.sin(s)))
    speed = np.hypot(curve.first[:, 0], curve.first[:, 1])
    np.testing.assert_allclose(speed[100:-100], 1.0, atol=1e-3)


def test_savitzky_golay_is_exact_on_a_quartic():
    # A least-squares polynomial of order 4 reproduces any quartic exactly, derivatives included
    # (Savitzky & Golay 1964, Anal. Chem. 36, 1627).
    t = np.linspace(0.0, 2.0, 201)
    track = Track(t=t, x=t**4 - t, y=2 * t**3)
    curve = smooth_track(track, smoothing="savgol", window=21)
    np.testing.assert_allclose(curve.first[:, 0], 4 * t**3 - 1, atol=1e-8)
    np.testing.assert_allclose(curve.second[:, 1], 12 * t, atol=1e-7)
    assert curve.method.startswith("Savitzky-Golay, 21 samples")


def test_savitzky_golay_needs_even_spacing_and_known_smoothings_only():
    t = np.concatenate((np.linspace(0.0, 1.0, 50), np.linspace(1.1, 3.0, 50)))
    track = Track(t=t, x=np.cos(t), y=np.sin(t))
    with pytest.raises(GeometryError, match="evenly spaced"):
        smooth_track(track, smoothing="savgol")
    with pytest.raises(GeometryError, match="unknown"):
        smooth_track(track, smoothing="lowess")  # type: ignore[arg-type]


@pytest.fixture(scope="module")
def uneven_ellipse():
    # 600 samples along 4 turns of an ellipse, at random places (gaps 0.001 to ~7 times the mean),
    # without times, noise 2e-3: issue 13, failure mode 4. Smoothed once for the tests below.
    rng = np.random.default_rng(2)
    gaps = rng.exponential(1.0, 600) ** 2 + 1e-3
    phase = np.concatenate(([0.0], np.cumsum(gaps)))
    phase *= 8 * np.pi / phase[-1]
    x, y = np.cos(phase), 0.6 * np.sin(phase)
    track = Track(x=x + 2e-3 * rng.standard_normal(x.size), y=y + 2e-3 * rng.standard_normal(x.size))
    return track, x, y, smooth_track(track)


def test_arc_length_of_unevenly_spaced_samples(uneven_ellipse):
    # The arc length is the parameter the shape-only smoothing needs; the sample number is not
    # one when the samples are spaced unevenly along the path. Its steps must follow the exact
    # ones to within twice the noise (the chord of exact, densely spaced points is the arc
    # length: common practice); the sample number as the pilot's parameter left them 6 times
    # worse.
    track, x, y, curve = uneven_ellipse
    exact = chord_length(x, y)
    found = curve.parameter
    assert np.all(np.diff(found) > 0)
    assert found[-1] == pytest.approx(exact[-1], rel=2e-3)
    assert np.std(np.diff(found) - np.diff(exact)) < 4e-3


def test_noise_of_unevenly_spaced_samples_without_times(uneven_ellipse):
    # Differences of the samples in their order see the uneven spacing as noise (5 times the
    # truth here); divided differences in the arc length, across the path, see the noise (to
    # within 20%: the arc length read from the samples follows them a little).
    from forcefit.geometry.levels import settle
    track, _, _, curve = uneven_ellipse
    settled = settle(track, "auto", lambda curve, previous: curve, lambda curve: (0.0, 1.0, None),
                     curve=curve)
    assert settled.noise.sd == pytest.approx(2e-3, rel=0.2)


@pytest.mark.parametrize("sd", [1e-3, 0.5, 2.0, 300.0])
def test_the_error_bars_take_the_noise_the_samples_show_in_any_unit(sd):
    # prepare's contract: without a given sigma, a resolved noise level read from the samples sets
    # the smoothing's error bars, whatever its size in the track's unit (a threshold on the
    # number would make the answer depend on the unit); an unresolved one, or a given sigma,
    # leaves them as they are.
    from forcefit._noise import NoiseEstimate
    from forcefit.geometry.levels import prepare

    t = np.linspace(0.0, 10.0, 400)
    rng = np.random.default_rng(1)
    noisy = 0.01 * rng.standard_normal((2, 400))
    track = Track(t=t, x=np.cos(t) + noisy[0], y=np.sin(t) + noisy[1])
    curve = smooth_track(track)
    resolved = NoiseEstimate(sd=sd, resolved=True, lag_ratio=1.0, correlated=False)
    np.testing.assert_allclose(prepare(curve, resolved).value_var, curve.with_noise(sd).value_var)
    assert not np.allclose(prepare(curve, resolved).value_var, curve.value_var)
    unresolved = NoiseEstimate(sd=sd, resolved=False, lag_ratio=1.0, correlated=False)
    assert prepare(curve, unresolved) is curve


def test_where_no_level_settles_the_lightest_one_tried_is_read():
    # Lepski's rule as settle states it: keep the heaviest level that agrees with every lighter
    # one; where none does, read the lightest level tried (its bias is the smallest). An
    # estimate that jumps by far more than its error at every level never settles.
    import math

    from forcefit.dynamics.simulate import simulate_orbit
    from forcefit.geometry.levels import settle

    track = simulate_orbit(exponent=-2.0, duration=6.0, rate=30.0, noise=1e-3, rng=3)
    tried: list[float] = []

    def estimate(curve, previous):
        tried.append(curve.level)
        return curve

    def jumping(curve):
        return 1e3 * math.log(curve.level), 1e-3, np.full((track.n_points, 2), 1e-9 * math.log(curve.level))

    settled = settle(track, "auto", estimate, jumping)
    assert not settled.settled and len(tried) > 2
    assert settled.curve.level == tried[-1]
    assert [step.level for step in settled.steps] == tried
