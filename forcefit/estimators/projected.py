"""The projected-orbit estimator: the force law of an orbit seen at an unknown inclination.

The body's planar orbit under F = -k r**n r_hat, integrated by the compiled batch propagator,
is turned by its inclination, node and in-plane orientation and projected onto the sky
(`forcefit.dynamics.sky.ProjectedOrbitModel`). The law, the orientation, the state at an epoch
and (unless known) the centre are fitted by least squares to every position, weighed by its
error ellipse, and to radial velocities when there are any. It shares the orbit fit's machinery:
its start search (on the path deprojected by trial orientations), its least squares, and its
covariance widened by the residuals' correlation time.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, replace
from typing import Literal

import numpy as np

from .._types import FloatArray
from ..astrometry import Astrometry, as_astrometry
from ..dynamics.sky import PROJECTION, ProjectedOrbitModel, orientation, plane_state
from ..errors import GeometryError, NotIdentifiable
from ..geometry.noise import difference_noise
from ..track import Track
from ..units import is_sky_angle, velocity_scale
from ._checks import chi_square_diagnostic, require_bend
from ._least_squares import Optimum, ParameterVector, run_least_squares
from ._projected_start import ProjectedStart, projected_starts
from ._start import centre_candidates
from .orbit import (
    MIN_SAMPLES,
    Loss,
    _epoch,
    _residual_checks,
    _robust_spread,
    _Solution,
    correlation_time,
    covariance_from,
)
from .result import Diagnostic, ProjectedFit

EDGE_ON = 3.0
"""Refuse when |cos i| is within this many of its standard errors of zero (the path is a line on
the sky) and no radial velocities see the depth."""

UNRESOLVED_EXPONENT = 0.5
"""Refuse when the exponent's standard error exceeds this: the projection has used up what
the data could say about the law (too short an arc, too few epochs, an orbit too round)."""

UNRESOLVED_ORIENTATION = 20.0
"""Refuse when the inclination's standard error exceeds this many degrees: the positions do not
fix the orbit's orientation (and the linearised errors of everything else mean little)."""

FACE_ON = 5.0
"""The orbit counts as seen nearly face-on when its foreshortening (`foreshortening`) is within
this many standard errors of none: the inclination is then stated as an upper limit and the
node as undetermined, since i and the node are no linear functions of the data there."""

FACE_ON_CHI2 = 5.991
"""The 95% point of chi-square with 2 degrees of freedom (common practice), for the limit."""

RESOLVED_EXCURSION = 10.0
"""The orbit's true radial half-range must exceed this many of its standard errors."""


@dataclass(frozen=True, eq=False)
class _Weights:
    """Turns observed-minus-predicted into numbers in units of their errors: each position by the
    inverse Cholesky factor of its error ellipse, each velocity by its sigma."""

    positions: FloatArray            # (n_positions, 2, 2)
    velocities: FloatArray           # (n_velocities,)

    def apply(self, difference: FloatArray) -> FloatArray:
        """Whiten differences of shape (n_observations,) or (n_observations, n_columns)."""
        count = self.positions.shape[0]
        head, tail = difference[:2 * count], difference[2 * count:]
        shaped = head.reshape((count, 2) + head.shape[1:])
        whitened = np.einsum("pij,pj...->pi...", self.positions, shaped).reshape(head.shape)
        scale = self.velocities if tail.ndim == 1 else self.velocities[:, None]
        return np.concatenate((whitened, tail / scale))

    def scaled(self, factor: float) -> _Weights:
        """The position weights for errors ``factor`` times larger."""
        return replace(self, positions=self.positions / factor)


def _weights(data: Astrometry, noise: float) -> _Weights:
    covariance = data.position_covariance()
    if covariance is None:
        covariance = np.full(data.track.n_points, noise**2)[:, None, None] * np.eye(2)[None]
    factor = np.linalg.cholesky(covariance)
    velocities = data.velocities.sigma if data.velocities is not None else np.empty(0)
    return _Weights(np.linalg.inv(factor), np.asarray(velocities, dtype=float))


def _observations(data: Astrometry) -> FloatArray:
    velocities = data.velocities.velocity if data.velocities is not None else np.empty(0)
    return np.concatenate((data.track.positions.ravel(), velocities))


def _velocity_factor(data: Astrometry) -> tuple[float, bool]:
    """RV per unit of dz/dt, and whether a parallax turns the sky's angles into au."""
    if data.velocities is None:
        return 1.0, False
    track = data.track
    factor = velocity_scale(track.length_unit, track.time_unit, data.velocities.unit)
    return factor, is_sky_angle(track.length_unit)


