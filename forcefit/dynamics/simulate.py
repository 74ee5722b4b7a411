"""Synthetic tracks with known truth, for tests, demos and planning experiments."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np
from numpy.typing import ArrayLike
from scipy.integrate import solve_ivp

from .._types import FloatArray
from ..astrometry import Astrometry, RadialVelocities, polar_covariance
from ..errors import InputError
from ..track import Track
from ..units import is_sky_angle, velocity_scale
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
        "noise": float(np.max(noise)), "units": {"length": length_unit, "time": time_unit}, **record,
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

    wx, wy, wz = omega

    def derivative(_: float, state: FloatArray) -> FloatArray:
        r, v = state[:3], state[3:]
        # -2 omega x v, written out (np.cross costs most of this function's time)
        coriolis = -2.0 * np.array([wy * v[2] - wz * v[1], wz * v[0] - wx * v[2], wx * v[1] - wy * v[0]])
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
        "centre": [0.0, 0.0], "noise": float(noise), "units": {"length": "m", "time": "s"}, **record,
    }
    return Track(
        t=samples["t"], x=samples["x"], y=samples["y"], sigma=samples["sigma"],
        length_unit="m", time_unit="s", name=name, metadata={"truth": truth},
    )


def _sky_epochs(count: int, duration: float, uneven: bool, rng: np.random.Generator) -> FloatArray:
    """Epochs over ``duration``: evenly spaced, or at random times (a Poisson process, as nights
    with good seeing come), the first and last at the ends."""
    if count < 3:
        raise InputError(f"{count} epochs are too few; simulate at least 3.")
    if not uneven:
        return np.linspace(0.0, duration, count)
    inner = np.sort(rng.uniform(0.0, duration, count - 2))
    return np.concatenate(([0.0], inner, [duration]))


def simulate_projected(
    *,
    exponent: float,
    strength: float = 1.0,
    start: Sequence[float] = (1.0, 0.0),
    velocity: Sequence[float] | None = None,
    inclination: float = 60.0,
    node: float = 30.0,
    duration: float | None = None,
    count: int = 80,
    uneven: bool = True,
    noise: float = 0.0,
    separation_error: float | None = None,
    angle_error: float | None = None,
    velocities: int = 0,
    velocity_error: float = 0.0,
    parallax: float = 1.0,
    velocity_unit: str = "km/s",
    centre: Sequence[float] = (0.0, 0.0),
    length_unit: str = "arcsec",
    time_unit: str = "yr",
    name: str = "simulated",
    rng: np.random.Generator | int | None = None,
) -> Astrometry:
    """Positions on the sky of a body in F = -k r**n r_hat, its orbit inclined, observed with noise.

    The orbit is integrated in its own plane by the reference integrator, turned by its
    inclination and node and projected: x = north, y = east (`forcefit.astrometry`), with the
    line-of-sight coordinate z = sin(i) Y positive away from the observer.

    Parameters
    ----------
    exponent, strength : float
        n and the true k (length_unit**(1-n) time_unit**-2).
    start, velocity : (float, float)
        The state at t = 0 in the node frame: first axis towards the ascending node, second 90
        deg ahead in the direction of motion (L, L/T). Default velocity: 0.8 times the circular
        speed, along the second axis.
    inclination, node : float
        i in degrees (below 90: direct, the position angle increases) and the position angle
        of the ascending node in degrees (north through east).
    duration : float, optional
        Time span; default three circular periods at ``|start|``.
    count : int
        Number of epochs.
    uneven : bool
        Scattered epochs (random gaps, some long) instead of even ones.
    noise : float
        Standard deviation of the position noise per coordinate (L).
    separation_error, angle_error : float, optional
        Instead of ``noise``: errors of the separation (L) and of the position angle (deg),
        drawn along and across the radius.
    velocities : int
        Number of radial velocities, at epochs drawn like the positions'.
    velocity_error : float
        Their noise, in ``velocity_unit``.
    parallax : float
        The parallax in ``length_unit`` when that is an angle on the sky: it sets the radial
        velocities' scale (one au at the parallax).
    centre : (float, float)
        The force centre on the sky (the origin: positions relative to the primary).
    rng : Generator or int, optional
        Source of randomness (or its seed).

    Returns
    -------
    Astrometry
        With ``metadata["truth"]`` holding every true value.

    Examples
    --------
    >>> data = simulate_projected(exponent=-2.0, inclination=0.0, node=0.0, count=20, uneven=False)
    >>> bool(np.allclose(data.separation[0], 1.0)), data.track.length_unit
    (True, 'arcsec')
    """
    generator = np.random.default_rng(rng)
    position = np.asarray(start, dtype=np.float64)
    r0 = float(np.hypot(*position))
    if not (math.isfinite(strength) and strength > 0 and r0 > 0):
        raise InputError("the strength must be positive and the start away from the centre.")
    if velocity is None:
        speed = 0.8 * float(circular_speed(r0, exponent, strength))
        velocity = tuple(speed * np.array([-position[1], position[0]])
                         / r0)
    motion = np.asarray(velocity, dtype=np.float64)
    if position[0] * motion[1] - position[1] * motion[0] <= 0:
        raise InputError("the velocity must turn from the node axis towards the second axis (positive "
                         "angular momentum in the node frame); set the sense with the inclination "
                         "(above 90 deg: retrograde).")
    if not 0.0 <= inclination <= 180.0:
        raise InputError(f"inclination {inclination!r} must lie between 0 and 180 degrees.")
    duration = 3.0 * float(circular_period(r0, exponent, strength)) if duration is None else float(duration)
    t = _sky_epochs(count, duration, uneven, generator)
    t_rv = _sky_epochs(velocities, duration, uneven, generator) if velocities else np.empty(0)
    times = np.unique(np.concatenate((t, t_rv)))
    states = propagate_reference(position, motion, times, exponent=exponent, strength=strength)
    incl, turn = math.radians(inclination), math.radians(node)
    rotate = np.array([[math.cos(turn), -math.sin(turn)], [math.sin(turn), math.cos(turn)]])
    sky = states.position @ np.diag([1.0, math.cos(incl)]) @ rotate.T + np.asarray(centre, dtype=float)
    keep = np.searchsorted(times, t)
    x, y = sky[keep, 0].copy(), sky[keep, 1].copy()
    covariance = None
    if separation_error is not None or angle_error is not None:
        rho, theta = np.hypot(x, y), np.arctan2(y, x)
        covariance = polar_covariance(rho, theta, np.full(t.size, separation_error or 0.0),
                                      np.radians(np.full(t.size, angle_error or 0.0)))
        draws = np.einsum("nij,nj->ni", np.linalg.cholesky(covariance + 1e-300 * np.eye(2)),
                          generator.standard_normal((t.size, 2)))
        x, y = x + draws[:, 0], y + draws[:, 1]
    elif noise > 0:
        x, y = x + noise * generator.standard_normal(t.size), y + noise * generator.standard_normal(t.size)
    known = noise > 0 and covariance is None
    track = Track(t=t, x=x, y=y, sigma=np.full(t.size, noise) if known else None,
                  length_unit=length_unit, time_unit=time_unit, name=name)
    radial = None
    if velocities:
        depth_rate = math.sin(incl) * states.velocity[np.searchsorted(times, t_rv), 1]
        scale = velocity_scale(track.length_unit, track.time_unit, velocity_unit)
        rv = scale * depth_rate / (parallax if is_sky_angle(track.length_unit) else 1.0)
        rv = rv + velocity_error * generator.standard_normal(t_rv.size)
        floor = max(velocity_error, 1e-12 * float(np.ptp(rv)))
        radial = RadialVelocities(t=t_rv, velocity=rv, sigma=np.full(t_rv.size, floor),
                                  unit=velocity_unit)
    truth = {"exponent": float(exponent), "strength": float(strength), "inclination": float(inclination),
             "node": float(node), "start": position.tolist(), "velocity": motion.tolist(),
             "centre": [float(c) for c in centre], "parallax": float(parallax), "noise": float(noise)}
    return Astrometry(track=track, covariance=covariance, velocities=radial,
                      relative=tuple(centre) == (0.0, 0.0), metadata={"truth": truth})

