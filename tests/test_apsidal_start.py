"""The orbit fit's quick start from the apsidal angle, and the search it falls back on."""

import math

import numpy as np
import pytest

import forcefit.estimators.orbit as orbit_module
from forcefit.dynamics.laws import apsidal_angle
from forcefit.dynamics.orbit_model import OrbitModel
from forcefit.dynamics.propagate import Drag
from forcefit.dynamics.simulate import simulate_orbit
from forcefit.estimators import fit_orbit
from forcefit.estimators._apsidal_start import apsidal_start
from forcefit.estimators._start import StartProblem
from forcefit.geometry.noise import difference_noise
from forcefit.track import Track


def _problem(track: Track, *, centre=None, exponent=None, drag=None) -> tuple[StartProblem, int, float]:
    noise = difference_noise(track)
    index = track.n_points // 2
    model = OrbitModel(tracks=(track,), epochs=(float(np.asarray(track.t)[index]),), reference_radius=1.0,
                       drag=drag)
    sigma = np.full(track.n_points, noise)
    return StartProblem(model=model, exponent=exponent, centre=centre, sigma=sigma), index, noise


@pytest.mark.parametrize("exponent", [-2.5, -2.0, -1.5, -1.0, 0.0, 1.0, 2.0])
def test_the_start_reads_the_law_and_the_pace_off_the_path(exponent):
    track = simulate_orbit(exponent=exponent, strength=1.7, noise=0.003, centre=(0.2, -0.4),
                           rng=int(exponent * 10) + 70)
    problem, index, noise = _problem(track)
    vector = apsidal_start(problem, [index], [noise])
    assert vector is not None
    model = problem.model
    # the exponent from the apsidal angle, within a few hundredths of the simulated one
    assert vector[0] == pytest.approx(exponent, abs=0.03)
    assert float(model.strength(vector)) == pytest.approx(1.7, rel=0.05)
    assert (vector[2], vector[3]) == pytest.approx((0.2, -0.4), abs=0.01)
    # the start's orbit keeps pace with the samples over every turn, not only near the epoch
    predicted, ok = model.predict(vector[None, :])
    miss = np.hypot(*(predicted[0][0] - track.positions).T)
    size = float(np.ptp(track.positions, axis=0).max())
    assert ok[0] and miss.max() < 0.05 * size


def test_a_clockwise_orbit_starts_clockwise():
    track = simulate_orbit(exponent=0.5, velocity=(0.0, -0.8), noise=2e-3, centre=(1.0, 2.0), rng=3)
    problem, index, noise = _problem(track)
    vector = apsidal_start(problem, [index], [noise])
    assert vector is not None and vector[0] == pytest.approx(0.5, abs=0.03)
    x, y, vx, vy = vector[4:8]
    assert x * vy - y * vx < 0                                   # angular momentum below the plane
    predicted, ok = problem.model.predict(vector[None, :])
    size = float(np.ptp(track.positions, axis=0).max())
    assert ok[0] and np.hypot(*(predicted[0][0] - track.positions).T).max() < 0.05 * size


def test_the_exponent_matches_the_apsidal_angle_of_an_eccentric_orbit():
    # An orbit of n = 1 (Hooke) at 0.5 times the circular speed: r_max / r_min = 2, and the
    # apsidal angle of every Hooke orbit is pi / 2 (closed ellipses about their centre:
    # common practice); the start must read n = 1 from the shape alone.
    track = simulate_orbit(exponent=1.0, velocity=(0.0, 0.5), noise=1e-3, duration=30.0, rate=20.0, rng=2)
    assert apsidal_angle(1.0, 2.0) == pytest.approx(math.pi / 2, abs=1e-12)
    problem, index, noise = _problem(track)
    vector = apsidal_start(problem, [index], [noise])
    assert vector is not None and vector[0] == pytest.approx(1.0, abs=0.01)


def test_a_held_exponent_and_a_given_centre_are_kept():
    track = simulate_orbit(exponent=-1.0, noise=1e-3, centre=(0.5, 0.1), rng=5)
    problem, index, noise = _problem(track, centre=(0.5, 0.1), exponent=-1.2)
    vector = apsidal_start(problem, [index], [noise])
    assert vector is not None and vector[0] == -1.2 and tuple(vector[2:4]) == (0.5, 0.1)


@pytest.mark.parametrize("case", ["short arc", "sparse", "circle", "drag modelled"])
def test_no_quick_start_where_the_path_does_not_fix_it(case):
    drag = None
    if case == "short arc":      # a third of a turn: not one radial period
        track = simulate_orbit(exponent=-2.0, noise=1e-3, duration=2.0, rate=100.0, rng=1)
    elif case == "sparse":       # 8 samples a turn
        track = simulate_orbit(exponent=-2.0, velocity=(0.0, 1.05), noise=1e-3, duration=60.0,
                               rate=8 / (2 * math.pi), rng=1)
    elif case == "circle":       # no radial excursion to read an apsidal angle from
        track = simulate_orbit(exponent=1.0, velocity=(0.0, 1.0), noise=1e-3, rng=1)
    else:
        track = simulate_orbit(exponent=1.0, drag=Drag("linear", 0.02), noise=1e-3, rng=1)
        drag = "linear"
    problem, index, noise = _problem(track, drag=drag)
    assert apsidal_start(problem, [index], [noise]) is None


def test_the_quick_fit_lands_where_the_search_does(monkeypatch):
    track = simulate_orbit(exponent=-1.5, noise=0.004, centre=(0.3, -0.2), rng=11)
    quick = fit_orbit(track)
    monkeypatch.setattr(orbit_module, "apsidal_start", lambda *args: None)
    searched = fit_orbit(track)
    assert quick.exponent == pytest.approx(searched.exponent, abs=1e-3 * searched.exponent_stderr)
    assert quick.exponent_stderr == pytest.approx(searched.exponent_stderr, rel=1e-3)
    assert abs(quick.exponent + 1.5) < 3 * quick.exponent_stderr


def test_a_quick_start_in_the_wrong_basin_is_caught_by_its_misses(monkeypatch):
    # A start whose pace is 20% fast lands the least squares in a wrong minimum that misses the
    # samples far beyond their noise; the search must then start a second fit, which wins.
    track = simulate_orbit(exponent=-1.5, noise=0.004, centre=(0.3, -0.2), duration=30.0, rng=12)
    real = orbit_module.apsidal_start

    def misled(*args):
        vector = real(*args).copy()        # exponent, ln F, centre (2), position (2), velocity (2)
        vector[1] += 2 * math.log(1.2)
        vector[6:8] *= 1.2
        return vector

    monkeypatch.setattr(orbit_module, "apsidal_start", misled)
    threshold = orbit_module.QUICK_MISS
    monkeypatch.setattr(orbit_module, "QUICK_MISS", math.inf)            # no second fit
    lost = fit_orbit(track)
    assert abs(lost.exponent + 1.5) > 10 * lost.exponent_stderr           # the trap is real
    monkeypatch.setattr(orbit_module, "QUICK_MISS", threshold)
    fit = fit_orbit(track)
    assert abs(fit.exponent + 1.5) < 3 * fit.exponent_stderr and fit.passed
