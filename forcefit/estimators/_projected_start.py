"""Where the projected-orbit fit starts: deproject the sky path by trial orientations and let
the planar orbit fit's start search (`forcefit.estimators._start`) find the law in each.

A projection is a linear map, so the planar start's ideas carry over: the samples sweep area
at a steady rate about the projected force centre (Kepler's second law survives any linear
map), and the path deprojected by the right orientation is a planar orbit about that centre.
The trial orientations are

1. the one that puts the centre at a focus of the conic through the points (exact for a
   Kepler ellipse: the classical deprojection of an apparent orbit; see `focal_deprojection`);
2. face-on;
3. a coarse grid of tilts and node directions (for laws far from Kepler's, whose paths are
   no conics).

Each trial's planar start becomes a projected parameter vector, offered in that order until
one leads to a fit that describes the data.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass, replace

import numpy as np

from .._types import FloatArray
from ..dynamics.orbit_model import OrbitModel
from ..dynamics.sky import PROJECTION, ProjectedOrbitModel
from ..errors import ForcefitError
from ..track import Track
from ._start import START_RTOL, StartProblem, conic_coefficients, orbit_start

TRIAL_TILTS = (0.8, 0.5)
"""cos i of the grid's trial orientations (besides face-on and the focal deprojection)."""

TRIAL_NODES = 4
"""Node directions tried at each grid tilt, evenly over 180 deg."""


def focal_deprojection(x: FloatArray, y: FloatArray) -> FloatArray | None:
    """The map from the sky to a plane in which the conic through the points has a focus at
    the origin, as a 2 x 2 matrix D (plane = D sky) of unit largest singular value; None when
    the points' conic cannot be deprojected that way (the origin outside an ellipse, say).

    The conic s^T K s + 2 d^T s + 1 = 0 (s on the sky, the centre at the origin) is the image
    s = T X of an ellipse |X| = p - e.X with a focus at the origin exactly when
    (T T^T)^-1 = p^2 (d d^T - K): the deprojection's metric follows from the conic, up to a
    rotation in the plane (derived here from the focus-directrix form of the conic, common
    practice; the classical route from the apparent to the true orbit of a visual binary).
    """
    scale = float(max(np.std(x), np.std(y), np.max(np.hypot(x, y))))
    if not scale > 0:
        return None
    coefficients = conic_coefficients(x / scale, y / scale)
    if coefficients is None:
        return None
    a, b, c, d, e, f = coefficients
    if abs(f) < 1e-9:
        return None
    quadratic = np.array([[a, b / 2], [b / 2, c]]) / f
    linear = np.array([d, e]) / (2 * f)
    metric = np.outer(linear, linear) - quadratic
    values, vectors = np.linalg.eigh(metric)
    if not values[0] > 1e-9 * max(values[1], 1e-300):
        return None
    root = vectors @ np.diag(np.sqrt(values)) @ vectors.T          # D^T D = metric (up to scale)
    return root / float(np.linalg.norm(root, ord=2))


def trial_deprojections(track: Track, centre: tuple[float, float]) -> list[FloatArray]:
    """Sky-to-plane matrices to try, the likeliest first: the focal deprojection, face-on,
    then the grid."""
    x, y = track.x - centre[0], track.y - centre[1]
    trials: list[FloatArray] = []
    focal = focal_deprojection(np.asarray(x), np.asarray(y))
    if focal is not None:
        trials.append(focal)
    trials.append(np.eye(2))
    for tilt in TRIAL_TILTS:
        for k in range(TRIAL_NODES):
            node = math.pi * k / TRIAL_NODES
            turn = np.array([[math.cos(node), -math.sin(node)], [math.sin(node), math.cos(node)]])
            trials.append(turn @ np.diag([1.0, 1.0 / tilt]) @ turn.T * tilt)
    return trials


@dataclass(frozen=True)
class ProjectedStart:
    """What the projected start search needs: the sky track, the model to start, a held
    exponent, the centre (given or a candidate), each sample's isotropic sigma (L) and the
    noise level (L)."""

    track: Track
    model: ProjectedOrbitModel
    exponent: float | None
    centre: tuple[float, float]
    sigma: FloatArray
    noise: float


def _deprojected(problem: ProjectedStart, deprojection: FloatArray) -> Track:
    offset = problem.track.positions - np.asarray(problem.centre)
    plane = offset @ deprojection.T
    stretch = float(np.linalg.norm(deprojection, ord=2))
    return replace(problem.track, x=plane[:, 0], y=plane[:, 1],
                   sigma=problem.sigma * stretch,
                   metadata={})


def _planar_start(problem: ProjectedStart, plane: Track, index: int) -> FloatArray | None:
    """The planar start's vector (n, ln F, centre, state) for the deprojected track, or None."""
    logs = np.log(np.hypot(plane.x, plane.y))
    radius = float(np.exp(np.mean(logs)))
    model = OrbitModel(tracks=(plane,), epochs=(problem.model.epoch,), reference_radius=radius)
    start = StartProblem(model=model, exponent=problem.exponent, centre=(0.0, 0.0),
                         sigma=np.asarray(plane.sigma))
    try:
        with np.errstate(all="ignore"):
            vector = orbit_start(start, [index], [problem.noise])
    except ForcefitError:
        return None
    vector[1] -= vector[0] * math.log(radius)                       # ln k
    return vector


