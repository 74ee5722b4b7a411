"""Open passages past an attractor (a comet; a puck deflected once by a fixed magnet), and how
the smoothing level is chosen when the fit's information lies in one fast, close turn."""

import math

import numpy as np
import pytest

from forcefit.dynamics.simulate import simulate_orbit
from forcefit.errors import NotIdentifiable
from forcefit.estimators import fit_acceleration, fit_curvature, fit_shape
from forcefit.estimators._smoothed import smoothing_diagnostic
from forcefit.geometry.levels import CONFIRMING_LEVELS, LEVEL_STEP, MAX_STEPS, settle
from forcefit.track import Track

START, RUN = (-3.0, 0.4), 3.6        # m: 3 m out, 0.4 m off the line through the centre; 3.6 m of run


def _passage(speed: float, noise: float, seed: int, rate: float = 100.0) -> Track:
    return simulate_orbit(exponent=-2.0, start=START, velocity=(speed, 0.0), duration=RUN / speed,
                          rate=rate, noise=noise, rng=100 + seed)


def test_the_simulated_passage_is_the_hyperbola_of_its_energy_and_angular_momentum():
    # Under F = -k/r^2 an orbit of energy E > 0 and angular momentum h is the hyperbola
    # r = p / (1 + e cos(theta)), p = h^2/k, e = sqrt(1 + 2 E h^2 / k^2), so its closest passage
    # is r_min = p / (1 + e) (Goldstein, Poole & Safko 2002, Classical Mechanics 3rd ed., section
    # 3.7; from memory). The samples' closest point, 2e-4 s (~1 mm) apart, lies outside the vertex
    # by at most (v dt / 2)^2 (1 / r_min - 1 / p) / 2 ~ 5e-7 m.
    speed = 1.2
    track = _passage(speed, 0.0, 0, rate=5000.0)
    energy = 0.5 * speed**2 - 1.0 / math.hypot(*START)
    h = abs(START[0] * 0.0 - START[1] * speed)
    p = h**2
    e = math.sqrt(1.0 + 2.0 * energy * h**2)
    closest = float(np.min(np.hypot(track.x, track.y)))
    assert e > 1.0
    assert p / (1.0 + e) <= closest < p / (1.0 + e) + 1e-6


# Passages that every check passed before while the exponent or the centre lay 3.2-6.3 stated
# errors from the truth (n = -2, centre at the origin): the smoothing rounded off the closest
# passage at the level where the exponent first stopped moving from one level to the next.
WRONGLY_PASSED = [(1.2, 0.002, 2), (1.6, 0.002, 5), (1.2, 0.02, 0), (1.2, 0.02, 1),
                  pytest.param(1.6, 0.005, 5, marks=pytest.mark.xfail(
                      strict=True, reason="known: the centre stays 3.2 errors off at every level that "
                                          "can be fitted (a bias of the acceleration lines near a "
                                          "close passage, not the smoothing's), and passes"))]


@pytest.mark.parametrize("fitter", [fit_acceleration, fit_curvature], ids=["acceleration", "curvature"])
@pytest.mark.parametrize(("speed", "noise", "seed"), WRONGLY_PASSED)
def test_a_fast_close_passage_passes_only_near_the_truth(fitter, speed, noise, seed):
    # The prime rule: an answer that passes its checks covers the truth (within 3 stated errors,
    # either side), or a check fails and says why.
    fit = fitter(_passage(speed, noise, seed))
    z = [(fit.exponent + 2.0) / fit.exponent_stderr,
         fit.centre[0] / fit.centre_stderr[0], fit.centre[1] / fit.centre_stderr[1]]
    if fit.passed:
        assert max(abs(value) for value in z) <= 3.0, z
    else:
        assert any(check.passed is False and check.message for check in fit.diagnostics.values())


def test_a_passage_sampled_well_enough_is_answered_and_covers():
    # The other side: a faster passage (closest approach 0.13 m, crossed in ~10 samples) at 2 mm
    # noise is answered, not refused, and within its errors (common practice: 3 stated errors).
    fit = fit_acceleration(_passage(2.5, 0.002, 3))
    assert fit.passed
    assert abs(fit.exponent + 2.0) <= 3.0 * fit.exponent_stderr
    assert all(abs(c) <= 3.0 * e for c, e in zip(fit.centre, fit.centre_stderr))


@pytest.fixture(scope="module")
def ellipse():
    t = np.linspace(0.0, 12.0, 600)
    rng = np.random.default_rng(5)
    return Track(t=t, x=np.cos(t) + 1e-3 * rng.standard_normal(t.size),
                 y=0.5 * np.sin(t) + 1e-3 * rng.standard_normal(t.size))


