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
from typing import Literal

import lmfit
import numpy as np

from .._types import FloatArray
from ..dynamics.orbit_model import OrbitModel, observed
from ..errors import FitError, InputError, NotIdentifiable
from ..geometry.path import PathGeometry, describe_path
from ..track import Track
from ._checks import require_monotonic, require_orbit, runs_diagnostic
from .curvature import fit_curvature
from .result import Diagnostic, LawFit

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


def _last_params(result: lmfit.minimizer.MinimizerResult) -> dict[str, float]:
    """Where the optimiser stopped, for a FitError."""
    return {name: float(result.params[name].value) for name in result.params}


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
) -> LawFit:
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
    LawFit
        With the lmfit result in ``details["lmfit"]``, the fitted noise level, drag and
        rotation rate (with errors) in ``details``.

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
    if result.covar is None:
        _covariance_at_end(result, model, paths, sigma, sigma_known)
    if result.covar is None or not np.all(np.isfinite(result.covar)):
        raise FitError(
            f"{tracks[0].label}: the orbit fit found no well-determined solution (its covariance "
            f"is singular after {result.nfev} evaluations: {result.message}). The path is probably "
            "not an orbit in a central power law; check the centre, the units and the data.",
            last_params=_last_params(result))
    return _law_fit(model, result, tracks, paths, sigma, sigma_known, loss)


def _covariance_at_end(result: lmfit.minimizer.MinimizerResult, model: OrbitModel,
                       paths: Sequence[PathGeometry], sigma: FloatArray, sigma_known: bool) -> None:
    """Fill in the covariance lmfit leaves out when the optimiser stopped early (the fit is
    then marked as not converged), from the Jacobian at the last point; leave it None when
    even that is singular."""
    vector = np.array([result.params[name].value for name in model.names])
    varying = [model.index(name) for name in result.var_names]
    data = observed(model.tracks)
    steps = _steps(model, vector, *_step_scales(model, paths))
    jacobian = model.jacobian(vector, steps, varying) / np.repeat(sigma.ravel(), 2)[:, None]
    if not np.all(np.isfinite(jacobian)):
        return
    try:
        covariance = np.linalg.inv(jacobian.T @ jacobian)
    except np.linalg.LinAlgError:
        return
    if not sigma_known:
        covariance *= float(result.chisqr) / max(data.size - len(varying), 1)
    if np.all(np.isfinite(covariance)) and np.all(np.diag(covariance) > 0):
        result.covar = covariance
        for k, name in enumerate(result.var_names):
            result.params[name].stderr = float(np.sqrt(covariance[k, k]))


def _value(result: lmfit.minimizer.MinimizerResult, name: str) -> tuple[float, float]:
    """A fitted value and its standard error (0 when held fixed, nan when not estimable)."""
    parameter = result.params[name]
    if not parameter.vary:
        return float(parameter.value), 0.0
    stderr = parameter.stderr
    return float(parameter.value), float(stderr) if stderr is not None else math.nan


def _covariance(result: lmfit.minimizer.MinimizerResult, first: str, second: str) -> float:
    names = list(result.var_names)
    if result.covar is None or first not in names or second not in names:
        return 0.0
    return float(result.covar[names.index(first), names.index(second)])


def _radial_residuals(model: OrbitModel, vector: FloatArray, data: FloatArray) -> FloatArray:
    """Residuals along the radius of the fitted orbit, track after track, in time order."""
    predictions, _ = model.predict(vector[None, :])
    pieces = []
    start = 0
    for j, prediction in enumerate(predictions):
        cx, cy, _ = model._track_columns(j)
        offset = prediction[0] - np.array([vector[cx], vector[cy]])
        unit = offset / np.hypot(offset[:, 0], offset[:, 1])[:, None]
        observed_part = data[start:start + prediction.shape[1]]
        pieces.append(np.sum((observed_part - prediction[0]) * unit, axis=1))
        start += prediction.shape[1]
    return np.concatenate(pieces)


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


