"""The curvature estimator: the force-curvature relation as a straight line in log-log."""

import math
import re

import numpy as np
import pytest

from forcefit.dynamics.propagate import Drag
from forcefit.dynamics.simulate import simulate_orbit
from forcefit.errors import NotIdentifiable
from forcefit.estimators import fit_curvature
from forcefit.track import Track


def test_centred_ellipse_gives_hookes_law():
    # Newton (1687), Principia, Book I, Prop. X: an ellipse about its centre needs a force
    # proportional to distance (n = 1); for x = a cos(wt), y = b sin(wt) the strength is k = w^2.
    t = np.linspace(0.0, 10.0, 2001)                                  # s
    fit = fit_curvature(Track(t=t, x=0.3 * np.cos(2 * t), y=0.1 * np.sin(2 * t)), centre=(0.0, 0.0))
    assert fit.exponent == pytest.approx(1.0, abs=1e-3)
    assert fit.strength == pytest.approx(4.0, rel=1e-3)               # s^-2
    assert fit.angular_momentum == pytest.approx(0.3 * 0.1 * 2.0, rel=1e-6)   # h = a b w
    assert fit.smoothing_dof > 0 and fit.correlation_time >= 1.0


def test_each_points_own_h_makes_it_immune_to_drag():
    # A drag acts along the motion, so it has no part across the path: the curvature still
    # measures the central force, F = h^2 kappa / (r^2 cos^3 gamma), with each point's own h
    # (Newton 1687, Principia, Book I, Prop. VI; common practice), while h itself decays.
    track = simulate_orbit(exponent=1.0, strength=4.0, drag=Drag("linear", 0.05), noise=2e-4,
                           duration=20.0, rate=50.0, rng=3)
    fit = fit_curvature(track, centre=(0.0, 0.0))
    assert abs(fit.exponent - 1.0) < 4 * fit.exponent_stderr
    assert abs(fit.strength - 4.0) < 4 * fit.strength_stderr
    assert fit.diagnostics["angular momentum"].passed is False         # but h is not constant


def test_the_power_law_check_measures_how_much_the_local_exponent_changes(bent):
    # F = r^(-2 + b ln r) has the local exponent -2 + 2 b ln r (differentiate ln F by ln r; common
    # practice): across the track's radial range it changes by 2 b ln(r_max / r_min), which the
    # check must report within 4 of its stated errors (its change over its number of standard
    # errors) and call significant. The track and its centre are moved to (3, -2) m together,
    # which changes no radius: a radius measured from anywhere but the centre would show.
    from dataclasses import replace

    track, truth = bent
    moved = replace(track, x=np.asarray(track.x) + 3.0, y=np.asarray(track.y) - 2.0)
    check = fit_curvature(moved, centre=(3.0, -2.0)).diagnostics["power law"]
    found = re.search(r"changes by ([-+0-9.e]+) across the radial range \(([0-9.]+) standard errors\)",
                      check.message)
    assert found and check.passed is False
    change, z = float(found[1]), float(found[2])
    assert z > 5 and abs(change - truth) < 4 * abs(change) / z



@pytest.mark.parametrize("method", ["curvature", "acceleration"])
def test_a_circular_orbit_is_refused_with_the_noise_in_the_radius(method):
    # A circle shows no exponent. The refusal compares the spread of r with what noise alone gives:
    # 8 times the radius's error, which for equal errors in x and y is their common error whatever
    # the direction (delta method, var r = ux^2 var x + uy^2 var y; common practice).
    from forcefit.geometry.curves import interior
    from forcefit.geometry.smoothing import smooth_track

    rng = np.random.default_rng(1)
    t = np.linspace(0.0, 20.0, 801)                                      # s
    track = Track(t=t, x=np.cos(t) + 1e-3 * rng.standard_normal(t.size),
                  y=np.sin(t) + 1e-3 * rng.standard_normal(t.size))     # m
    curve = smooth_track(track)
    inside = interior(curve)
    np.testing.assert_allclose(curve.value_var[inside, 0], curve.value_var[inside, 1], rtol=1e-9)
    expected = 8.0 * math.sqrt(float(np.mean(curve.value_var[inside, 0])))
    from forcefit.estimators import fit

    with pytest.raises(NotIdentifiable, match="hardly changes") as refused:
        fit(track, method, centre=(0.0, 0.0))
    found = re.search(r"noise alone moves it by about ([0-9.e-]+)\)", str(refused.value))
    assert found and float(found[1]) == pytest.approx(expected, rel=0.03)      # printed to 2 digits


