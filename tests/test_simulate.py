"""Synthetic tracks: truth recorded, noise as asked, pendulum physics against closed forms."""

import numpy as np
import pytest
from scipy.special import ellipk

from forcefit.dynamics.propagate import propagate_reference
from forcefit.dynamics.simulate import simulate_orbit, simulate_pendulum, spherical_pendulum_states
from forcefit.errors import InputError


def test_a_noise_free_hooke_track_is_the_harmonic_oscillator():
    # F = -k r: x(t) = x0 cos(wt) + (vx0/w) sin(wt), w = sqrt(k), per axis (common practice).
    track = simulate_orbit(exponent=1.0, strength=2.25, start=(1.2, 0.3), velocity=(-0.4, 0.9),
                           duration=17.0, rate=20.0, centre=(3.0, -1.0))
    w, t = 1.5, track.t
    np.testing.assert_allclose(track.x - 3.0, 1.2 * np.cos(w * t) - 0.4 / w * np.sin(w * t), atol=1e-9)
    np.testing.assert_allclose(track.y + 1.0, 0.3 * np.cos(w * t) + 0.9 / w * np.sin(w * t), atol=1e-9)


def test_a_noise_free_kepler_track_follows_keplers_equation():
    # From pericentre r_p = a(1 - e) at speed sqrt(GM (1 + e) / r_p): M = E - e sin E with
    # M = sqrt(GM / a^3) t, x = a (cos E - e), y = a sqrt(1 - e^2) sin E (Murray & Dermott 1999,
    # Solar System Dynamics, eqs 2.36-2.41, from memory); E solved by scipy's Newton method.
    from scipy.optimize import newton

    gm, a, e = 4.0, 1.5, 0.6
    pericentre = a * (1 - e)
    track = simulate_orbit(exponent=-2.0, strength=gm, start=(pericentre, 0.0),
                           velocity=(0.0, np.sqrt(gm * (1 + e) / pericentre)), duration=12.0,
                           rate=50.0)
    mean_anomaly = np.sqrt(gm / a**3) * track.t
    anomaly = newton(lambda E: E - e * np.sin(E) - mean_anomaly, mean_anomaly,
                     fprime=lambda E: 1 - e * np.cos(E), tol=1e-14, maxiter=100)
    np.testing.assert_allclose(track.x, a * (np.cos(anomaly) - e), atol=1e-8)
    np.testing.assert_allclose(track.y, a * np.sqrt(1 - e**2) * np.sin(anomaly), atol=1e-8)


def test_noise_dropped_frames_and_outliers_are_as_asked():
    clean = simulate_orbit(exponent=1.0, strength=1.0, duration=200.0, rate=20.0, rng=1)
    noisy = simulate_orbit(exponent=1.0, strength=1.0, duration=200.0, rate=20.0, noise=0.01, rng=1)
    residual = np.concatenate((noisy.x - clean.x, noisy.y - clean.y))
    assert np.std(residual) == pytest.approx(0.01, rel=0.03)
    np.testing.assert_allclose(noisy.sigma, 0.01)
    track = simulate_orbit(exponent=1.0, strength=1.0, duration=200.0, rate=20.0, noise=0.01,
                           dropped=0.1, outliers=0.01, rng=2)
    assert track.n_points == clean.n_points - 400
    planted = track.metadata["truth"]["outlier_indices"]
    assert 30 <= len(planted) <= 40
    expected = propagate_reference(track.metadata["truth"]["start"], track.metadata["truth"]["velocity"],
                                   track.t, exponent=1.0, strength=1.0).position
    miss = np.hypot(track.x - expected[:, 0], track.y - expected[:, 1])
    assert np.all(miss[planted] > 0.1) and np.median(miss) < 0.02


def test_same_seed_same_track_and_shape_only():
    first = simulate_orbit(exponent=0.5, noise=0.01, rng=7)
    second = simulate_orbit(exponent=0.5, noise=0.01, rng=7)
    np.testing.assert_array_equal(first.x, second.x)
    assert simulate_orbit(exponent=0.5, shape_only=True).t is None


