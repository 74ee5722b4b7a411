"""Path geometry against closed forms of differential geometry and mechanics."""

import numpy as np
import pytest

from forcefit.dynamics.simulate import simulate_orbit
from forcefit.geometry.path import describe_path
from forcefit.track import Track


def test_circle_curvature_is_one_over_radius():
    # Source: do Carmo (1976), Differential Geometry of Curves and Surfaces, §1-5 (from memory):
    # a circle of radius R has curvature 1/R.
    t = np.linspace(0.0, 4 * np.pi, 1601)
    path = describe_path(Track(t=t, x=2.5 * np.cos(t), y=2.5 * np.sin(t)), centre=(0.0, 0.0))
    np.testing.assert_allclose(path.curvature[100:-100], 1 / 2.5, rtol=1e-6)
    np.testing.assert_allclose(path.radius_of_curvature[100:-100], 2.5, rtol=1e-6)


def test_ellipse_curvature_formula():
    # Source: do Carmo (1976), §1-5 (from memory): x = a cos t, y = b sin t has
    # kappa = a b / (a^2 sin^2 t + b^2 cos^2 t)^(3/2).
    a, b = 3.0, 1.2
    t = np.linspace(0.0, 4 * np.pi, 1601)
    path = describe_path(Track(t=t, x=a * np.cos(t), y=b * np.sin(t)), centre=(0.0, 0.0))
    expected = a * b / (a**2 * np.sin(t) ** 2 + b**2 * np.cos(t) ** 2) ** 1.5
    np.testing.assert_allclose(path.curvature[100:-100], expected[100:-100], rtol=1e-5)


def test_shape_only_curvature_is_the_same():
    a, b = 3.0, 1.2
    t = np.linspace(0.0, 4 * np.pi, 1601)
    path = describe_path(Track(x=a * np.cos(t), y=b * np.sin(t)), centre=(0.0, 0.0))
    expected = a * b / (a**2 * np.sin(t) ** 2 + b**2 * np.cos(t) ** 2) ** 1.5
    np.testing.assert_allclose(path.curvature[100:-100], expected[100:-100], rtol=1e-5)


def test_force_curvature_relation_reproduces_the_law():
    # Source: Newton (1687), Principia, Book I, Prop. VI-VII: F = h^2 kappa / (r^2 cos^3 gamma).
    track = simulate_orbit(exponent=1.5, strength=2.0, start=(1.0, 0.0), velocity=(0.0, 1.1),
                           duration=12.0, rate=200.0)
    path = describe_path(track, centre=(0.0, 0.0))
    force = path.angular_momentum**2 * path.curvature / (path.radius**2 * np.cos(path.gamma) ** 3)
    np.testing.assert_allclose(force[100:-100], 2.0 * path.radius[100:-100] ** 1.5, rtol=1e-5)


def test_angular_momentum_and_gamma_of_a_kepler_orbit():
    # At pericentre gamma = 0 and h = r v (any mechanics text; common practice).
    track = simulate_orbit(exponent=-2.0, strength=1.0, start=(0.5, 0.0), velocity=(0.0, 1.7),
                           duration=20.0, rate=100.0)
    path = describe_path(track, centre=(0.0, 0.0))
    np.testing.assert_allclose(path.angular_momentum[50:-50], 0.5 * 1.7, rtol=1e-6)
    peri = np.argmin(path.radius[50:-50]) + 50
    assert abs(path.gamma[peri]) < 1e-2


def test_standard_errors_are_honest_on_noisy_data():
    rng = np.random.default_rng(8)
    t = np.linspace(0.0, 6 * np.pi, 1500)
    clean = Track(t=t, x=np.cos(t), y=0.5 * np.sin(t))
    noisy = Track(t=t, x=clean.x + 0.002 * rng.standard_normal(t.size),
                  y=clean.y + 0.002 * rng.standard_normal(t.size))
    truth = describe_path(clean, centre=(0.0, 0.0))
    path = describe_path(noisy, centre=(0.0, 0.0))
    z = (path.curvature - truth.curvature)[100:-100] / path.curvature_stderr[100:-100]
    # Bayesian spline errors include the smoothing bias, so they are, if anything, generous.
    assert 0.2 < np.std(z) < 1.5
    assert path.smoothing.noise[0] == pytest.approx(0.002, rel=0.1)