def _steps(model: ProjectedOrbitModel, vector: FloatArray, size: float, speed: float) -> FloatArray:
    """Central-difference steps for each parameter, in its own unit."""
    steps = np.empty(vector.size)
    matrix = float(np.max(np.abs(vector[2:6])))
    for i, name in enumerate(model.names):
        typical = {"exponent": 1.0, "log_force": 1.0, "vx0": speed, "vy0": speed,
                   "parallax": abs(vector[i])}.get(name, matrix if name in PROJECTION else size)
        steps[i] = 1e-6 * max(abs(vector[i]), typical, 1e-300)
    return steps


@dataclass(frozen=True, eq=False)
class _Problem:
    """One projected fit's fixed parts: the model, the data, their weights and step scales."""

    model: ProjectedOrbitModel
    observed: FloatArray
    weights: _Weights
    size: float
    speed: float

    def residual(self, vector: FloatArray) -> FloatArray:
        """Whitened observed minus predicted (a large constant where the orbit fails)."""
        flat, ok = self.model.observe(vector[None, :])
        if not ok[0]:
            return np.full(self.observed.size, 1e4)
        return self.weights.apply(self.observed - flat[0])

    def jacobian(self, vector: FloatArray, columns: list[int]) -> FloatArray:
        """Whitened d(residual)/d(parameter) for ``columns``."""
        steps = _steps(self.model, vector, self.size, self.speed)
        return -self.weights.apply(self.model.jacobian(vector, steps, columns))


def _minimise(problem: _Problem, params: ParameterVector, loss: Loss, max_evaluations: int) -> Optimum:
    with np.errstate(all="ignore"):
        return run_least_squares(problem.residual,
                                 lambda vector, columns: np.nan_to_num(problem.jacobian(vector, columns)),
                                 params, loss, max_evaluations, what="the projected-orbit fit")


def _parameters(model: ProjectedOrbitModel, vector: FloatArray, exponent: float | None) -> ParameterVector:
    """The parameters at ``vector``, with the exponent held when it is given."""
    return ParameterVector.of(model.names, vector, lambda name: name == "exponent" and exponent is not None)


def _optimise(problem: _Problem, vector: FloatArray, exponent: float | None, known: bool, loss: Loss,
              max_evaluations: int) -> tuple[_Solution, _Problem]:
    """Least squares from ``vector``; without known position errors, re-run in the units of the
    noise the residuals show. Returns the solution (covariance widened by the residuals'
    correlation time) and the problem with its final weights."""
    result = _minimise(problem, _parameters(problem.model, vector, exponent), loss, max_evaluations)
    if not known:
        count = 2 * problem.model.position_times.size
        head = np.asarray(result.residual)[:count]
        free = len(result.parameters.varying)
        spread = (math.sqrt(float(head @ head) / max(count - free, 1)) if loss == "linear"
                  else _robust_spread(head))
        if spread > 0 and math.isfinite(spread):
            problem = replace(problem, weights=problem.weights.scaled(spread))
            if abs(math.log(spread)) > math.log(1.2) or problem.model.has_velocities:
                result = _minimise(problem, result.parameters, loss, max_evaluations)
    varying = [problem.model.index(name) for name in result.parameters.varying]
    best = result.parameters.values
    residual = np.asarray(result.residual)
    jacobian = problem.jacobian(best, varying)
    covariance = covariance_from(jacobian, residual, loss, known or problem.model.has_velocities)
    tau = correlation_time(_residual_series(problem.model, residual))
    return _Solution.of(result).widened(covariance, tau), problem


def _residual_series(model: ProjectedOrbitModel, residual: FloatArray) -> list[FloatArray]:
    """The whitened residuals as series in time order: the two sky coordinates, the velocities."""
    count = model.position_times.size
    pieces = residual[:2 * count].reshape(count, 2)
    series = [pieces[:, 0], pieces[:, 1]]
    if model.has_velocities and residual.size - 2 * count >= 8:
        series.append(residual[2 * count:])
    return series


ANGLES = {"inclination": 360.0, "periastron_argument": 360.0}
"""Derived angles (deg) and their period, for differences that wrap; the node's period is 180
deg without radial velocities, 360 with."""


