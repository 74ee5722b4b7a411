"""Known forces besides the power law: what is already explained, so that a fitted exponent
measures only the deviation beyond it.

- `Relativity`: the first post-Newtonian acceleration of a test body about a point mass
  (Schwarzschild field, harmonic gauge; IERS Conventions 2010, IERS Technical Note 36,
  ch. 10, eq. 10.12, its first term).
- `Yukawa`: a Yukawa term beside the power law, F = -k r**n [1 + alpha (1 + r/lambda) e**(-r/lambda)],
  the force of the potential -(k/r)(1 + alpha e**(-r/lambda)) for n = -2 (E. G. Adelberger,
  B. R. Heckel & A. E. Nelson 2003, Annu. Rev. Nucl. Part. Sci. 53, 77, eq. 2). The range
  lambda is given; alpha is fitted.
- `Perturber`: a third body of known positions and GM: the direct pull and the indirect term
  (the central body is pulled too), -GM_p [(r - r_p)/|r - r_p|**3 + r_p/|r_p|**3]
  (C. D. Murray & S. F. Dermott 1999, Solar System Dynamics, eq. 6.8). It holds the tidal
  and the constant parts of the perturbation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from .._types import FloatArray
from ..errors import InputError
from ..track import Track


def _positive(value: float, name: str) -> float:
    if not (math.isfinite(value) and value > 0):
        raise InputError(f"{name} {value!r} must be a positive number.")
    return float(value)


@dataclass(frozen=True)
class Relativity:
    """The first post-Newtonian acceleration of a body about a point mass.

    a = GM / (c**2 r**3) [(4 GM / r - v**2) r + 4 (r . v) v]

    Parameters
    ----------
    gm : float
        GM of the central body, L**3 T**-2 (e.g. 2.959122082855911e-4 au**3/d**2 for the Sun).
    speed_of_light : float
        c in L/T (e.g. 173.1446326846693 au/d).

    Examples
    --------
    On a circular orbit (v**2 = GM/r) it is 3 (GM)**2 / (c**2 r**3), outwards:

    >>> gm, c, r = 2.959122082855911e-4, 173.1446326846693, 0.387
    >>> term = Relativity(gm=gm, speed_of_light=c)
    >>> a = term.acceleration(np.array([r, 0.0]), np.array([0.0, (gm / r) ** 0.5]))
    >>> round(float(a[0] / (3 * gm**2 / (c**2 * r**3))), 12)
    1.0
    """

    gm: float
    speed_of_light: float

    def __post_init__(self) -> None:
        object.__setattr__(self, "gm", _positive(self.gm, "the central body's GM"))
        object.__setattr__(self, "speed_of_light", _positive(self.speed_of_light, "the speed of light"))

    def acceleration(self, position: FloatArray, velocity: FloatArray) -> FloatArray:
        """The acceleration (L T**-2) for positions and velocities of shape (..., 2)."""
        r = np.hypot(position[..., 0], position[..., 1])[..., None]
        v2 = np.sum(velocity**2, axis=-1)[..., None]
        along = np.sum(position * velocity, axis=-1)[..., None]
        scale = self.gm / (self.speed_of_light**2 * r**3)
        return scale * ((4.0 * self.gm / r - v2) * position + 4.0 * along * velocity)


@dataclass(frozen=True)
class Yukawa:
    """A Yukawa term of range ``length`` (L) beside the power law, of strength ``alpha``
    (dimensionless; fitted by the orbit fit, used as given by simulations)."""

    length: float
    alpha: float = 0.0

    def __post_init__(self) -> None:
        object.__setattr__(self, "length", _positive(self.length, "the Yukawa range"))
        if not math.isfinite(self.alpha):
            raise InputError(f"the Yukawa strength {self.alpha!r} must be a finite number.")

    def factor(self, radius: FloatArray, alpha: float | None = None) -> FloatArray:
        """1 + alpha (1 + r/lambda) e**(-r/lambda): what the power law's force is multiplied by."""
        scaled = np.asarray(radius) / self.length
        return 1.0 + (self.alpha if alpha is None else alpha) * (1.0 + scaled) * np.exp(-scaled)


