"""The shape estimator: a time-free fit of Binet's equation to the path.

About the force centre the polar angle theta is monotonic along a central orbit, and
u = 1/r obeys Binet's equation d2u/dtheta2 + u = (k/h**2) u**(-n-2) for F = k r**n.
Integrating it from a reference angle in the middle of the path and fitting n, k/h**2,
the initial u and du/dtheta (and the centre, unless given) to the observed points
gives the exponent from the shape alone, with every point used as measured (no
derivatives of noisy data).

References
----------
J. P. M. Binet (1841), Comptes Rendus 13; H. Goldstein, C. Poole and J. Safko (2002),
Classical Mechanics, 3rd ed., section 3.7, equation (3.34).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import OptimizeResult, least_squares

from .._types import FloatArray
from ..errors import FitError, GeometryError, NotIdentifiable
from ..geometry.path import PathGeometry, describe_path, force_relation
from ..geometry.smoothing import Smoothing
from ..track import Track
from ._checks import (
    angular_momentum,
    constancy_diagnostic,
    require_monotonic,
    require_orbit,
    runs_diagnostic,
)
from .curvature import fit_curvature
from .result import CurvaturePoints, Diagnostic, ShapeFit

AMBIGUITY_FACTOR = 1.5
"""Solutions whose reduced chi-square is within this factor of the best are all reported."""


EXPONENT_RANGE = 50.0
"""|n| beyond which the optimiser is taken to have strayed: the Binet equation is then so stiff
that one integration could take minutes; such a trial gets the penalty residual instead."""

EVALUATIONS_PER_TURN = 10_000
"""Right-hand-side evaluations allowed per turn of polar angle (plus as many again for the
first), about five times what even a pendulum ellipse with b/a = 0.01 needs at rtol 1e-10; a
trial that needs more (a stiff, strayed one) gets the penalty residual."""


class _TooStiff(Exception):
    """A trial integration exceeded its evaluation budget (EVALUATIONS_PER_TURN)."""


def _binet_radius(
    theta: FloatArray, reference: float, exponent: float, ratio: float, u0: float, w0: float
) -> tuple[FloatArray, FloatArray]:
    """Model r(theta) and cos(gamma) at ``theta`` from u(reference) = u0, u'(reference) = w0.

    Raises ``_TooStiff`` when an integration exceeds its budget (EVALUATIONS_PER_TURN).
    """
    evaluations, budget = 0, 0

    def derivative(_: float, state: FloatArray) -> FloatArray:
        nonlocal evaluations
        evaluations += 1
        if evaluations > budget:
            raise _TooStiff
        u, w = state
        return np.array([w, ratio * max(u, 1e-300) ** (-exponent - 2.0) - u])

    def escape(_: float, state: FloatArray) -> float:
        return float(state[0] - 1e-9 * u0)

    escape.terminal = True  # type: ignore[attr-defined]
    u = np.full(theta.size, np.nan)
    w = np.full(theta.size, np.nan)
    for side in (theta >= reference, theta < reference):
        points = theta[side]
        if points.size == 0:
            continue
        order = np.argsort(np.abs(points - reference))
        targets = points[order]
        evaluations = 0
        budget = int(EVALUATIONS_PER_TURN * (1.0 + abs(float(targets[-1]) - reference) / (2.0 * math.pi)))
        solution = solve_ivp(derivative, (reference, float(targets[-1])), [u0, w0], method="DOP853",
                             t_eval=targets, rtol=1e-10, atol=1e-12 * abs(u0), events=escape)
        values = np.asarray(solution.y, dtype=float).reshape(2, -1)     # empty if it failed at once
        index = np.flatnonzero(side)[order][: values.shape[1]]
        u[index], w[index] = values[0], values[1]
    return 1.0 / u, u / np.hypot(u, w)


def _polar(
    x: FloatArray, y: FloatArray, centre: tuple[float, float], reference: float
) -> tuple[FloatArray, FloatArray]:
    """r and the unwrapped polar angle about ``centre``, on the branch where the middle
    sample lies within pi of ``reference`` (so that small moves of the centre never jump)."""
    radius = np.hypot(x - centre[0], y - centre[1])
    theta = np.unwrap(np.arctan2(y - centre[1], x - centre[0]))
    theta -= 2.0 * math.pi * round((theta[theta.size // 2] - reference) / (2.0 * math.pi))
    return radius, theta


def _residuals(
    params: FloatArray, x: FloatArray, y: FloatArray, sigma: FloatArray, reference: float,
    fixed_centre: tuple[float, float] | None, penalty: float,
    prior: tuple[FloatArray, FloatArray] | None,
) -> FloatArray:
    """Normal distances from the points to the Binet curve, in units of their sigma, and
    (with a ``prior`` centre and its standard error) the centre's pull towards it."""
    exponent, log_ratio, log_r0, slope0 = params[:4]
    centre = fixed_centre if fixed_centre is not None else (float(params[4]), float(params[5]))
    radius, theta = _polar(x, y, centre, reference)
    try:
        if not abs(exponent) <= EXPONENT_RANGE:
            raise _TooStiff
        r0 = math.exp(log_r0)
        with np.errstate(all="ignore"):
            model, cos_gamma = _binet_radius(theta, reference, exponent, math.exp(log_ratio),
                                             1.0 / r0, -slope0 / r0)
            residual = np.where(np.isfinite(model), (radius - model) * cos_gamma / sigma, penalty)
    except (OverflowError, ZeroDivisionError, ValueError, _TooStiff):   # the optimiser strayed
        residual = np.full(radius.size, penalty)
    residual = np.where(np.isfinite(residual), residual, penalty)
    if prior is None:
        return residual
    return np.concatenate((residual, (np.asarray(centre) - prior[0]) / prior[1]))