def kepler_elements(position: FloatArray, velocity: FloatArray, strength: float, epoch: float,
                    ) -> dict[str, float]:
    """Osculating Kepler elements of a state in the node frame (angular momentum positive).

    Parameters
    ----------
    position, velocity : ndarray, shape (2,)
        L and L/T, first axis towards the ascending node.
    strength : float
        k = GM (L**3 T**-2).
    epoch : float
        Time of the state (T).

    Returns
    -------
    dict
        ``semi_major_axis`` (L), ``eccentricity``, ``periastron_argument`` (deg from the
        ascending node in the direction of motion), ``period`` (T) and ``periastron_time``
        (T, the passage nearest the epoch); nan for an unbound state.

    References
    ----------
    The vis-viva and eccentricity-vector relations and Kepler's equation (common practice;
    e.g. R. M. Green 1985, Spherical Astronomy, Cambridge, chapter 6, from memory).

    Examples
    --------
    >>> elements = kepler_elements(np.array([0.5, 0.0]), np.array([0.0, math.sqrt(3.0)]), 1.0, 0.0)
    >>> round(elements["semi_major_axis"], 12), round(elements["eccentricity"], 12)
    (1.0, 0.5)
    """
    r = float(np.hypot(*position))
    speed2 = float(velocity @ velocity)
    energy = 0.5 * speed2 - strength / r
    radial = float(position @ velocity)
    vector = ((speed2 - strength / r) * position - radial * velocity) / strength
    eccentricity = float(np.hypot(*vector))
    if not (energy < 0 and strength > 0):
        return dict.fromkeys(("semi_major_axis", "eccentricity", "periastron_argument", "period",
                              "periastron_time"), math.nan)
    axis = -strength / (2.0 * energy)
    period = 2.0 * math.pi * math.sqrt(axis**3 / strength)
    anomaly = math.atan2(radial / math.sqrt(strength * axis), 1.0 - r / axis)      # E
    mean = anomaly - eccentricity * math.sin(anomaly)
    return {"semi_major_axis": axis, "eccentricity": eccentricity,
            "periastron_argument": math.degrees(math.atan2(vector[1], vector[0])) % 360.0,
            "period": period, "periastron_time": epoch - mean * period / (2.0 * math.pi)}


def foreshortening(projection: FloatArray) -> FloatArray:
    """The foreshortening vector of a projection matrix T = s R(node) diag(1, cos i) R(w):

        f = (sin(i)**2 / (1 + cos(i)**2)) (cos 2 node, sin 2 node),

    from M = T T^T as ((M11 - M22), 2 M12) / trace(M): a smooth (rational) function of T, so its
    errors are linear where those of i and the node are not (near face-on, i and the node are
    polar coordinates of f about its origin).

    Examples
    --------
    >>> from forcefit.dynamics.sky import projection_matrix
    >>> T = projection_matrix(scale=2.0, inclination=math.radians(60), node=0.0, axis_angle=0.4)
    >>> np.round(foreshortening(T), 12)          # (3/4) / (5/4) along the node
    array([0.6, 0. ])
    """
    matrix = np.asarray(projection, dtype=float).reshape(2, 2)
    m = matrix @ matrix.T
    return np.array([m[0, 0] - m[1, 1], 2.0 * m[0, 1]]) / (m[0, 0] + m[1, 1])


def inclination_of(size: float) -> float:
    """The inclination (deg, 0 to 90) whose foreshortening has this size (clipped to [0, 1])."""
    size = min(max(size, 0.0), 1.0)
    return math.degrees(math.acos(math.sqrt((1.0 - size) / (1.0 + size))))


def _face_on_limit(model: ProjectedOrbitModel, vector: FloatArray, columns: list[int], steps: FloatArray,
                   covariance: FloatArray) -> float:
    """The 95% upper limit (deg) on the angle from face-on when the foreshortening is within FACE_ON
    standard errors of none; nan when it is resolved.

    |f_true| <= |f| + |f - f_true| and |f - f_true| <= sqrt(lambda_max chi2), chi2 being chi-square
    with 2 degrees of freedom: the limit covers the truth at 95% or more (conservative)."""
    first = model.index(PROJECTION[0])
    centre = foreshortening(vector[first:first + 4])
    gradient = np.zeros((2, len(columns)))
    for k, i in enumerate(columns):
        up, down = vector.copy(), vector.copy()
        up[i] += steps[i]
        down[i] -= steps[i]
        change = foreshortening(up[first:first + 4]) - foreshortening(down[first:first + 4])
        gradient[:, k] = change / (2 * steps[i])
    spread = gradient @ covariance @ gradient.T
    try:
        significance = float(centre @ np.linalg.solve(spread, centre))
    except np.linalg.LinAlgError:
        return math.nan
    if not (math.isfinite(significance) and significance < FACE_ON**2):
        return math.nan
    largest = float(np.linalg.eigvalsh(spread)[-1])
    return inclination_of(float(np.hypot(*centre)) + math.sqrt(max(largest, 0.0) * FACE_ON_CHI2))