def _ladder(ellipse, values, *, fails_from=None):
    """settle() over made-up estimates: level i (i = 0 the heaviest) gives values[i], and its
    response to the samples is a random walk, so that the change between levels i and j has a
    standard error of sqrt(|i - j|) (our own construction)."""
    first_level = []

    def index_of(curve):
        if not first_level:
            first_level.append(curve.level)
        return round(math.log(first_level[0] / curve.level, LEVEL_STEP))

    def estimate(curve, _previous):
        if fails_from is not None and index_of(curve) >= fails_from:
            raise NotIdentifiable("lost in the noise")
        return curve

    def exponent(curve):
        i = index_of(curve)
        influence = np.zeros((ellipse.n_points, 2))
        scale = 1.0 / np.sqrt(curve.response.noise_var[: i])
        influence[: i, 0] = scale
        return float(values[i]), 1.0, influence

    return settle(ellipse, "auto", estimate, exponent)


def test_the_level_is_read_only_once_two_lighter_levels_agree(ellipse):
    steady = _ladder(ellipse, [0.0] * (MAX_STEPS + 1))
    assert steady.settled and steady.lighter == CONFIRMING_LEVELS - 1 and len(steady.steps) == 2
    # A drift of 1.5 errors per level: each step's change is within 2 of its errors (the next
    # lighter level alone would call it settled), the change over two steps is 3 / sqrt(2) = 2.1
    # of its errors: it never settles, and says so.
    drifting = _ladder(ellipse, [1.5 * i for i in range(MAX_STEPS + 1)])
    assert not drifting.settled and not drifting.exhausted
    assert smoothing_diagnostic(drifting, "s").passed is False
    assert "still changed" in smoothing_diagnostic(drifting, "s").message


def test_a_level_that_lighter_levels_cannot_check_fails_the_smoothing_check(ellipse):
    # Only one lighter level can be fitted (the force is lost in the noise beyond it): however
    # well the two agree, the smoothing's bias has not been checked.
    checked = _ladder(ellipse, [0.0] * (MAX_STEPS + 1), fails_from=2)
    assert not checked.settled and checked.exhausted
    verdict = smoothing_diagnostic(checked, "s")
    assert verdict.passed is False and "could not be fitted" in verdict.message
    assert "orbit fit" in verdict.message


def test_the_shape_fit_fails_when_its_centre_error_turns_the_closest_direction():
    # At 2 cm noise on a passage 8-11 cm from the centre the shape fit passed every check with the
    # centre 4.5 errors off (n = -2.48 +- 0.16): one error of the centre turned the direction to
    # the closest sample by 0.12 rad. It must now fail that check and say what to do.
    fit = fit_shape(_passage(1.2, 0.02, 4))
    check = fit.diagnostics["closest passage"]
    assert check.passed is False and "orbit fit" in check.message
    assert not fit.passed


def test_the_shape_fit_answers_a_precisely_measured_close_passage():
    # The other side: at 2 mm noise (0.018 rad) the check passes and so does the answer, within
    # 3 stated errors of n = -2 and of the centre (common practice).
    fit = fit_shape(_passage(1.6, 0.002, 1))
    assert fit.diagnostics["closest passage"].passed is True
    assert fit.passed
    assert abs(fit.exponent + 2.0) <= 3.0 * fit.exponent_stderr
    assert all(abs(c) <= 3.0 * e for c, e in zip(fit.centre, fit.centre_stderr))


def test_the_centre_of_a_passage_is_found_within_its_errors():
    # find_centre alone once read the centre at the cross-validated smoothing, which rounds off
    # the close turn: on these passages it lay 3-9.5 of its errors off in 71% of the coordinates.
    # It now lightens the smoothing until the centre settles (or states the move in its
    # errors); the truth (0, 0) must lie within 3 errors of every one (an hyperbola about the
    # simulated centre: see the first test).
    from forcefit.geometry.centre import find_centre

    z = []
    cases = [(1.2, 0.005, 4), (1.2, 0.002, 2), (1.6, 0.005, 4), (1.6, 0.002, 1), (2.0, 0.005, 1)]
    for speed, noise, seed in cases:
        found = find_centre(_passage(speed, noise, seed))
        z += [found.centre[0] / found.stderr[0], found.centre[1] / found.stderr[1]]
    assert np.all(np.abs(z) < 3), np.round(z, 2)
