"""The orbit estimator: integrate the equation of motion and fit it to every sample.

The reference estimator. The state at an epoch in the middle of the data, the force
law (n and the force at a reference radius), the centre, and on request a drag
coefficient and the rotation rate of the observer's frame are fitted by least
squares (scipy's trust region, with a robust loss on request) to all samples of one
track, or of several tracks that share n and k. Each evaluation integrates the orbit with the
compiled batch propagator; the Jacobian is one batch of central differences. The start
comes from what the samples resolve: the path's shape where it is well posed
(`forcefit.estimators._apsidal_start`), else a search of trial orbits
(`forcefit.estimators._start`); the errors allow for correlated residuals and, with a
robust loss, for the glitches it down-weights.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Literal

import numpy as np

from .._regression import autocorrelation_time
from .._types import FloatArray
from ..dynamics.forces import ExtraForces
from ..dynamics.orbit_model import OrbitModel, observed
from ..errors import FitError, GeometryError, InputError, NotIdentifiable
from ..geometry.noise import difference_noise
from ..track import Track
from ._apsidal_start import apsidal_start
from ._checks import (
    RESOLVED_EXCURSION,
    chi_square_diagnostic,
    polar_steps,
    require_bend,
    require_one_sense,
    runs_diagnostic,
)
from ._least_squares import Loss, Optimum, ParameterVector, run_least_squares
from ._start import StartProblem, orbit_start
from .result import Diagnostic, OrbitFit

MIN_SAMPLES = 12
"""Fewest samples per track the orbit fit accepts (it fits up to 7 numbers from each)."""

OUTLIER_Z = 5.0
"""Residuals beyond this many robust standard deviations are reported as outliers."""

QUICK_MISS = 1.25
"""The fit from the apsidal start (`forcefit.estimators._apsidal_start`) stands when the robust
spread of its residuals is within this factor of the noise the samples' differences show;
otherwise the trial-orbit search (`forcefit.estimators._start`) starts a second fit, and the
one with the smaller objective stands."""


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


def _parameters(
    model: OrbitModel, vector: FloatArray, exponent: float | None, centre: tuple[float, float] | None,
) -> ParameterVector:
    """The parameters at ``vector``, with the held exponent, a given centre and an unfitted
    rotation rate held."""
    return ParameterVector.of(model.names, vector, lambda name: (
        (name == "exponent" and exponent is not None)
        or (name.startswith("centre_") and centre is not None)
        or (name == "rotation_rate" and not model.fit_rotation)))


def _step_scales(model: OrbitModel) -> tuple[float, float, float]:
    """The data's size (L), median chord speed (L/T) and longest duration (T): what `_steps`
    scales by."""
    data = observed(model.tracks)
    size = float(np.ptp(data, axis=0).max())
    speeds = np.concatenate([np.hypot(np.diff(track.x), np.diff(track.y)) / np.diff(np.asarray(track.t))
                             for track in model.tracks])
    duration = float(max(track.duration for track in model.tracks))
    return size, float(np.median(speeds)), duration


@dataclass(frozen=True)
class _Solution:
    """Where the optimiser ended: every parameter's value and standard error (0 when held, nan
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
    correlation_time: float = 1.0
    white_stderrs: dict[str, float] | None = None

    @classmethod
    def of(cls, optimum: Optimum) -> _Solution:
        """The optimiser's end point, errors not yet known (nan; 0 for the held parameters)."""
        parameters = optimum.parameters
        residual = np.array(optimum.residual, dtype=float)
        unknown = {name: 0.0 if fixed else math.nan for name, fixed in zip(parameters.names, parameters.held)}
        return cls(values=parameters.as_dict(), stderrs=unknown,
                   varying=parameters.varying, covariance=None, chi2=float(residual @ residual),
                   residual=residual, evaluations=optimum.evaluations, success=optimum.success,
                   message=optimum.message)

    def widened(self, covariance: FloatArray | None, tau: float) -> _Solution:
        """This solution with the white-noise ``covariance`` of the varying parameters, widened by
        the residuals' correlation time ``tau``; errors nan when there is none."""
        white = {name: 0.0 for name in self.values}
        stderrs = {name: 0.0 for name in self.values}
        for k, name in enumerate(self.varying):
            white[name] = float(np.sqrt(covariance[k, k])) if covariance is not None else math.nan
            stderrs[name] = white[name] * math.sqrt(tau)
        return replace(self, covariance=None if covariance is None else covariance * tau,
                       stderrs=stderrs, white_stderrs=white, correlation_time=tau)

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
    scale = {"exponent": 1.0, "log_force": 1.0, "drag": 1.0 / duration, "rotation_rate": 1.0 / duration,
             "yukawa_strength": 1.0}
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


