"""Where the orbit fit starts when the path's shape does not fix the start
(`forcefit.estimators._apsidal_start`): from what the samples resolve, never from a default law.

The orbit fit is a nonlinear least-squares problem whose minimum can be far from its
start: over many turns a small error in the period wraps the phase, and a wrong
exponent or centre can fit one stretch of the path as well as the right one. The start
is therefore built in steps that each use only what the data fix:

1. a noise level from high-order differences of the samples, given by the caller
   (`forcefit.geometry.noise.difference_noise`: robust to glitches);
2. candidate centres: the given one, else the conic through the points (its centre and
   foci: Hooke's and Newton's centres of an ellipse), the point the accelerations aim
   at, and the centroid;
3. for each centre and a grid of exponents, the state at the epoch from a local fit,
   the strength from the time-averaged radial equation, and a short least-squares fit of
   strength and state on about one turn around the epoch; the best few are refined with
   the exponent (and the centre) free on the same stretch;
4. the stretch is doubled, and refitted, until it covers the whole track.

References
----------
F. L. Bookstein (1979), Computer Graphics and Image Processing 9, 56 (algebraic conic
fit).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import least_squares

from .._types import FloatArray
from ..dynamics.orbit_model import OrbitModel
from ..errors import NotIdentifiable
from ..track import Track

START_RTOL = 1e-10
"""Step control of the integrations used while searching for the start."""

TRIAL_EXPONENTS = (-2.5, -2.0, -1.5, -1.0, -0.5, 0.0, 1.0, 2.0)
"""Exponents tried on the first stretch when the exponent is free."""

AREAL_TOLERANCE = 3.0
"""A candidate centre is kept when the area swept about it departs from a steady rate by at
most this factor more than about the best candidate."""

TRIAL_CENTRES = 2
"""How many of the likeliest centres are tried."""

KEPT_TRIALS = 2
"""How many of the best (centre, exponent) trials are refined with the exponent free."""

STAGE_POINTS = 300
"""Most samples per track a stage of the start search fits (every m-th of a longer stretch)."""

@dataclass(frozen=True)
class _Conic:
    centre: tuple[float, float]
    foci: tuple[tuple[float, float], ...]


def conic_coefficients(u: FloatArray, v: FloatArray) -> FloatArray | None:
    """Unit-norm coefficients (a, b, c, d, e, f) of the conic a u² + b uv + c v² + d u + e v + f
    = 0 nearest the points (algebraic fit: the smallest singular vector); None when it fails."""
    design = np.column_stack((u * u, u * v, v * v, u, v, np.ones_like(u)))
    try:
        _, _, rows = np.linalg.svd(design, full_matrices=False)
    except np.linalg.LinAlgError:
        return None
    return np.asarray(rows[-1])


def _conic(x: FloatArray, y: FloatArray) -> _Conic | None:
    """The conic a x² + b xy + c y² + d x + e y + f = 0 nearest the points (algebraic fit,
    unit-norm coefficients, on centred and scaled coordinates); None when degenerate."""
    mx, my = float(np.mean(x)), float(np.mean(y))
    scale = float(max(np.std(x), np.std(y)))
    if not scale > 0:
        return None
    coefficients = conic_coefficients((x - mx) / scale, (y - my) / scale)
    if coefficients is None:
        return None
    a, b, c, d, e, f = coefficients
    quadratic = np.array([[a, b / 2], [b / 2, c]])
    if abs(np.linalg.det(quadratic)) < 1e-9 * max(abs(a), abs(c), 1e-300) ** 2:
        return None                                   # a parabola or a pair of lines
    centre = np.linalg.solve(2 * quadratic, [-d, -e])
    constant = f + (d * centre[0] + e * centre[1]) / 2
    values, vectors = np.linalg.eigh(quadratic)
    if constant == 0:
        return None
    squares = -constant / values                      # squared semi-axes (negative: imaginary)
    foci: list[FloatArray] = []
    if np.all(squares > 0):                           # an ellipse: foci on the major axis
        major = int(np.argmax(squares))
        distance = math.sqrt(abs(squares[major] - squares[1 - major]))
        foci = [centre + s * distance * vectors[:, major] for s in (1.0, -1.0)]
    elif np.any(squares > 0):                         # a hyperbola: foci on the transverse axis
        transverse = int(np.argmax(squares))
        distance = math.sqrt(abs(squares[0]) + abs(squares[1]))
        foci = [centre + s * distance * vectors[:, transverse] for s in (1.0, -1.0)]

    def back(point: FloatArray) -> tuple[float, float]:
        return (mx + scale * float(point[0]), my + scale * float(point[1]))

    return _Conic(centre=back(centre), foci=tuple(back(point) for point in foci))


def _stencil(track: Track, noise: float) -> int:
    """Half-width m (samples) of the differences that read velocity and acceleration:
    wide enough that the chord beats the noise, at most an eighth of the samples."""
    steps = np.hypot(np.diff(track.x), np.diff(track.y))
    typical = float(np.median(steps)) if steps.size else 0.0
    if typical <= 0:
        return 1
    wanted = math.ceil(20.0 * noise / typical) if noise > 0 else 1
    return int(max(1, min(wanted, max(1, track.n_points // 8))))


def _aim_of_accelerations(track: Track, noise: float) -> tuple[float, float] | None:
    """The point the accelerations aim at: the least-squares meeting point of the lines
    through each sample along its acceleration (second divided differences)."""
    if track.t is None or track.n_points < 7:
        return None
    m = _stencil(track, noise)
    t, p = np.asarray(track.t), track.positions
    before, here, after = p[:-2 * m], p[m:-m], p[2 * m:]
    left = (t[m:-m] - t[:-2 * m])[:, None]
    right = (t[2 * m:] - t[m:-m])[:, None]
    acceleration = 2 * ((after - here) / right - (here - before) / left) / (left + right)
    size = np.hypot(acceleration[:, 0], acceleration[:, 1])
    resolved = size > 6.0 * noise * 2 / (left[:, 0] * right[:, 0]) if noise > 0 else size > 0
    if resolved.sum() < 3:
        return None
    direction = acceleration[resolved] / size[resolved, None]
    normal = np.column_stack((-direction[:, 1], direction[:, 0]))
    offset = np.sum(normal * here[resolved], axis=1)
    weight = size[resolved] ** 2
    matrix = normal.T @ (weight[:, None] * normal)
    if np.linalg.cond(matrix) > 1e10:
        return None
    point = np.linalg.solve(matrix, normal.T @ (weight * offset))
    return float(point[0]), float(point[1])


def swept_area(positions: FloatArray) -> FloatArray:
    """Area (L²) swept about the origin from the first of ``positions`` (N, 2): the polygon's
    running sum."""
    x, y = positions[:, 0], positions[:, 1]
    return 0.5 * np.concatenate(([0.0], np.cumsum(x[:-1] * y[1:] - x[1:] * y[:-1])))


def _areal_design(track: Track) -> tuple[FloatArray, FloatArray]:
    """The area about a centre c is A_c(t) = A_0(t) - (c_x (y - y_0) - c_y (x - x_0)) / 2;
    Kepler's second law makes it a + b t (+ c t² for a slow drag) about the force centre."""
    t = np.asarray(track.t)
    scaled = (t - t.mean()) / max(float(np.ptp(t)), 1e-300)
    return np.column_stack((np.ones_like(scaled), scaled, scaled**2)), swept_area(np.asarray(track.positions))