def test_repulsive_strength_is_refused():
    with pytest.raises(InputError, match="positive"):
        simulate_orbit(exponent=1.0, strength=-1.0)


def test_planar_pendulum_period_at_ten_degrees():
    # Exact period T = 4 sqrt(L/g) K(sin(theta0/2)) (Nelson & Olsson 1986, Am. J. Phys. 54, 112,
    # from memory); at 10 degrees T/T0 = 1.0019071881 (OEIS A223067).
    length, gravity = 7.5, 9.81
    theta0 = np.radians(10.0)
    exact = 4 * np.sqrt(length / gravity) * ellipk(np.sin(theta0 / 2) ** 2)
    assert exact / (2 * np.pi * np.sqrt(length / gravity)) == pytest.approx(1.0019071881, abs=1e-9)
    t = np.linspace(0.99 * exact, 1.01 * exact, 2001)     # around the first return
    x = spherical_pendulum_states(length=length, gravity=gravity, start=(length * np.sin(theta0), 0.0),
                                  velocity=(0.0, 0.0), times=t)[:, 0]
    peak = int(np.argmax(x))
    curve = np.polyfit(t[peak - 3:peak + 4], x[peak - 3:peak + 4], 2)
    assert -curve[1] / (2 * curve[0]) == pytest.approx(exact, rel=1e-8)


def test_spherical_pendulum_keeps_its_length_and_precesses():
    # Airy (1851) precession of an elliptical spherical-pendulum orbit, Omega = (3/8) a b w / L^2
    # (Olsson 1981, Am. J. Phys. 49, 531; from memory): the sense is that of the motion.
    length, gravity, a, b = 7.5, 9.81, 0.5, 0.25
    w = np.sqrt(gravity / length)
    t = np.linspace(0.0, 40 * 2 * np.pi / w, 40001)
    xy = spherical_pendulum_states(length=length, gravity=gravity, start=(a, 0.0),
                                   velocity=(0.0, b * w), times=t)
    r = np.hypot(*xy.T)
    peaks = np.flatnonzero((r[1:-1] > r[:-2]) & (r[1:-1] >= r[2:])) + 1
    angle = np.unwrap(2 * np.arctan2(xy[peaks, 1], xy[peaks, 0])) / 2
    rate = np.polyfit(t[peaks], angle, 1)[0]
    assert rate == pytest.approx(3 / 8 * a * b * w / length**2, rel=0.05)
    # On a rod of fixed length the energy per mass, written with the bob at depth
    # sqrt(L^2 - r^2), and the angular momentum about the vertical are conserved (common
    # practice: the spherical pendulum's two first integrals). A bob drifting off the sphere of
    # radius L breaks the first; central differences at 1000 samples a period add ~1e-5.
    vx, vy = np.gradient(xy[:, 0], t), np.gradient(xy[:, 1], t)
    depth = np.sqrt(length**2 - r**2)
    vz = (xy[:, 0] * vx + xy[:, 1] * vy) / depth
    energy = 0.5 * (vx**2 + vy**2 + vz**2) - gravity * depth + gravity * length   # 0 at rest
    h = xy[:, 0] * vy - xy[:, 1] * vx
    inner = slice(1, -1)                                     # one-sided differences at the ends
    assert np.ptp(energy[inner]) < 1e-4 * energy.mean() and np.ptp(h[inner]) < 1e-4 * abs(h.mean())


def test_pendulum_track_records_its_truth():
    track = simulate_pendulum(length=2.4, gravity=9.81, start=(0.2, 0.0), velocity=(0.0, 0.1),
                              duration=10.0, rate=30.0, latitude=45.0, noise=0.001, rng=3)
    truth = track.metadata["truth"]
    assert truth["strength"] == pytest.approx(9.81 / 2.4)
    assert truth["latitude"] == 45.0 and track.n_points == 301
