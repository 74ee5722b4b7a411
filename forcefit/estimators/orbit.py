"""The orbit estimator: integrate the equation of motion and fit it to every sample.

The reference estimator. The state at an epoch in the middle of the data, the force
law (n and the force at a reference radius), the centre, and on request a drag
coefficient and the rotation rate of the observer's frame are fitted by least
squares (lmfit, with a robust loss on request) to all samples of one track, or of
several tracks that share n and k. Each evaluation integrates the orbit with the
compiled batch propagator; the Jacobian is one batch of central differences.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Literal

import lmfit
import numpy as np

from .._types import FloatArray
from ..dynamics.orbit_model import OrbitModel, observed
from ..errors import FitError, InputError, NotIdentifiable
from ..geometry.path import PathGeometry, describe_path, force_relation
from ..track import Track
from ._checks import require_monotonic, require_orbit, runs_diagnostic
from .curvature import fit_curvature
from .result import CurvaturePoints, Diagnostic, OrbitFit

Loss = Literal["linear", "soft_l1", "huber"]
OUTLIER_Z = 5.0
"""Residuals beyond this many robust standard deviations are reported as outliers."""


def _as_tracks(track_or_tracks: Track | Sequence[Track]) -> tuple[Track, ...]:
    tracks = (track_or_tracks,) if isinstance(track_or_tracks, Track) else tuple(track_or_tracks)
    if not tracks:
        raise InputError("no track to fit.")
    for track in tracks:
        if not track.has_times:
            raise NotIdentifiable(
                f"{track.label}: the orbit estimator needs timestamps; fit a shape-only "
                "path with the shape or curvature estimator."
            )
    return tracks


def _epoch(track: Track, epoch: Literal["middle"] | float) -> tuple[float, int]:
    t = np.asarray(track.t)
    if epoch == "middle":
        index = t.size // 2
        return float(t[index]), index
    index = int(np.argmin(np.abs(t - float(epoch))))
    return float(epoch), index


def _starting_law(
    paths: Sequence[PathGeometry], exponent: float | None, radius: float
) -> tuple[float, float]:
    """(n, ln F(r_ref)) to start from: the curvature fit of the first track, held n if given."""
    try:
        first = fit_curvature(paths[0].track, path=paths[0])
        n, force = first.exponent, first.strength * radius**first.exponent
    except (NotIdentifiable, np.linalg.LinAlgError):
        acceleration = np.hypot(*paths[0].acceleration.T)
        n, force = 1.0, float(np.median(acceleration))
    if exponent is not None:
        n = float(exponent)       # ln F(r_ref) stays: it is what the data fix, whatever n
    return n, math.log(force)


def _parameters(
    model: OrbitModel, paths: Sequence[PathGeometry], indices: Sequence[int], start: tuple[float, float],
    exponent: float | None, centre: tuple[float, float] | None, rate: float,
) -> lmfit.Parameters:
    params = lmfit.Parameters()
    params.add("exponent", value=start[0], vary=exponent is None)
    params.add("log_force", value=start[1])
    if model.drag is not None:
        drift = []
        for path in paths:
            h = path.angular_momentum
            drift.append(-np.polyfit(path.parameter, np.log(np.abs(h)), 1)[0])
        speed = float(np.median(np.hypot(*paths[0].velocity.T)))
        guess = max(float(np.mean(drift)), 0.0)
        params.add("drag", value=guess if model.drag == "linear" else guess / speed)
    if model.fit_rotation:
        params.add("rotation_rate", value=rate)
    centres = [path.centre for path in paths]
    if model.shared_centre:
        shared = centre if centre is not None else tuple(np.mean(centres, axis=0))
        params.add("centre_x", value=shared[0], vary=centre is None)
        params.add("centre_y", value=shared[1], vary=centre is None)
    for j, (path, index) in enumerate(zip(paths, indices)):
        suffix = f"_{j}" if len(paths) > 1 else ""
        own = centre if centre is not None else centres[j]
        if not model.shared_centre:
            params.add(f"centre_x{suffix}", value=own[0], vary=centre is None)
            params.add(f"centre_y{suffix}", value=own[1], vary=centre is None)
        base = (params["centre_x"].value, params["centre_y"].value) if model.shared_centre else own
        x, y = path.position[index] - np.asarray(base)
        vx, vy = path.velocity[index]
        params.add(f"x0{suffix}", value=x)
        params.add(f"y0{suffix}", value=y)
        params.add(f"vx0{suffix}", value=vx - rate * y)        # inertial velocity at the epoch
        params.add(f"vy0{suffix}", value=vy + rate * x)
    return params


def _step_scales(model: OrbitModel, paths: Sequence[PathGeometry]) -> tuple[float, float, float]:
    """The data's size (L), median speed (L/T) and longest duration (T): what `_steps` scales by."""
    size = float(np.ptp(observed(model.tracks), axis=0).max())
    speed = float(np.median(np.concatenate([np.hypot(*p.velocity.T) for p in paths])))
    duration = float(max(track.duration for track in model.tracks))
    return size, speed, duration