def _law_fit(
    model: OrbitModel, result: lmfit.minimizer.MinimizerResult, tracks: tuple[Track, ...],
    paths: Sequence[PathGeometry], sigma: FloatArray, sigma_known: bool, loss: Loss,
) -> LawFit:
    vector = np.array([result.params[name].value for name in model.names])
    n, n_se = _value(result, "exponent")
    log_force, log_force_se = _value(result, "log_force")
    log_radius = math.log(model.reference_radius)
    covariance_n_f = _covariance(result, "exponent", "log_force")
    log_k_se = math.sqrt(max(log_force_se**2 + log_radius**2 * n_se**2
                             - 2 * log_radius * covariance_n_f, 0.0))
    strength = float(model.strength(vector))
    cx, cx_se = _value(result, "centre_x" if model.shared_centre else "centre_x_0")
    cy, cy_se = _value(result, "centre_y" if model.shared_centre else "centre_y_0")
    first = model._track_columns(0)[2]
    x0, y0, vx0, vy0 = vector[first:first + 4]
    h = float(x0 * vy0 - y0 * vx0)
    data = observed(tracks)
    radial = _radial_residuals(model, vector, data)
    dof = max(data.size - result.nvarys, 1)
    reduced = float(result.chisqr) / dof
    diagnostics = {
        "convergence": Diagnostic(bool(result.success),
                                  f"{result.message} ({result.nfev} evaluations)"
                                  + ("" if result.success else "; the optimiser stopped before "
                                     "converging: the values and errors are those where it stopped")),
    }
    if sigma_known:
        spread = math.sqrt(2.0 / dof)
        text = f"reduced chi-square {reduced:.3g} (expected 1 ± {spread:.2g})"
        diagnostics["chi-square"] = Diagnostic(
            not (reduced > 1.0 + 5.0 * spread),
            text + (": the model misses the points by more than their sigma." if reduced > 1 + 5 * spread
                    else "."))
    noise = float(np.median(sigma)) * (math.sqrt(reduced) if not sigma_known else 1.0)
    diagnostics.update(_residual_checks(radial, sigma.ravel(), loss))
    diagnostics["noise"] = Diagnostic(None, (f"sigma as given (median {noise:.3g} {tracks[0].length_unit})"
                                             if sigma_known else
                                             f"fitted noise level {noise:.3g} {tracks[0].length_unit}"))
    turns = sum(path.revolutions for path in paths)
    diagnostics["coverage"] = Diagnostic(None, f"the data sweep {turns:.2f} turns about the centre.")
    details = {"lmfit": result, "model": model, "sigma": sigma.ravel(),
               "evaluations": int(result.nfev), "noise": noise, "loss": loss,
               "turns": turns,
               "sigma_known": sigma_known,
               "epochs": list(model.epochs), "n_tracks": len(tracks), "angular_momentum": h,
               "states": {name: float(result.params[name].value) for name in model.names
                          if name.startswith(("x0", "y0", "vx0", "vy0"))}}
    for name in ("drag", "rotation_rate"):
        if name in result.params:
            details[name], details[f"{name}_stderr"] = _value(result, name)
    with np.errstate(all="ignore"):
        derived = (strength, strength * log_k_se, float(np.float64(strength) / h**2),
                   float(np.exp(log_force)))
    if not all(math.isfinite(value) for value in derived):
        raise FitError(
            f"{tracks[0].label}: the orbit fit ran away (n = {n:.4g}, the strength overflows); "
            "the samples are probably too sparse for the orbit (fewer than a few per turn) or the "
            "path is not an orbit in a central power law. Check the times, the units and the data.",
            last_params=_last_params(result))
    names = tuple(result.var_names)
    covariance = result.covar if result.covar is not None else np.full((len(names),) * 2, math.nan)
    return LawFit(
        exponent=n, exponent_stderr=n_se, strength=strength, strength_stderr=strength * log_k_se,
        strength_per_h2=strength / h**2, strength_per_h2_stderr=strength * log_k_se / h**2,
        centre=(cx, cy), centre_stderr=(cx_se, cy_se), method="orbit", n_points=data.shape[0],
        chi2=float(result.chisqr), reduced_chi2=reduced, parameter_names=names,
        covariance=np.asarray(covariance), residuals=np.asarray(result.residual),
        length_unit=tracks[0].length_unit, time_unit=tracks[0].time_unit,
        reference_radius=model.reference_radius, force_at_reference=math.exp(log_force),
        force_at_reference_stderr=math.exp(log_force) * log_force_se, diagnostics=diagnostics,
        details=details, track_name=" + ".join(track.name for track in tracks),
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
