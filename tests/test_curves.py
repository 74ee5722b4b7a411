"""Curve geometry from exact derivatives: curvature, polar quantities, the force-curvature
relation, the interior and the straight-path test."""

import math

import numpy as np
import pytest

from forcefit.geometry.curves import (
    attractive_points,
    curvature_of,
    curvature_relation,
    interior,
    is_straight,
    polar_about,
    relation_residual,
    turning_sense,
)
from forcefit.geometry.pspline import SmoothedCurve

A, B = 3.0, 1.2


def _ellipse(sense=1.0, n_points=2001):
    """x = a cos t, y = sense b sin t with exact derivatives and no errors."""
    t = np.linspace(0.0, 4 * np.pi, n_points)
    value = np.column_stack((A * np.cos(t), sense * B * np.sin(t)))
    first = np.column_stack((-A * np.sin(t), sense * B * np.cos(t)))
    zeros = np.zeros_like(value)
    return t, SmoothedCurve(parameter=t, value=value, first=first, second=-value, value_var=zeros,
                            first_var=zeros, second_var=zeros, first_second_cov=zeros,
                            noise=np.zeros(t.size), level=1.0, knot_spacing=t[1] - t[0], dof=10.0,
                            span=0.1, method="exact")


def test_curvature_of_an_ellipse():
    # do Carmo (1976), Differential Geometry of Curves and Surfaces, §1-5 (from memory):
    # kappa = a b / (a^2 sin^2 t + b^2 cos^2 t)^(3/2), positive when turning counter-clockwise.
    t, curve = _ellipse()
    kappa, error = curvature_of(curve)
    np.testing.assert_allclose(kappa, A * B / (A**2 * np.sin(t) ** 2 + B**2 * np.cos(t) ** 2) ** 1.5,
                               rtol=1e-12)
    assert np.all(error == 0.0)
    assert turning_sense(curve) == 1.0
    clockwise_kappa, _ = curvature_of(_ellipse(sense=-1.0)[1])
    np.testing.assert_allclose(clockwise_kappa, -kappa, rtol=1e-12)
    assert turning_sense(_ellipse(sense=-1.0)[1]) == -1.0


def test_polar_quantities_about_the_centre():
    # On x = a cos t, y = b sin t about the centre: r x v = a b, so cos(gamma) = a b / (r v)
    # (common practice); at t = 0 the velocity is perpendicular to the radius (gamma = 0).
    t, curve = _ellipse()
    polar = polar_about(curve, np.zeros(2))
    radius = np.hypot(A * np.cos(t), B * np.sin(t))
    speed = np.hypot(A * np.sin(t), B * np.cos(t))
    np.testing.assert_allclose(polar.radius, radius, rtol=1e-12)
    np.testing.assert_allclose(polar.cos_gamma, A * B / (radius * speed), rtol=1e-12)
    np.testing.assert_allclose(polar.polar_angle[-1] - polar.polar_angle[0], 4 * np.pi, rtol=1e-12)
    assert abs(polar.gamma[0]) < 1e-12


def test_force_curvature_relation_of_a_hooke_ellipse():
    # Newton (1687), Principia, Book I, Prop. X: the ellipse about its centre is an orbit of
    # F = w^2 r with h = a b w, so F / h^2 = r / (a b)^2: ln(F/h^2) = ln r - 2 ln(a b).
    _, curve = _ellipse()
    kappa, error = curvature_of(curve)
    used = np.ones(kappa.size, dtype=bool)
    points = curvature_relation(curve, kappa, error, np.zeros(2), used)
    np.testing.assert_allclose(points.log_force_per_h2, points.log_radius - 2 * np.log(A * B), atol=1e-10)
    assert np.all(points.sigma == 0.0) and points.used is used


def test_interior_leaves_out_the_ends_and_keeps_the_middle_half():
    t, curve = _ellipse()
    keep = interior(curve)
    margin = 2.0 * curve.span                      # EDGE_SPANS smoothing spans at each end
    assert not keep[0] and not keep[-1]
    np.testing.assert_array_equal(keep, (t >= t[0] + margin) & (t <= t[-1] - margin))
    wide = SmoothedCurve(**{**curve.__dict__, "span": 100.0})
    assert interior(wide).mean() == pytest.approx(0.5, abs=0.01)
    assert attractive_points(curve, *curvature_of(curve)).sum() == keep.sum()   # all bend inwards