@dataclass(frozen=True)
class _Solution:
    """Where the optimiser ended, copied out of lmfit's result so that no result holds (or
    changes) a library object: every parameter's value and standard error (0 when held, nan
    when not estimable), the varying ones in covariance order, and the optimiser's record."""

    values: dict[str, float]
    stderrs: dict[str, float]
    varying: tuple[str, ...]
    covariance: FloatArray | None
    chi2: float
    residual: FloatArray
    evaluations: int
    success: bool
    message: str

    @classmethod
    def of(cls, result: lmfit.minimizer.MinimizerResult) -> _Solution:
        stderrs = {}
        for name, parameter in result.params.items():
            if not parameter.vary:
                stderrs[name] = 0.0
            else:
                stderrs[name] = float(parameter.stderr) if parameter.stderr is not None else math.nan
        covariance = None if result.covar is None else np.array(result.covar, dtype=float)
        return cls(values={name: float(result.params[name].value) for name in result.params},
                   stderrs=stderrs, varying=tuple(result.var_names), covariance=covariance,
                   chi2=float(result.chisqr), residual=np.array(result.residual, dtype=float),
                   evaluations=int(result.nfev), success=bool(result.success), message=str(result.message))

    def value(self, name: str) -> tuple[float, float]:
        """A fitted value and its standard error (0 when held fixed, nan when not estimable)."""
        return self.values[name], self.stderrs[name]

    def covariance_of(self, first: str, second: str) -> float:
        """The covariance of two varying parameters; 0 when either is held or none is known."""
        names = list(self.varying)
        if self.covariance is None or first not in names or second not in names:
            return 0.0
        return float(self.covariance[names.index(first), names.index(second)])


def _steps(model: OrbitModel, vector: FloatArray, size: float, speed: float, duration: float) -> FloatArray:
    """Central-difference steps for each parameter, in its own unit."""
    scale = {"exponent": 1.0, "log_force": 1.0, "drag": 1.0 / duration, "rotation_rate": 1.0 / duration}
    steps = np.empty(vector.size)
    for i, name in enumerate(model.names):
        if name in scale:
            typical = scale[name]
        elif name.startswith(("vx0", "vy0")):
            typical = speed
        else:
            typical = size
        steps[i] = 1e-6 * max(abs(vector[i]), typical)
    return steps


