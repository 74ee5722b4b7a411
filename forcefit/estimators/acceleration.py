"""The acceleration estimator: radial acceleration against distance, from timestamps.

The smoothed second derivative of the timestamped positions gives the acceleration;
its component along the radius is a_r = -k r**n for a central power law. A weighted
non-linear least-squares fit of that model gives n and k directly; the tangential
component, zero for a central force, is checked for drag.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import OptimizeResult, least_squares

from .._regression import autocorrelation_time, fit_line
from .._types import FloatArray
from ..errors import NotIdentifiable
from ..geometry.curves import interior
from ..geometry.path import PathGeometry, describe_path, force_relation
from ..geometry.smoothing import Smoothing
from ..track import Track
from ._checks import (
    angular_momentum,
    bend_diagnostic,
    centre_covariance,
    constancy_diagnostic,
    leverage_diagnostic,
    require_orbit,
)
from .result import AccelerationFit, CurvaturePoints, Diagnostic


def _radial(path: PathGeometry, centre: tuple[float, float]) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Distance r, radial acceleration a_r and its standard error about ``centre``, at the
    samples away from the ends of the track."""
    keep = interior(path.smoothing)
    offset = path.position[keep] - np.asarray(centre)
    radius = np.hypot(offset[:, 0], offset[:, 1])
    unit = offset / radius[:, None]
    radial = np.sum(path.acceleration[keep] * unit, axis=1)
    variance = (unit[:, 0] ** 2 * path.smoothing.second_var[keep, 0]
                + unit[:, 1] ** 2 * path.smoothing.second_var[keep, 1])
    return radius, radial, np.sqrt(variance)


def _solve(
    radius: FloatArray, radial: FloatArray, sigma: FloatArray, start: FloatArray, scale: float
) -> OptimizeResult:
    """Least squares of a_r = -F(scale) (r / scale)**n for (n, log F(scale))."""

    def residuals(theta: FloatArray) -> FloatArray:
        exponent, log_force = theta
        return (radial + np.exp(log_force) * (radius / scale) ** exponent) / sigma

    return least_squares(residuals, start, method="lm")


