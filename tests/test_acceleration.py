"""The acceleration estimator: the radial acceleration against r, and its torque check."""

import re

import pytest

from forcefit.dynamics.propagate import Drag
from forcefit.dynamics.simulate import simulate_orbit
from forcefit.errors import NotIdentifiable
from forcefit.estimators import fit_acceleration
from forcefit.track import Track


def test_acceleration_needs_timestamps(noisy_orbit):
    with pytest.raises(NotIdentifiable, match="needs timestamps"):
        fit_acceleration(noisy_orbit(1.0, rng=1).shape_only())


def test_a_drag_shows_as_a_torque_against_the_motion():
    # A drag a = -c v has a component across the radius whenever the body moves round the centre:
    # a torque, which no central force has (common practice). The centre sits away from the
    # origin, so that the radius is measured from where it is said to be.
    centre = (2.5, -1.5)

    def moved(track):
        return Track(t=track.t, x=track.x + centre[0], y=track.y + centre[1], name=track.name)

    track = moved(simulate_orbit(exponent=1.0, strength=4.0, drag=Drag("linear", 0.05), noise=2e-4,
                                 duration=20.0, rate=50.0, rng=3))
    check = fit_acceleration(track, centre=centre).diagnostics["transverse acceleration"]
    assert check.passed is False and "against the motion" in check.message
    clean = moved(simulate_orbit(exponent=1.0, strength=4.0, noise=2e-4, duration=20.0, rate=50.0, rng=3))
    assert fit_acceleration(clean, centre=centre).diagnostics["transverse acceleration"].passed
    # A drag 25 times weaker shows a torque many standard errors from zero but 0.1% of the
    # acceleration: too small to matter for the force law, so noted, not failed (the angular
    # momentum check reports the drift it causes) -- in metres and, the same, in micrometres.
    weak = simulate_orbit(exponent=1.0, strength=4.0, drag=Drag("linear", 0.002), noise=2e-4,
                          duration=20.0, rate=50.0, rng=3)
    for scale in (1.0, 1e6):
        written = Track(t=weak.t, x=(weak.x + centre[0]) * scale, y=(weak.y + centre[1]) * scale)
        check = fit_acceleration(written, centre=(centre[0] * scale, centre[1] * scale)).diagnostics[
            "transverse acceleration"]
        found = re.search(r"radius (-[0-9.e+]+) ± ([0-9.e+-]+) .*\(([0-9.]+)% of the typical", check.message)
        assert found and float(found[1]) < -5 * float(found[2]) and float(found[3]) < 0.5, check.message
        assert check.passed is True, (scale, check.message)


def test_the_power_law_check_measures_how_much_the_local_exponent_changes(bent):
    # F = r^(-2 + b ln r) has the local exponent -2 + 2 b ln r (differentiate ln F by ln r; common
    # practice): across the track's radial range it changes by 2 b ln(r_max / r_min), which the
    # check must report within 4 of its stated errors (its change over its number of standard
    # errors) and call significant.
    track, truth = bent
    check = fit_acceleration(track, centre=(0.0, 0.0)).diagnostics["power law"]
    found = re.search(r"changes by ([-+0-9.e]+) across the radial range \(([0-9.]+) standard errors\)",
                      check.message)
    assert found and check.passed is False
    change, z = float(found[1]), float(found[2])
    assert z > 5 and abs(change - truth) < 4 * abs(change) / z


def test_moving_the_track_and_its_centre_together_changes_nothing():
    # Translation invariance (common practice): a central force depends on the position relative
    # to its centre only, so every number of the fit, the torque check's mean included, must be
    # the same for the track and centre moved together (the centre far from the orbit's size).
    track = simulate_orbit(exponent=1.0, strength=4.0, drag=Drag("linear", 0.05), noise=2e-4,
                           duration=20.0, rate=50.0, rng=3)
    here = fit_acceleration(track, centre=(0.0, 0.0))
    moved = Track(t=track.t, x=track.x + 25.0, y=track.y - 15.0, sigma=track.sigma)
    there = fit_acceleration(moved, centre=(25.0, -15.0))
    for name in ("exponent", "exponent_stderr", "strength", "strength_stderr", "reference_radius",
                 "force_at_reference", "force_at_reference_stderr"):                   # rounding
        assert getattr(there, name) == pytest.approx(getattr(here, name), rel=1e-4), name  # at 25 m

    def numbers(fit):
        text = fit.diagnostics["transverse acceleration"].message
        return [float(word) for word in re.findall(r"[-+]?\d+\.?\d*(?:e[-+]?\d+)?", text)]

    assert numbers(there) == pytest.approx(numbers(here), rel=1e-3)