def _reference_radius(tracks: Sequence[Track], centres: Sequence[tuple[float, float]]) -> float:
    """Geometric mean distance (L) of the samples from their centres."""
    logs = [np.log(np.hypot(track.x - c[0], track.y - c[1])) for track, c in zip(tracks, centres)]
    with np.errstate(divide="ignore"):
        radius = float(np.exp(np.mean(np.concatenate(logs))))
    return radius if math.isfinite(radius) and radius > 0 else 1.0


def _centres(model: OrbitModel, vector: FloatArray) -> list[tuple[float, float]]:
    """Each track's centre in a parameter vector."""
    return [(float(vector[model.track_columns(j)[0]]), float(vector[model.track_columns(j)[1]]))
            for j in range(len(model.tracks))]


def _sigma(track: Track, noise: float) -> FloatArray:
    """Each sample's sigma (L): as given, or the noise level the differences show."""
    if track.sigma is not None:
        return np.asarray(track.sigma, dtype=float)
    size = float(max(np.ptp(track.x), np.ptp(track.y)))
    return np.full(track.n_points, max(noise, 1e-12 * size, 1e-300))


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
    extra: ExtraForces | None = None,
    max_evaluations: int = 200,
    start: OrbitFit | None = None,
) -> OrbitFit:
    """Fit the integrated orbit of F = -k r**n r_hat to every sample of timestamped tracks.

    The start comes from what the samples resolve. With one track (no drag, rotation or
    extra force) that covers a radial period and a half densely: the apsidal angle, the
    apsides and the areal rate (`forcefit.estimators._apsidal_start`). Elsewhere, or when
    the fit from there misses the samples by more than QUICK_MISS times their noise: likely
    centres from the conic through the points and the aim of the accelerations, trial
    exponents fitted on about one turn around the epoch, then stretches doubled until
    they cover the data (`forcefit.estimators._start`); of two fits the one with the
    smaller objective stands. Without a sigma the noise is fitted; with a robust loss its
    scale and the errors come from the residuals' robust spread.

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
    extra : ExtraForces, optional
        Known forces added to the power law (`forcefit.dynamics.forces`): the first
        post-Newtonian term of the central mass, a Yukawa term of given range (its strength
        alpha is fitted), a perturbing body of known positions and GM. The fitted exponent
        then measures the deviation beyond them.
    max_evaluations : int
        Most model evaluations the final optimiser may use.
    start : OrbitFit, optional
        An earlier fit of a track much like this one (a refit after a small change): the
        optimiser starts from its values, matched by name (each state taken as it is at this
        fit's epoch; a held exponent or a given centre overrides), and no other start is tried
        unless the fit from it fails. Its parameters not in this model are left out; this
        model's not in it start as the start search begins them (no drag, the given rotation
        rate and Yukawa strength).

    Returns
    -------
    OrbitFit
        With the model, every parameter's value and error, the noise assumed, the
        residuals' correlation time, and the fitted drag and rotation rate (nan when not
        fitted).

    Raises
    ------
    NotIdentifiable
        Without timestamps; for a straight path; when the fitted orbit's radial excursion
        is not resolved above the noise (a circle about the centre, or nearly).
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
    for track in tracks:
        if track.n_points < MIN_SAMPLES:
            raise GeometryError(
                f"{track.label}: {track.n_points} samples are too few for the orbit fit; it needs at "
                f"least {MIN_SAMPLES} to fix the law, the centre and the state with room to spare. "
                "Record a longer stretch or at a higher frame rate.")
    noise = [difference_noise(track) for track in tracks]
    for track, level in zip(tracks, noise):
        require_bend(track, level)
    epochs, indices = zip(*(_epoch(track, epoch) for track in tracks))
    rate = 0.0 if rotation_rate is None or rotation_rate == "fit" else float(rotation_rate)
    sigma_known = all(track.sigma is not None for track in tracks)
    sigma = np.concatenate([_sigma(track, level) for track, level in zip(tracks, noise)])
    if centre is not None:
        for track, level in zip(tracks, noise):
            require_one_sense(track, centre, _sigma(track, level))
    first_guess = [centre if centre is not None else (float(np.mean(t.x)), float(np.mean(t.y)))
                   for t in tracks]
    provisional = _reference_radius(tracks, first_guess)
    extra = _checked_extra(extra, tracks, rotation_rate)
    model = OrbitModel(tracks=tracks, epochs=tuple(epochs), reference_radius=provisional, drag=drag,
                       fit_rotation=rotation_rate == "fit", rotation_rate=rate,
                       shared_centre=shared_centre or len(tracks) == 1, extra=extra)
    problem = StartProblem(model=model, exponent=exponent, centre=centre, sigma=sigma)

    def fit_from(vector: FloatArray) -> tuple[OrbitModel, _Solution, FloatArray, float]:
        radius = _reference_radius(tracks, _centres(model, vector))
        vector = vector.copy()
        vector[1] += vector[0] * (math.log(radius) - math.log(provisional))   # same force, new radius
        moved = replace(model, reference_radius=radius)
        return (moved, *optimise(moved, _parameters(moved, vector, exponent, centre), sigma,
                                 sigma_known, loss, max_evaluations))

    given = None if start is None else _vector_from(start, model, provisional, exponent, centre)
    quick = given if given is not None else apsidal_start(problem, indices, noise)
    outcome, misses = None, np.zeros(0)
    if quick is not None:
        try:
            outcome = fit_from(quick)
            misses = _misses(*outcome[:2], sigma, loss, sigma_known)
        except FitError:
            outcome = None
    if outcome is None or (given is None and _robust_spread(misses * np.repeat(sigma, 2))
                           > QUICK_MISS * float(np.median(noise))):
        searched = fit_from(orbit_start(problem, indices, noise))
        if outcome is None or (_objective(_misses(*searched[:2], sigma, loss, sigma_known), loss)
                               <= _objective(misses, loss)):
            outcome = searched
    model, solution, sigma, noise_level = outcome
    fitted = np.array([solution.values[name] for name in model.names])
    if exponent is None:
        _require_resolved_excursion(model, fitted, noise_level)
    inlier = _inliers(model, fitted, sigma)
    bounds = np.cumsum([0] + [track.n_points for track in tracks])
    for j, (track, about) in enumerate(zip(tracks, _centres(model, fitted))):
        own = slice(bounds[j], bounds[j + 1])
        require_one_sense(track, about, sigma[own], np.flatnonzero(inlier[own]))
    if solution.covariance is None or not np.all(np.isfinite(solution.covariance)):
        raise FitError(
            f"{tracks[0].label}: the orbit fit found no well-determined solution (its covariance "
            f"is singular after {solution.evaluations} evaluations). The path is probably "
            "not an orbit in a central power law; check the centre, the units and the data.",
            last_params=solution.values)
    return _law_fit(model, solution, solution.covariance, tracks, sigma, sigma_known, loss, noise_level)


def _vector_from(
    start: OrbitFit, model: OrbitModel, radius: float, exponent: float | None,
    centre: tuple[float, float] | None,
) -> FloatArray:
    """``model``'s vector (its log force at reference radius ``radius``) from an earlier fit's
    values, matched by name; a held exponent and a given centre replace theirs."""
    values = dict(start.values)
    values["log_force"] += values["exponent"] * (math.log(radius) - math.log(start.model.reference_radius))
    vector = np.array([values.get(name, 0.0) for name in model.names])
    if "rotation_rate" in model.names and "rotation_rate" not in values:
        vector[model.index("rotation_rate")] = model.rotation_rate
    if "yukawa_strength" in model.names and "yukawa_strength" not in values and model.extra is not None \
            and model.extra.yukawa is not None:
        vector[model.index("yukawa_strength")] = model.extra.yukawa.alpha
    if exponent is not None:
        vector[0] = exponent
    if centre is not None:
        for j in range(len(model.tracks)):
            cx, cy, _ = model.track_columns(j)
            vector[cx], vector[cy] = centre
    return vector


def _per_h2_relative_error(solution: _Solution, model: OrbitModel, log_radius: float) -> float:
    """The relative standard error of k/h^2, by the delta method over ln k = ln F(r_ref) - n ln r_ref
    and h = x0 vy0 - y0 vx0 of the first track, with their covariances (h is fitted too; on
    n = 1 orbits ignoring it understated the error 5-fold, on n = -2 overstated it 2-fold)."""
    first = model.track_columns(0)[2]
    x0_name, y0_name, vx0_name, vy0_name = model.names[first:first + 4]
    x0, y0, vx0, vy0 = (solution.values[name] for name in (x0_name, y0_name, vx0_name, vy0_name))
    h = x0 * vy0 - y0 * vx0
    gradient = {"log_force": 1.0, "exponent": -log_radius, x0_name: -2.0 * vy0 / h,
                vy0_name: -2.0 * x0 / h, y0_name: 2.0 * vx0 / h, vx0_name: 2.0 * y0 / h}
    variance = sum(ga * gb * solution.covariance_of(a, b)
                   for a, ga in gradient.items() for b, gb in gradient.items())
    return math.sqrt(max(variance, 0.0))


def _misses(model: OrbitModel, solution: _Solution, sigma: FloatArray, loss: Loss,
            sigma_known: bool) -> FloatArray:
    """Residuals of a fit in units of ``sigma``, each sample's sigma the fit started with (a
    robust fit without a given sigma rescales its own)."""
    if loss == "linear" or sigma_known:
        return solution.residual
    vector = np.array([solution.values[name] for name in model.names])
    predictions, _ = model.predict(vector[None, :])
    return ((observed(model.tracks) - np.concatenate([p[0] for p in predictions]))
            / sigma[:, None]).ravel()


def _objective(residual: FloatArray, loss: Loss) -> float:
    """The sum the optimiser minimises, of residuals in units of sigma."""
    return float(np.sum(_loss_terms(residual, loss)[0]))


def _loss_terms(residual: FloatArray, loss: Loss) -> tuple[FloatArray, FloatArray, FloatArray]:
    """The loss rho, its half-derivative psi and psi's slope at each residual (units of sigma),
    scaled as scipy's least_squares takes them: rho = r² for least squares, 2 (sqrt(1 + r²) - 1)
    for soft_l1, r² within 1 and 2 |r| - 1 beyond for Huber's loss."""
    squares = residual * residual
    if loss == "soft_l1":
        return (2.0 * (np.sqrt(1.0 + squares) - 1.0), residual / np.sqrt(1.0 + squares),
                (1.0 + squares) ** -1.5)
    if loss == "huber":
        inside = np.abs(residual) <= 1.0
        return (np.where(inside, squares, 2.0 * np.abs(residual) - 1.0), np.clip(residual, -1.0, 1.0),
                inside.astype(float))
    return squares, residual, np.ones_like(residual)


