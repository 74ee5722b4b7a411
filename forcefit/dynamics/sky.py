"""Orbits seen in projection: the planar orbit of F = -k r**n, turned in space and projected.

A body on a central orbit moves in a plane through the centre. Seen from far away along a
line of sight that is not the plane's normal, the observer measures the orthographic
projection of the orbit onto the plane of the sky (or of an image): a linear image of the
planar orbit. forcefit writes it as

    sky(t) = centre + T X(t),        X'' = -k_c |X|**(n-1) X,   X(epoch) = (x0, 0),

with X(t) the orbit in its own plane in *canonical* coordinates (the epoch's position on the
first axis, at the fixed distance x0), integrated by the compiled batch propagator, and T a
2 x 2 projection matrix. Every orientation of the plane, every rotation of the orbit within
it and its true size are in T: the model is smooth everywhere, face-on included, which keeps
least squares and the sampler well behaved. The astronomer's angles are read off T:

    T = s R(node) diag(1, cos i) R(w)

(`orientation`), where s is the scale from canonical to true lengths, R(a) a rotation by a,
``node`` the position angle of the ascending node, i the inclination and w the angle in the
orbit's plane from the ascending node to the canonical first axis, counted in the direction
of motion (the argument of latitude of the epoch's position). The line-of-sight coordinate (positive
away from the observer, the convention of visual-binary work) is z = s sin i (sin w, cos w) . X.
Without radial velocities the sky positions cannot tell (node, w) from (node + 180 deg,
w + 180 deg): z changes sign and nothing else does.

Sky axes: x is the first sky coordinate and y the second, and position angles, the node
among them, are counted from x towards y. For the sky this is x = north (Delta dec) and y =
east (Delta RA cos dec), so that angles run from north through east (the IAU convention)
and a position angle that increases is direct motion (i < 90 deg).

Parameters (one flat vector, names in `ProjectedOrbitModel.names`):

``exponent``                 n
``log_force``                ln F_c(r_ref) = ln(k_c r_ref**n), the canonical orbit's force at the
                             reference radius (decorrelates n and k, as in the planar model)
``proj_xx`` ... ``proj_yy``  T, row by row (sky x and y from canonical X and Y); dimensionless
``vx0``, ``vy0``             the canonical velocity at the epoch (L/T)
``centre_x``, ``centre_y``   the force centre on the sky (L), when fitted
``parallax``                 the parallax in the sky's angle unit, when radial velocities are
                             fitted with positions in an angle (it converts angles to au)

References
----------
W. D. Heintz (1978), Double Stars (Reidel), chapter 4: the orbital elements of a visual binary,
the Thiele-Innes constants and their conventions (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import NamedTuple

import numpy as np

from .._types import FloatArray
from ..errors import InputError
from .propagate import BATCH_RTOL, propagate_batch

PROJECTION = ("proj_xx", "proj_xy", "proj_yx", "proj_yy")
"""Names of the projection matrix's entries in the parameter vector."""


class Orientation(NamedTuple):
    """The angles of a projection matrix T = s R(node) diag(1, cos i) R(w).

    scale : s, true length per canonical length.
    cos_inclination : cos i; positive for direct motion (position angle increasing).
    node : position angle of the ascending node, rad, in [0, pi) (the branch without
        radial velocities) or [0, 2 pi).
    axis_angle : w, rad: the angle in the orbit's plane from the ascending node to the
        canonical first axis, counted in the direction of motion.
    line_of_sight : (2,) z per canonical length: z = scale * line_of_sight . X, for the node
        given here (the other branch has the opposite sign).
    """

    scale: float
    cos_inclination: float
    node: float
    axis_angle: float
    line_of_sight: FloatArray

    @property
    def inclination(self) -> float:
        """i in rad, in [0, pi]: below pi/2 for direct motion."""
        return math.acos(max(-1.0, min(1.0, self.cos_inclination)))


def _rotation(angle: float) -> FloatArray:
    cos, sin = math.cos(angle), math.sin(angle)
    return np.array([[cos, -sin], [sin, cos]])


def projection_matrix(*, scale: float, inclination: float, node: float, axis_angle: float) -> FloatArray:
    """T = s R(node) diag(1, cos i) R(w), the inverse of `orientation` (angles in rad).

    Examples
    --------
    >>> T = projection_matrix(scale=2.0, inclination=0.0, node=0.3, axis_angle=-0.3)
    >>> bool(np.allclose(T, 2 * np.eye(2)))      # face-on: a pure scale
    True
    """
    return scale * _rotation(node) @ np.diag([1.0, math.cos(inclination)]) @ _rotation(axis_angle)


