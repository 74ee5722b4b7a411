"""The shape estimator: a time-free fit of Binet's equation to the path.

About the force centre the polar angle theta is monotonic along a central orbit, and
u = 1/r obeys Binet's equation d2u/dtheta2 + u = (k/h**2) u**(-n-2) for F = k r**n.
Integrating it from a reference angle in the middle of the path and fitting n, k/h**2,
the initial u and du/dtheta (and the centre, unless given) to the samples' distances
from the curve gives the exponent from the shape alone, with every sample used as
measured: no smoothing, no derivatives of noisy data, no assumption about the spacing of
the samples. The start comes from what the samples resolve (`._binet_fit`), about each
likely centre (the conic through the points: its centre and foci; with timestamps, the
centre of steady areal rate). Timestamps, when present, give h and so k, and decide
between centres the shape alone cannot tell apart.

References
----------
J. P. M. Binet (1841), Comptes Rendus 13; H. Goldstein, C. Poole and J. Safko (2002),
Classical Mechanics, 3rd ed., section 3.7, equation (3.34).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from .._regression import autocorrelation_time, fit_line
from .._types import FloatArray
from ..errors import FitError, GeometryError, NotIdentifiable
from ..geometry.noise import difference_noise
from ..geometry.path import PathGeometry, force_relation
from ..track import Track
from ._binet_fit import BinetProblem, Effort, Evaluation, evaluate, fit_binet, polar
from ._checks import (
    RESOLVED_EXCURSION,
    chi_square_diagnostic,
    constancy_diagnostic,
    require_bend,
    require_one_sense,
    runs_diagnostic,
)
from ._start import AREAL_TOLERANCE, areal_misfit, centre_candidates
from .result import CurvaturePoints, Diagnostic, ShapeFit

AMBIGUITY_FACTOR = 1.5
"""Solutions whose chi-square is within this factor of the best are all reported."""

STEADY_AREA = 25.0
"""Largest reduced chi-square of the area swept about the centre against a steady rate in time.
A central force sweeps equal areas in equal times (Kepler's second law), whatever its law; about
the right centre the samples scatter about a line in t (measured up to 7 on short arcs and sparse
orbits), about the other focus of an ellipse they swing by its size (measured 1e5 at 8 samples
per orbit, noise 1e-3 of the size)."""

CLOSEST_ANGLE = 0.1
"""Largest angle (rad) by which one standard error of the fitted centre may turn the direction
from the centre to the closest sample. The fit's errors are linear in the centre; within one
error the closest samples' polar angles must hardly move for them to hold. On open passages
whose closest samples lie 0.1 m from the centre at 0.02 m noise (0.12-0.2 rad) the centre
passed 3-5 of its errors off in 5 of 8 tracks, with every other check passing; at 0.002-0.005 m
(0.016-0.1 rad) 2 of 46 passing answers lay beyond 3 errors (3.4 and 4.0)."""

MIN_SAMPLES = 12
"""Fewest samples the shape fit accepts (it fits up to 6 numbers)."""

PARAMETER_NAMES = ("exponent", "log_strength_per_h2", "log_r_reference", "dlnr_dtheta_reference")


@dataclass(frozen=True)
class _Solution:
    """The least-squares solution about one start centre, before any check."""

    problem: BinetProblem
    vector: FloatArray
    evaluation: Evaluation
    chi2: float
    settled: bool

    @property
    def centre(self) -> tuple[float, float]:
        return self.problem.centre_of(self.vector)


def _solve_about(track: Track, start: tuple[float, float], sigma: FloatArray, *, free_centre: bool,
                 effort: Effort) -> _Solution:
    """Fit the Binet curve to every sample, starting about ``start`` (held when not free)."""
    require_one_sense(track, start, sigma)
    radius, theta = polar(track.x, track.y, start, 0.0)
    reference = float(theta[int(np.argmin(np.abs(theta - 0.5 * (theta.min() + theta.max()))))])
    size = float(np.ptp(radius) + np.min(radius))
    problem = BinetProblem(x=track.x, y=track.y, sigma=sigma, reference=reference,
                           centre=None if free_centre else start,
                           penalty=1e3 * size / float(np.median(sigma)))
    solved = fit_binet(problem, start, effort)
    if not math.isfinite(solved.chi2):
        raise FitError(f"{track.label}: no Binet curve about ({start[0]:.6g}, {start[1]:.6g}) follows the "
                       "samples; the path is probably not an orbit in a central power law about that "
                       "centre.", last_params=dict(zip(PARAMETER_NAMES, map(float, solved.vector))))
    evaluation = evaluate(problem, solved.vector, effort)
    return _Solution(problem, solved.vector, evaluation, solved.chi2, solved.settled)


def _require_resolved_excursion(track: Track, solution: _Solution, noise: float) -> None:
    """Refuse a solution whose radial excursion is not resolved above the noise.

    A circular orbit exists for every exponent, so n shows only through how r varies along
    the fitted curve. With the centre fitted, a small shift of the centre adds
    -(shift . r_hat), a first harmonic in theta, to r: that part of the excursion says
    nothing about n and is set aside. What remains must exceed RESOLVED_EXCURSION times its
    standard error (~ noise sqrt(2/N)), as in the orbit fit.
    """
    model = solution.evaluation.solution.radius
    theta = solution.evaluation.theta
    if solution.problem.centre is None:
        design = np.column_stack((np.ones_like(theta), np.cos(theta), np.sin(theta)))
        part = model - design @ np.linalg.lstsq(design, model, rcond=None)[0]
    else:
        part = model - float(np.mean(model))
    excursion = 0.5 * float(np.ptp(part))
    resolution = max(noise * math.sqrt(2.0 / model.size), 1e-10 * float(np.mean(model)))
    if excursion <= RESOLVED_EXCURSION * resolution:
        moved = " beyond what a shift of the centre explains" if solution.problem.centre is None else ""
        raise NotIdentifiable(
            f"{track.label}: the distance from the centre hardly changes{moved} (by "
            f"{2 * excursion:.3g} {track.length_unit} about r = {np.mean(model):.6g} "
            f"{track.length_unit}, against a noise of {noise:.3g} {track.length_unit}); a circular "
            "orbit exists for every exponent, so the exponent cannot be read from this path. "
            + ("Give the centre if it is known, or launch" if moved else "Launch")
            + " the body off-circular so that r varies.")


def _correlation_time(residuals: FloatArray) -> float:
    """Integrated autocorrelation time of the residuals in path order; 1 within its own noise
    (5/sqrt(N)) of 1, as in the orbit fit (`forcefit.estimators.orbit.residual_correlation_time`)."""
    estimate = autocorrelation_time(residuals)
    return estimate if estimate > 1.0 + 5.0 / math.sqrt(max(residuals.size, 1)) else 1.0


def _angular_momentum(track: Track, evaluation: Evaluation, sigma: FloatArray
                      ) -> tuple[float, float, float, float, float]:
    """h (L**2/T), its standard error, its relative drift over the track, the drift's standard
    error, and the reduced chi-square of the swept area about a steady rate, from the times.

    Along the fitted curve g(theta) = integral of r**2 dtheta grows as h t; a sample's
    position error sigma across the path moves its g by r sigma. A line in t gives h. The
    drift comes from the samples' own g (the trapezoids of r**2 over their polar angles: a
    curve of constant h cannot show it when drag shrinks the path): a quadratic in t gives
    dh/dt times the duration, over h, its error from the quadratic's own scatter.
    """
    if track.t is None:
        return math.nan, math.nan, math.nan, math.nan, math.nan
    t = np.asarray(track.t) - float(np.mean(track.t))
    g, spread = evaluation.solution.swept, evaluation.radius * sigma
    line = fit_line(t, g, spread)
    h, h_se = line.slope, math.sqrt(float(line.covariance[0, 0]))
    if not h:
        return h, h_se, math.nan, math.nan, line.reduced_chi2
    square = evaluation.radius**2
    swept = np.concatenate(([0.0], np.cumsum(0.5 * (square[1:] + square[:-1]) * np.diff(evaluation.theta))))
    scale = max(float(np.ptp(t)), 1e-300)
    design = np.column_stack((np.ones_like(t), t / scale, (t / scale) ** 2)) / spread[:, None]
    quadratic, *_ = np.linalg.lstsq(design, swept / spread, rcond=None)
    misfit = swept / spread - design @ quadratic
    variance = float(misfit @ misfit) / max(t.size - 3, 1) * autocorrelation_time(misfit)
    curvature_se = math.sqrt(max(float(np.linalg.pinv(design.T @ design)[2, 2]) * variance, 0.0))
    return (h, h_se, 2.0 * float(quadratic[2]) / scale / h, abs(2.0 * curvature_se / scale / h),
            line.reduced_chi2)


def _areal_rate_check(steadiness: float) -> Diagnostic | None:
    """Whether the area swept about the fitted centre grows steadily in time, from the reduced
    chi-square of the swept area about a line in t (`_angular_momentum`); None without times.

    The shape alone cannot tell an ellipse's two foci apart (the same conic about either); the
    times can: only about the centre of force is the swept area g(t) a straight line in t.
    """
    if not math.isfinite(steadiness):
        return None
    text = f"area swept about the centre against a steady rate in time: reduced chi-square {steadiness:.3g}"
    if steadiness > STEADY_AREA:
        return Diagnostic(False, text + f", beyond {STEADY_AREA:g}: a central force sweeps equal areas "
                          "in equal times, so the force does not point at this centre (an ellipse's "
                          "other focus has the same shape). Give the centre if it is known, or use the "
                          "orbit fit.")
    return Diagnostic(True, text + ".")


def _drift_spread(track: Track, solution: _Solution, covariance: FloatArray, sigma: FloatArray) -> float:
    """The standard error of h's drift that the fitted parameters carry (a centre fixed only
    loosely, on a short arc, makes the swept area grow unevenly): the drift's gradient by
    central differences of a tenth of each parameter's error, through the covariance."""
    effort = Effort(track.n_points, track.label)
    errors = np.sqrt(np.diag(covariance))
    gradient = np.zeros(errors.size)
    for j, error in enumerate(errors):
        step = np.zeros(errors.size)
        step[j] = 0.1 * error
        drifts = [_angular_momentum(track, evaluate(solution.problem, solution.vector + sign * step, effort),
                                    sigma)[2] for sign in (1.0, -1.0)]
        gradient[j] = (drifts[0] - drifts[1]) / (0.2 * error)
    spread = float(gradient @ covariance @ gradient)
    return math.sqrt(spread) if math.isfinite(spread) and spread > 0 else 0.0