def _checked_extra(extra: ExtraForces | None, tracks: Sequence[Track],
                   rotation_rate: float | Literal["fit"] | None) -> ExtraForces | None:
    """The extra forces, or None when there are none; refuses what cannot be combined."""
    if extra is None or extra.empty:
        return None
    perturber = extra.perturber
    if perturber is not None:
        if rotation_rate not in (None, 0.0):
            raise InputError("a perturbing body's positions are taken in a non-rotating frame; fit a "
                             "rotating frame or a perturber, not both.")
        for track in tracks:
            if not perturber.covers(np.asarray(track.t)):
                raise InputError(
                    f"{perturber.name}: its positions span t = {perturber.times[0]:.10g} to "
                    f"{perturber.times[-1]:.10g} {track.time_unit}, but {track.label} runs from "
                    f"{float(np.asarray(track.t)[0]):.10g} to {float(np.asarray(track.t)[-1]):.10g}. "
                    "Give the perturber's positions over the whole span of the data.")
    return extra


def _require_resolved_excursion(model: OrbitModel, vector: FloatArray, noise: float) -> None:
    """Refuse a fit whose orbit keeps its distance from the centre within the noise.

    The exponent shows only through how r varies (a circular orbit exists for every
    exponent); when the fitted orbit's radial excursion is not resolved above what the
    noise allows (its standard error ~ noise sqrt(2/N)), the exponent is not identified
    and its linearised error is meaningless.
    """
    predictions, ok = model.predict(vector[None, :])
    if not ok[0]:
        return
    for j, prediction in enumerate(predictions):
        cx, cy, _ = model.track_columns(j)
        offset = prediction[0] - np.array([vector[cx], vector[cy]])
        radius = np.hypot(offset[:, 0], offset[:, 1])
        excursion = 0.5 * float(np.ptp(radius))
        resolution = max(noise * math.sqrt(2.0 / radius.size), 1e-10 * float(np.mean(radius)))
        if excursion <= RESOLVED_EXCURSION * resolution:
            track = model.tracks[j]
            raise NotIdentifiable(
                f"{track.label}: the distance from the centre hardly changes (by "
                f"{2 * excursion:.3g} {track.length_unit} about r = {np.mean(radius):.6g} "
                f"{track.length_unit}, against a noise of {noise:.3g} {track.length_unit}); a "
                "circular orbit exists for every exponent, so the exponent cannot be read from "
                "this path. Launch the body off-circular so that r varies, or measure more "
                "precisely.")


