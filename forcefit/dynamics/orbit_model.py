"""The full-orbit model: parameters → predicted positions of one or several tracks.

Parameters (one flat vector, names in `OrbitModel.names`):

``exponent``            n
``log_force``           ln F(r_ref), F = k r**n at the reference radius (decorrelates n, k)
``drag``                c1 (1/T, linear) or c2 (1/L, quadratic), when drag is modelled
``rotation_rate``       Omega (rad/T) of the observer's frame, when fitted
``yukawa_strength``     alpha of a Yukawa term of given range, when one is modelled
``centre_x``, ...       the force centre (one shared, or ``centre_x_j`` per track)
``x0_j``, ``y0_j``, ``vx0_j``, ``vy0_j``   track j's state relative to the centre at its epoch,
                        in the non-rotating frame that coincides with the observer's at the epoch

Observed positions are centre + R(-Omega (t - epoch)) r(t): a frame turning
counter-clockwise at Omega (a laboratory on the rotating Earth, seen from above in the
northern hemisphere: Omega = Omega_E sin(latitude)) sees the inertial motion turn back.
Known extra forces (`forcefit.dynamics.forces`: the first post-Newtonian term, a Yukawa
term, a perturbing body) are added to the power law when ``extra`` holds them.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .._types import FloatArray
from ..track import Track
from .forces import ExtraForces
from .propagate import BATCH_RTOL, propagate_batch

DragKind = str | None


@dataclass(frozen=True)
class OrbitModel:
    """Maps parameter vectors to predicted positions for a set of tracks.

    ``rtol``, ``dense`` and ``parallel`` are passed to `propagate_batch`: the fits step onto
    every sample; the sampler reads the samples off the continuous extension, on every core.
    """

    tracks: tuple[Track, ...]
    epochs: tuple[float, ...]
    reference_radius: float
    drag: DragKind = None
    fit_rotation: bool = False
    rotation_rate: float = 0.0
    shared_centre: bool = True
    rtol: float = BATCH_RTOL
    extra: ExtraForces | None = None
    dense: bool = False
    parallel: bool = False

    @property
    def names(self) -> tuple[str, ...]:
        """Parameter names in vector order."""
        names = ["exponent", "log_force"]
        if self.drag is not None:
            names.append("drag")
        if self.fit_rotation:
            names.append("rotation_rate")
        if self.extra is not None and self.extra.yukawa is not None:
            names.append("yukawa_strength")
        multi = len(self.tracks) > 1
        if self.shared_centre:
            names += ["centre_x", "centre_y"]
        for j in range(len(self.tracks)):
            suffix = f"_{j}" if multi else ""
            if not self.shared_centre:
                names += [f"centre_x{suffix}", f"centre_y{suffix}"]
            names += [f"x0{suffix}", f"y0{suffix}", f"vx0{suffix}", f"vy0{suffix}"]
        return tuple(names)

    def index(self, name: str) -> int:
        """Position of a parameter in the vector."""
        return self.names.index(name)

    def strength(self, vector: FloatArray) -> FloatArray:
        """k = F(r_ref) r_ref**-n for parameter vectors of shape (..., n_params)."""
        return np.exp(vector[..., 1] - vector[..., 0] * math.log(self.reference_radius))

    def track_columns(self, j: int) -> tuple[int, int, int]:
        """Indices of track j's centre x and state x0 in the vector."""
        multi = len(self.tracks) > 1
        suffix = f"_{j}" if multi else ""
        centre = self.index(f"centre_x{suffix}" if not self.shared_centre else "centre_x")
        return centre, centre + 1, self.index(f"x0{suffix}")

    def predict(self, vectors: FloatArray) -> tuple[list[FloatArray], np.ndarray]:
        """Predicted positions, per track of shape (n_sets, n_points, 2), and which sets succeeded.

        Parameters
        ----------
        vectors : ndarray, shape (n_sets, n_params)
        """
        vectors = np.atleast_2d(vectors)
        exponent, strength = vectors[:, 0], self.strength(vectors)
        drag = vectors[:, self.index("drag")] if self.drag is not None else np.zeros(len(vectors))
        rate = (vectors[:, self.index("rotation_rate")] if self.fit_rotation
                else np.full(len(vectors), self.rotation_rate))
        alpha = (vectors[:, self.index("yukawa_strength")] if "yukawa_strength" in self.names
                 else np.zeros(len(vectors)))
        ok = np.ones(len(vectors), dtype=bool)
        predictions = []
        for j, (track, epoch) in enumerate(zip(self.tracks, self.epochs)):
            cx, cy, state = self.track_columns(j)
            batch = propagate_batch(
                np.asarray(track.t), vectors[:, state:state + 2], vectors[:, state + 2:state + 4],
                exponent=exponent, strength=strength, epoch=epoch,
                linear_drag=drag if self.drag == "linear" else 0.0,
                quadratic_drag=drag if self.drag == "quadratic" else 0.0, rtol=self.rtol,
                extra=self.extra, yukawa_alpha=alpha, centre=vectors[:, cx:cy + 1],
                dense=self.dense, parallel=self.parallel,
            )
            ok &= batch.ok
            position = batch.position
            if self.fit_rotation or self.rotation_rate != 0.0:
                angle = -rate[:, None] * (np.asarray(track.t)[None, :] - epoch)
                cos, sin = np.cos(angle), np.sin(angle)
                position = np.stack((cos * position[..., 0] - sin * position[..., 1],
                                     sin * position[..., 0] + cos * position[..., 1]), axis=-1)
            centre = np.stack((vectors[:, cx], vectors[:, cy]), axis=-1)[:, None, :]
            predictions.append(position + centre)
        return predictions, ok


    def jacobian(self, vector: FloatArray, steps: FloatArray, columns: Sequence[int]) -> FloatArray:
        """d(predicted positions)/d(parameter) for the given parameter columns, by central
        differences in one batch; shape (2 n_total, len(columns)), nan where an orbit failed."""
        columns = list(columns)
        sets = np.repeat(vector[None, :], 2 * len(columns), axis=0)
        for k, i in enumerate(columns):
            sets[2 * k, i] += steps[i]
            sets[2 * k + 1, i] -= steps[i]
        predictions, ok = self.predict(sets)
        stacked = np.concatenate(predictions, axis=1)
        stacked[~ok] = np.nan
        difference = (stacked[0::2] - stacked[1::2]) / (2 * np.asarray(steps)[columns])[:, None, None]
        return difference.reshape(len(columns), -1).T


def observed(tracks: Sequence[Track]) -> FloatArray:
    """All tracks' positions stacked, shape (n_total, 2)."""
    return np.concatenate([track.positions for track in tracks])