def _derived(model: ProjectedOrbitModel, vector: FloatArray, branch: float, radius: float,
             kepler: bool) -> dict[str, float]:
    """The physical numbers of a parameter vector: the angles (deg), the true law and h."""
    state = plane_state(model, vector, branch=branch)
    angles = state.orientation
    h = float(state.position[0] * state.velocity[1] - state.position[1] * state.velocity[0])
    values = {"inclination": math.degrees(angles.inclination), "node": math.degrees(angles.node),
              "strength": state.strength, "force_at_reference": state.strength * radius**state.exponent,
              "angular_momentum": h, "strength_per_h2": state.strength / h**2, "scale": angles.scale}
    if kepler:
        values.update(kepler_elements(state.position, state.velocity, state.strength, model.epoch))
    return values


def physical_values(fit: ProjectedFit, vector: FloatArray) -> dict[str, float]:
    """The physical numbers of a parameter vector of ``fit.model``, as the fit derives its own.

    Parameters
    ----------
    fit : ProjectedFit
        Its model, node branch and reference radius fix the reading.
    vector : ndarray, shape (n_params,)
        In the order of ``fit.model.names``.

    Returns
    -------
    dict
        ``inclination`` and ``node`` (deg), the true ``strength`` (L**(1-n) T**-2),
        ``force_at_reference``, ``angular_momentum``, ``strength_per_h2`` and ``scale``; with the
        exponent held at -2, the Kepler elements too (`kepler_elements`).
    """
    kepler = "exponent" not in fit.parameter_names and fit.exponent == -2.0
    return _derived(fit.model, np.asarray(vector, dtype=float), fit.branch, fit.reference_radius, kepler)


def _propagate(function: Callable[[FloatArray], dict[str, float]], vector: FloatArray, columns: list[int],
               steps: FloatArray, covariance: FloatArray, periods: Mapping[str, float]) -> dict[str, float]:
    """Standard errors of derived numbers by the delta method: central differences of
    ``function`` over the varying ``columns``, differences of angles wrapped by their period."""
    centre = function(vector)
    gradient = {name: np.zeros(len(columns)) for name in centre}
    for k, i in enumerate(columns):
        up, down = vector.copy(), vector.copy()
        up[i] += steps[i]
        down[i] -= steps[i]
        high, low = function(up), function(down)
        for name in centre:
            difference = high[name] - low[name]
            if name in periods:
                period = periods[name]
                difference = (difference + period / 2) % period - period / 2
            gradient[name][k] = difference / (2 * steps[i])
    return {name: math.sqrt(max(float(g @ covariance @ g), 0.0)) if np.all(np.isfinite(g)) else math.nan
            for name, g in gradient.items()}


def _misfit(solution: _Solution, problem: _Problem, known: bool) -> float:
    """What ranks the fits from several starts: the chi-square with known errors; without, the
    position noise each fit needs (its chi-square is scaled to the degrees of freedom)."""
    return solution.chi2 if known else _noise_level(problem)


def _describes(solution: _Solution, problem: _Problem, known: bool, noise: float) -> bool:
    """Whether a fit describes the positions: with known errors, a reduced chi-square within the
    chi-square check's bounds; without, residuals no larger than the noise the samples'
    differences show (an upper bound when the samples are sparse)."""
    residual = solution.residual
    dof = max(residual.size - len(solution.varying), 1)
    if known:
        return float(residual @ residual) / dof < 1.0 + 5.0 * math.sqrt(2.0 / dof)
    return _noise_level(problem) < 1.5 * noise