def areal_centre(track: Track) -> tuple[float, float] | None:
    """The centre about which the samples sweep area at a steady (or slowly changing) rate,
    by linear least squares (Kepler's second law holds about the centre of any central
    force); None when the path does not fix it."""
    if track.t is None or track.n_points < 6:
        return None
    design, area = _areal_design(track)
    x, y = np.asarray(track.x), np.asarray(track.y)
    columns = np.column_stack((design, 0.5 * (y - y[0]), -0.5 * (x - x[0])))
    scale = np.linalg.norm(columns, axis=0)
    if not np.all(scale > 0):
        return None
    solution, _, rank, _ = np.linalg.lstsq(columns / scale, area, rcond=1e-12)
    if rank < columns.shape[1]:
        return None
    solution = solution / scale
    return float(solution[3]), float(solution[4])


def areal_misfit(track: Track, centre: tuple[float, float]) -> float:
    """RMS departure (L²) of the area swept about ``centre`` from a quadratic in time."""
    design, area = _areal_design(track)
    x, y = np.asarray(track.x), np.asarray(track.y)
    about = area - 0.5 * (centre[0] * (y - y[0]) - centre[1] * (x - x[0]))
    solution, *_ = np.linalg.lstsq(design, about, rcond=None)
    return float(np.sqrt(np.mean((about - design @ solution) ** 2)))