def fit_orbit(
    track_or_tracks: Track | Sequence[Track],
    *,
    exponent: float | None = None,
    drag: Literal["linear", "quadratic"] | None = None,
    loss: Loss = "linear",
    epoch: Literal["middle"] | float = "middle",
    centre: tuple[float, float] | None = None,
    shared_centre: bool = True,
    rotation_rate: float | Literal["fit"] | None = None,
    max_evaluations: int = 200,
) -> OrbitFit:
    """Fit the integrated orbit of F = -k r**n r_hat to every sample of timestamped tracks.

    Parameters
    ----------
    track_or_tracks : Track or sequence of Track
        Timestamped positions (L, T). Several tracks are fitted jointly: they share n
        and k (and the centre unless ``shared_centre`` is False), each with its own state.
    exponent : float, optional
        Hold n fixed at this value (for comparing with a nominal law).
    drag : {"linear", "quadratic"}, optional
        Fit a drag a = -c1 v (c1 in 1/T) or a = -c2 |v| v (c2 in 1/L) as well.
    loss : {"linear", "soft_l1", "huber"}
        Least squares, or a robust loss that limits what a tracking glitch can pull.
    epoch : "middle" or float
        Where the fitted state is defined: the middle sample (default) or a time (T).
    centre : (float, float), optional
        A known force centre (L), held fixed.
    shared_centre : bool
        With several tracks: one centre for all (default) or one each.
    rotation_rate : float or "fit", optional
        Rotation rate Omega (rad/T, counter-clockwise) of the observer's frame, given or
        fitted; e.g. Omega_E sin(latitude) for a camera fixed in a laboratory.
    max_evaluations : int
        Most model evaluations the optimiser may use.

    Returns
    -------
    OrbitFit
        With the model, every parameter's value and error, the noise assumed, and the
        fitted drag and rotation rate (nan when not fitted).

    Raises
    ------
    NotIdentifiable
        Without timestamps; for a circle about the centre or a straight path.
    FitError
        When the optimiser fails.

    Examples
    --------
    >>> from forcefit.dynamics.simulate import simulate_orbit
    >>> track = simulate_orbit(exponent=-1.5, noise=1e-3, rng=1)
    >>> fit = fit_orbit(track)
    >>> abs(fit.exponent + 1.5) < 4 * fit.exponent_stderr
    True
    """
    tracks = _as_tracks(track_or_tracks)
    paths = [describe_path(track, centre=centre) for track in tracks]
    for path in paths:
        require_orbit(path)
        require_monotonic(path)
    epochs, indices = zip(*(_epoch(track, epoch) for track in tracks))
    radius = float(np.exp(np.mean(np.concatenate([np.log(path.radius) for path in paths]))))
    rate = 0.0 if rotation_rate is None or rotation_rate == "fit" else float(rotation_rate)
    model = OrbitModel(tracks=tracks, epochs=tuple(epochs), reference_radius=radius, drag=drag,
                       fit_rotation=rotation_rate == "fit", rotation_rate=rate,
                       shared_centre=shared_centre or len(tracks) == 1)
    params = _parameters(model, paths, indices, _starting_law(paths, exponent, radius),
                         exponent, centre, rate)
    result, sigma, sigma_known = optimise(model, params, paths, loss, max_evaluations)
    solution = _Solution.of(result)
    if solution.covariance is None:
        solution = _covariance_at_end(solution, model, paths, sigma, sigma_known)
    if solution.covariance is None or not np.all(np.isfinite(solution.covariance)):
        raise FitError(
            f"{tracks[0].label}: the orbit fit found no well-determined solution (its covariance "
            f"is singular after {solution.evaluations} evaluations: {solution.message}). The path is "
            "probably not an orbit in a central power law; check the centre, the units and the data.",
            last_params=solution.values)
    return _law_fit(model, solution, solution.covariance, tracks, paths, sigma, sigma_known, loss)


def _covariance_at_end(solution: _Solution, model: OrbitModel, paths: Sequence[PathGeometry],
                       sigma: FloatArray, sigma_known: bool) -> _Solution:
    """The solution with the covariance lmfit leaves out when the optimiser stopped early (the
    fit is then marked as not converged), from the Jacobian at the last point; unchanged when
    even that is singular."""
    vector = np.array([solution.values[name] for name in model.names])
    varying = [model.index(name) for name in solution.varying]
    data = observed(model.tracks)
    steps = _steps(model, vector, *_step_scales(model, paths))
    jacobian = model.jacobian(vector, steps, varying) / np.repeat(sigma.ravel(), 2)[:, None]
    if not np.all(np.isfinite(jacobian)):
        return solution
    try:
        covariance = np.linalg.inv(jacobian.T @ jacobian)
    except np.linalg.LinAlgError:
        return solution
    if not sigma_known:
        covariance *= solution.chi2 / max(data.size - len(varying), 1)
    if not (np.all(np.isfinite(covariance)) and np.all(np.diag(covariance) > 0)):
        return solution
    stderrs = {**solution.stderrs, **{name: float(np.sqrt(covariance[k, k]))
                                      for k, name in enumerate(solution.varying)}}
    return replace(solution, covariance=covariance, stderrs=stderrs)


def _radial_residuals(
    model: OrbitModel, vector: FloatArray, data: FloatArray
) -> tuple[FloatArray, FloatArray]:
    """Residuals along the radius of the fitted orbit, track after track, in time order, and
    the fitted positions themselves (nan where the orbit could not be integrated)."""
    predictions, ok = model.predict(vector[None, :])
    pieces = []
    start = 0
    for j, prediction in enumerate(predictions):
        cx, cy, _ = model.track_columns(j)
        offset = prediction[0] - np.array([vector[cx], vector[cy]])
        unit = offset / np.hypot(offset[:, 0], offset[:, 1])[:, None]
        observed_part = data[start:start + prediction.shape[1]]
        pieces.append(np.sum((observed_part - prediction[0]) * unit, axis=1))
        start += prediction.shape[1]
    positions = np.concatenate([prediction[0] for prediction in predictions])
    return np.concatenate(pieces), positions if ok[0] else np.full_like(positions, np.nan)