GRID_EXPONENTS = (-5.0, -4.0, -3.0, -2.5, -2.0, -1.5, -1.0, -0.5, 0.0, 0.5, 1.0, 2.0, 3.0)
"""Exponents tried for a start when the curvature relation is too noisy to give one."""


def _start(
    track: Track, path: PathGeometry, reference_index: int, reference: float, sigma: FloatArray
) -> FloatArray:
    """(n, log k/h**2, log r, d ln r / d theta) at the reference angle to start from.

    n and k/h**2 come from the curvature fit about the centre; when the curvature is
    too noisy for that, from the best of short fits with n held at each of GRID_EXPONENTS.
    """
    radius = path.radius
    slope = float(np.gradient(np.log(radius), path.polar_angle)[reference_index])
    log_r0 = math.log(radius[reference_index])
    try:
        first = fit_curvature(track, centre=path.centre, path=replace(path, centre_estimate=None))
        return np.array([first.exponent, math.log(first.strength_per_h2), log_r0, slope])
    except (NotIdentifiable, np.linalg.LinAlgError):
        pass
    mean_log_r = float(np.mean(np.log(radius)))
    best, best_cost = None, math.inf
    for exponent in GRID_EXPONENTS:
        def held(params: FloatArray, exponent: float = exponent) -> FloatArray:
            return _residuals(np.concatenate(([exponent], params)), track.x, track.y, sigma,
                              reference, path.centre, 1e6, None)

        trial = least_squares(held, [-(exponent + 3.0) * mean_log_r, log_r0, slope], max_nfev=20)
        if trial.cost < best_cost:
            best, best_cost = np.concatenate(([exponent], trial.x)), float(trial.cost)
    return np.asarray(best)


def _solve(
    track: Track, path: PathGeometry, free_centre: bool
) -> tuple[OptimizeResult, float, FloatArray]:
    """Least-squares Binet fit started from the curvature fit about ``path.centre``.

    With timestamps, the centre the accelerations point at enters as a Gaussian prior
    (its value and standard error), so that a shape that cannot fix the centre alone
    (a circle through the centre, say) still gets the centre the motion shows.
    """
    polar = path.polar_angle
    reference_index = int(np.argmin(np.abs(polar - 0.5 * (polar.min() + polar.max()))))
    reference = float(polar[reference_index])
    sigma = track.sigma if track.sigma is not None else path.smoothing.noise
    start = _start(track, path, reference_index, reference, sigma)
    if free_centre:
        start = np.concatenate((start, path.centre))
    fixed = None if free_centre else path.centre
    penalty = 1e3 * float(np.ptp(path.radius) / np.median(sigma))
    stderr = np.asarray(path.centre_stderr)
    prior = ((np.asarray(path.centre), stderr)
             if free_centre and track.has_times and np.all(stderr > 0) else None)
    result = least_squares(
        _residuals, start, args=(track.x, track.y, sigma, reference, fixed, penalty, prior),
        method="trf", x_scale="jac", max_nfev=200,
    )
    return result, reference, sigma