def _relation(path: PathGeometry | None, centre: tuple[float, float], timed: bool) -> CurvaturePoints:
    """The force-curvature relation about the fitted centre, for the figure: only from a path the
    caller described (the fit itself smooths nothing)."""
    if path is None:
        return CurvaturePoints(log_radius=np.empty(0), log_force=np.empty(0), per_h2=not timed)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_radius, log_force, _ = force_relation(path, centre)
    return CurvaturePoints(log_radius=log_radius, log_force=log_force, per_h2=not path.track.has_times)


def _law_fit(track: Track, solution: _Solution, sigma_known: bool, path: PathGeometry | None,
             evaluations: int) -> ShapeFit:
    """The checked result of one solution: errors in the noise the residuals show, widened by
    their correlation time; h and k from the times when there are any."""
    problem, evaluation = solution.problem, solution.evaluation
    n_params = problem.n_parameters
    dof = max(track.n_points - n_params, 1)
    scale = 1.0 if sigma_known else math.sqrt(solution.chi2 / dof)    # fitted noise / provisional sigma
    sigma = problem.sigma * scale
    noise = float(np.median(sigma))
    centre = solution.centre
    require_one_sense(track, centre, sigma)
    _require_resolved_excursion(track, solution, noise)
    residuals = evaluation.residual / scale
    tau = _correlation_time(residuals)
    try:
        covariance = np.linalg.inv(evaluation.jacobian.T @ evaluation.jacobian) * scale**2 * tau
    except np.linalg.LinAlgError:
        covariance = np.full((n_params, n_params), math.nan)
    if not (np.all(np.isfinite(covariance)) and np.all(np.diag(covariance) > 0)):
        raise FitError(f"{track.label}: the shape fit found no well-determined solution (its covariance "
                       "is singular). The path is probably not an orbit in a central power law; check "
                       "the centre and the data.", last_params=dict(zip(PARAMETER_NAMES, solution.vector)))
    chi2 = float(residuals @ residuals)
    exponent, log_ratio = (float(value) for value in solution.vector[:2])
    ratio = math.exp(log_ratio)
    ratio_se = ratio * math.sqrt(covariance[1, 1])
    centre_se = ((math.sqrt(covariance[4, 4]), math.sqrt(covariance[5, 5])) if problem.centre is None
                 else (0.0, 0.0))
    h, h_se, drift, drift_se, steadiness = _angular_momentum(track, evaluation, sigma)
    if math.isfinite(drift):
        drift_se = math.hypot(drift_se, _drift_spread(track, solution, covariance, sigma))
    strength = ratio * h**2
    strength_se = abs(strength) * math.hypot(ratio_se / ratio, 2 * h_se / h) if math.isfinite(h) else math.nan
    log_reference = float(np.mean(np.log(evaluation.radius)))
    gradient = np.zeros(n_params)
    gradient[:2] = (log_reference, 1.0)            # ln F/h**2 (r_ref) = ln(k/h**2) + n ln r_ref
    per_h2_se = math.sqrt(float(gradient @ covariance @ gradient))
    force = math.exp(log_ratio + exponent * log_reference) * h**2
    force_se = force * math.hypot(per_h2_se, 2 * h_se / h) if math.isfinite(h) else math.nan
    turns = float(np.ptp(evaluation.theta)) / (2.0 * math.pi)
    diagnostics = _checks(track, solution, residuals, sigma_known, noise, tau, (drift, drift_se), turns)
    areal = _areal_rate_check(steadiness)
    if areal is not None:
        diagnostics["areal rate"] = areal
    if problem.centre is None:
        diagnostics["closest passage"] = _closest_passage(track, evaluation, centre_se)
    if problem.centre is None and max(centre_se) > 0.05 * float(np.ptp(evaluation.radius)
                                                                + np.min(evaluation.radius)):
        diagnostics["centre"] = Diagnostic(None, f"the shape fixes the centre only to ±{max(centre_se):.3g} "
                                                 f"{track.length_unit}; give it if it is known.")
    return ShapeFit(
        exponent=exponent, exponent_stderr=math.sqrt(covariance[0, 0]), strength=strength,
        strength_stderr=strength_se, strength_per_h2=ratio, strength_per_h2_stderr=ratio_se,
        centre=centre, centre_stderr=centre_se, method="shape", n_points=track.n_points,
        reference_radius=math.exp(log_reference), force_at_reference=force,
        force_at_reference_stderr=force_se, chi2=chi2, reduced_chi2=chi2 / dof,
        parameter_names=PARAMETER_NAMES + (("centre_x", "centre_y") if problem.centre is None else ()),
        covariance=covariance, residuals=residuals, length_unit=track.length_unit,
        time_unit=track.time_unit if track.has_times else None, diagnostics=diagnostics,
        relation=_relation(path, centre, track.has_times), reference_angle=problem.reference,
        angular_momentum=h, angular_momentum_stderr=h_se, evaluations=evaluations, noise=noise,
        correlation_time=tau, track_name=track.name,
    )