def _residual_checks(radial: FloatArray, sigma: FloatArray, loss: Loss) -> dict[str, Diagnostic]:
    checks = {"residuals": runs_diagnostic(radial)}
    normalised = radial / sigma
    centred = normalised - normalised.mean()
    lag_one = float(centred[1:] @ centred[:-1] / max(centred @ centred, 1e-300))
    text = f"lag-one autocorrelation of the radial residuals {lag_one:+.2f}"
    if lag_one > 0.5:
        checks["correlation"] = Diagnostic(False, text + ": neighbouring residuals agree, so the "
                                                         "model misses a systematic part of the motion.")
    else:
        checks["correlation"] = Diagnostic(True, text + ".")
    spread = 1.4826 * float(np.median(np.abs(normalised - np.median(normalised))))
    outliers = np.flatnonzero(np.abs(normalised - np.median(normalised)) > OUTLIER_Z * spread)
    if outliers.size:
        listed = ", ".join(map(str, outliers[:12])) + (" ..." if outliers.size > 12 else "")
        verdict = None if loss != "linear" else False
        advice = "down-weighted by the robust loss" if loss != "linear" else (
            "refit with a robust loss (--robust) or remove them")
        checks["outliers"] = Diagnostic(verdict, f"{outliers.size} samples lie beyond {OUTLIER_Z:g} "
                                                 f"robust standard deviations (sample {listed}); {advice}.")
    else:
        checks["outliers"] = Diagnostic(True, f"no sample beyond {OUTLIER_Z:g} robust standard deviations.")
    return checks


def _fit_checks(
    solution: _Solution, radial: FloatArray, sigma: FloatArray, sigma_known: bool, loss: Loss,
    reduced: float, dof: int, noise: float, turns: float, length_unit: str,
) -> dict[str, Diagnostic]:
    """The orbit fit's checks: convergence, chi-square (known sigma), residuals, noise, coverage."""
    diagnostics = {
        "convergence": Diagnostic(solution.success,
                                  f"{solution.message} ({solution.evaluations} evaluations)"
                                  + ("" if solution.success else "; the optimiser stopped before "
                                     "converging: the values and errors are those where it stopped")),
    }
    if sigma_known:
        spread = math.sqrt(2.0 / dof)
        text = f"reduced chi-square {reduced:.3g} (expected 1 ± {spread:.2g})"
        diagnostics["chi-square"] = Diagnostic(
            not (reduced > 1.0 + 5.0 * spread),
            text + (": the model misses the points by more than their sigma." if reduced > 1 + 5 * spread
                    else "."))
    diagnostics.update(_residual_checks(radial, sigma.ravel(), loss))
    diagnostics["noise"] = Diagnostic(None, (f"sigma as given (median {noise:.3g} {length_unit})"
                                             if sigma_known else
                                             f"fitted noise level {noise:.3g} {length_unit}"))
    diagnostics["coverage"] = Diagnostic(None, f"the data sweep {turns:.2f} turns about the centre.")
    return diagnostics


def _relation(path: PathGeometry, centre: tuple[float, float]) -> CurvaturePoints:
    """The force-curvature relation of the first track about the fitted centre, for the figure."""
    with np.errstate(divide="ignore", invalid="ignore"):
        log_radius, log_force, _ = force_relation(path, centre)
    return CurvaturePoints(log_radius=log_radius, log_force=log_force, per_h2=not path.track.has_times)