def fit_shape(
    track: Track,
    *,
    centre: tuple[float, float] | None = None,
    smoothing: Smoothing = "auto",
    path: PathGeometry | None = None,
) -> ShapeFit:
    """Fit Binet's equation to the path: n and k/h**2 from the shape, time-free.

    Parameters
    ----------
    track : Track
        Positions (L); timestamps, when present, give h and so k, and fix the centre.
    centre : (float, float), optional
        The force centre (L), held fixed; fitted when not given.
    smoothing : {"auto", "spline", "savgol"}
        Smoothing for the starting values (the fit itself uses the raw points).
    path : PathGeometry, optional
        The track's geometry, if already described.

    Returns
    -------
    ShapeFit
        For a shape-only track with a free centre, ``alternatives`` lists the other
        solutions that fit as well (a closed ellipse: n = 1 about its centre and
        n = -2 about a focus).

    Raises
    ------
    NotIdentifiable
        For a circle about the centre or a straight path.
    GeometryError
        When the path winds back about the centre.

    Examples
    --------
    >>> theta = np.linspace(0.0, 4 * np.pi, 600)            # Kepler ellipse, focus at 0
    >>> r = 1.0 / (1.0 + 0.5 * np.cos(theta))                # semi-latus rectum 1 m
    >>> track = Track(x=r * np.cos(theta), y=r * np.sin(theta), sigma=1e-6)
    >>> fit = fit_shape(track, centre=(0.0, 0.0))
    >>> round(fit.exponent, 6), round(fit.strength_per_h2, 6)   # k/h**2 = 1/p
    (-2.0, 1.0)
    """
    path = path if path is not None else describe_path(track, centre=centre, smoothing=smoothing)
    free = centre is None
    fit = _fit_about(track, path, free_centre=free)
    estimate = path.centre_estimate
    if not free or estimate is None or not estimate.alternatives:
        return fit
    others = []
    for other in estimate.alternatives:
        try:
            others.append(_fit_about(
                track, describe_path(track, centre=other.centre, curve=path.smoothing), free_centre=True))
        except (FitError, GeometryError):
            continue
    best = min([fit, *others], key=lambda f: f.reduced_chi2)
    rest = tuple(f for f in [fit, *others] if f is not best
                 and f.reduced_chi2 <= AMBIGUITY_FACTOR * best.reduced_chi2
                 and math.dist(f.centre, best.centre) > 1e-3 * float(np.ptp(path.radius) + 1e-300))
    if not rest:
        return best
    listed = "; ".join(f"n = {f.exponent:.3f} about ({f.centre[0]:.4g}, {f.centre[1]:.4g})" for f in rest)
    check = Diagnostic(False, f"the path's shape fits as well about other centres ({listed}). A closed "
                              "ellipse is an orbit of n = 1 about its centre and of n = -2 about a "
                              "focus; give the centre or timestamps to decide.")
    return replace(best, alternatives=rest, diagnostics={**best.diagnostics, "centre": check})