def test_a_described_path_keeps_its_centre_given_or_found():
    # A path described about a given centre is fitted about that centre, held (stated error 0);
    # one described with its centre found is fitted with the centre free (a stated error above 0),
    # as fit_curvature(track, centre=...) and fit_curvature(track) do (the README's promise).
    from forcefit.geometry.path import describe_path

    orbit = simulate_orbit(exponent=1.0, strength=4.0, start=(0.5, 0.0), velocity=(0.0, 0.6),
                           noise=2e-4, duration=8.0, rate=60.0, rng=4)
    track = Track(t=orbit.t, x=orbit.x + 0.3, y=orbit.y - 0.2, sigma=orbit.sigma)
    held = fit_curvature(track, path=describe_path(track, centre=(0.3, -0.2)))
    assert held.centre == (0.3, -0.2) and held.centre_stderr == (0.0, 0.0)
    found = fit_curvature(track, path=describe_path(track))
    assert min(found.centre_stderr) > 0
    for c, truth, se in zip(found.centre, (0.3, -0.2), found.centre_stderr):
        assert abs(c - truth) < 4 * se


def test_an_alternative_centre_that_cannot_be_fitted_is_left_out_and_the_rest_kept(monkeypatch):
    # A closed ellipse without times is an orbit about its centre (n = 1) and about either focus
    # (n = -2) (Newton, Principia I, props. 10-11; Bertrand 1873): the fit reports one and lists
    # the other two. When one alternative's relation cannot be fitted, only that one is dropped.
    import forcefit.estimators.curvature as curvature

    theta = np.linspace(0, 4 * np.pi, 800)
    rng = np.random.default_rng(0)
    track = Track(x=2.0 * np.cos(theta) + 1e-4 * rng.standard_normal(800),
                  y=np.sin(theta) + 1e-4 * rng.standard_normal(800), name="ellipse")
    fit = fit_curvature(track)
    laws = sorted([fit.exponent, *(other.exponent for other in fit.alternatives)])
    assert np.allclose(laws, [-2.0, -2.0, 1.0], atol=0.01)
    # the answer is ambiguous, so it fails its centre check, naming each alternative
    assert fit.diagnostics["centre"].passed is False and not fit.passed
    assert all(f"about ({other.centre[0]:.4g}, {other.centre[1]:.4g})" in fit.diagnostics["centre"].message
               for other in fit.alternatives)
    dropped = fit.alternatives[0].centre
    relation = curvature._relation

    def failing(track, curve, centre, influence, **options):
        if np.hypot(*(np.asarray(centre) - dropped)) < 1e-9:
            raise NotIdentifiable("cannot")
        return relation(track, curve, centre, influence, **options)

    monkeypatch.setattr(curvature, "_relation", failing)
    refit = fit_curvature(track)
    assert [other.centre for other in refit.alternatives] == [other.centre for other in fit.alternatives[1:]]


def test_a_relation_that_cannot_be_fitted_about_the_given_centre_is_refused_naming_it(monkeypatch):
    # When the force-curvature relation cannot be solved about the centre given, the refusal
    # names that centre (x then y) so that the user can check it.
    import forcefit.estimators.curvature as curvature
    from forcefit.errors import GeometryError

    def unsolvable(*args, **kwargs):
        raise GeometryError("singular")

    monkeypatch.setattr(curvature, "fit_pointwise", unsolvable)
    track = simulate_orbit(exponent=-2.0, noise=1e-3, rng=1, centre=(0.3, -0.7))
    with pytest.raises(NotIdentifiable, match=re.escape("about (0.3, -0.7); check the centre")):
        fit_curvature(track, centre=(0.3, -0.7))


@pytest.mark.parametrize("method", ["curvature", "acceleration"])
def test_a_smoothing_at_the_knot_grids_resolution_is_not_taken_as_settled(method):
    # A Kepler orbit (e = 0.36) with 95 samples a turn, measured to 2.5e-6 of its size: lighter
    # and lighter levels agree, but only because the spline's knot grid, not its level, sets the
    # smoothing (each point averages about one knot spacing); the grid's own bias put n 3-6
    # standard errors off. The prime rule, two-sided: a passing answer covers the truth, and at
    # ordinary noise (1e-3 of the size) the smoothing check passes (Kepler 1609; Newton,
    # Principia I, prop. 11: an ellipse about a focus under the inverse square).
    from forcefit.estimators import fit

    for seed in (1,):                    # 6 standard errors off before the check
        precise = simulate_orbit(exponent=-2.0, strength=1.0, start=(1.0, 0.0), velocity=(0.0, 0.8),
                                 duration=15.7, rate=375 / 15.7, noise=2.5e-6, rng=seed)
        result = fit(precise, method=method)
        z = (result.exponent + 2.0) / result.exponent_stderr
        assert not result.passed or abs(z) < 3.0
        if not result.diagnostics["smoothing"].passed:
            assert "knot grid" in result.diagnostics["smoothing"].message
    ordinary = simulate_orbit(exponent=-2.0, strength=1.0, start=(1.0, 0.0), velocity=(0.0, 0.8),
                              duration=15.7, rate=375 / 15.7, noise=1e-3, rng=0)
    result = fit(ordinary, method=method)
    assert result.diagnostics["smoothing"].passed
    assert abs(result.exponent + 2.0) < 3.0 * result.exponent_stderr