def orientation(projection: FloatArray, sense: float = 1.0) -> Orientation:
    """Scale, inclination, node and in-plane angle of a projection matrix.

    Parameters
    ----------
    projection : ndarray, shape (2, 2)
        T, sky coordinates per canonical coordinate.
    sense : float
        The sign of the canonical orbit's angular momentum x vy - y vx: the in-plane motion
        runs from the first canonical axis towards the second when positive.

    Returns
    -------
    Orientation
        On the branch with the node in [0, pi); `line_of_sight` is in the caller's canonical
        frame (whatever ``sense``).

    Examples
    --------
    >>> T = projection_matrix(scale=1.5, inclination=math.radians(60), node=math.radians(30),
    ...                       axis_angle=math.radians(-80))
    >>> angles = orientation(T)
    >>> [round(math.degrees(a), 6) for a in (angles.inclination, angles.node, angles.axis_angle)]
    [60.0, 30.0, -80.0]
    """
    flip = np.diag([1.0, 1.0 if sense >= 0 else -1.0])
    turned = np.asarray(projection, dtype=float) @ flip
    left, values, _ = np.linalg.svd(turned)
    scale = float(values[0])
    node = math.atan2(left[1, 0], left[0, 0]) % math.pi
    if node >= math.pi - 1e-15:
        node = 0.0
    rows = _rotation(-node) @ turned / scale
    w = math.atan2(-rows[0, 1], rows[0, 0])
    cos_i = float(rows[1] @ np.array([math.sin(w), math.cos(w)]))
    sin_i = math.sqrt(max(0.0, 1.0 - cos_i * cos_i))
    line_of_sight = sin_i * np.array([math.sin(w), math.cos(w)]) @ flip
    return Orientation(scale, max(-1.0, min(1.0, cos_i)), node, w, line_of_sight)


def line_of_sight_rows(projections: FloatArray, reference: FloatArray) -> FloatArray:
    """z per canonical length for a batch of projection matrices, on the branch nearest
    ``reference`` (shape (2,)): the unit line-of-sight row v with v v^T = I - P^T P, where
    P = T / s, times the sign that makes v . reference >= 0.

    Parameters
    ----------
    projections : ndarray, shape (n_sets, 2, 2)
    reference : ndarray, shape (2,)

    Returns
    -------
    ndarray, shape (n_sets, 2)
    """
    _, values, right = np.linalg.svd(projections)
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = values[:, 1] / values[:, 0]
    sin_i = np.sqrt(np.clip(1.0 - ratio**2, 0.0, None))
    rows = sin_i[:, None] * right[:, 1, :]            # the direction P foreshortens most
    sign = np.where(rows @ np.asarray(reference, dtype=float) < 0, -1.0, 1.0)
    return rows * sign[:, None]


class SkyPrediction(NamedTuple):
    """What a projected orbit predicts for a batch of parameter sets.

    positions : ndarray, shape (n_sets, n_positions, 2)
        Sky positions (L) at the astrometric epochs; nan where the orbit failed.
    radial_velocities : ndarray, shape (n_sets, n_velocities)
        Line-of-sight velocities (in the velocities' unit; positive receding).
    ok : ndarray of bool, shape (n_sets,)
    """

    positions: FloatArray
    radial_velocities: FloatArray
    ok: np.ndarray