def centre_candidates(track: Track, noise: float) -> list[tuple[float, float]]:
    """Possible force centres of a timestamped path (L), best first by how steadily the
    samples sweep area about them: the centre of steady areal rate, the conic's centre
    and foci, the aim of the accelerations and the centroid, without near-duplicates."""
    x, y = np.asarray(track.x), np.asarray(track.y)
    found: list[tuple[float, float]] = []
    areal = areal_centre(track)
    if areal is not None:
        found.append(areal)
    conic = _conic(x, y)
    if conic is not None:
        found += [conic.centre, *conic.foci]
    aim = _aim_of_accelerations(track, noise)
    if aim is not None:
        found.append(aim)
    found.append((float(np.mean(x)), float(np.mean(y))))
    size = float(max(np.ptp(x), np.ptp(y)))
    distinct: list[tuple[float, float]] = []
    for point in found:
        if not all(math.isfinite(v) and abs(v) < 1e6 * max(size, 1e-300) + 1e6 * abs(np.mean(x))
                   for v in point):
            continue
        if all(math.hypot(point[0] - q[0], point[1] - q[1]) > 0.02 * size for q in distinct):
            distinct.append(point)
    if track.t is None or not distinct:
        return distinct
    misfits = [areal_misfit(track, point) for point in distinct]
    order = np.argsort(misfits)
    best = misfits[order[0]]
    return [distinct[i] for i in order if misfits[i] <= AREAL_TOLERANCE * best + 1e-300]


def _local_state(track: Track, index: int, centre: tuple[float, float], noise: float) -> FloatArray:
    """(x, y, vx, vy) at sample ``index`` relative to ``centre``: a quadratic in time fitted
    over the stencil's window (an exact interpolation when the samples are sparse)."""
    m = _stencil(track, noise)
    low, high = max(0, index - m), min(track.n_points, index + m + 1)
    if high - low < 3:
        low, high = max(0, min(low, track.n_points - 3)), min(track.n_points, max(high, 3))
    t = np.asarray(track.t)[low:high] - float(np.asarray(track.t)[index])
    design = np.column_stack((np.ones_like(t), t, t * t))
    coefficients, *_ = np.linalg.lstsq(design, track.positions[low:high], rcond=None)
    position, velocity = coefficients[0], coefficients[1]
    return np.array([position[0] - centre[0], position[1] - centre[1], velocity[0], velocity[1]])


def _log_force(track: Track, centre: tuple[float, float], exponent: float, radius: float) -> float:
    """ln F(r_ref) for a trial exponent from the time-averaged radial equation
    <r''> = <h²/r³> - k <r**n> ≈ 0, with h from the areal rate of the samples."""
    offset = track.positions - np.asarray(centre)
    r = np.hypot(offset[:, 0], offset[:, 1])
    t = np.asarray(track.t)
    swept = 0.5 * np.concatenate(([0.0], np.cumsum(offset[:-1, 0] * offset[1:, 1]
                                                    - offset[:-1, 1] * offset[1:, 0])))
    h = 2.0 * np.polyfit(t - t.mean(), swept, 1)[0]
    weight = np.gradient(t)
    with np.errstate(all="ignore"):
        strength = float(np.sum(weight * h * h / r**3) / np.sum(weight * r**exponent))
    if not (math.isfinite(strength) and strength > 0):
        return math.nan
    return math.log(strength) + exponent * math.log(radius)


def _thinned(window: slice, index: int) -> slice:
    """A window thinned to about STAGE_POINTS samples, keeping the epoch sample."""
    step = max(1, math.ceil((window.stop - window.start) / STAGE_POINTS))
    first = window.start + (index - window.start) % step
    return slice(first, window.stop, step)