def _closest_passage(track: Track, evaluation: Evaluation, centre_se: tuple[float, float]) -> Diagnostic:
    """Does one standard error of the fitted centre turn the direction to the closest sample by
    less than CLOSEST_ANGLE? Beyond it the errors, linear in the centre, are not to be trusted."""
    closest = float(np.min(evaluation.radius))
    spread = math.hypot(*centre_se)
    angle = spread / closest if closest > 0 else math.inf
    unit = track.length_unit
    text = (f"the path passes {closest:.3g} {unit} from the centre, which is fixed to ±{spread:.2g} "
            f"{unit}: one standard error turns the direction to the closest sample by {angle:.2g} rad")
    if angle > CLOSEST_ANGLE:
        return Diagnostic(False, text + f", more than {CLOSEST_ANGLE:g}: the errors, linear in the "
                                        "centre, are too small this close to it. Measure the closest "
                                        "passage more precisely, give the centre if it is known, or "
                                        "use the orbit fit.")
    return Diagnostic(True, text + ".")


def _checks(track: Track, solution: _Solution, residuals: FloatArray, sigma_known: bool, noise: float,
            tau: float, drift: tuple[float, float], turns: float) -> dict[str, Diagnostic]:
    """Convergence, chi-square (sigma given), runs of residual signs, h's constancy; the noise,
    the correlation time and the coverage as information."""
    dof = max(track.n_points - solution.problem.n_parameters, 1)
    diagnostics = {
        "convergence": Diagnostic(True, "the least-squares fit settled.") if solution.settled else
        Diagnostic(False, "the least-squares fit had not settled when it stopped: the values and "
                          "errors are those where it stopped."),
        "residuals": runs_diagnostic(residuals),
        "angular momentum": constancy_diagnostic(drift[0], error=drift[1]),
        "noise": Diagnostic(None, f"sigma as given (median {noise:.3g} {track.length_unit})" if sigma_known
                            else f"fitted noise level {noise:.3g} {track.length_unit}"),
        "coverage": Diagnostic(None, f"the samples sweep {turns:.2f} turns about the centre"
                                     + (f"; neighbouring residuals stay alike over {tau:.3g} samples, "
                                        f"so the errors are widened {math.sqrt(tau):.3g} times."
                                        if tau > 1.0 else ".")),
    }
    if sigma_known:
        diagnostics["chi-square"] = chi_square_diagnostic(float(residuals @ residuals) / dof, dof)
    return diagnostics