def _inliers(model: OrbitModel, vector: FloatArray, sigma: FloatArray) -> np.ndarray:
    """Samples whose miss of the fitted orbit is within OUTLIER_Z robust spreads."""
    misses = np.hypot(*(_normalised_residuals(model, vector, observed(model.tracks), sigma)
                        .reshape(-1, 2).T))
    return misses < OUTLIER_Z * max(_robust_spread(misses) / 1.1774, 1e-300)   # Rayleigh median


def _radial_residuals(model: OrbitModel, vector: FloatArray, data: FloatArray) -> FloatArray:
    """Residuals along the radius of the fitted orbit, track after track, in time order."""
    predictions, _ = model.predict(vector[None, :])
    pieces = []
    start = 0
    for j, prediction in enumerate(predictions):
        cx, cy, _ = model.track_columns(j)
        offset = prediction[0] - np.array([vector[cx], vector[cy]])
        unit = offset / np.hypot(offset[:, 0], offset[:, 1])[:, None]
        observed_part = data[start:start + prediction.shape[1]]
        pieces.append(np.sum((observed_part - prediction[0]) * unit, axis=1))
        start += prediction.shape[1]
    return np.concatenate(pieces)


def _normalised_residuals(model: OrbitModel, vector: FloatArray, data: FloatArray,
                          sigma: FloatArray) -> FloatArray:
    """(data - model) / sigma, both coordinates of each sample in turn."""
    predictions, _ = model.predict(vector[None, :])
    return ((data - np.concatenate([p[0] for p in predictions])) / sigma[:, None]).ravel()