def fit_projected(
    data: Track | Astrometry,
    *,
    exponent: float | None = None,
    centre: tuple[float, float] | None = None,
    loss: Loss = "linear",
    epoch: Literal["middle"] | float = "middle",
    max_evaluations: int = 300,
) -> ProjectedFit:
    """Fit the law F = -k r**n r_hat of an orbit seen in projection, with its orientation.

    Parameters
    ----------
    data : Astrometry or Track
        Positions on the sky (x north, y east; see `forcefit.astrometry`) or on any image
        plane, with epochs, their errors and optional radial velocities. A plain `Track` is
        taken as positions with isotropic errors (its sigma, or unknown) and no velocities.
    exponent : float, optional
        Hold n at this value (-2 also gives the Kepler elements).
    centre : (float, float), optional
        A known force centre on the sky (L). Default: the origin for relative positions
        (``Astrometry.relative``, a companion measured from its primary), else fitted.
    loss : {"linear", "soft_l1", "huber"}
        Least squares, or a robust loss against the odd wild measurement.
    epoch : "middle" or float
        Where the fitted state is defined: the middle epoch or a time (T).
    max_evaluations : int
        Most model evaluations each run of the optimiser may use.

    Returns
    -------
    ProjectedFit
        The true law in the orbit's plane, the centre, the inclination and node with their
        errors, the sense of motion, and the checks.

    Raises
    ------
    NotIdentifiable
        Without epochs; for positions along a line on the sky (edge-on, or too short an arc);
        when the orbit is seen edge-on without radial velocities, is too round, or the data
        leave the exponent's error above UNRESOLVED_EXPONENT or the inclination's above
        UNRESOLVED_ORIENTATION; when no trial orientation leads to an orbit.
    GeometryError
        For fewer than MIN_SAMPLES positions.

    Examples
    --------
    >>> from forcefit.dynamics.simulate import simulate_projected
    >>> data = simulate_projected(exponent=-2.0, inclination=60.0, node=30.0, noise=2e-3, rng=1)
    >>> fit = fit_projected(data)
    >>> bool(abs(fit.exponent + 2.0) < 4 * fit.exponent_stderr)
    True
    >>> bool(abs(fit.inclination - 60) < 4 * fit.inclination_stderr)
    True
    """
    if isinstance(data, Track) and not data.has_times:
        raise NotIdentifiable(f"{data.label}: the projected-orbit estimator needs timestamps; fit a "
                              "shape-only path with the shape or curvature estimator.")
    data = as_astrometry(data)
    track = data.track
    if track.n_points < MIN_SAMPLES:
        raise GeometryError(
            f"{track.label}: {track.n_points} positions are too few for the projected-orbit fit; it "
            f"needs at least {MIN_SAMPLES} to fix the law, the orientation and the state with room "
            "to spare. Add epochs.")
    noise = difference_noise(track)
    try:
        require_bend(track, noise)
    except NotIdentifiable:
        raise NotIdentifiable(
            f"{track.label}: the positions lie along a line on the sky within their noise: an orbit "
            "seen edge-on (its depth unseen), or an arc too short to bend. Neither fixes the "
            "orientation or the law; observe a longer arc, or add radial velocities "
            "(`Astrometry.velocities`).") from None
    typical = data.typical_error()
    size = float(max(np.ptp(track.x), np.ptp(track.y)))
    sigma = typical if typical is not None else np.full(track.n_points, max(noise, 1e-9 * size))
    held = centre if centre is not None else ((0.0, 0.0) if data.relative else None)
    guess = held if held is not None else centre_candidates(track, noise)[0]
    t = np.asarray(track.t)
    epoch_time, index = _epoch(track, epoch)
    offsets = np.hypot(track.x - guess[0], track.y - guess[1])
    with np.errstate(divide="ignore"):
        radius = float(np.exp(np.mean(np.log(offsets))))
    factor, parallax = _velocity_factor(data)
    model = ProjectedOrbitModel(
        position_times=t, epoch=epoch_time, start_radius=max(float(offsets[index]), 1e-9 * size),
        reference_radius=radius if math.isfinite(radius) and radius > 0 else size, centre=held,
        velocity_times=data.velocities.t if data.velocities is not None else np.empty(0),
        velocity_factor=factor, fit_parallax=parallax)
    sky = replace(model, velocity_times=np.empty(0), fit_parallax=False)
    weights = _weights(data, float(np.median(sigma)))
    speed = float(np.median(np.hypot(np.diff(track.x), np.diff(track.y)) / np.diff(t)))
    problem = _Problem(sky, track.positions.ravel(), replace(weights, velocities=np.empty(0)), size, speed)
    starts = projected_starts(ProjectedStart(track=track, model=sky, exponent=exponent, centre=guess,
                                             sigma=sigma, noise=float(np.median(sigma))), index)
    known = typical is not None
    best: tuple[_Solution, _Problem] | None = None
    for vector in starts:
        fitted = _optimise(problem, vector, exponent, known, loss, max_evaluations)
        if best is None or _misfit(*fitted, known) < _misfit(*best, known):
            best = fitted
        if _describes(*best, known, noise):
            break
    if best is None:
        raise NotIdentifiable(
            f"{track.label}: no orientation of any power-law orbit about the centre follows the "
            "positions; the path is probably not a projected central-force orbit, or the epochs do "
            "not belong to the positions. Check the epochs and the centre.")
    solution, problem = best
    branch, branch_chi2 = 1.0, (math.nan, math.nan)
    if data.velocities is not None:
        solution, problem, branch, branch_chi2 = _with_velocities(
            model, solution, problem, _observations(data), weights, exponent, known, loss, max_evaluations)
    return _result(data, problem, solution, branch, branch_chi2, exponent, known, loss)