def _candidates(track: Track, noise: float) -> list[tuple[float, float]]:
    """Likely centres: the conic's centre and foci, the centroid; with timestamps those about
    which the area grows steadily, best first (`forcefit.estimators._start.centre_candidates`)."""
    candidates = centre_candidates(track, noise)
    if not candidates:
        raise NotIdentifiable(f"{track.label}: no likely force centre could be found from the path's "
                              "shape. Give the centre.")
    return candidates


def fit_shape(
    track: Track,
    *,
    centre: tuple[float, float] | None = None,
    path: PathGeometry | None = None,
) -> ShapeFit:
    """Fit Binet's equation to the path: n and k/h**2 from the shape, time-free.

    Parameters
    ----------
    track : Track
        Positions (L) in path order, evenly spaced or not; timestamps, when present, give h
        and so k, and decide between centres the shape fits equally well; a sigma column
        weights the samples (without one the noise is fitted).
    centre : (float, float), optional
        The force centre (L), held fixed; fitted when not given.
    path : PathGeometry, optional
        The track's geometry, if already described: its force-curvature relation about the
        fitted centre is kept for the figure (the fit itself smooths nothing).

    Returns
    -------
    ShapeFit
        For a shape-only track with a free centre, ``alternatives`` lists the other
        solutions that fit as well (a closed ellipse: n = 1 about its centre and
        n = -2 about a focus).

    Raises
    ------
    NotIdentifiable
        For a straight path, and when the radial excursion of the fitted curve is not resolved
        above the noise (a circle about the centre, or nearly).
    GeometryError
        For fewer than 12 samples, and when the path winds back about the centre.
    FitError
        When no Binet curve follows the samples, or the fit spends its budget of integration
        steps (which grows with the samples) without settling.

    Examples
    --------
    >>> theta = np.linspace(0.0, 4 * np.pi, 600)            # Kepler ellipse, focus at 0
    >>> r = 1.0 / (1.0 + 0.5 * np.cos(theta))                # semi-latus rectum 1 m
    >>> track = Track(x=r * np.cos(theta), y=r * np.sin(theta), sigma=1e-6)
    >>> fit = fit_shape(track, centre=(0.0, 0.0))
    >>> round(fit.exponent, 6), round(fit.strength_per_h2, 6)   # k/h**2 = 1/p
    (-2.0, 1.0)
    """
    if track.n_points < MIN_SAMPLES:
        raise GeometryError(
            f"{track.label}: {track.n_points} samples are too few for the shape fit; it needs at least "
            f"{MIN_SAMPLES} to fix the law, the state and the centre with room to spare. Record a "
            "longer stretch of the path or more points along it.")
    noise = difference_noise(track)
    require_bend(track, noise)
    size = float(max(np.ptp(track.x), np.ptp(track.y)))
    sigma = (np.asarray(track.sigma, dtype=float) if track.sigma is not None
             else np.full(track.n_points, max(noise, 1e-12 * size, 1e-300)))
    effort = Effort(track.n_points, track.label)
    solutions: list[_Solution] = []
    failures: list[Exception] = []
    for start in [centre] if centre is not None else _candidates(track, noise):
        try:
            solutions.append(_solve_about(track, (float(start[0]), float(start[1])), sigma,
                                          free_centre=centre is None, effort=effort))
        except (GeometryError, FitError) as exc:
            if effort.spent > effort.limit:
                raise
            failures.append(exc)
    if not solutions:
        raise failures[0]
    if track.has_times and len(solutions) > 1:
        misfits = [areal_misfit(track, solution.centre) for solution in solutions]
        solutions = [solution for solution, misfit in zip(solutions, misfits)
                     if misfit <= AREAL_TOLERANCE * min(misfits) + 1e-300]
    solutions.sort(key=lambda solution: solution.chi2)
    fit = _law_fit(track, solutions[0], track.sigma is not None, path, effort.integrations)
    return _with_alternatives(track, fit, solutions, path, effort.integrations)


