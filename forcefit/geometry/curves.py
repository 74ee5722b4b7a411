"""Pure geometry of a smoothed curve: curvature, and polar quantities about a centre."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from .._types import FloatArray

if TYPE_CHECKING:  # scipy's splines load only where a curve is smoothed, not for the orbit fit's checks
    from .pspline import SmoothedCurve

MIN_COS_GAMMA = 1e-6
"""cos(gamma) is floored here so that log(cos(gamma)) stays finite on radial stretches."""


def curvature_of(curve: SmoothedCurve) -> tuple[FloatArray, FloatArray]:
    """Signed curvature kappa = (x'y'' - y'x'') / (x'**2 + y'**2)**1.5 and its standard error.

    The error is propagated linearly from the variances of the derivatives (and the
    covariance of each coordinate's first and second derivative).

    Returns
    -------
    kappa, stderr : ndarray, shape (n_points,)
        In 1/L; kappa > 0 where the curve turns counter-clockwise.
    """
    (dx, dy), (ddx, ddy) = curve.first.T, curve.second.T
    speed2 = dx**2 + dy**2
    speed3 = speed2**1.5
    kappa = (dx * ddy - dy * ddx) / speed3
    grad_dx = ddy / speed3 - 3.0 * kappa * dx / speed2
    grad_dy = -ddx / speed3 - 3.0 * kappa * dy / speed2
    grad_ddx, grad_ddy = -dy / speed3, dx / speed3
    variance = (
        grad_dx**2 * curve.first_var[:, 0] + grad_ddx**2 * curve.second_var[:, 0]
        + 2 * grad_dx * grad_ddx * curve.first_second_cov[:, 0]
        + grad_dy**2 * curve.first_var[:, 1] + grad_ddy**2 * curve.second_var[:, 1]
        + 2 * grad_dy * grad_ddy * curve.first_second_cov[:, 1]
    )
    return kappa, np.sqrt(np.maximum(variance, 0.0))


def turning_sense(curve: SmoothedCurve) -> float:
    """+1 when the tangent turns counter-clockwise overall, -1 when clockwise."""
    angle = np.unwrap(np.arctan2(curve.first[:, 1], curve.first[:, 0]))
    return 1.0 if angle[-1] >= angle[0] else -1.0


@dataclass(frozen=True)
class Polar:
    """Radius, polar angle and the angle gamma about a centre, with standard errors."""

    radius: FloatArray
    radius_stderr: FloatArray
    polar_angle: FloatArray
    gamma: FloatArray
    gamma_stderr: FloatArray
    cos_gamma: FloatArray


def polar_about(curve: SmoothedCurve, centre: FloatArray) -> Polar:
    """r, theta and gamma (the angle between velocity and the normal to the radius).

    sin(gamma) = r_hat . v_hat and cos(gamma) = |r_hat x v_hat|, so gamma lies in
    [-pi/2, pi/2] whichever way the body goes round.
    """
    offset = curve.value - centre
    radius = np.hypot(offset[:, 0], offset[:, 1])
    radius = np.maximum(radius, 1e-300)
    speed = np.hypot(curve.first[:, 0], curve.first[:, 1])
    unit_r = offset / radius[:, None]
    unit_v = curve.first / speed[:, None]
    cos_gamma = np.abs(unit_r[:, 0] * unit_v[:, 1] - unit_r[:, 1] * unit_v[:, 0])
    sin_gamma = unit_r[:, 0] * unit_v[:, 0] + unit_r[:, 1] * unit_v[:, 1]
    var_theta = (unit_r[:, 0] ** 2 * curve.value_var[:, 1]
                 + unit_r[:, 1] ** 2 * curve.value_var[:, 0]) / radius**2
    var_phi = (unit_v[:, 0] ** 2 * curve.first_var[:, 1]
               + unit_v[:, 1] ** 2 * curve.first_var[:, 0]) / speed**2
    return Polar(
        radius=radius,
        radius_stderr=np.sqrt(unit_r[:, 0] ** 2 * curve.value_var[:, 0]
                              + unit_r[:, 1] ** 2 * curve.value_var[:, 1]),
        polar_angle=np.unwrap(np.arctan2(offset[:, 1], offset[:, 0])),
        gamma=np.arctan2(sin_gamma, cos_gamma),
        gamma_stderr=np.sqrt(var_theta + var_phi),
        cos_gamma=cos_gamma,
    )


@dataclass(frozen=True)
class RelationPoints:
    """Points of the force-curvature relation log(kappa / (r**2 cos**3 gamma)) vs log r."""

    log_radius: FloatArray
    log_force_per_h2: FloatArray
    sigma: FloatArray
    used: np.ndarray


def curvature_relation(
    curve: SmoothedCurve, kappa: FloatArray, kappa_stderr: FloatArray, centre: FloatArray,
    used: np.ndarray,
) -> RelationPoints:
    """The force-curvature relation F / h**2 = kappa / (r**2 cos**3 gamma) at the used points.

    For F = k r**n, log(F / h**2) = log(k / h**2) + n log r: a straight line. The
    standard error of each point's log comes from those of kappa, r and gamma.

    References
    ----------
    I. Newton (1687), Principia, Book I, Prop. VI-VII: the force is as in the circle
    of the same curvature.
    """
    polar = polar_about(curve, centre)
    sense = turning_sense(curve)
    cos_gamma = np.maximum(polar.cos_gamma[used], MIN_COS_GAMMA)
    radius = polar.radius[used]
    signed = np.maximum(sense * kappa[used], 1e-300)
    tan_gamma2 = (1.0 - cos_gamma**2) / cos_gamma**2
    variance = ((kappa_stderr[used] / signed) ** 2 + 4.0 * (polar.radius_stderr[used] / radius) ** 2
                + 9.0 * tan_gamma2 * polar.gamma_stderr[used] ** 2)
    return RelationPoints(
        log_radius=np.log(radius),
        log_force_per_h2=np.log(signed) - 2.0 * np.log(radius) - 3.0 * np.log(cos_gamma),
        sigma=np.sqrt(variance),
        used=used,
    )


def cross(first: FloatArray, second: FloatArray) -> FloatArray:
    """z-component of the cross product of two arrays of plane vectors, shape (m, 2)."""
    return first[:, 0] * second[:, 1] - first[:, 1] * second[:, 0]


def relation_residual(
    parameters: FloatArray, value: FloatArray, first: FloatArray, second: FloatArray, *,
    sense: float, reference_radius: float, timed: bool, extra_log_force: FloatArray | float = 0.0,
) -> FloatArray:
    """Residual of the force-curvature relation at each sample, in linear form.

    ``parameters`` = (n, ln f_ref, centre x, centre y), with F = f_ref (r / r_ref)**n the
    force per unit mass (timed) or F / h**2 (shape-only). For a central force the path's
    normal acceleration is F cos(gamma); divided by the squared speed it is the curvature
    kappa, and with h = r v cos(gamma): kappa = (F / h**2) r**2 cos(gamma)**3. So

    - timed (derivatives in time): residual = v x a / v - F(r) cos(gamma);
    - shape-only (in arc length): residual = kappa - (F/h**2)(r) r**2 cos(gamma)**3,

    each signed so that bending towards the centre counts positive; ``extra_log_force`` is
    added to ln F at each sample (a departure from the power law to test). Being linear in the
    acceleration, the residual has no bias from noise where the curvature is small (a
    logarithm would), and every sample can enter, however faintly it bends.

    References
    ----------
    I. Newton (1687), Principia, Book I, Prop. VI, Cor. 3-5, and Prop. VII, Cor. 3.
    """
    exponent, log_force, cx, cy = parameters
    offset = value - np.array([cx, cy])
    radius = np.hypot(offset[:, 0], offset[:, 1])
    speed = np.hypot(first[:, 0], first[:, 1])
    cos_gamma = sense * cross(offset, first) / (radius * speed)
    force = np.exp(log_force + extra_log_force) * (radius / reference_radius) ** exponent
    bending = sense * cross(first, second)
    if timed:
        return bending / speed - force * cos_gamma
    return bending / speed**3 - force * radius**2 * cos_gamma**3


EDGE_SPANS = 2.0
"""Samples within this many smoothing spans of either end are left out of the fits."""


def interior(curve: SmoothedCurve) -> np.ndarray:
    """Samples away from the ends, where smoothed derivatives carry the boundary's bias, and
    away from the edges of every stretch without samples longer than EDGE_SPANS smoothing spans
    (a pericentre passage hidden from the camera), which are ends too: over a shorter one the
    smoothing bridges as over the ordinary spacing of unevenly timed samples.

    Keeps at least the middle half of the samples when there is no such stretch.
    """
    parameter = curve.parameter
    margin = min(EDGE_SPANS * curve.span, 0.25 * float(parameter[-1] - parameter[0]))
    keep = (parameter >= parameter[0] + margin) & (parameter <= parameter[-1] - margin)
    for gap in np.flatnonzero(np.diff(parameter) > EDGE_SPANS * curve.span):
        keep &= (parameter <= parameter[gap] - margin) | (parameter >= parameter[gap + 1] + margin)
    return keep


def attractive_points(curve: SmoothedCurve, kappa: FloatArray, kappa_stderr: FloatArray) -> np.ndarray:
    """Interior samples whose curvature bends significantly (2 sigma) towards the inside of
    the turn."""
    return interior(curve) & (turning_sense(curve) * kappa > 2.0 * kappa_stderr)


def is_straight(x: FloatArray, y: FloatArray, noise: FloatArray) -> bool:
    """True when the points stay within noise of one straight line (total least squares).

    The RMS distance from the best line is compared with the RMS position noise per
    coordinate; below 3 times it the path shows no bending a force could cause.
    """
    points = np.column_stack((x, y))
    centred = points - points.mean(axis=0)
    spread = np.linalg.svd(centred, compute_uv=False)
    rms_off_line = float(spread[-1]) / math.sqrt(x.size)
    return rms_off_line < 3.0 * float(np.sqrt(np.mean(np.asarray(noise) ** 2)))
