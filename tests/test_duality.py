"""The Kasner-Arnold duality: maps, predictions, and refits of dual tracks."""

import numpy as np
import pytest

from forcefit.dynamics.duality import (
    dual_energy,
    dual_exponent,
    dual_strength,
    dual_track,
    map_power,
    specific_energy_at,
)
from forcefit.dynamics.simulate import simulate_orbit
from forcefit.errors import InputError
from forcefit.estimators import fit_orbit, fit_shape
from forcefit.track import Track


def test_dual_exponents():
    # (a + 3)(A + 3) = 4 (Arnold 1990, Huygens and Barrow, Newton and Hooke, Appendix 1, from
    # memory; Hall & Josic 2000, SIAM Review 42, 115).
    for a in (-2.5, -2.0, -1.5, 0.0, 0.5, 1.0, 2.0, 3.0):
        assert (a + 3) * (dual_exponent(a) + 3) == pytest.approx(4.0)
    assert dual_exponent(0.5) == pytest.approx(-13 / 7)
    assert dual_exponent(-5.0) == -5.0 and map_power(-5.0) == -1.0
    with pytest.raises(InputError, match="no dual"):
        map_power(-3.0)


def test_hooke_ellipse_maps_to_a_kepler_ellipse_about_its_focus():
    # ../shared/CHECKS.md §3 (derived, verified): semi-axes A0, B0 -> a_K = (A0^2 + B0^2)/2,
    # e_K = (A0^2 - B0^2)/(A0^2 + B0^2), GM' = E_Hooke.
    a0, b0, omega = 1.4, 0.8, 2.0
    track = simulate_orbit(exponent=1.0, strength=omega**2, start=(a0, 0.0), velocity=(0.0, b0 * omega),
                           duration=10.0, rate=60.0)
    dual = dual_track(track, 1.0)
    r = np.hypot(dual.x, dual.y)                         # sampled: extremes good to ~1e-4
    semi_major = 0.5 * (r.max() + r.min())
    assert semi_major == pytest.approx((a0**2 + b0**2) / 2, rel=1e-4)
    assert (r.max() - r.min()) / (r.max() + r.min()) == pytest.approx((a0**2 - b0**2) / (a0**2 + b0**2),
                                                                     rel=1e-4)
    energy = specific_energy_at((a0, 0.0), (0.0, b0 * omega), 1.0, omega**2)
    fit = fit_orbit(dual, centre=(0.0, 0.0))
    assert fit.exponent == pytest.approx(-2.0, abs=1e-6)
    assert fit.strength == pytest.approx(dual_strength(1.0, energy), rel=1e-6)
    assert dual_strength(1.0, energy) == pytest.approx(energy)                # GM' = E_Hooke
    assert dual_energy(1.0, omega**2) == pytest.approx(-omega**2 / 2)          # E_Kepler


def test_half_power_law_maps_to_minus_thirteen_sevenths():
    # a = 0.5 -> A = 4/3.5 - 3 (CHECKS.md §3), recovered by the orbit fit within 4 stated errors
    # (about 3e-7 here).
    track = simulate_orbit(exponent=0.5, duration=30.0, rate=40.0, noise=1e-5, rng=1)
    fit = fit_orbit(dual_track(track, 0.5), centre=(0.0, 0.0))
    assert 0 < fit.exponent_stderr < 1e-5 and abs(fit.exponent - (4 / 3.5 - 3)) < 4 * fit.exponent_stderr


def test_self_dual_inverse_fifth_power_maps_lines_to_circles_through_the_centre():
    # Newton (1687), Principia, Book I, Prop. VII: circles through the centre are orbits of
    # r^-5; under w = 1/z (a = -5) a straight line (no force) maps onto such a circle.
    s = np.linspace(-3.0, 3.0, 200)
    line = Track(x=np.full(s.size, 0.5), y=s)
    image = dual_track(line, -5.0)
    # |w - c|^2 = R^2 with the circle through 0: x^2 + y^2 = 2 (cx x + cy y); here x = 1/x0 circle
    residual = image.x**2 + image.y**2 - image.x / 0.5
    assert np.abs(residual).max() < 1e-12


def test_shape_only_dual_track_has_no_times():
    track = simulate_orbit(exponent=1.0, duration=6.0, rate=50.0).shape_only()
    dual = dual_track(track, 1.0)
    assert dual.t is None
    assert fit_shape(dual, centre=(0.0, 0.0)).exponent == pytest.approx(-2.0, abs=1e-3)