def _with_alternatives(track: Track, fit: ShapeFit, solutions: list[_Solution], path: PathGeometry | None,
                       evaluations: int) -> ShapeFit:
    """``fit`` with the other solutions that fit about as well about distinct centres, flagged."""
    size = float(max(np.ptp(track.x), np.ptp(track.y)))
    others: list[ShapeFit] = []
    for solution in solutions[1:]:
        if solution.chi2 > AMBIGUITY_FACTOR * solutions[0].chi2:
            continue
        distinct = max(1e-3 * size, 3.0 * math.hypot(*fit.centre_stderr))
        if any(math.dist(solution.centre, known.centre) <= distinct for known in [fit, *others]):
            continue
        try:
            others.append(_law_fit(track, solution, track.sigma is not None, path, evaluations))
        except (NotIdentifiable, GeometryError, FitError):
            continue
    if not others:
        return fit
    listed = "; ".join(f"n = {f.exponent:.3f} about ({f.centre[0]:.4g}, {f.centre[1]:.4g})" for f in others)
    check = Diagnostic(False, f"the path's shape fits as well about other centres ({listed}). A closed "
                              "ellipse is an orbit of n = 1 about its centre and of n = -2 about a "
                              "focus; give the centre or timestamps to decide.")
    return replace(fit, alternatives=tuple(others), diagnostics={**fit.diagnostics, "centre": check})
