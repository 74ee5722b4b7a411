"""Finding the force centre, with and without timestamps."""

import math

import numpy as np
import pytest

from forcefit.dynamics.simulate import simulate_orbit
from forcefit.errors import NotIdentifiable
from forcefit.geometry.centre import find_centre
from forcefit.geometry.smoothing import smooth_track
from forcefit.track import Track


@pytest.mark.parametrize("exponent", [-2.0, -1.0, 0.5, 1.0])
def test_centre_from_accelerations_within_three_standard_errors(exponent):
    track = simulate_orbit(exponent=exponent, centre=(0.4, -0.3), noise=0.002, rate=None, rng=11)
    estimate = find_centre(track)
    assert estimate.method == "acceleration lines"
    for axis, truth in enumerate((0.4, -0.3)):
        assert abs(estimate.centre[axis] - truth) < 3.5 * estimate.stderr[axis]


def test_a_start_given_to_the_centre_search_leads_to_the_same_centre():
    # The lines of the accelerations meet in one point: a start near it or far (the estimators
    # pass the previous smoothing level's centre) gives the same least-squares centre as the
    # search's own first intersection, to a twentieth of its error (the reweighting rounds stop
    # a few millionths short of the fixed point).
    track = simulate_orbit(exponent=-1.5, centre=(0.4, -0.3), noise=0.002, rate=None, rng=11)
    own = find_centre(track)
    for start in ((0.5, -0.2), (0.3, -0.45), (9.0, 9.0)):
        started = find_centre(track, starts=[start])
        assert started.method == "acceleration lines"
        assert np.allclose(started.centre, own.centre, atol=0.05 * min(own.stderr))


def test_centre_of_a_rosette_without_timestamps_is_unique():
    track = simulate_orbit(exponent=-1.5, centre=(0.4, -0.3), noise=0.002, rate=None, rng=12).shape_only()
    estimate = find_centre(track)
    assert estimate.alternatives == ()
    assert np.allclose(estimate.centre, (0.4, -0.3), atol=3 * max(estimate.stderr) + 1e-4)


def test_closed_ellipse_without_timestamps_is_ambiguous():
    # Source: Bertrand (1873), C. R. Acad. Sci. 77, 849 (from memory): an ellipse is an orbit
    # of n = 1 about its centre and of n = -2 about a focus; both must be reported.
    theta = np.linspace(0, 4 * np.pi, 800)
    a, b = 2.0, 1.0
    track = Track(x=a * np.cos(theta), y=b * np.sin(theta))
    estimate = find_centre(track)
    found = [estimate.centre, *[other.centre for other in estimate.alternatives]]
    focus = np.sqrt(a**2 - b**2)
    for expected in ((0.0, 0.0), (focus, 0.0), (-focus, 0.0)):
        assert min(np.hypot(*(np.asarray(c) - expected)) for c in found) < 1e-3


def test_straight_path_has_no_centre():
    t = np.linspace(0.0, 1.0, 200)
    rng = np.random.default_rng(1)
    track = Track(t=t, x=t + 1e-3 * rng.standard_normal(200), y=2 * t + 1e-3 * rng.standard_normal(200))
    with pytest.raises(NotIdentifiable, match="straight"):
        find_centre(track)
    with pytest.raises(NotIdentifiable, match="straight"):
        find_centre(track.shape_only())


def _centre_z(exponent, seeds):
    z = []
    for seed in seeds:
        track = simulate_orbit(exponent=exponent, centre=(0.4, -0.3), noise=0.002, rate=None, rng=100 + seed)
        estimate = find_centre(track)
        z += [(found - truth) / error
              for found, truth, error in zip(estimate.centre, (0.4, -0.3), estimate.stderr)]
    return np.array(z)


def test_centre_errors_are_neither_too_large_nor_too_small():
    # Issue 20, item 7: the stated centre error was about 4.5 times too large (SD of z 0.22 -
    # 0.28). z = (found - true) / stated error is N(0, 1) when the errors are honest (common
    # practice); 12 z-scores put their SD within 0.6-1.6 unless the errors are off by ~1.7x.
    z = _centre_z(-1.0, range(6))
    assert 0.6 < np.std(z) < 1.6, np.std(z)