def _fit_about(track: Track, path: PathGeometry, *, free_centre: bool) -> ShapeFit:
    require_orbit(path)
    require_monotonic(path)
    result, reference, sigma = _solve(track, path, free_centre)
    if not result.success:
        raise FitError(f"{track.label}: the shape fit did not converge ({result.message}).",
                       last_params=dict(zip(("exponent", "log_ratio", "log_r0", "slope0"), result.x)))
    n_params = result.x.size
    chi2 = 2.0 * float(result.cost)
    reduced = chi2 / max(track.n_points - n_params, 1)
    scale = reduced if track.sigma is None else 1.0
    covariance = np.linalg.pinv(result.jac.T @ result.jac) * scale
    exponent, log_ratio = result.x[:2]
    ratio = math.exp(log_ratio)
    ratio_se = ratio * math.sqrt(covariance[1, 1])
    centre = (float(result.x[4]), float(result.x[5])) if free_centre else path.centre
    centre_se = ((math.sqrt(covariance[4, 4]), math.sqrt(covariance[5, 5])) if free_centre
                 else path.centre_stderr)
    h, h_se, drift = angular_momentum(path)
    strength = ratio * h**2
    strength_se = abs(strength) * math.hypot(ratio_se / ratio, 2 * h_se / h) if math.isfinite(h) else math.nan
    log_reference = float(np.mean(np.log(path.radius)))
    gradient = np.zeros(n_params)
    gradient[:2] = (log_reference, 1.0)            # log F/h^2 (r_ref) = log(k/h^2) + n log r_ref
    per_h2_se = math.sqrt(float(gradient @ covariance @ gradient))
    force = math.exp(log_ratio + exponent * log_reference) * h**2
    force_se = force * math.hypot(per_h2_se, 2 * h_se / h) if math.isfinite(h) else math.nan
    residuals = result.fun[: track.n_points]
    diagnostics = {
        "residuals": runs_diagnostic(residuals),
        "angular momentum": constancy_diagnostic(drift),
        "noise": Diagnostic(None, "sigma as given" if track.sigma is not None else
                            "sigma estimated from the residuals: "
                            f"{math.sqrt(reduced) * float(np.median(sigma)):.3g} {track.length_unit}"),
    }
    if track.sigma is not None:
        diagnostics["chi-square"] = _chi2_diagnostic(reduced, track.n_points - n_params)
    if free_centre and max(centre_se) > 0.05 * float(np.ptp(path.radius) + np.min(path.radius)):
        diagnostics["centre"] = Diagnostic(None, f"the shape fixes the centre only to ±{max(centre_se):.3g} "
                                                 f"{track.length_unit}; give it if it is known.")
    names = ("exponent", "log_strength_per_h2", "log_r_reference", "dlnr_dtheta_reference")
    return ShapeFit(
        exponent=float(exponent), exponent_stderr=math.sqrt(covariance[0, 0]), strength=strength,
        strength_stderr=strength_se, strength_per_h2=ratio, strength_per_h2_stderr=ratio_se,
        centre=centre, centre_stderr=centre_se, method="shape", n_points=track.n_points,
        reference_radius=math.exp(log_reference), force_at_reference=force,
        force_at_reference_stderr=force_se,
        chi2=chi2, reduced_chi2=reduced,
        parameter_names=names + (("centre_x", "centre_y") if free_centre else ()),
        covariance=covariance, residuals=residuals, length_unit=track.length_unit,
        time_unit=track.time_unit if track.has_times else None, diagnostics=diagnostics,
        relation=_relation(path, centre), reference_angle=reference, angular_momentum=h,
        angular_momentum_stderr=h_se, evaluations=int(result.nfev), track_name=track.name,
    )


def _relation(path: PathGeometry, centre: tuple[float, float]) -> CurvaturePoints:
    """The force-curvature relation about the fitted centre, for the figure."""
    with np.errstate(divide="ignore", invalid="ignore"):
        log_radius, log_force, _ = force_relation(path, centre)
    return CurvaturePoints(log_radius=log_radius, log_force=log_force, per_h2=not path.track.has_times)


def _chi2_diagnostic(reduced: float, dof: int) -> Diagnostic:
    """Reduced chi-square against its expected spread sqrt(2/dof) (for known sigma)."""
    spread = math.sqrt(2.0 / max(dof, 1))
    text = f"reduced chi-square {reduced:.3g} (expected 1 ± {spread:.2g})"
    if abs(reduced - 1.0) > 5 * spread and reduced > 1.0:
        return Diagnostic(False, text + ": the model misses the points by more than their sigma.")
    return Diagnostic(True, text + ".")