def test_straight_and_bent_paths():
    rng = np.random.default_rng(1)
    s = np.linspace(0.0, 1.0, 200)
    noise = np.full(s.size, 1e-3)
    line = (s + 1e-3 * rng.standard_normal(s.size), 2 * s + 1e-3 * rng.standard_normal(s.size))
    assert is_straight(*line, noise)
    assert not is_straight(np.cos(3 * s), np.sin(3 * s), noise)


def test_the_relation_residual_vanishes_on_an_exact_hooke_orbit():
    # Newton (1687), Principia, Book I, Prop. X: x = a cos wt, y = b sin wt about the centre c
    # moves under F = w^2 r towards c (n = 1, f_ref = w^2 r_ref), with h = a b w. With exact
    # derivatives in time, and in arc length (T = v/|v|, d2r/ds2 = (acc - (acc.T) T)/|v|^2;
    # common practice), both forms of the relation hold to rounding, and a wrong exponent or
    # centre breaks them. The shape-only form also holds on derivatives in time, a parameter that
    # is not arc length: kappa = |r' x r''| / |r'|^3 in any parametrisation (do Carmo 1976,
    # Differential Geometry of Curves and Surfaces, sec. 1-5), as a smoothing in a rescaled
    # parameter gives it.
    a, b, w, r_ref, c = 0.3, 0.1, 2.0, 0.2, (0.5, -0.2)
    t = np.linspace(0.0, np.pi, 60)
    relative = np.column_stack((a * np.cos(w * t), b * np.sin(w * t)))
    value = relative + np.array(c)
    velocity = np.column_stack((-a * w * np.sin(w * t), b * w * np.cos(w * t)))
    acceleration = -(w**2) * relative
    speed = np.hypot(velocity[:, 0], velocity[:, 1])[:, None]
    tangent = velocity / speed
    along = np.sum(acceleration * tangent, axis=1)[:, None]
    in_arc = (acceleration - along * tangent) / speed**2
    h = a * b * w
    for first, second, timed, log_force in ((velocity, acceleration, True, np.log(w**2 * r_ref)),
                                            (tangent, in_arc, False, np.log(w**2 * r_ref / h**2)),
                                            (velocity, acceleration, False, np.log(w**2 * r_ref / h**2))):
        def residual(exponent, cx=c[0], log_force=log_force, first=first, second=second, timed=timed):
            return relation_residual(np.array([exponent, log_force, cx, c[1]]), value, first, second,
                                     sense=1.0, reference_radius=r_ref, timed=timed)
        assert np.abs(residual(1.0)).max() < 1e-10                # terms of size 0.1 to 30
        assert np.abs(residual(1.1)).max() > 1e-3 and np.abs(residual(1.0, cx=c[0] + 0.01)).max() > 1e-3


def _delta_method(function, values, variances, covariances=()):
    """sqrt(g^T C g) with g the central-difference gradient of ``function`` at ``values`` (the
    delta method; common practice), C diagonal plus the given (i, j, cov) pairs."""
    values = np.asarray(values, dtype=float)
    gradient = np.empty(values.size)
    for i in range(values.size):
        step = 1e-6 * max(abs(values[i]), 1.0)
        up, down = values.copy(), values.copy()
        up[i] += step
        down[i] -= step
        gradient[i] = (function(up) - function(down)) / (2 * step)
    covariance = np.diag(np.asarray(variances, dtype=float))
    for i, j, value in covariances:
        covariance[i, j] = covariance[j, i] = value
    return float(np.sqrt(gradient @ covariance @ gradient))