def _with_velocities(
    model: ProjectedOrbitModel, solution: _Solution, problem: _Problem, observed: FloatArray,
    weights: _Weights, exponent: float | None, known: bool, loss: Loss, max_evaluations: int,
) -> tuple[_Solution, _Problem, float, tuple[float, float]]:
    """Refit with the radial velocities on each side of the node ambiguity; keep the better."""
    sky_vector = np.array([solution.values[name] for name in problem.model.names])
    first = problem.model.index(PROJECTION[0])
    speed = sky_vector[problem.model.index("vx0"):problem.model.index("vx0") + 2]
    sense = 1.0 if speed[1] >= 0 else -1.0
    row = orientation(sky_vector[first:first + 4].reshape(2, 2), sense).line_of_sight
    fitted_weights = _Weights(problem.weights.positions, weights.velocities)   # the fitted noise scale
    runs = []
    for branch in (1.0, -1.0):
        side = replace(model, line_of_sight=branch * row)
        values = {**solution.values, "parallax": 1.0}
        vector = np.array([values[name] for name in side.names])
        if side.fit_parallax:
            vector[side.index("parallax")] = _parallax_guess(side, vector, observed, fitted_weights)
        full = _Problem(side, observed, fitted_weights, problem.size, problem.speed)
        fitted, full = _optimise(full, vector, exponent, known, loss, max_evaluations)
        runs.append((fitted.chi2, branch, fitted, full))
    runs.sort(key=lambda run: run[0])
    chi2, branch, fitted, full = runs[0]
    other = runs[1][0]
    return fitted, full, branch, (chi2, other)


def _parallax_guess(model: ProjectedOrbitModel, vector: FloatArray, observed: FloatArray,
                    weights: _Weights) -> float:
    """The parallax that best scales the velocities predicted at parallax 1 (linear least
    squares in 1/parallax); its magnitude when the sign comes out wrong."""
    trial = vector.copy()
    trial[model.index("parallax")] = 1.0
    predicted = model.predict(trial[None, :]).radial_velocities[0]
    count = 2 * model.position_times.size
    measured = observed[count:]
    weight = 1.0 / weights.velocities**2
    inverse = float(np.sum(weight * predicted * measured) / max(float(np.sum(weight * predicted**2)), 1e-300))
    return 1.0 / abs(inverse) if inverse != 0 and math.isfinite(inverse) else 1.0


def _refuse_unidentified(track: Track, solution: _Solution, model: ProjectedOrbitModel,
                         elements: Mapping[str, float], errors: Mapping[str, float], *, face_on: bool,
                         ) -> None:
    """Refuse what the projection leaves undetermined: an orbit seen edge-on (without radial
    velocities), an exponent whose error is too large for its linearised value to mean anything,
    and an orientation the positions do not fix."""
    inclination, spread = elements["inclination"], errors["inclination"]
    cos_error = math.sin(math.radians(inclination)) * math.radians(spread)
    if (not model.has_velocities and spread < UNRESOLVED_ORIENTATION
            and abs(math.cos(math.radians(inclination))) < EDGE_ON * cos_error):
        raise NotIdentifiable(
            f"{track.label}: the orbit is seen edge-on (i = {inclination:.1f} ± {spread:.1f} deg): its "
            "path on the sky is nearly a line, which leaves the orbit's depth, and with it the "
            "exponent, undetermined. Radial velocities would see the depth (`Astrometry.velocities`).")
    n_error = solution.stderrs.get("exponent", 0.0)
    if not math.isfinite(n_error) or n_error > UNRESOLVED_EXPONENT:
        raise NotIdentifiable(
            f"{track.label}: the exponent is not determined (n = {solution.values['exponent']:.3g} ± "
            f"{n_error:.2g}): the projection's unknown orientation takes up what these positions "
            "could say about the law. Observe a longer arc (through pericentre) or more epochs, or "
            "hold the exponent (--fix-exponent) to fit the orbit's elements.")
    if not face_on and (not math.isfinite(spread) or spread > UNRESOLVED_ORIENTATION):
        raise NotIdentifiable(
            f"{track.label}: the orbit's orientation is not determined (i = {inclination:.3g} ± "
            f"{spread:.2g} deg): these positions fit about as well at any inclination. A harmonic "
            "orbit (n = 1) or a circular one looks alike from every angle, and a short arc shows "
            "too little of the orbit; observe more of it (through pericentre), or add radial "
            "velocities (`Astrometry.velocities`).")