@dataclass(frozen=True, eq=False)
class ProjectedOrbitModel:
    """Maps parameter vectors to sky positions (and radial velocities) of one projected orbit.

    Attributes
    ----------
    position_times : ndarray, shape (n_positions,)
        Increasing epochs of the sky positions (T).
    epoch : float
        Where the canonical state is defined (T).
    start_radius : float
        x0, the canonical distance at the epoch (L).
    reference_radius : float
        r_ref of ``log_force``, in canonical lengths (L).
    centre : (float, float) or None
        A known force centre on the sky (L); None when fitted.
    velocity_times : ndarray, shape (n_velocities,)
        Increasing epochs of the radial velocities (T); empty without.
    velocity_factor : float
        Radial velocity per unit of dz/dt: with ``parallax`` fitted, RV = factor (dz/dt) / parallax
        (factor: the velocity of one au per time unit); else RV = factor dz/dt.
    fit_parallax : bool
        Whether ``parallax`` is a parameter.
    line_of_sight : ndarray, shape (2,)
        Which branch the radial velocities see (`line_of_sight_rows`).
    rtol : float
        Step control of the propagator.
    """

    position_times: FloatArray
    epoch: float
    start_radius: float
    reference_radius: float
    centre: tuple[float, float] | None = None
    velocity_times: FloatArray = field(default_factory=lambda: np.empty(0))
    velocity_factor: float = 1.0
    fit_parallax: bool = False
    line_of_sight: FloatArray = field(default_factory=lambda: np.array([1.0, 0.0]))
    rtol: float = BATCH_RTOL
    _times: FloatArray = field(init=False, repr=False)
    _position_index: np.ndarray = field(init=False, repr=False)
    _velocity_index: np.ndarray = field(init=False, repr=False)

    def __post_init__(self) -> None:
        position_times = np.asarray(self.position_times, dtype=float)
        velocity_times = np.asarray(self.velocity_times, dtype=float)
        times, inverse = np.unique(np.concatenate((position_times, velocity_times)), return_inverse=True)
        object.__setattr__(self, "position_times", position_times)
        object.__setattr__(self, "velocity_times", velocity_times)
        object.__setattr__(self, "line_of_sight", np.asarray(self.line_of_sight, dtype=float))
        object.__setattr__(self, "_times", times)
        object.__setattr__(self, "_position_index", inverse[:position_times.size])
        object.__setattr__(self, "_velocity_index", inverse[position_times.size:])

    @property
    def has_velocities(self) -> bool:
        """Whether radial velocities are modelled."""
        return self.velocity_times.size > 0

    @property
    def names(self) -> tuple[str, ...]:
        """Parameter names in vector order."""
        names = ["exponent", "log_force", *PROJECTION, "vx0", "vy0"]
        if self.centre is None:
            names += ["centre_x", "centre_y"]
        if self.fit_parallax:
            names.append("parallax")
        return tuple(names)

    def index(self, name: str) -> int:
        """Position of a parameter in the vector."""
        return self.names.index(name)

    @property
    def n_observations(self) -> int:
        """Numbers the model predicts: two per sky position, one per radial velocity."""
        return 2 * self.position_times.size + self.velocity_times.size

    def strength(self, vector: FloatArray) -> FloatArray:
        """k_c = F_c(r_ref) r_ref**-n, the canonical orbit's strength, for vectors (..., n_params)."""
        return np.exp(vector[..., 1] - vector[..., 0] * math.log(self.reference_radius))

    def centres(self, vectors: FloatArray) -> FloatArray:
        """The force centre of each parameter set, shape (n_sets, 2)."""
        vectors = np.atleast_2d(vectors)
        if self.centre is None:
            first = self.index("centre_x")
            return vectors[:, first:first + 2]
        return np.broadcast_to(np.asarray(self.centre, dtype=float), (vectors.shape[0], 2))

    def canonical(self, vectors: FloatArray) -> tuple[FloatArray, FloatArray, np.ndarray]:
        """Canonical positions and velocities at every propagated time, shape
        (n_sets, n_times, 2) each, and which sets succeeded; the times are the sorted union of
        the position and velocity epochs."""
        vectors = np.atleast_2d(vectors)
        first = self.index("vx0")
        batch = propagate_batch(
            self._times, np.array([self.start_radius, 0.0]), vectors[:, first:first + 2],
            exponent=vectors[:, 0], strength=self.strength(vectors), epoch=self.epoch, rtol=self.rtol)
        return batch.position, batch.velocity, batch.ok

    def predict(self, vectors: FloatArray) -> SkyPrediction:
        """Sky positions and radial velocities of each parameter set.

        Parameters
        ----------
        vectors : ndarray, shape (n_sets, n_params)
        """
        vectors = np.atleast_2d(np.asarray(vectors, dtype=float))
        position, velocity, ok = self.canonical(vectors)
        first = self.index(PROJECTION[0])
        projections = vectors[:, first:first + 4].reshape(-1, 2, 2)
        at = position[:, self._position_index]
        sky = np.einsum("sij,stj->sti", projections, at) + self.centres(vectors)[:, None, :]
        radial = np.empty((vectors.shape[0], 0))
        if self.has_velocities:
            rows = line_of_sight_rows(projections, self.line_of_sight)
            scale = np.linalg.norm(projections, ord=2, axis=(1, 2))
            moving = velocity[:, self._velocity_index]
            radial = self.velocity_factor * scale[:, None] * np.einsum("sj,stj->st", rows, moving)
            if self.fit_parallax:
                radial = radial / vectors[:, self.index("parallax")][:, None]
        return SkyPrediction(sky, radial, ok)

    def observe(self, vectors: FloatArray) -> tuple[FloatArray, np.ndarray]:
        """Every predicted number in one row per set: the sky positions (x, y of each epoch in
        turn) then the radial velocities; shape (n_sets, n_observations), and which succeeded."""
        prediction = self.predict(vectors)
        flat = np.concatenate((prediction.positions.reshape(prediction.positions.shape[0], -1),
                               prediction.radial_velocities), axis=1)
        return flat, prediction.ok

    def jacobian(self, vector: FloatArray, steps: FloatArray, columns: list[int]) -> FloatArray:
        """d(observations)/d(parameter) for the given columns by central differences in one
        batch; shape (n_observations, len(columns)), nan where an orbit failed."""
        sets = np.repeat(vector[None, :], 2 * len(columns), axis=0)
        for k, i in enumerate(columns):
            sets[2 * k, i] += steps[i]
            sets[2 * k + 1, i] -= steps[i]
        flat, ok = self.observe(sets)
        flat[~ok] = np.nan
        difference = (flat[0::2] - flat[1::2]) / (2 * np.asarray(steps)[columns])[:, None]
        return difference.T