@pytest.mark.slow
@pytest.mark.parametrize("estimator", ["acceleration", "curvature"])
@pytest.mark.parametrize("exponent", [-2.0, 1.0])
def test_centre_errors_of_the_fits_are_honest_over_many_seeds(estimator, exponent):
    # The centre as the fits state it (found at the smoothing level where the exponent
    # settled) over 40 seeds (80 z-scores): SD of z within 0.8-1.25, 90-98% inside 1.96
    # stated errors (common practice).
    from forcefit.estimators import fit_acceleration, fit_curvature
    fit = {"acceleration": fit_acceleration, "curvature": fit_curvature}[estimator]
    z = []
    for seed in range(40):
        track = simulate_orbit(exponent=exponent, centre=(0.4, -0.3), noise=0.002, rate=None, rng=100 + seed)
        result = fit(track)
        z += [(found - truth) / error
              for found, truth, error in zip(result.centre, (0.4, -0.3), result.centre_stderr)]
    z = np.array(z)
    assert 0.8 < np.std(z) < 1.25, np.std(z)
    assert 0.90 <= np.mean(np.abs(z) < 1.96) <= 0.98 or np.std(z) < 1.1


def test_centre_of_a_narrow_ellipse_whose_acceleration_lies_along_one_axis():
    # Newton (1687), Principia, Book I, Prop. X: x = cos 2t, y = 0.1 sin 2t is an orbit of a force
    # towards the ellipse's centre (0, 0); its acceleration, -4 (x, y), lies almost along x. The
    # acceleration is significant wherever |x| is not small, so the centre is found, within its
    # stated errors on both axes.
    rng = np.random.default_rng(3)
    t = np.linspace(0.0, 12.0, 600)
    track = Track(t=t, x=np.cos(2 * t) + 0.003 * rng.standard_normal(t.size),
                  y=0.1 * np.sin(2 * t) + 0.003 * rng.standard_normal(t.size))
    estimate = find_centre(track, curve=smooth_track(track))          # at the GCV level
    assert estimate.method == "acceleration lines"
    for axis in (0, 1):
        assert 0 < estimate.stderr[axis] < 0.05 and abs(estimate.centre[axis]) < 4 * estimate.stderr[axis]
    # Left to choose its level, the search lightens the smoothing; here the nearly parallel
    # lines' noise bias grows as it does and the centre never settles (it moves by ~0.3): the
    # errors then include that move, and a note says so.
    searched = find_centre(track)
    assert searched.notes and "did not settle" in searched.notes[0]
    for axis in (0, 1):
        assert abs(searched.centre[axis]) < 2 * searched.stderr[axis]


def test_the_first_centre_is_the_weighted_least_squares_meeting_point_of_the_lines():
    # The fit of the acceleration lines starts from the point nearest to all of them: it minimises
    # sum (a x (c - p))^2 / sd^2 (the cross product is |a| times the distance from c to the line
    # through p along a: common practice). Exact lines through (2, -1) meet there; lines bent at
    # random meet where an independent least-squares solver (scipy's) puts the minimum.
    from scipy.optimize import least_squares

    from forcefit.geometry.centre import _first_intersection

    rng = np.random.default_rng(5)
    angle = rng.uniform(0.0, 2 * np.pi, 40)
    points = np.column_stack((2.0 + 3.0 * np.cos(angle), -1.0 + 1.5 * np.sin(angle)))
    towards = np.array([2.0, -1.0]) - points
    accel = towards * rng.uniform(0.5, 4.0, 40)[:, None]
    sd = rng.uniform(0.05, 0.5, 40)
    magnitude = np.hypot(accel[:, 0], accel[:, 1])
    np.testing.assert_allclose(_first_intersection(points, accel, magnitude, sd), [2.0, -1.0], atol=1e-12)
    bent = accel + 0.3 * magnitude[:, None] * rng.standard_normal((40, 2))
    bent_magnitude = np.hypot(bent[:, 0], bent[:, 1])

    def lines(c):
        return (bent[:, 0] * (c[1] - points[:, 1]) - bent[:, 1] * (c[0] - points[:, 0])) / sd

    reference = least_squares(lines, np.zeros(2), xtol=1e-15, ftol=1e-15, gtol=1e-15).x
    found = _first_intersection(points, bent, bent_magnitude, sd)
    np.testing.assert_allclose(found, reference, atol=1e-9)
    assert np.linalg.norm(found - [2.0, -1.0]) > 1e-3               # the bent lines do not meet at (2, -1)