def _require_resolved_excursion(track: Track, model: ProjectedOrbitModel, vector: FloatArray,
                                noise: float) -> None:
    """Refuse an orbit whose true distance from the centre stays within what the noise resolves
    (a circle exists for every exponent; seen at an angle it is an ellipse about its centre)."""
    position, _, ok = model.canonical(vector[None, :])
    if not ok[0]:
        return
    scale = plane_state(model, vector).orientation.scale
    radius = scale * np.hypot(position[0, :, 0], position[0, :, 1])
    excursion = 0.5 * float(np.ptp(radius))
    resolution = noise * math.sqrt(2.0 / radius.size)
    if excursion <= RESOLVED_EXCURSION * resolution:
        raise NotIdentifiable(
            f"{track.label}: the orbit's distance from the centre hardly changes (by {2 * excursion:.3g} "
            f"{track.length_unit} about r = {np.mean(radius):.4g} {track.length_unit}, against a noise "
            f"of {noise:.3g} {track.length_unit}); a circular orbit exists for every exponent and, "
            "seen at an angle, looks like any other, so the exponent cannot be read from this path.")


TURN_SAMPLES = 4096
"""Times at which the fitted orbit is followed to count its turns: the epochs alone may be
years apart, far more than the half turn an unwrapped angle can tell."""


def _turns(model: ProjectedOrbitModel, vector: FloatArray) -> float:
    """Turns the fitted orbit sweeps about the centre between the first and last epochs, followed
    at TURN_SAMPLES even times (and the epochs) however sparse the epochs are."""
    times = model.position_times
    dense = np.union1d(np.linspace(times[0], times[-1], TURN_SAMPLES), times)
    followed = replace(model, position_times=dense, velocity_times=np.empty(0))
    position, _, ok = followed.canonical(vector[None, :])
    if not ok[0]:
        return math.nan
    angle = np.unwrap(np.arctan2(position[0, :, 1], position[0, :, 0]))
    return abs(float(angle[-1] - angle[0])) / (2.0 * math.pi)


def _checks(solution: _Solution, residual: FloatArray, model: ProjectedOrbitModel, known: bool, loss: Loss,
            noise: float, turns: float, length_unit: str, branch_chi2: tuple[float, float],
            outward: FloatArray) -> dict[str, Diagnostic]:
    """Convergence, chi-square (known errors), the residuals' runs, correlation and outliers
    (of their part along ``outward``, the unit vectors from the centre to the fitted positions),
    the node's ambiguity, the noise and the coverage."""
    diagnostics = {"convergence": Diagnostic(
        solution.success, f"the least-squares fit {'settled' if solution.success else 'had not settled'} "
                          f"after {solution.evaluations} evaluations of the projected orbit.")}
    dof = max(residual.size - len(solution.varying), 1)
    if known or model.has_velocities:
        diagnostics["chi-square"] = chi_square_diagnostic(float(residual @ residual) / dof, dof)
    count = model.position_times.size
    whitened = residual[:2 * count].reshape(count, 2)
    radial = np.sum(whitened * outward, axis=1)                       # in units of sigma
    diagnostics.update(_residual_checks(radial, np.ones(count), loss,
                                        solution.correlation_time))
    if model.has_velocities:
        gap = branch_chi2[1] - branch_chi2[0]
        diagnostics["node"] = Diagnostic(
            True if gap > 9.0 else None,
            f"the radial velocities prefer this node to the one 180 deg on by a chi-square of {gap:.3g}"
            + ("." if gap > 9.0 else ": the ambiguity is not resolved."))
    else:
        diagnostics["node"] = Diagnostic(None, "without radial velocities the node 180 deg on fits as well "
                                               "(reported in [0, 180) deg).")
    diagnostics["noise"] = Diagnostic(None, (f"position errors as given (typical {noise:.3g} {length_unit})"
                                             if known else
                                             f"fitted position noise {noise:.3g} {length_unit}"))
    diagnostics["coverage"] = Diagnostic(None, f"the epochs cover {turns:.2f} turns of the orbit.")
    return diagnostics