def _turns(model: OrbitModel, vector: FloatArray) -> float:
    """Turns the samples sweep about their fitted centres, all tracks together."""
    total = 0.0
    for j, track in enumerate(model.tracks):
        cx, cy, _ = model.track_columns(j)
        step, _ = polar_steps(track, (float(vector[cx]), float(vector[cy])))
        total += abs(float(np.sum(step))) / (2.0 * math.pi)
    return total


def _sample_names(tracks: tuple[Track, ...], indices: np.ndarray) -> str:
    """The samples at ``indices`` of the stacked tracks, named by their rows in the source file
    and their times (and the track, when several were fitted together)."""
    starts = np.cumsum([0] + [track.n_points for track in tracks])
    names = []
    for index in indices:
        j = int(np.searchsorted(starts, index, side="right")) - 1
        label = tracks[j].sample_label(int(index - starts[j]))
        names.append(f"{tracks[j].name} {label}" if len(tracks) > 1 else label)
    return ", ".join(names)


def _residual_checks(radial: FloatArray, sigma: FloatArray, loss: Loss,
                     correlation_time: float, tracks: tuple[Track, ...] = ()) -> dict[str, Diagnostic]:
    """Runs, correlation and outliers of the radial residuals; outliers named by the tracks' rows and
    times when the tracks are given, else by their sample number (from 1)."""
    checks = {"residuals": runs_diagnostic(radial)}
    normalised = radial / sigma
    centred = normalised - normalised.mean()
    lag_one = float(centred[1:] @ centred[:-1] / max(centred @ centred, 1e-300))
    text = f"lag-one autocorrelation of the radial residuals {lag_one:+.2f}"
    if correlation_time > 1.5:
        text += (f"; the residuals stay alike over {correlation_time:.3g} samples, so the errors "
                 f"are widened {math.sqrt(correlation_time):.3g} times")
    if lag_one > 0.5:
        checks["correlation"] = Diagnostic(False, text + ": neighbouring residuals agree, so the "
                                                         "model misses a systematic part of the motion"
                                                         " (or the noise is correlated).")
    else:
        checks["correlation"] = Diagnostic(True, text + ".")
    spread = 1.4826 * float(np.median(np.abs(normalised - np.median(normalised))))
    outliers = np.flatnonzero(np.abs(normalised - np.median(normalised)) > OUTLIER_Z * spread)
    if outliers.size:
        shown = outliers[:12]
        numbers = ("sample " if shown.size == 1 else "samples ") + ", ".join(str(int(i) + 1) for i in shown)
        named = _sample_names(tracks, shown) if tracks else numbers
        listed = named + (" ..." if outliers.size > 12 else "")
        verdict = None if loss != "linear" else False
        advice = "down-weighted by the robust loss" if loss != "linear" else (
            "refit with a robust loss (--robust) or remove them")
        count = "1 sample lies" if outliers.size == 1 else f"{outliers.size} samples lie"
        checks["outliers"] = Diagnostic(verdict, f"{count} beyond {OUTLIER_Z:g} robust standard "
                                                 f"deviations: {listed}; {advice}.")
    else:
        checks["outliers"] = Diagnostic(True, f"no sample beyond {OUTLIER_Z:g} robust standard deviations.")
    return checks