def _law_fit(
    model: OrbitModel, solution: _Solution, covariance: FloatArray, tracks: tuple[Track, ...],
    paths: Sequence[PathGeometry], sigma: FloatArray, sigma_known: bool, loss: Loss,
) -> OrbitFit:
    vector = np.array([solution.values[name] for name in model.names])
    n, n_se = solution.value("exponent")
    log_force, log_force_se = solution.value("log_force")
    log_radius = math.log(model.reference_radius)
    covariance_n_f = solution.covariance_of("exponent", "log_force")
    log_k_se = math.sqrt(max(log_force_se**2 + log_radius**2 * n_se**2
                             - 2 * log_radius * covariance_n_f, 0.0))
    strength = float(model.strength(vector))
    cx, cx_se = solution.value("centre_x" if model.shared_centre else "centre_x_0")
    cy, cy_se = solution.value("centre_y" if model.shared_centre else "centre_y_0")
    first = model.track_columns(0)[2]
    x0, y0, vx0, vy0 = vector[first:first + 4]
    h = float(x0 * vy0 - y0 * vx0)
    data = observed(tracks)
    radial, positions = _radial_residuals(model, vector, data)
    dof = max(data.size - len(solution.varying), 1)
    reduced = solution.chi2 / dof
    noise = float(np.median(sigma)) * (math.sqrt(reduced) if not sigma_known else 1.0)
    turns = sum(path.revolutions for path in paths)
    diagnostics = _fit_checks(solution, radial, sigma, sigma_known, loss, reduced, dof, noise, turns,
                              tracks[0].length_unit)
    with np.errstate(all="ignore"):
        derived = (strength, strength * log_k_se, float(np.float64(strength) / h**2),
                   float(np.exp(log_force)))
    if not all(math.isfinite(value) for value in derived):
        raise FitError(
            f"{tracks[0].label}: the orbit fit ran away (n = {n:.4g}, the strength overflows); "
            "the samples are probably too sparse for the orbit (fewer than a few per turn) or the "
            "path is not an orbit in a central power law. Check the times, the units and the data.",
            last_params=solution.values)
    drag, drag_se = solution.value("drag") if model.drag is not None else (math.nan, math.nan)
    rate, rate_se = solution.value("rotation_rate") if model.fit_rotation else (math.nan, math.nan)
    return OrbitFit(
        exponent=n, exponent_stderr=n_se, strength=strength, strength_stderr=strength * log_k_se,
        strength_per_h2=strength / h**2, strength_per_h2_stderr=strength * log_k_se / h**2,
        centre=(cx, cy), centre_stderr=(cx_se, cy_se), method="orbit", n_points=data.shape[0],
        chi2=solution.chi2, reduced_chi2=reduced, parameter_names=solution.varying,
        covariance=covariance, residuals=solution.residual,
        length_unit=tracks[0].length_unit, time_unit=tracks[0].time_unit,
        reference_radius=model.reference_radius, force_at_reference=math.exp(log_force),
        force_at_reference_stderr=math.exp(log_force) * log_force_se, diagnostics=diagnostics,
        relation=_relation(paths[0], (cx, cy)), track_name=" + ".join(track.name for track in tracks),
        model=model, values=solution.values, stderrs=solution.stderrs, sigma=sigma.ravel(),
        sigma_known=sigma_known, noise=noise, loss=loss, evaluations=solution.evaluations,
        converged=solution.success, turns=turns, angular_momentum=h, fitted_positions=positions,
        drag=drag, drag_stderr=drag_se, rotation_rate=rate, rotation_rate_stderr=rate_se,
    )


def optimise(
    model: OrbitModel, params: lmfit.Parameters, paths: Sequence[PathGeometry], loss: Loss,
    max_evaluations: int,
) -> tuple[lmfit.minimizer.MinimizerResult, FloatArray, bool]:
    """Least squares of the model from the starting ``params``: the lmfit result, each
    sample's sigma (given, or the smoothing's noise estimate) and whether sigma was given.

    Every residual evaluation is one orbit per track; every Jacobian one batch of central
    differences (two orbits per varying parameter) through the compiled propagator.
    """
    sigma_known = all(track.sigma is not None for track in model.tracks)
    sigma = np.concatenate([track.sigma if track.sigma is not None
                            else np.full(track.n_points, float(path.smoothing.noise[0]))
                            for track, path in zip(model.tracks, paths)])[:, None]
    data = observed(model.tracks)
    scales = _step_scales(model, paths)
    penalty = 1e4

    def vector_of(values: lmfit.Parameters) -> FloatArray:
        return np.array([values[name].value for name in model.names])

    def residual(values: lmfit.Parameters) -> FloatArray:
        predictions, ok = model.predict(vector_of(values)[None, :])
        if not ok[0]:
            return np.full(data.size, penalty)
        return ((data - np.concatenate([p[0] for p in predictions])) / sigma).ravel()

    def jacobian(values: lmfit.Parameters) -> FloatArray:
        vector = vector_of(values)
        varying = [i for i, name in enumerate(model.names) if values[name].vary]
        steps = _steps(model, vector, *scales)
        return np.nan_to_num(-model.jacobian(vector, steps, varying) / np.repeat(sigma.ravel(), 2)[:, None])

    minimizer = lmfit.Minimizer(residual, params, scale_covar=not sigma_known)
    try:
        result = minimizer.least_squares(jac=jacobian, loss=loss, f_scale=1.0, x_scale="jac",
                                         max_nfev=max_evaluations)
    except (ValueError, np.linalg.LinAlgError) as exc:
        raise FitError(f"the orbit fit failed: {exc}",
                       last_params={name: params[name].value for name in params}) from None
    return result, sigma, sigma_known