def kepler_start(plane: Track, index: int) -> FloatArray | None:
    """The planar start's vector (n = -2, ln k, centre, state) of a Kepler ellipse with a focus
    at the origin through a deprojected track, timed by Kepler's equation; None when the points
    are no such ellipse.

    The focal conic r = p - e . X is linear in (p, e) (common practice); each point's eccentric
    and mean anomalies follow (Green 1985, Spherical Astronomy, ch. 6; from memory), the mean
    anomaly grows between epochs by the whole turns its median rate implies plus the change
    seen, and its rate gives k = (mean motion)**2 a**3. Works on epochs too sparse for a local
    velocity.
    """
    x, y, t = np.asarray(plane.x), np.asarray(plane.y), np.asarray(plane.t)
    r = np.hypot(x, y)
    design = np.column_stack((np.ones_like(r), -x, -y))
    (p, ex, ey), *_ = np.linalg.lstsq(design, r, rcond=None)
    e = math.hypot(ex, ey)
    if not (p > 0 and 1e-6 < e < 0.99):
        return None
    sense = 1.0 if np.median(x[:-1] * y[1:] - y[:-1] * x[1:]) >= 0 else -1.0
    peri = np.array([ex, ey]) / e
    quarter = sense * np.array([-peri[1], peri[0]])
    true = np.arctan2(x * quarter[0] + y * quarter[1], x * peri[0] + y * peri[1])
    eccentric = 2.0 * np.arctan(math.sqrt((1.0 - e) / (1.0 + e)) * np.tan(true / 2.0))
    mean = eccentric - e * np.sin(eccentric)
    gaps, step = np.diff(t), (np.diff(mean) + math.pi) % (2.0 * math.pi) - math.pi   # in (-pi, pi]
    rate = float(np.median((step % (2.0 * math.pi)) / np.maximum(gaps, 1e-300)))        # most gaps
    turns = np.round((rate * gaps - step) / (2.0 * math.pi))          # whole turns the rate implies
    grown = np.concatenate(([0.0], np.cumsum(step + 2.0 * math.pi * turns)))
    motion, offset = np.polyfit(t - t[index], grown, 1)
    if not motion > 0:
        return None
    axis = p / (1.0 - e * e)
    strength = motion**2 * axis**3
    anomaly = float(offset + mean[0])                                 # mean anomaly at the epoch
    e_anomaly = anomaly
    for _ in range(50):                                               # Newton on Kepler's equation
        e_anomaly -= (e_anomaly - e * math.sin(e_anomaly) - anomaly) / (1.0 - e * math.cos(e_anomaly))
    nu = 2.0 * math.atan2(math.sqrt(1.0 + e) * math.sin(e_anomaly / 2),
                          math.sqrt(1.0 - e) * math.cos(e_anomaly / 2))
    radius = axis * (1.0 - e * math.cos(e_anomaly))
    position = radius * (math.cos(nu) * peri + math.sin(nu) * quarter)
    velocity = math.sqrt(strength / p) * (-math.sin(nu) * peri + (e + math.cos(nu)) * quarter)
    return np.array([-2.0, math.log(strength), 0.0, 0.0, *position, *velocity])


def _as_projected(problem: ProjectedStart, deprojection: FloatArray, planar: FloatArray) -> FloatArray:
    """The projected model's vector for a planar start found on the deprojected track."""
    model = problem.model
    exponent, log_strength = float(planar[0]), float(planar[1])
    position, velocity = planar[4:6], planar[6:8]
    angle = math.atan2(position[1], position[0])
    shrink = model.start_radius / float(np.hypot(*position))        # plane -> canonical
    cos, sin = math.cos(angle), math.sin(angle)
    turn = np.array([[cos, -sin], [sin, cos]])
    projection = np.linalg.inv(deprojection) @ turn / shrink
    canonical_velocity = shrink * turn.T @ velocity
    log_strength += (1.0 - exponent) * math.log(shrink)
    values = {"exponent": exponent,
              "log_force": log_strength + exponent * math.log(model.reference_radius),
              "vx0": canonical_velocity[0], "vy0": canonical_velocity[1],
              "centre_x": problem.centre[0], "centre_y": problem.centre[1], "parallax": 1.0}
    values.update(zip(PROJECTION, projection.ravel()))
    return np.array([values[name] for name in model.names])


def sky_misfit(model: ProjectedOrbitModel, vector: FloatArray, track: Track, sigma: FloatArray) -> float:
    """Chi-square of a vector's sky positions with isotropic sigma (inf when it fails)."""
    prediction = model.predict(vector[None, :])
    if not prediction.ok[0]:
        return math.inf
    miss = (track.positions - prediction.positions[0]) / sigma[:, None]
    value = float(np.sum(miss**2))
    return value if math.isfinite(value) else math.inf


def projected_starts(problem: ProjectedStart, index: int) -> Iterator[FloatArray]:
    """Starting vectors for the projected model, one per trial orientation that gave a planar
    orbit, the likeliest first (`trial_deprojections`). A generator: the caller stops asking
    once a start has led to a fit that describes the data.

    Parameters
    ----------
    problem : ProjectedStart
    index : int
        The epoch's sample.
    """
    model = replace(problem.model, rtol=START_RTOL)
    focal = focal_deprojection(*(problem.track.positions - np.asarray(problem.centre)).T)
    if focal is not None and problem.exponent in (None, -2.0):
        planar = kepler_start(_deprojected(problem, focal), index)
        if planar is not None:
            vector = _as_projected(problem, focal, planar)
            if math.isfinite(sky_misfit(model, vector, problem.track, problem.sigma)):
                yield vector
    for deprojection in trial_deprojections(problem.track, problem.centre):
        planar = _planar_start(problem, _deprojected(problem, deprojection), index)
        if planar is None:
            continue
        vector = _as_projected(problem, deprojection, planar)
        if math.isfinite(sky_misfit(model, vector, problem.track, problem.sigma)):
            yield vector