def _fit_checks(
    solution: _Solution, radial: FloatArray, sigma: FloatArray, sigma_known: bool, loss: Loss,
    reduced: float, dof: int, noise: float, turns: float, tracks: tuple[Track, ...],
) -> dict[str, Diagnostic]:
    """The orbit fit's checks: convergence, chi-square (known sigma), residuals, noise, coverage."""
    length_unit = tracks[0].length_unit
    if solution.success:
        converged = Diagnostic(True, f"the least-squares fit settled after {solution.evaluations} "
                                     "evaluations of the orbit.")
    else:
        converged = Diagnostic(False, f"the least-squares fit had not settled after "
                                      f"{solution.evaluations} evaluations of the orbit: the values and "
                                      "errors are those where it stopped.")
    diagnostics = {"convergence": converged}
    if sigma_known:
        diagnostics["chi-square"] = chi_square_diagnostic(reduced, dof)
    diagnostics.update(_residual_checks(radial, sigma, loss, solution.correlation_time, tracks))
    diagnostics["noise"] = Diagnostic(None, (f"sigma as given (median {noise:.3g} {length_unit})"
                                             if sigma_known else
                                             f"fitted noise level {noise:.3g} {length_unit}"))
    diagnostics["coverage"] = Diagnostic(None, f"the data sweep {turns:.2f} turns about the centre.")
    return diagnostics


def _law_fit(
    model: OrbitModel, solution: _Solution, covariance: FloatArray, tracks: tuple[Track, ...],
    sigma: FloatArray, sigma_known: bool, loss: Loss, noise: float,
) -> OrbitFit:
    """The typed result of a fit whose ``covariance`` (of the varying parameters) is finite."""
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
    predictions, ok = model.predict(vector[None, :])
    positions = np.concatenate([prediction[0] for prediction in predictions])
    if not ok[0]:
        positions = np.full_like(positions, np.nan)
    radial = _radial_residuals(model, vector, data)
    residuals = ((data - positions) / sigma[:, None]).ravel()
    chi2 = float(residuals @ residuals)
    dof = max(data.size - len(solution.varying), 1)
    reduced = chi2 / dof
    turns = _turns(model, vector)
    diagnostics = _fit_checks(solution, radial, sigma, sigma_known, loss, reduced, dof, noise, turns,
                              tracks)
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
    alpha, alpha_se = (solution.value("yukawa_strength") if "yukawa_strength" in model.names
                       else (math.nan, math.nan))
    return OrbitFit(
        exponent=n, exponent_stderr=n_se, strength=strength, strength_stderr=strength * log_k_se,
        strength_per_h2=strength / h**2,
        strength_per_h2_stderr=strength / h**2 * _per_h2_relative_error(solution, model, log_radius),
        centre=(cx, cy), centre_stderr=(cx_se, cy_se), method="orbit", n_points=data.shape[0],
        chi2=chi2, reduced_chi2=reduced, parameter_names=solution.varying,
        covariance=covariance, residuals=residuals,
        length_unit=tracks[0].length_unit, time_unit=tracks[0].time_unit,
        reference_radius=model.reference_radius, force_at_reference=math.exp(log_force),
        force_at_reference_stderr=math.exp(log_force) * log_force_se, diagnostics=diagnostics,
        track_name=" + ".join(track.name for track in tracks),
        model=model, values=solution.values, stderrs=solution.stderrs, sigma=sigma,
        sigma_known=sigma_known, noise=noise, loss=loss, evaluations=solution.evaluations,
        converged=solution.success, turns=turns, angular_momentum=h, fitted_positions=positions,
        drag=drag, drag_stderr=drag_se, rotation_rate=rate, rotation_rate_stderr=rate_se,
        yukawa_strength=alpha, yukawa_strength_stderr=alpha_se,
        correlation_time=solution.correlation_time, white_stderrs=solution.white_stderrs or {},
    )


