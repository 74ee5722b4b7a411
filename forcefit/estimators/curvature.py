"""The curvature estimator: the force-curvature relation as a straight line in log-log.

For a central force, F = h**2 kappa / (r**2 cos(gamma)**3). With F = k r**n,
log(kappa / (r**2 cos(gamma)**3)) = log(k / h**2) + n log r: a weighted regression
of the one on the other gives n and k / h**2 from the path's shape alone, and k
when timestamps give h.

References
----------
I. Newton (1687), Principia, Book I, Prop. VI, Cor. 3-5, and Prop. VII, Cor. 3.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from .._regression import fit_line
from .._types import FloatArray
from ..errors import NotIdentifiable
from ..geometry.curves import attractive_points
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
from .result import CurvatureFit, CurvaturePoints, Diagnostic

MIN_USED = 10
"""Fewest significantly bending points the regression needs."""


def fit_curvature(
    track: Track,
    *,
    centre: tuple[float, float] | None = None,
    smoothing: Smoothing = "auto",
    path: PathGeometry | None = None,
) -> CurvatureFit:
    """Fit F = -k r**n through the force-curvature relation (time-free).

    Parameters
    ----------
    track : Track
        Positions (L), with times (T) when known.
    centre : (float, float), optional
        The force centre (L); found from the data when not given.
    smoothing : {"auto", "spline", "savgol"}
        How to smooth before differentiating.
    path : PathGeometry, optional
        The track's geometry, if already described.

    Returns
    -------
    CurvatureFit
        n and k / h**2 from the shape; k too when the track is timestamped.

    Raises
    ------
    NotIdentifiable
        For a circle about the centre or a straight path.

    Examples
    --------
    >>> t = np.linspace(0.0, 10.0, 2001)                         # s
    >>> track = Track(t=t, x=0.3 * np.cos(2 * t), y=0.1 * np.sin(2 * t))   # m
    >>> fit = fit_curvature(track, centre=(0.0, 0.0))
    >>> round(fit.exponent, 4), round(fit.strength, 4)
    (1.0, 4.0)
    """
    path = path if path is not None else describe_path(track, centre=centre, smoothing=smoothing)
    fit = _fit_about(track, path)
    estimate = path.centre_estimate
    if estimate is None or not estimate.alternatives:
        return fit
    others = tuple(
        _fit_about(track, describe_path(track, centre=other.centre, curve=path.smoothing))
        for other in estimate.alternatives
    )
    checks = {**fit.diagnostics, "centre": _ambiguity(fit, others)}
    return replace(fit, alternatives=others, diagnostics=checks)


def _ambiguity(fit: CurvatureFit, others: tuple[CurvatureFit, ...]) -> Diagnostic:
    listed = "; ".join(f"n = {other.exponent:.3f} about ({other.centre[0]:.4g}, {other.centre[1]:.4g})"
                       for other in others)
    return Diagnostic(False, f"the path's shape fits as well about other centres ({listed}). A closed "
                             "ellipse is an orbit of n = 1 about its centre and of n = -2 about a focus; "
                             "give the centre or timestamps to decide.")


def _fit_about(track: Track, path: PathGeometry) -> CurvatureFit:
    """The curvature fit about the path's centre."""
    require_orbit(path)
    used = attractive_points(path.smoothing, path.curvature, path.curvature_stderr)
    if used.sum() < MIN_USED:
        raise NotIdentifiable(
            f"{track.label}: only {int(used.sum())} points bend significantly towards the "
            "centre; the curvature is too noisy for the curvature estimator. Try the shape estimator."
        )
    log_radius, log_force, sigma = force_relation(path, path.centre, used)
    log_reference = float(np.mean(log_radius))
    line = fit_line(log_radius - log_reference, log_force, sigma)

    def parameters(about: tuple[float, float]) -> FloatArray:
        x, y, e = force_relation(path, about, used)
        fitted = fit_line(x - log_reference, y, e)
        return np.array([fitted.slope, fitted.intercept])

    covariance = line.covariance + centre_covariance(parameters, path)
    exponent = line.slope
    # k = F(r_ref) r_ref**-n: log k = intercept - n log r_ref.
    gradient = np.array([-log_reference, 1.0])
    log_k_se = math.sqrt(float(gradient @ covariance @ gradient))
    level = math.exp(line.intercept - exponent * log_reference)
    h, h_se, drift = angular_momentum(path)
    if track.has_times:
        strength, strength_se = level, level * log_k_se
        ratio = strength / h**2
        ratio_se = ratio * math.hypot(log_k_se, 2 * h_se / h)
        force, force_se = math.exp(line.intercept), math.exp(line.intercept) * math.sqrt(covariance[1, 1])
    else:
        ratio, ratio_se = level, level * log_k_se
        strength = strength_se = force = force_se = math.nan
    diagnostics = {
        "power law": bend_diagnostic(log_radius, log_force, sigma),
        "radial range": leverage_diagnostic(path.radius[used]),
        "angular momentum": constancy_diagnostic(drift),
        "points used": Diagnostic(None, f"{int(used.sum())} of {track.n_points} bend "
                                        "significantly towards the centre."),
        "smoothing": Diagnostic(None, f"{path.smoothing.method}: each point averages about "
                                      f"{path.smoothing.span:.3g} {_parameter_unit(track)} of the path."),
    }
    return CurvatureFit(
        exponent=exponent, exponent_stderr=math.sqrt(covariance[0, 0]), strength=strength,
        strength_stderr=strength_se, strength_per_h2=ratio, strength_per_h2_stderr=ratio_se,
        centre=path.centre, centre_stderr=path.centre_stderr, method="curvature",
        reference_radius=math.exp(log_reference), force_at_reference=force,
        force_at_reference_stderr=force_se,
        n_points=int(used.sum()), chi2=line.chi2, reduced_chi2=line.reduced_chi2,
        parameter_names=("exponent", "log_force_at_reference" if track.has_times
                         else "log_force_per_h2_at_reference"), covariance=covariance,
        residuals=line.residuals, length_unit=track.length_unit,
        time_unit=track.time_unit if track.has_times else None, diagnostics=diagnostics,
        relation=CurvaturePoints(log_radius=log_radius, log_force=log_force, per_h2=not track.has_times),
        angular_momentum=h, angular_momentum_stderr=h_se, correlation_time=line.correlation_time,
        smoothing_level=path.smoothing.level, smoothing_dof=path.smoothing.dof, track_name=track.name,
    )


def _parameter_unit(track: Track) -> str:
    return track.time_unit if track.has_times else track.length_unit