def _turn_windows(track: Track, index: int, centre: tuple[float, float]) -> list[slice]:
    """Windows around ``index`` that sweep 1, 2, 4, ... turns about ``centre``, the last the
    whole track."""
    offset = track.positions - np.asarray(centre)
    angle = np.unwrap(np.arctan2(offset[:, 1], offset[:, 0]))
    swept = np.abs(angle - angle[index])
    windows: list[slice] = []
    half_turns = 0.5
    while True:
        outside = swept > 2 * math.pi * half_turns
        left = np.flatnonzero(outside[:index])
        right = np.flatnonzero(outside[index:])
        low = int(left[-1]) + 1 if left.size else 0
        high = index + int(right[0]) if right.size else track.n_points
        low, high = min(low, max(0, index - 4)), max(high, min(track.n_points, index + 5))
        windows.append(_thinned(slice(low, high), index))
        if low == 0 and high == track.n_points:
            return windows
        half_turns *= 2


@dataclass(frozen=True)
class StartProblem:
    """What the start search needs besides the tracks: the full model and its options."""

    model: OrbitModel
    exponent: float | None
    centre: tuple[float, float] | None
    sigma: FloatArray          # per sample, all tracks stacked (L)


def _solve(
    model: OrbitModel, vector: FloatArray, varying: Sequence[int], sigma: FloatArray,
    max_nfev: int,
) -> tuple[FloatArray, float]:
    """Least squares of ``model`` from ``vector`` with the ``varying`` entries free; returns the
    solution and its chi-square (inf when no orbit could be integrated)."""
    data = np.concatenate([track.positions for track in model.tracks])
    weights = 1.0 / np.repeat(sigma, 2)
    columns = list(varying)
    size = float(np.ptp(data, axis=0).max())

    def full(free: FloatArray) -> FloatArray:
        out = vector.copy()
        out[columns] = free
        return out

    def residual(free: FloatArray) -> FloatArray:
        predictions, ok = model.predict(full(free)[None, :])
        if not ok[0]:
            return np.full(data.size, 1e6)
        return (data - np.concatenate([p[0] for p in predictions])).ravel() * weights

    def jacobian(free: FloatArray) -> FloatArray:
        current = full(free)
        steps = 1e-6 * np.maximum(np.abs(current), size)
        steps[:2] = 1e-6 * np.maximum(np.abs(current[:2]), 1.0)
        for name in ("drag", "rotation_rate"):
            if name in model.names:
                steps[model.index(name)] = 1e-6 / max(model.tracks[0].duration, 1e-300)
        if "yukawa_strength" in model.names:
            steps[model.index("yukawa_strength")] = 1e-6
        velocity = [i for i, name in enumerate(model.names) if name.startswith(("vx0", "vy0"))]
        speed = float(np.median(np.abs(current[velocity]))) if velocity else 1.0
        steps[velocity] = 1e-6 * np.maximum(np.abs(current[velocity]), speed)
        return -np.nan_to_num(model.jacobian(current, steps, columns)) * weights[:, None]

    try:
        with np.errstate(all="ignore"):               # trial orbits may run away: they lose
            solution = least_squares(residual, vector[columns], jac=jacobian, method="trf",
                                     x_scale="jac", max_nfev=max_nfev)
    except (ValueError, np.linalg.LinAlgError):
        return vector, math.inf
    chi2 = float(solution.fun @ solution.fun)
    return full(solution.x), chi2 if np.all(np.isfinite(solution.fun)) else math.inf


def _window_model(problem: StartProblem, windows: Sequence[slice]) -> tuple[OrbitModel, FloatArray]:
    """The problem's model on a stretch of each track, and the stretch's sigma."""
    model = problem.model
    tracks = tuple(track.select(window) for track, window in zip(model.tracks, windows))
    bounds = np.cumsum([0] + [track.n_points for track in model.tracks])
    sigma = np.concatenate([problem.sigma[bounds[j]:bounds[j + 1]][window]
                            for j, window in enumerate(windows)])
    return replace(model, tracks=tracks, rtol=START_RTOL), sigma


def _vector(model: OrbitModel, exponent: float, log_force: float, centre: tuple[float, float],
            states: Sequence[FloatArray], drag: float) -> FloatArray:
    vector = np.zeros(len(model.names))
    vector[0], vector[1] = exponent, log_force
    if model.drag is not None:
        vector[model.index("drag")] = drag
    if model.fit_rotation:
        vector[model.index("rotation_rate")] = model.rotation_rate
    if "yukawa_strength" in model.names and model.extra is not None and model.extra.yukawa is not None:
        vector[model.index("yukawa_strength")] = model.extra.yukawa.alpha
    for j, state in enumerate(states):
        cx, cy, first = model.track_columns(j)
        vector[cx], vector[cy] = centre
        vector[first:first + 4] = state
    return vector