class PlaneState(NamedTuple):
    """A projected orbit in physical terms: its law, its orientation and its state at the epoch
    in the node frame (first axis towards the ascending node, second 90 deg ahead in the
    direction of motion, so that the angular momentum is positive).

    exponent, strength : n and the true k (L**(1-n) T**-2).
    orientation : the angles (`Orientation`).
    position, velocity : ndarray, shape (2,): the state in the node frame (L, L/T).
    """

    exponent: float
    strength: float
    orientation: Orientation
    position: FloatArray
    velocity: FloatArray


def sky_vector(
    model: ProjectedOrbitModel, *, exponent: float, strength: float, position: FloatArray,
    velocity: FloatArray, inclination: float, node: float, centre: tuple[float, float] | None = None,
    parallax: float | None = None,
) -> FloatArray:
    """The parameter vector of ``model`` for an orbit given in physical terms.

    Parameters
    ----------
    model : ProjectedOrbitModel
        Its ``start_radius`` and ``reference_radius`` fix the canonical frame.
    exponent, strength : float
        n and the true k (L**(1-n) T**-2).
    position, velocity : array_like, shape (2,)
        The state at the model's epoch in the node frame (see `PlaneState`); the angular
        momentum must be positive.
    inclination, node : float
        i in [0, pi] (below pi/2: direct) and the position angle of the ascending node, rad.
    centre : (float, float), optional
        The force centre on the sky, when the model fits it.
    parallax : float, optional
        When the model fits it.

    Returns
    -------
    ndarray, shape (n_params,)
    """
    position, velocity = np.asarray(position, dtype=float), np.asarray(velocity, dtype=float)
    radius = float(np.hypot(*position))
    angle = math.atan2(position[1], position[0])
    scale = radius / model.start_radius
    canonical_velocity = _rotation(-angle) @ velocity / scale
    canonical_strength = strength * scale ** (exponent - 1.0)
    values = {
        "exponent": exponent,
        "log_force": math.log(canonical_strength) + exponent * math.log(model.reference_radius),
        "vx0": canonical_velocity[0], "vy0": canonical_velocity[1],
    }
    matrix = projection_matrix(scale=scale, inclination=inclination, node=node, axis_angle=angle)
    values.update(zip(PROJECTION, matrix.ravel()))
    if model.centre is None:
        if centre is None:
            raise InputError("the model fits the force centre: give its position (centre=(x, y)).")
        values.update(centre_x=centre[0], centre_y=centre[1])
    if model.fit_parallax:
        if parallax is None:
            raise InputError("the model fits the parallax: give a starting value (parallax=...).")
        values["parallax"] = parallax
    return np.array([values[name] for name in model.names])


def plane_state(model: ProjectedOrbitModel, vector: FloatArray, *, branch: float = 1.0) -> PlaneState:
    """The physical orbit of a parameter vector: the inverse of `sky_vector`.

    Parameters
    ----------
    branch : float
        +1 for the node in [0, pi), -1 for the node 180 deg on (what radial velocities decide).
    """
    vector = np.asarray(vector, dtype=float)
    exponent = float(vector[0])
    first = model.index(PROJECTION[0])
    matrix = vector[first:first + 4].reshape(2, 2)
    speed = vector[model.index("vx0"):model.index("vx0") + 2]
    sense = 1.0 if model.start_radius * speed[1] >= 0 else -1.0
    angles = orientation(matrix, sense)
    if branch < 0:
        angles = angles._replace(node=angles.node + math.pi, axis_angle=angles.axis_angle + math.pi,
                                 line_of_sight=-angles.line_of_sight)
    flip = np.diag([1.0, sense])
    turn = _rotation(angles.axis_angle) @ flip
    position = angles.scale * turn @ np.array([model.start_radius, 0.0])
    velocity = angles.scale * turn @ speed
    strength = float(model.strength(vector)) * angles.scale ** (1.0 - exponent)
    return PlaneState(exponent, strength, angles, position, velocity)