def optimise(
    model: OrbitModel, params: ParameterVector, sigma: FloatArray, sigma_known: bool, loss: Loss,
    max_evaluations: int,
) -> tuple[_Solution, FloatArray, float]:
    """Least squares of the model from the starting ``params``.

    Every residual evaluation is one orbit per track; every Jacobian one batch of central
    differences (two orbits per varying parameter) through the compiled propagator.

    Returns
    -------
    solution : _Solution
        Where the optimiser ended, with the covariance of `_fit_covariance` widened by the
        residuals' correlation time (`residual_correlation_time`).
    sigma : ndarray, shape (n_samples,)
        Each sample's sigma (L): as given, or the fitted noise level when none was given
        (so that the reduced chi-square is 1 by construction).
    noise : float
        The noise level (L): the median sigma given, or the one the residuals show
        (their robust spread with a robust loss).
    """
    data = observed(model.tracks)
    scales = _step_scales(model)
    sigma = np.asarray(sigma, dtype=float).copy()
    result = _least_squares(model, params, data, sigma, scales, loss, max_evaluations)
    if loss != "linear" and not sigma_known:
        # A robust loss measures residuals in units of its scale: re-run in units of the
        # noise the residuals show (their robust spread), not of the first guess.
        spread = _robust_spread(np.asarray(result.residual))
        if spread > 0 and abs(math.log(spread)) > math.log(1.2):
            sigma *= spread
            result = _least_squares(model, result.parameters, data, sigma, scales, loss, max_evaluations)
    residual = np.asarray(result.residual)
    covariance = _fit_covariance(model, result, sigma, scales, loss, sigma_known)
    solution = _Solution.of(result).widened(covariance, residual_correlation_time(model, residual))
    if not sigma_known:
        dof = max(residual.size - len(solution.varying), 1)
        sigma *= (math.sqrt(float(residual @ residual) / dof) if loss == "linear"
                  else _robust_spread(residual))
    return solution, sigma, float(np.median(sigma))


def residual_correlation_time(model: OrbitModel, residual: FloatArray) -> float:
    """Integrated autocorrelation time (in samples) of the normalised residuals: the largest
    over the tracks and the two coordinates, 1 for independent residuals.

    Why this method: residuals of a real orbit are rarely independent (perturbations by
    other bodies, an unmodelled drag, a camera that wobbles), and least-squares errors that
    assume they are come out 10 to 40 times too small. Correlated residuals carry about
    1/tau as much information as independent ones, so the covariance is multiplied by tau,
    estimated with Geyer's initial-positive-sequence rule (C. J. Geyer 1992, Statistical
    Science 7, 473; the same estimator as for MCMC chains). A sandwich (Newey & West 1987,
    Econometrica 55, 703) and an AR(1) noise model fitted with the orbit (Cochrane & Orcutt
    1949, JASA 44, 32) were tried on planetary orbits from the JPL DE421 ephemeris: both left
    the exponent of one year of the Earth-Moon barycentre 4 to 10 corrected errors from -2,
    because the fit itself absorbs the part of a slow perturbation that looks like the law.
    With fewer than ~10 correlation times in the data no method can tell the two apart; the
    fit's correlation check says so. An estimate within 5/sqrt(N) of 1 (what independent
    residuals give by chance) counts as 1.
    """
    pieces = residual.reshape(-1, 2)
    bounds = np.cumsum([0] + [track.n_points for track in model.tracks])
    return correlation_time([pieces[low:high, column] for low, high in zip(bounds[:-1], bounds[1:])
                             for column in range(2)])