def _free(model: OrbitModel, problem: StartProblem, *, law: bool) -> list[int]:
    """Indices fitted at a stage: the states always, the strength, and with ``law`` the
    exponent (unless held), the centre (unless given), drag and rotation (when modelled)."""
    free = [i for i, name in enumerate(model.names) if name.startswith(("x0", "y0", "vx0", "vy0"))]
    free.append(1)
    if law:
        if problem.exponent is None:
            free.append(0)
        if problem.centre is None:
            free += [i for i, name in enumerate(model.names) if name.startswith("centre_")]
        free += [model.index(name) for name in ("drag", "rotation_rate", "yukawa_strength")
                 if name in model.names]
    return sorted(set(free))


def orbit_start(problem: StartProblem, indices: Sequence[int], noise: Sequence[float]) -> FloatArray:
    """A parameter vector of ``problem.model`` close enough to the least-squares minimum
    that the full fit converges to it.

    Parameters
    ----------
    problem : StartProblem
        The full model (all tracks, drag and rotation as asked), a held exponent and a
        given centre if any, and each sample's sigma.
    indices : sequence of int
        Each track's epoch sample.
    noise : sequence of float
        Each track's noise level (L), e.g. `difference_noise`.

    Raises
    ------
    NotIdentifiable
        When no trial orbit could be integrated through the first stretch.
    """
    model = problem.model
    first = model.tracks[0]
    centres = ([problem.centre] if problem.centre is not None
               else centre_candidates(first, noise[0])[:TRIAL_CENTRES])
    exponents = (problem.exponent,) if problem.exponent is not None else TRIAL_EXPONENTS
    radius = model.reference_radius
    trials: list[tuple[float, FloatArray, list[slice]]] = []
    for centre in centres:
        windows = [_turn_windows(track, index, centre)
                   for track, index in zip(model.tracks, indices)]
        seed = [options[0] for options in windows]
        local, sigma = _window_model(problem, seed)
        states = [_local_state(track, (index - window.start) // (window.step or 1), centre, level)
                  for track, index, window, level in zip(local.tracks, indices, seed, noise)]
        for exponent in exponents:
            log_force = _log_force(local.tracks[0], centre, exponent, radius)
            if not math.isfinite(log_force):
                continue
            vector = _vector(local, exponent, log_force, centre, states, 0.0)
            vector, chi2 = _solve(local, vector, _free(local, problem, law=False), sigma, 30)
            if math.isfinite(chi2):
                trials.append((chi2, vector, [options[-1] for options in windows]))
    if not trials:
        raise NotIdentifiable(
            f"{first.label}: no trial orbit about any likely centre follows the samples; the path "
            "is probably not an orbit in a central power law, or the times do not belong to the "
            "positions. Check the time column and its unit.")
    trials.sort(key=lambda trial: trial[0])
    best_chi2, best = math.inf, trials[0][1]
    for _, vector, _ in trials[:KEPT_TRIALS]:
        centre = (float(vector[model.track_columns(0)[0]]), float(vector[model.track_columns(0)[1]]))
        windows = [_turn_windows(track, index, centre)
                   for track, index in zip(model.tracks, indices)]
        local, sigma = _window_model(problem, [options[0] for options in windows])
        refined, chi2 = _solve(local, vector, _free(local, problem, law=True), sigma, 60)
        if chi2 < best_chi2:
            best_chi2, best = chi2, refined
    return _extend(problem, best, indices)


def _extend(problem: StartProblem, vector: FloatArray, indices: Sequence[int]) -> FloatArray:
    """Refit on stretches that double in turns until they cover the tracks."""
    model = problem.model
    centre = (float(vector[model.track_columns(0)[0]]), float(vector[model.track_columns(0)[1]]))
    windows = [_turn_windows(track, index, centre) for track, index in zip(model.tracks, indices)]
    stages = max(len(options) for options in windows)
    for stage in range(1, stages - 1):
        picked = [options[min(stage, len(options) - 1)] for options in windows]
        local, sigma = _window_model(problem, picked)
        refined, chi2 = _solve(local, vector, _free(local, problem, law=True), sigma, 60)
        if math.isfinite(chi2):
            vector = refined
    return vector