def test_the_curvature_and_radius_errors_are_the_delta_method_of_their_formulas():
    from types import SimpleNamespace

    from forcefit.geometry.curves import curvature_of, polar_about

    # one point with unequal derivatives and variances, and a first-second covariance per axis
    dx, dy, ddx, ddy = 0.7, -1.3, 2.1, 0.4
    var = dict(dx=1e-4, dy=4e-4, ddx=9e-4, ddy=2.5e-3)
    cov = dict(x=2e-4, y=-5e-4)
    curve = SimpleNamespace(
        value=np.array([[1.5, -0.4]]), first=np.array([[dx, dy]]), second=np.array([[ddx, ddy]]),
        value_var=np.array([[3e-6, 7e-6]]), first_var=np.array([[var["dx"], var["dy"]]]),
        second_var=np.array([[var["ddx"], var["ddy"]]]), first_second_cov=np.array([[cov["x"], cov["y"]]]))
    kappa, stderr = curvature_of(curve)

    def curvature(v):
        return (v[0] * v[3] - v[1] * v[2]) / (v[0] ** 2 + v[1] ** 2) ** 1.5

    assert kappa[0] == pytest.approx(curvature([dx, dy, ddx, ddy]), rel=1e-12)
    expected = _delta_method(curvature, [dx, dy, ddx, ddy], list(var.values()),
                             [(0, 2, cov["x"]), (1, 3, cov["y"])])
    assert stderr[0] == pytest.approx(expected, rel=1e-6)
    polar = polar_about(curve, np.array([0.2, 0.3]))
    expected = _delta_method(lambda p: math.hypot(p[0] - 0.2, p[1] - 0.3), [1.5, -0.4], [3e-6, 7e-6])
    assert polar.radius_stderr[0] == pytest.approx(expected, rel=1e-6)

    # gamma = atan2(r_hat . v_hat, |r_hat x v_hat|) of the position and the velocity, whose
    # errors are independent: its error is the delta method over (x, y, vx, vy) (common practice)
    def gamma(p):
        rx, ry, vx, vy = p[0] - 0.2, p[1] - 0.3, p[2], p[3]
        return math.atan2(rx * vx + ry * vy, abs(rx * vy - ry * vx))

    assert polar.gamma[0] == pytest.approx(gamma([1.5, -0.4, dx, dy]), rel=1e-12)
    expected = _delta_method(gamma, [1.5, -0.4, dx, dy], [3e-6, 7e-6, var["dx"], var["dy"]])
    assert polar.gamma_stderr[0] == pytest.approx(expected, rel=1e-6)

    # the relation's point ln(kappa / (r^2 cos^3 gamma)) from independent kappa, r and gamma:
    # its error is their delta method (common practice)
    from forcefit.geometry.curves import curvature_relation

    points = curvature_relation(curve, kappa, stderr, np.array([0.2, 0.3]), np.array([True]))

    def relation(p):
        return math.log(abs(p[0])) - 2.0 * math.log(p[1]) - 3.0 * math.log(math.cos(p[2]))

    values = [kappa[0], polar.radius[0], polar.gamma[0]]
    assert points.log_force_per_h2[0] == pytest.approx(relation(values), rel=1e-12)
    expected = _delta_method(relation, values, [stderr[0] ** 2, polar.radius_stderr[0] ** 2,
                                                polar.gamma_stderr[0] ** 2])
    assert points.sigma[0] == pytest.approx(expected, rel=1e-6)


def test_the_edges_of_a_long_stretch_without_samples_are_ends_too():
    # Samples lost over more than the smoothing's reach (a hidden pericentre passage): the
    # smoothed derivatives beside the gap carry an end's bias, so those samples are left out as
    # the ends' are; a single dropped frame is bridged and costs nothing (common practice).
    from forcefit.geometry.curves import interior
    from forcefit.geometry.pspline import smooth_curve

    rng = np.random.default_rng(4)
    s = np.linspace(0.0, 6 * np.pi, 1200)
    dropped = np.delete(s, 600)
    gapped = s[(s < 8.0) | (s > 10.0)]
    for parameter in (dropped, gapped):
        curve = smooth_curve(parameter, np.cos(parameter) + 1e-3 * rng.standard_normal(parameter.size),
                             np.sin(parameter) + 1e-3 * rng.standard_normal(parameter.size))
        keep = interior(curve)
        near_gap = (parameter > 8.0 - 3 * curve.span) & (parameter < 10.0 + 3 * curve.span)
        ends = (parameter < 3 * curve.span) | (parameter > parameter[-1] - 3 * curve.span)
        if parameter is dropped:
            assert keep[~ends].all()
        else:
            last, first = parameter[parameter < 8.0][-1], parameter[parameter > 10.0][0]
            assert not keep[(parameter <= last) & (parameter > last - curve.span)].any()
            assert not keep[(parameter >= first) & (parameter < first + curve.span)].any()
            assert keep[~near_gap & ~ends].all()