def _exact_hooke_curve(omega=2.0, a=0.3, b=0.1, centre=(2.0, -1.0), angle=0.6, n_points=801):
    """x = a cos(wt), y = b sin(wt) turned by ``angle`` and moved to ``centre``, with its exact
    derivatives and no errors: an orbit of F = -w^2 r about ``centre``."""
    from forcefit.geometry.pspline import SmoothedCurve

    t = np.linspace(0.0, 2 * np.pi / omega, n_points)
    turn = np.array([[np.cos(angle), -np.sin(angle)], [np.sin(angle), np.cos(angle)]])
    local = np.column_stack((a * np.cos(omega * t), b * np.sin(omega * t)))
    value = local @ turn.T + np.asarray(centre)
    first = np.column_stack((-a * omega * np.sin(omega * t), b * omega * np.cos(omega * t))) @ turn.T
    second = -omega**2 * local @ turn.T
    zeros = np.zeros_like(value)
    tiny = np.full_like(value, 1e-12)
    return SmoothedCurve(parameter=t, value=value, first=first, second=second, value_var=tiny,
                         first_var=tiny, second_var=tiny, first_second_cov=zeros,
                         noise=np.zeros(t.size), level=1.0, knot_spacing=t[1] - t[0], dof=10.0,
                         span=0.1, method="exact")


def test_the_relation_starts_at_hookes_law_with_times_and_without():
    # Newton (1687), Principia, Book I, Prop. X: the ellipse about its centre needs F = w^2 r, so
    # the relation's first line has slope n = 1 and, with times, ln F(r_ref) = ln(w^2 r_ref); without
    # them ln(F / h^2) with h = a b w, the ellipse's constant angular momentum.
    from forcefit.geometry.centre import relation_start

    curve = _exact_hooke_curve()
    used = np.ones(curve.parameter.size, dtype=bool)
    for timed in (True, False):
        (slope, intercept), reference, sense = relation_start(curve, used, np.array([2.0, -1.0]), timed)
        h2 = 1.0 if timed else (0.3 * 0.1 * 2.0) ** 2
        assert slope == pytest.approx(1.0, abs=1e-9) and sense == 1.0
        assert intercept == pytest.approx(np.log(4.0 * reference / h2), abs=1e-9)


def test_the_shape_search_starts_at_the_middle_the_centroid_and_the_foci():
    # An ellipse of semi-axes a, b has its foci sqrt(a^2 - b^2) from its centre along the major
    # axis (Apollonius, Conics, III.45; common practice); its bounding box's middle and its
    # evenly sampled centroid are its centre.
    from forcefit.geometry.centre import _starting_centres

    curve = _exact_hooke_curve()
    points = curve.value[:-1]                                     # one full turn, evenly in angle
    starts = _starting_centres(points)
    focal = math.sqrt(0.3**2 - 0.1**2) * np.array([np.cos(0.6), np.sin(0.6)])
    expected = [(2.0, -1.0), (2.0, -1.0), np.array([2.0, -1.0]) + focal, np.array([2.0, -1.0]) - focal]
    assert len(starts) == 4
    np.testing.assert_allclose(starts[0], expected[0], atol=1e-4)
    np.testing.assert_allclose(starts[1], expected[1], atol=1e-12)
    for found, focus in zip(sorted(starts[2:], key=lambda c: c[0]), sorted(expected[2:], key=lambda c: c[0])):
        np.testing.assert_allclose(found, focus, atol=1e-4)


@pytest.mark.parametrize("bending_samples, heavier", [(9, True), (10, False)])
def test_a_heavier_guide_is_drawn_only_below_the_fewest_bending_samples(monkeypatch, bending_samples,
                                                                         heavier):
    # The documented rule (MIN_BENDING: the fewest samples that must bend significantly): with
    # exactly that many the fit's own smoothing guides the first line; with one fewer a heavier
    # smoothing is tried. Checked on both sides of the boundary by fixing how many samples bend.
    from forcefit.geometry import centre

    assert centre.MIN_BENDING == 10
    track = simulate_orbit(exponent=-2.0, duration=8.0, rate=20.0, noise=1e-3, rng=4)
    curve = smooth_track(track)
    drawn: list[float] = []

    def counted(*args, **kwargs):
        drawn.append(kwargs.get("level", math.nan))
        return smooth_track(*args, **kwargs)

    def fixed(guide, kappa, kappa_err):
        mask = np.zeros(guide.value.shape[0], dtype=bool)
        mask[10:10 + bending_samples] = True
        return mask

    monkeypatch.setattr(centre, "smooth_track", counted)
    monkeypatch.setattr(centre, "attractive_points", fixed)
    guide, bending = centre.relation_guide(track, curve)
    assert int(bending.sum()) == bending_samples
    assert (guide is not curve) == heavier
    assert drawn == ([curve.level * centre.HEAVIER * centre.HEAVIER**i for i in range(centre.HEAVIER_STEPS)]
                     if heavier else [])


