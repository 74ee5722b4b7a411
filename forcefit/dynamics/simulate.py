"""Synthetic tracks with known truth, for tests, demos and planning experiments."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np
from numpy.typing import ArrayLike
from scipy.integrate import solve_ivp

from .._types import FloatArray
from ..errors import InputError
from ..track import Track
from .laws import EARTH_ROTATION_RATE, circular_period, circular_speed
from .propagate import REFERENCE_RTOL, Drag, propagate_reference


def _observe(
    t: FloatArray, x: FloatArray, y: FloatArray, *, noise: float | ArrayLike, dropped: float,
    outliers: float, outlier_size: float, rng: np.random.Generator,
) -> tuple[dict[str, Any], dict[str, Any]]:
    """Add noise, drop frames and plant gross outliers; return the samples and a record."""
    n = t.size
    sigma = np.broadcast_to(np.asarray(noise, dtype=np.float64), (n,)).copy()
    if (sigma < 0).any() or not np.isfinite(sigma).all():
        raise InputError("noise must be zero or a positive standard deviation.")
    if not (0.0 <= dropped < 1.0 and 0.0 <= outliers < 1.0):
        raise InputError("the dropped and outlier fractions must lie in [0, 1).")
    x = x + sigma * rng.standard_normal(n)
    y = y + sigma * rng.standard_normal(n)
    size = float(max(np.ptp(x), np.ptp(y)))
    n_outliers = int(round(outliers * n))
    planted = np.sort(rng.choice(n, size=n_outliers, replace=False)) if n_outliers else np.array([], int)
    if n_outliers:
        jump = outlier_size * np.where(sigma[planted] > 0, sigma[planted], 1e-2 * size)
        angle = rng.uniform(0.0, 2.0 * np.pi, n_outliers)
        x[planted] += jump * np.cos(angle)
        y[planted] += jump * np.sin(angle)
    n_dropped = int(round(dropped * n))
    keep = np.ones(n, dtype=bool)
    if n_dropped:
        keep[rng.choice(np.arange(1, n - 1), size=n_dropped, replace=False)] = False
    new_index = np.cumsum(keep) - 1
    planted_kept = planted[keep[planted]]
    samples = {
        "t": t[keep], "x": x[keep], "y": y[keep],
        "sigma": sigma[keep] if (sigma > 0).any() else None,
    }
    record = {
        "dropped_frames": n_dropped,
        "outlier_indices": new_index[planted_kept].tolist(),
    }
    return samples, record


def simulate_orbit(
    *,
    exponent: float,
    strength: float = 1.0,
    start: Sequence[float] = (1.0, 0.0),
    velocity: Sequence[float] | None = None,
    duration: float | None = None,
    rate: float | None = None,
    noise: float | ArrayLike = 0.0,
    drag: Drag | None = None,
    centre: Sequence[float] = (0.0, 0.0),
    dropped: float = 0.0,
    outliers: float = 0.0,
    outlier_size: float = 40.0,
    shape_only: bool = False,
    length_unit: str = "m",
    time_unit: str = "s",
    name: str = "simulated",
    rng: np.random.Generator | int | None = None,
) -> Track:
    """A track of a body in F = -k r**n r_hat, observed with noise.

    Parameters
    ----------
    exponent, strength : float
        n and k (k in length_unit**(1-n) time_unit**-2).
    start : (float, float)
        Position relative to the centre at t = 0, in ``length_unit``.
    velocity : (float, float), optional
        Velocity at t = 0; default perpendicular to ``start`` (counter-clockwise) at
        0.8 times the circular speed, which gives a rosette.
    duration : float, optional
        Time span; default three periods of the circular orbit at ``|start|``.
    rate : float, optional
        Samples per time unit; default 200 per circular period.
    noise : float or array_like
        Standard deviation of the Gaussian position noise per coordinate (per point
        when an array), in ``length_unit``; recorded as the track's sigma.
    drag : Drag, optional
        Linear or quadratic drag.
    centre : (float, float)
        Where the force centre sits in the output coordinates.
    dropped, outliers : float
        Fractions of samples removed (dropped frames) and displaced by
        ``outlier_size`` times the noise (tracking glitches).
    shape_only : bool
        Drop the timestamps.
    rng : Generator or int, optional
        Source of randomness (or its seed).

    Returns
    -------
    Track
        With ``metadata["truth"]`` holding every true value used.

    Examples
    --------
    >>> track = simulate_orbit(exponent=1.0, strength=4.0, duration=3.0, rate=100.0)
    >>> track.n_points, track.metadata["truth"]["exponent"]
    (301, 1.0)
    """
    generator = np.random.default_rng(rng)
    start_vector = np.asarray(start, dtype=np.float64)
    r0 = float(np.hypot(*start_vector))
    if not (math.isfinite(strength) and strength > 0):
        raise InputError(f"strength {strength!r} must be positive (an attractive force).")
    if velocity is None:
        tangent = np.array([-start_vector[1], start_vector[0]]) / r0
        velocity = tuple(0.8 * float(circular_speed(r0, exponent, strength)) * tangent)
    period = float(circular_period(r0, exponent, strength))
    duration = 3.0 * period if duration is None else float(duration)
    rate = 200.0 / period if rate is None else float(rate)
    if duration <= 0 or rate <= 0:
        raise InputError("duration and rate must be positive.")
    n_points = int(math.floor(duration * rate + 1e-9)) + 1
    t = np.arange(n_points) / rate
    states = propagate_reference(
        start_vector, velocity, t, exponent=exponent, strength=strength, drag=drag
    )
    x = states.position[:, 0] + centre[0]
    y = states.position[:, 1] + centre[1]
    samples, record = _observe(
        t, x, y, noise=noise, dropped=dropped, outliers=outliers, outlier_size=outlier_size,
        rng=generator,
    )
    truth = {
        "exponent": float(exponent), "strength": float(strength),
        "start": [float(v) for v in start_vector], "velocity": [float(v) for v in velocity],
        "centre": [float(c) for c in centre],
        "drag": None if drag is None else {"kind": drag.kind, "coefficient": drag.coefficient},
        "noise": float(np.max(noise)), **record,
    }
    return Track(
        t=None if shape_only else samples["t"], x=samples["x"], y=samples["y"],
        sigma=samples["sigma"], length_unit=length_unit, time_unit=time_unit, name=name,
        metadata={"truth": truth},
    )


def spherical_pendulum_states(
    *,
    length: float,
    gravity: float,
    start: Sequence[float],
    velocity: Sequence[float],
    times: ArrayLike,
    latitude: float | None = None,
    damping: float = 0.0,
) -> FloatArray:
    """Exact motion of a spherical pendulum bob, as horizontal positions.

    Integrates the bob in 3-D on a rigid, massless rod (constraint force from
    d²|r|²/dt² = 0), with optional Coriolis force of the Earth's rotation for a
    frame fixed in the laboratory (x east, y north, z up) and linear air damping.

    Parameters
    ----------
    length : float
        Pivot to bob centre, m.
    gravity : float
        Local acceleration of gravity, m/s**2.
    start, velocity : (float, float)
        Horizontal position below the pivot (m) and horizontal velocity (m/s) at t = 0.
    times : array_like
        Increasing times, s, starting at 0.
    latitude : float, optional
        Geographic latitude in degrees; None for a non-rotating frame.
    damping : float
        Linear damping rate c in a = -c v, 1/s.

    Returns
    -------
    ndarray, shape (n_times, 2)
        Horizontal positions of the bob relative to the point below the pivot, m.
    """
    x0, y0 = map(float, start)
    rho2 = x0 * x0 + y0 * y0
    if rho2 >= length * length:
        raise InputError("the start must lie within one pendulum length of the pivot.")
    z0 = -math.sqrt(length * length - rho2)
    vx, vy = map(float, velocity)
    vz = -(x0 * vx + y0 * vy) / z0
    omega = np.zeros(3)
    if latitude is not None:
        phi = math.radians(latitude)
        omega = EARTH_ROTATION_RATE * np.array([0.0, math.cos(phi), math.sin(phi)])
    down = np.array([0.0, 0.0, -gravity])

    def derivative(_: float, state: FloatArray) -> FloatArray:
        r, v = state[:3], state[3:]
        coriolis = -2.0 * np.cross(omega, v)
        free = down + coriolis - damping * v
        tension = -(r @ free + v @ v) / (r @ r)
        return np.concatenate((v, free + tension * r))

    times = np.asarray(times, dtype=np.float64)
    scale = np.array([length] * 3 + [math.sqrt(gravity * length)] * 3)
    solution = solve_ivp(
        derivative, (0.0, float(times[-1])), np.array([x0, y0, z0, vx, vy, vz]),
        method="DOP853", t_eval=times, rtol=REFERENCE_RTOL, atol=REFERENCE_RTOL * scale,
    )
    return solution.y[:2].T.copy()


def simulate_pendulum(
    *,
    length: float,
    gravity: float = 9.81,
    start: Sequence[float],
    velocity: Sequence[float],
    duration: float,
    rate: float,
    latitude: float | None = None,
    damping: float = 0.0,
    noise: float = 0.0,
    dropped: float = 0.0,
    outliers: float = 0.0,
    outlier_size: float = 40.0,
    name: str = "pendulum",
    rng: np.random.Generator | int | None = None,
) -> Track:
    """A long pendulum filmed from straight above: the bob's horizontal path, in m and s.

    The projected motion is close to a Hooke orbit (n = 1, k = g/L) but not exactly:
    finite amplitude lowers the fitted exponent by about 1.1 (a/L)**2 and turns the
    ellipse (Airy precession), and the Earth's rotation turns it too when the camera
    is fixed to the laboratory. Parameters as in `spherical_pendulum_states` and
    `simulate_orbit`.

    Examples
    --------
    >>> track = simulate_pendulum(length=2.0, start=(0.1, 0.0), velocity=(0.0, 0.1),
    ...                           duration=4.0, rate=30.0, rng=1)
    >>> track.n_points, round(track.metadata["truth"]["strength"], 3)
    (121, 4.905)
    """
    generator = np.random.default_rng(rng)
    t = np.arange(int(math.floor(duration * rate + 1e-9)) + 1) / rate
    position = spherical_pendulum_states(
        length=length, gravity=gravity, start=start, velocity=velocity, times=t,
        latitude=latitude, damping=damping,
    )
    samples, record = _observe(
        t, position[:, 0], position[:, 1], noise=noise, dropped=dropped, outliers=outliers,
        outlier_size=outlier_size, rng=generator,
    )
    truth = {
        "exponent": 1.0, "strength": gravity / length, "pendulum_length": length,
        "gravity": gravity, "latitude": latitude, "damping": damping,
        "start": [float(v) for v in start], "velocity": [float(v) for v in velocity],
        "centre": [0.0, 0.0], "noise": float(noise), **record,
    }
    return Track(
        t=samples["t"], x=samples["x"], y=samples["y"], sigma=samples["sigma"],
        length_unit="m", time_unit="s", name=name, metadata={"truth": truth},
    )