@dataclass(frozen=True, eq=False)
class Perturber:
    """A third body whose positions (relative to the central body, in the tracks' coordinates
    and units) and GM are known.

    Parameters
    ----------
    times : array_like, shape (m,)
        Increasing times (T); at least 4, covering the data (interpolated in between by
        4-point Lagrange polynomials).
    positions : array_like, shape (m, 2)
        Positions (L) in the same coordinates as the tracks fitted.
    gm : float
        GM of the perturbing body, L**3 T**-2.
    name : str
        For messages.
    """

    times: FloatArray
    positions: FloatArray
    gm: float
    name: str = "perturber"

    def __post_init__(self) -> None:
        times = np.array(self.times, dtype=np.float64)          # copies: the caller's arrays keep
        positions = np.array(self.positions, dtype=np.float64)  # their flags and their values
        if times.ndim != 1 or times.size < 4 or positions.shape != (times.size, 2):
            raise InputError(f"{self.name}: a perturbing body needs at least 4 timed positions (t, x, y); "
                             f"got {times.size}.")
        if not (np.all(np.isfinite(times)) and np.all(np.isfinite(positions)) and np.all(np.diff(times) > 0)):
            raise InputError(f"{self.name}: the perturbing body's times must increase and its positions be "
                             "finite numbers.")
        object.__setattr__(self, "gm", _positive(self.gm, f"{self.name}: the perturbing body's GM"))
        times.setflags(write=False)
        positions.setflags(write=False)
        object.__setattr__(self, "times", times)
        object.__setattr__(self, "positions", positions)

    @classmethod
    def from_track(cls, track: Track, *, gm: float) -> Perturber:
        """A perturber from a timestamped track of its positions."""
        if track.t is None:
            raise InputError(f"{track.label}: a perturbing body's track needs a time column.")
        return cls(times=np.asarray(track.t), positions=track.positions, gm=gm, name=track.label)

    def covers(self, times: ArrayLike) -> bool:
        """Whether the table spans ``times``."""
        times = np.asarray(times)
        return bool(self.times[0] <= times.min() and times.max() <= self.times[-1])

    def position_at(self, t: ArrayLike) -> FloatArray:
        """Positions (L) at times ``t`` by the same 4-point Lagrange interpolation as the
        compiled propagator; shape (..., 2)."""
        t = np.asarray(t, dtype=np.float64)
        index = np.clip(np.searchsorted(self.times, t) - 2, 0, self.times.size - 4)
        window = index[..., None] + np.arange(4)
        nodes = self.times[window]
        weights = np.ones(nodes.shape)
        for a in range(4):
            for b in range(4):
                if a != b:
                    weights[..., a] *= (t - nodes[..., b]) / (nodes[..., a] - nodes[..., b])
        return np.einsum("...a,...ac->...c", weights, self.positions[window])

    def acceleration(self, position: FloatArray, t: ArrayLike,
                     centre: tuple[float, float] = (0.0, 0.0)) -> FloatArray:
        """Direct and indirect pull (L T**-2) on a body at ``position`` (relative to the centre,
        which sits at ``centre`` in the tracks' coordinates) at times ``t``."""
        towards = self.position_at(t) - np.asarray(centre)
        offset = position - towards
        distance = np.hypot(offset[..., 0], offset[..., 1])[..., None]
        reach = np.hypot(towards[..., 0], towards[..., 1])[..., None]
        return -self.gm * (offset / distance**3 + towards / reach**3)


@dataclass(frozen=True)
class ExtraForces:
    """The known forces to add to the power law (any of them may be absent)."""

    relativity: Relativity | None = None
    yukawa: Yukawa | None = None
    perturber: Perturber | None = None

    @property
    def empty(self) -> bool:
        """True when no extra force is asked for."""
        return self.relativity is None and self.yukawa is None and self.perturber is None

    def describe(self) -> str:
        """One line for reports: which forces were added."""
        parts = []
        if self.relativity is not None:
            term = self.relativity
            parts.append(f"first post-Newtonian term (GM {term.gm:.10g}, c {term.speed_of_light:.10g})")
        if self.yukawa is not None:
            parts.append(f"Yukawa term of range {self.yukawa.length:.6g}")
        if self.perturber is not None:
            parts.append(f"{self.perturber.name} (GM {self.perturber.gm:.6g})")
        return "; ".join(parts) if parts else "none"

    def acceleration(self, position: FloatArray, velocity: FloatArray, t: ArrayLike, *, exponent: float,
                     strength: float, centre: tuple[float, float] = (0.0, 0.0)) -> FloatArray:
        """The extra acceleration (L T**-2) beside -k r**n r_hat, for the reference integrator."""
        total = np.zeros(np.shape(position))
        if self.yukawa is not None:
            r = np.hypot(position[..., 0], position[..., 1])[..., None]
            total += -strength * r ** (exponent - 1.0) * position * (self.yukawa.factor(r) - 1.0)
        if self.relativity is not None:
            total += self.relativity.acceleration(position, velocity)
        if self.perturber is not None:
            total += self.perturber.acceleration(position, t, centre)
        return total