def test_too_few_bending_samples_refuse_the_centre_and_say_how_heavily_they_were_smoothed(monkeypatch):
    # With fewer samples bending significantly than MIN_BENDING on every guide, the centre is
    # refused; the message states the heaviest smoothing tried, as a multiple of the fit's own
    # level (recorded here as the guides are drawn).
    from forcefit.geometry import centre

    timed = simulate_orbit(exponent=-2.0, duration=8.0, rate=20.0, noise=1e-3, rng=4)
    track = Track(x=timed.x, y=timed.y)                      # the shape alone
    curve = smooth_track(track)
    drawn: list[float] = []

    def counted(*args, **kwargs):
        drawn.append(kwargs["level"])
        return smooth_track(*args, **kwargs)

    def too_few(guide, kappa, kappa_err):
        mask = np.zeros(guide.value.shape[0], dtype=bool)
        mask[10:19] = True
        return mask

    monkeypatch.setattr(centre, "smooth_track", counted)
    monkeypatch.setattr(centre, "attractive_points", too_few)
    with pytest.raises(NotIdentifiable, match="too noisy to locate the centre") as refusal:
        find_centre(track, curve=curve)
    assert drawn and f"even smoothed {max(drawn) / curve.level:.3g} times more heavily" in str(refusal.value)
    assert f"9 of {track.n_points} points bend significantly" in str(refusal.value)


@pytest.mark.parametrize(("significant", "signal", "refused"),
                         [(2, 3.5, False), (1, 3.5, True), (2, 2.9, True), (2, 3.0, True), (3, 3.01, False)])
def test_no_force_is_seen_below_two_percent_of_samples_beyond_three_errors(significant, signal, refused):
    # The rule (MIN_SIGNAL = 3, MIN_SIGNIFICANT_FRACTION = 0.02): the acceleration lines are
    # refused as "no force" when fewer than 2% of the samples have |a| beyond 3 of its errors.
    # On 100 samples: 2 at 3.5 errors are exactly 2% (kept), 1 is not, 2 at 2.9 or exactly 3 errors are not
    # significant; the rest have a = 0. What happens after the rule (a fit through two lines) is
    # not this test's business.
    from types import SimpleNamespace

    from forcefit.geometry.centre import _from_accelerations

    second = np.zeros((100, 2))
    second[10:10 + significant] = [signal * math.sqrt(2.0), 0.0]       # |a| / sd(|a|) = signal
    line = np.column_stack((np.arange(100.0), np.ones(100)))
    curve = SimpleNamespace(parameter=np.arange(100.0), span=0.0, second=second,
                            second_var=np.ones((100, 2)), value=line)
    track = Track(x=np.arange(100.0), y=np.zeros(100), name="straight")
    try:
        _from_accelerations(track, curve, (0.0, 0.0))
    except NotIdentifiable as error:
        said_no_force = "not significantly different from zero" in str(error)
    except Exception:                                     # noqa: BLE001 - past the rule
        said_no_force = False
    else:
        said_no_force = False
    assert said_no_force == refused


def test_a_centre_that_settles_is_returned_as_its_level_found_it():
    # On a closed rosette the centre settles as the smoothing is lightened (two lighter levels
    # agree): find_centre returns that level's estimate, its errors not widened and no note;
    # the truth (0.4, -0.3) within 3 of them.
    track = simulate_orbit(exponent=-1.0, centre=(0.4, -0.3), noise=0.002, rng=201)
    found = find_centre(track)
    assert found.notes == ()
    np.testing.assert_allclose(np.square(found.stderr), np.diag(found.covariance), rtol=1e-12)
    assert all(abs(c - truth) < 3 * e for c, truth, e in zip(found.centre, (0.4, -0.3), found.stderr))


def test_centres_within_one_and_a_half_times_the_best_chi_square_are_all_reported(monkeypatch):
    # The documented rule (AMBIGUITY_FACTOR = 1.5): a shape-only track's other centres are
    # listed when their reduced chi-square is at most 1.5 times the best's (exactly 1.5 counts);
    # here four centres are found with reduced chi-squares 1, 1.5, 1.6 and 2.4.
    from forcefit.geometry import centre

    theta = np.linspace(0, 4 * np.pi, 400)
    track = Track(x=2.0 * np.cos(theta), y=np.sin(theta), name="ellipse")
    chi2 = {(0.0, 0.0): 1.0, (1.0, 0.0): 1.5, (2.0, 0.0): 1.6, (3.0, 0.0): 2.4}

    def refined(curve, guide, bending, start, size):
        return centre.CentreEstimate(tuple(start), (0.1, 0.1), "curvature relation", chi2[tuple(start)],
                                     np.eye(2) * 0.01, np.zeros((2, track.n_points, 2)))

    monkeypatch.setattr(centre, "_refine_centre", refined)
    found = find_centre(track, curve=smooth_track(track), starts=list(chi2))
    assert found.centre == (0.0, 0.0)
    assert [other.centre for other in found.alternatives] == [(1.0, 0.0)]
