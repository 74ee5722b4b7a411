"""The orbit model: parameter names and order, the strength, predictions against the
harmonic oscillator (with and without a turning frame), and its Jacobian."""

import math

import numpy as np
import pytest

from forcefit.dynamics.orbit_model import OrbitModel, observed
from forcefit.track import Track

OMEGA, RADIUS = 2.0, 0.5


def _track(name="a", start=0.0):
    t = np.linspace(start, start + 6.0, 301)
    return Track(t=t, x=np.cos(t), y=np.sin(t), name=name)


def _hooke(t, epoch, state, omega=OMEGA):
    """The harmonic oscillator from a state at the epoch (common practice): each coordinate
    q(t) = q0 cos(w (t - t0)) + (v0 / w) sin(w (t - t0))."""
    x0, y0, vx0, vy0 = state
    phase = omega * (t - epoch)
    return np.column_stack((x0 * np.cos(phase) + vx0 / omega * np.sin(phase),
                            y0 * np.cos(phase) + vy0 / omega * np.sin(phase)))


def _vector(model, state, centre=(0.3, -0.2)):
    # n = 1 and F(r_ref) = k r_ref: ln F(r_ref) = ln(w^2 r_ref)
    return np.array([1.0, math.log(OMEGA**2 * model.reference_radius), *centre, *state])


def test_names_follow_the_vector_order():
    one = OrbitModel(tracks=(_track(),), epochs=(3.0,), reference_radius=RADIUS)
    assert one.names == ("exponent", "log_force", "centre_x", "centre_y", "x0", "y0", "vx0", "vy0")
    two = OrbitModel(tracks=(_track("a"), _track("b")), epochs=(3.0, 3.0), reference_radius=RADIUS,
                     drag="linear", fit_rotation=True, shared_centre=False)
    assert two.names[:4] == ("exponent", "log_force", "drag", "rotation_rate")
    assert two.names[4:10] == ("centre_x_0", "centre_y_0", "x0_0", "y0_0", "vx0_0", "vy0_0")
    assert two.track_columns(1) == (two.index("centre_x_1"), two.index("centre_y_1"), two.index("x0_1"))


def test_strength_from_the_force_at_the_reference_radius():
    # k = F(r_ref) / r_ref^n (the model's parametrisation)
    model = OrbitModel(tracks=(_track(),), epochs=(3.0,), reference_radius=RADIUS)
    vector = np.array([[-2.0, math.log(3.0), 0, 0, 1, 0, 0, 1]])
    assert model.strength(vector)[0] == pytest.approx(3.0 * RADIUS**2, rel=1e-14)


def test_prediction_is_the_harmonic_oscillator_about_the_centre():
    track = _track()
    model = OrbitModel(tracks=(track,), epochs=(3.0,), reference_radius=RADIUS)
    state = (0.4, -0.1, 0.2, 0.7)
    predictions, ok = model.predict(_vector(model, state)[None, :])
    assert ok[0] and predictions[0].shape == (1, track.n_points, 2)
    expected = _hooke(np.asarray(track.t), 3.0, state) + np.array([0.3, -0.2])
    np.testing.assert_allclose(predictions[0][0], expected, atol=1e-10)


def test_a_turning_frame_sees_the_orbit_turn_back():
    # A frame turning counter-clockwise at W sees inertial positions turned by -W (t - t0)
    # (kinematics of rotating frames, common practice).
    track = _track()
    rate = 0.05
    model = OrbitModel(tracks=(track,), epochs=(3.0,), reference_radius=RADIUS, rotation_rate=rate)
    state = (0.4, -0.1, 0.2, 0.7)
    predictions, _ = model.predict(_vector(model, state, centre=(0.0, 0.0))[None, :])
    t = np.asarray(track.t)
    inertial = _hooke(t, 3.0, state)
    angle = -rate * (t - 3.0)
    turned = np.column_stack((np.cos(angle) * inertial[:, 0] - np.sin(angle) * inertial[:, 1],
                              np.sin(angle) * inertial[:, 0] + np.cos(angle) * inertial[:, 1]))
    np.testing.assert_allclose(predictions[0][0], turned, atol=1e-10)


def test_jacobian_of_the_centre_is_exact_and_of_the_state_matches_the_oscillator():
    track = _track()
    model = OrbitModel(tracks=(track,), epochs=(3.0,), reference_radius=RADIUS)
    state = (0.4, -0.1, 0.2, 0.7)
    vector = _vector(model, state)
    steps = np.full(vector.size, 1e-6)
    columns = [model.index("centre_x"), model.index("vx0")]
    jacobian = model.jacobian(vector, steps, columns)
    assert jacobian.shape == (2 * track.n_points, 2)
    np.testing.assert_allclose(jacobian[0::2, 0], 1.0, atol=1e-8)      # x moves with the centre
    np.testing.assert_allclose(jacobian[1::2, 0], 0.0, atol=1e-8)
    # dx/dvx0 = sin(w (t - t0)) / w for the oscillator
    phase = OMEGA * (np.asarray(track.t) - 3.0)
    np.testing.assert_allclose(jacobian[0::2, 1], np.sin(phase) / OMEGA, atol=1e-7)


def test_several_tracks_share_the_law_and_stack_in_order():
    first, second = _track("a"), _track("b", start=10.0)
    model = OrbitModel(tracks=(first, second), epochs=(3.0, 13.0), reference_radius=RADIUS)
    states = [(0.4, -0.1, 0.2, 0.7), (-0.3, 0.2, 0.5, 0.1)]
    vector = np.array([1.0, math.log(OMEGA**2 * RADIUS), 0.3, -0.2, *states[0], *states[1]])
    predictions, ok = model.predict(vector[None, :])
    assert ok[0] and len(predictions) == 2
    np.testing.assert_allclose(predictions[1][0], _hooke(np.asarray(second.t), 13.0, states[1])
                               + np.array([0.3, -0.2]), atol=1e-10)
    assert observed((first, second)).shape == (first.n_points + second.n_points, 2)