def fit_acceleration(
    track: Track,
    *,
    centre: tuple[float, float] | None = None,
    smoothing: Smoothing = "auto",
    path: PathGeometry | None = None,
) -> AccelerationFit:
    """Fit a_r = -k r**n to the radial acceleration of a timestamped track.

    Parameters
    ----------
    track : Track
        Timestamped positions (L, T).
    centre : (float, float), optional
        The force centre (L); found from the accelerations when not given.
    smoothing : {"auto", "spline", "savgol"}
        How to smooth before differentiating twice.
    path : PathGeometry, optional
        The track's geometry, if already described.

    Returns
    -------
    AccelerationFit

    Raises
    ------
    NotIdentifiable
        Without timestamps, for a circle about the centre, or for a straight path.

    Examples
    --------
    >>> t = np.linspace(0.0, 10.0, 2001)                                   # s
    >>> track = Track(t=t, x=0.3 * np.cos(2 * t), y=0.1 * np.sin(2 * t))   # m
    >>> fit = fit_acceleration(track, centre=(0.0, 0.0))
    >>> round(fit.exponent, 4), round(fit.strength, 4)
    (1.0, 4.0)
    """
    if not track.has_times:
        raise NotIdentifiable(
            f"{track.label}: the acceleration estimator needs timestamps; use the "
            "curvature or shape estimator for a shape-only path."
        )
    path = path if path is not None else describe_path(track, centre=centre, smoothing=smoothing)
    require_orbit(path)
    radius, radial, sigma = _radial(path, path.centre)
    inward = radial < -2.0 * sigma
    if inward.sum() < 10:
        raise NotIdentifiable(f"{track.label}: the radial acceleration is not significantly "
                              "inward anywhere; no attractive central force is seen.")
    pilot = fit_line(np.log(radius[inward]), np.log(-radial[inward]), sigma[inward] / -radial[inward])
    scale = float(np.exp(np.mean(np.log(radius))))     # where k r**n is best determined
    start = np.array([pilot.slope, pilot.intercept + pilot.slope * math.log(scale)])
    result = _solve(radius, radial, sigma, start, scale)

    def parameters(about: tuple[float, float]) -> FloatArray:
        r, a, s = _radial(path, about)
        return _solve(r, a, s, result.x, scale).x

    reduced = 2.0 * float(result.cost) / max(radius.size - 2, 1)
    tau = autocorrelation_time(result.fun)
    covariance = np.linalg.inv(result.jac.T @ result.jac) * reduced * tau
    covariance = covariance + centre_covariance(parameters, path)
    exponent, log_force = result.x
    strength = math.exp(log_force) * scale ** (-exponent)
    # k = F(scale) scale**-n: propagate the covariance of (n, log F(scale)).
    gradient = np.array([-math.log(scale) * strength, strength])
    strength_se = math.sqrt(float(gradient @ covariance @ gradient))
    h, h_se, drift = angular_momentum(path)
    ratio = strength / h**2
    ratio_se = abs(ratio) * math.hypot(strength_se / strength, 2 * h_se / h)
    log_a = np.log(np.maximum(-radial[inward], 1e-300))
    diagnostics = {
        "power law": bend_diagnostic(np.log(radius[inward]), log_a, sigma[inward] / -radial[inward]),
        "radial range": leverage_diagnostic(radius),
        "angular momentum": constancy_diagnostic(drift),
        "transverse acceleration": _transverse(path),
        "smoothing": Diagnostic(None, f"{path.smoothing.method}: each point averages about "
                                      f"{path.smoothing.span:.3g} {track.time_unit}."),
    }
    with np.errstate(divide="ignore", invalid="ignore"):
        relation = force_relation(path, path.centre)
    return AccelerationFit(
        exponent=float(exponent), exponent_stderr=math.sqrt(covariance[0, 0]), strength=strength,
        strength_stderr=strength_se, strength_per_h2=ratio, strength_per_h2_stderr=ratio_se,
        centre=path.centre, centre_stderr=path.centre_stderr, method="acceleration",
        reference_radius=scale, force_at_reference=math.exp(log_force),
        force_at_reference_stderr=math.exp(log_force) * math.sqrt(covariance[1, 1]),
        n_points=int(radius.size), chi2=2.0 * float(result.cost), reduced_chi2=reduced,
        parameter_names=("exponent", "log_force_at_scale"), covariance=covariance,
        residuals=result.fun, length_unit=track.length_unit, time_unit=track.time_unit,
        diagnostics=diagnostics,
        relation=CurvaturePoints(log_radius=relation[0], log_force=relation[1], per_h2=False),
        angular_momentum=h, angular_momentum_stderr=h_se, correlation_time=tau, track_name=track.name,
    )


def _transverse(path: PathGeometry) -> Diagnostic:
    """Mean transverse acceleration (across the radius) against its error: a central
    force has none, so a significant one means torque (drag, or the wrong centre)."""
    offset = path.position - np.asarray(path.centre)
    unit = offset / np.hypot(offset[:, 0], offset[:, 1])[:, None]
    transverse = unit[:, 0] * path.acceleration[:, 1] - unit[:, 1] * path.acceleration[:, 0]
    sense = np.sign(np.nanmean(path.angular_momentum))
    variance = (unit[:, 1] ** 2 * path.smoothing.second_var[:, 0]
                + unit[:, 0] ** 2 * path.smoothing.second_var[:, 1])
    weight = 1.0 / variance
    mean = sense * float(np.sum(weight * transverse) / np.sum(weight))
    stderr = math.sqrt(autocorrelation_time(transverse - mean) / float(np.sum(weight)))
    typical = float(np.median(np.hypot(path.acceleration[:, 0], path.acceleration[:, 1])))
    text = (f"mean acceleration across the radius {mean:.3g} ± {stderr:.2g} "
            f"{path.track.length_unit} {path.track.time_unit}^-2 ({abs(mean) / typical:.2%} of the "
            "typical acceleration)")
    if abs(mean) > 3.0 * stderr and abs(mean) > 0.005 * typical:
        sense_text = "against" if mean < 0 else "along"
        return Diagnostic(False, text + f": a torque {sense_text} the motion (drag?) acts too.")
    return Diagnostic(True, text + ".")