def _result(data: Astrometry, problem: _Problem, solution: _Solution, branch: float,
            branch_chi2: tuple[float, float], exponent: float | None, known: bool, loss: Loss,
            ) -> ProjectedFit:
    track, model = data.track, problem.model
    if solution.covariance is None or not np.all(np.isfinite(solution.covariance)):
        raise NotIdentifiable(
            f"{track.label}: the projected orbit is not determined by these positions (its covariance "
            f"is singular after {solution.evaluations} evaluations): the orientation trades off "
            "against the law, as for a harmonic (n = 1) orbit, which looks harmonic from every angle, "
            "or a circular one. Fit it as a planar orbit, or observe more of it.")
    vector = np.array([solution.values[name] for name in model.names])
    columns = [model.index(name) for name in solution.varying]
    steps = _steps(model, vector, problem.size, problem.speed)
    state = plane_state(model, vector, branch=branch)
    positions, _, _ = model.canonical(vector[None, :])
    true_radius = state.orientation.scale * np.hypot(positions[0, :, 0], positions[0, :, 1])
    radius = float(np.exp(np.mean(np.log(true_radius))))
    kepler = exponent is not None and exponent == -2.0

    def derived(trial: FloatArray) -> dict[str, float]:
        return _derived(model, trial, branch, radius, kepler)

    periods = {**ANGLES, "node": 360.0 if model.has_velocities else 180.0}
    elements = derived(vector)
    errors = _propagate(derived, vector, columns, steps, solution.covariance, periods)
    face_on = _face_on_limit(model, vector, columns, steps, solution.covariance)
    _refuse_unidentified(track, solution, model, elements, errors, face_on=math.isfinite(face_on))
    if math.isfinite(face_on):
        for name in ("inclination", "node", "periastron_argument"):
            if name in elements:
                elements[name], errors[name] = math.nan, math.nan
    residual = problem.residual(vector)
    typical = data.typical_error()
    noise = float(np.median(typical)) if typical is not None else _noise_level(problem)
    if exponent is None:
        _require_resolved_excursion(track, model, vector, noise)
    prediction = model.predict(vector[None, :])
    turns = _turns(model, vector)
    offset = prediction.positions[0] - model.centres(vector)[0]
    outward = offset / np.maximum(np.hypot(offset[:, 0], offset[:, 1]), 1e-300)[:, None]
    diagnostics = _checks(solution, residual, model, known, loss, noise, turns, track.length_unit,
                          branch_chi2, outward)
    direct = state.orientation.cos_inclination >= 0
    if math.isfinite(face_on):
        diagnostics["orientation"] = Diagnostic(None, (
            f"seen nearly face-on: the orbit's plane is tilted less than {face_on:.3g} deg from the sky "
            "(95%), too little to fix the inclination or the node (both left out); the law is not "
            "affected."))
    n, n_error = solution.value("exponent")
    centre = model.centres(vector)[0]
    centre_error = ((solution.stderrs["centre_x"], solution.stderrs["centre_y"]) if model.centre is None
                    else (0.0, 0.0))
    parallax = solution.value("parallax") if model.fit_parallax else (math.nan, math.nan)
    dof = max(residual.size - len(solution.varying), 1)
    chi2 = float(residual @ residual)
    return ProjectedFit(
        exponent=n, exponent_stderr=n_error, strength=elements["strength"],
        strength_stderr=errors["strength"],
        strength_per_h2=elements["strength_per_h2"], strength_per_h2_stderr=errors["strength_per_h2"],
        centre=(float(centre[0]), float(centre[1])), centre_stderr=centre_error, method="projected",
        n_points=track.n_points, chi2=chi2, reduced_chi2=chi2 / dof, parameter_names=solution.varying,
        covariance=solution.covariance, residuals=residual, length_unit=track.length_unit,
        time_unit=track.time_unit, reference_radius=radius, force_at_reference=elements["force_at_reference"],
        force_at_reference_stderr=errors["force_at_reference"], diagnostics=diagnostics,
        track_name=track.name, model=model, values=solution.values, stderrs=solution.stderrs,
        inclination=elements["inclination"], inclination_stderr=errors["inclination"],
        node=elements["node"], node_stderr=errors["node"], node_ambiguous=not model.has_velocities,
        sense="direct" if direct else "retrograde", inclination_limit=face_on,
        elements=elements, elements_stderr=errors, sigma_known=known, noise=noise, loss=loss,
        evaluations=solution.evaluations, converged=solution.success, turns=turns,
        angular_momentum=elements["angular_momentum"], fitted_positions=prediction.positions[0],
        fitted_velocities=prediction.radial_velocities[0], branch_chi2=branch_chi2,
        parallax=parallax[0], parallax_stderr=parallax[1], correlation_time=solution.correlation_time,
        white_stderrs=solution.white_stderrs or {}, observed=problem.observed,
        whitening=problem.weights.positions, velocity_sigma=problem.weights.velocities, branch=branch)


def _noise_level(problem: _Problem) -> float:
    """The fitted position noise (L): the inverse of the scaled weights' typical entry."""
    return float(np.median(1.0 / np.abs(problem.weights.positions[:, 0, 0])))