def correlation_time(series: Sequence[FloatArray]) -> float:
    """The largest integrated autocorrelation time (in samples) of residual series, each in time
    order; 1 when none departs from independence by more than 5/sqrt(N) (its own noise)."""
    tau = 1.0
    for values in series:
        estimate = autocorrelation_time(np.asarray(values, dtype=float))
        if estimate > 1.0 + 5.0 / math.sqrt(max(len(values), 1)):   # beyond its own noise
            tau = max(tau, estimate)
    return tau


def _robust_spread(residuals: FloatArray) -> float:
    """1.4826 times the median absolute residual: the standard deviation of Gaussian
    residuals, unmoved by a few gross ones."""
    return float(1.4826 * np.median(np.abs(residuals)))


def _least_squares(
    model: OrbitModel, params: ParameterVector, data: FloatArray, sigma: FloatArray,
    scales: tuple[float, float, float], loss: Loss, max_evaluations: int,
) -> Optimum:
    """Trust-region least squares of the samples in units of ``sigma`` from ``params``: every
    residual one orbit per track, every Jacobian one batch of central differences."""
    weights = 1.0 / np.repeat(sigma, 2)
    penalty = 1e4

    def residual(vector: FloatArray) -> FloatArray:
        predictions, ok = model.predict(vector[None, :])
        if not ok[0]:
            return np.full(data.size, penalty)
        return (data - np.concatenate([p[0] for p in predictions])).ravel() * weights

    def jacobian(vector: FloatArray, varying: list[int]) -> FloatArray:
        steps = _steps(model, vector, *scales)
        return np.nan_to_num(-model.jacobian(vector, steps, varying) * weights[:, None])

    return run_least_squares(residual, jacobian, params, loss, max_evaluations)


def _fit_covariance(
    model: OrbitModel, result: Optimum, sigma: FloatArray,
    scales: tuple[float, float, float], loss: Loss, sigma_known: bool,
) -> FloatArray | None:
    """Covariance of the varying parameters where the optimiser stopped.

    Least squares: (J^T J)^-1 with J the Jacobian in units of sigma, times the reduced
    chi-square when sigma was not given. A robust loss: the M-estimator covariance
    K² [sum psi²/(N - p)] / [sum psi'/N]² (J^T J)^-1 of the normalised residuals
    (P. J. Huber 1981, Robust Statistics, Wiley, §7.6), which counts a down-weighted
    glitch neither as information nor as noise. None when J^T J is singular.
    """
    vector = result.parameters.values
    varying = [model.index(name) for name in result.parameters.varying]
    steps = _steps(model, vector, *scales)
    jacobian = model.jacobian(vector, steps, varying) / np.repeat(sigma, 2)[:, None]
    return covariance_from(jacobian, np.asarray(result.residual), loss, sigma_known)


def covariance_from(
    jacobian: FloatArray, residual: FloatArray, loss: Loss, sigma_known: bool,
) -> FloatArray | None:
    """The covariance of `_fit_covariance` from the Jacobian and residuals in units of sigma."""
    if not np.all(np.isfinite(jacobian)):
        return None
    try:
        inverse = np.linalg.inv(jacobian.T @ jacobian)
    except np.linalg.LinAlgError:
        return None
    varying = range(jacobian.shape[1])
    count, dof = residual.size, max(residual.size - len(varying), 1)
    if loss == "linear":
        factor = 1.0 if sigma_known else float(residual @ residual) / dof
    else:
        _, psi, slope = _loss_terms(residual, loss)
        mean_slope = float(np.mean(slope))
        if not mean_slope > 0:
            return None
        correction = 1.0 + len(varying) / count * float(np.var(slope)) / mean_slope**2
        factor = correction**2 * float(psi @ psi) / dof / mean_slope**2
    covariance = inverse * factor
    if not (np.all(np.isfinite(covariance)) and np.all(np.diag(covariance) > 0)):
        return None
    return covariance
