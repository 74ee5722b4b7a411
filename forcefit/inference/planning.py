"""Planning an experiment: how precisely will a run fix the exponent, before filming it?

The forecast is the Cramer-Rao bound of the full-orbit fit: the inverse of the Fisher
information J^T J / sigma**2 of the orbit model at the planned law, launch and sampling.
The orbit estimator reaches this bound (benchmarks/orbit_fit.py), so the forecast is what
a run will give, if the law and the noise are as planned.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.optimize import brentq

from .._json import json_safe
from .._types import Row
from ..dynamics.orbit_model import OrbitModel
from ..dynamics.propagate import propagate_reference
from ..dynamics.simulate import simulate_orbit
from ..errors import InputError, NotIdentifiable

FREE = ("exponent", "log_force", "centre", "state")
"""What a fit would leave free, by default: the law, the centre and the launch."""


@dataclass(frozen=True)
class Forecast:
    """Predicted standard errors of a planned run's full-orbit fit.

    Attributes
    ----------
    standard_errors : dict
        Per fitted parameter (``exponent``, ``log_force``, ``centre_x``, ...).
    exponent_stderr : float
        Of n.
    strength_relative_stderr : float
        Of k, relative (from n and ln F(r_ref) and their correlation).
    n_points, duration, rate, noise : float
        The plan: samples, time span (T), samples per T, position noise (L).
    length_unit, time_unit : str
    """

    standard_errors: dict[str, float]
    exponent_stderr: float
    strength_relative_stderr: float
    n_points: int
    duration: float
    rate: float
    noise: float
    length_unit: str
    time_unit: str

    def rows(self) -> list[Row]:
        """The forecast standard errors as text, with units."""
        rows = [Row("exponent n", f"± {self.exponent_stderr:.3g}"),
                Row("strength k", f"± {100 * self.strength_relative_stderr:.3g}%")]
        for name in ("centre_x", "centre_y"):
            if name in self.standard_errors:
                rows.append(Row(name.replace("_", " "), f"± {self.standard_errors[name]:.3g}",
                                self.length_unit))
        return rows

    def to_text(self) -> str:
        """The forecast with units."""
        lines = [f"  plan: {self.n_points} samples over {self.duration:.6g} {self.time_unit} "
                 f"({self.rate:.6g} per {self.time_unit}), noise {self.noise:.3g} {self.length_unit}"]
        lines += [f"  {row.label:<17} {row.text}" for row in self.rows()]
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form."""
        return json_safe(vars(self))


def _model_at(exponent: float, strength: float, start: Sequence[float], velocity: Sequence[float],
              duration: float, rate: float) -> tuple[OrbitModel, np.ndarray]:
    track = simulate_orbit(exponent=exponent, strength=strength, start=start, velocity=velocity,
                           duration=duration, rate=rate)
    t = np.asarray(track.t)
    epoch = float(t[t.size // 2])
    states = propagate_reference(start, velocity, [epoch], exponent=exponent, strength=strength,
                                 epoch=0.0)
    radius = float(np.exp(np.mean(np.log(np.hypot(track.x, track.y)))))
    model = OrbitModel(tracks=(track,), epochs=(epoch,), reference_radius=radius)
    vector = np.array([exponent, math.log(strength * radius**exponent), 0.0, 0.0,
                       *states.position[0], *states.velocity[0]])
    return model, vector


def forecast_precision(
    *,
    exponent: float,
    strength: float,
    start: Sequence[float],
    velocity: Sequence[float],
    duration: float,
    rate: float,
    noise: float,
    free: Sequence[str] = FREE,
    length_unit: str = "m",
    time_unit: str = "s",
) -> Forecast:
    """Predicted standard errors of the full-orbit fit of a planned run.

    Parameters
    ----------
    exponent, strength : float
        The law expected (n; k in L**(1-n) T**-2).
    start, velocity : (float, float)
        The launch relative to the centre (L, L/T).
    duration, rate : float
        Time span (T) and samples per unit time (1/T).
    noise : float
        Position noise per coordinate (L).
    free : sequence of str
        What the fit will leave free: "exponent", "log_force", "centre", "state".
    length_unit, time_unit : str
        For the printed forecast.

    Returns
    -------
    Forecast

    Examples
    --------
    >>> f = forecast_precision(exponent=1.0, strength=4.0, start=(0.3, 0.0), velocity=(0.0, 0.2),
    ...                        duration=30.0, rate=30.0, noise=0.001)
    >>> 1e-5 < f.exponent_stderr < 1e-2
    True
    """
    if noise <= 0 or duration <= 0 or rate <= 0:
        raise InputError("noise, duration and rate must be positive.")
    model, vector = _model_at(exponent, strength, start, velocity, duration, rate)
    groups = {"exponent": ["exponent"], "log_force": ["log_force"], "centre": ["centre_x", "centre_y"],
              "state": ["x0", "y0", "vx0", "vy0"]}
    unknown = set(free) - set(groups)
    if unknown:
        raise InputError(f"unknown free parameters {sorted(unknown)}; choose from {list(groups)}.")
    names = [name for group in free for name in groups[group]]
    columns = [model.index(name) for name in names]
    size = math.hypot(*start)
    speed = math.hypot(*velocity)
    scale = {"exponent": 1.0, "log_force": 1.0}
    steps = np.array([1e-6 * max(abs(v), scale.get(n, speed if n.startswith("v") else size))
                      for n, v in zip(model.names, vector)])
    jacobian = model.jacobian(vector, steps, columns) / noise
    if not np.all(np.isfinite(jacobian)):
        raise NotIdentifiable("the planned orbit cannot be integrated (it falls into the centre?).")
    fisher = jacobian.T @ jacobian
    try:
        covariance = np.linalg.inv(fisher)
    except np.linalg.LinAlgError:
        raise NotIdentifiable("the planned run cannot determine these parameters together (a "
                              "circular orbit, say); launch off-circular.") from None
    errors = dict(zip(names, np.sqrt(np.diag(covariance))))
    n_error = errors.get("exponent", 0.0)
    log_r = math.log(model.reference_radius)
    strength_var = errors.get("log_force", 0.0) ** 2 + log_r**2 * n_error**2
    if "exponent" in names and "log_force" in names:
        strength_var -= 2 * log_r * covariance[names.index("exponent"), names.index("log_force")]
    track = model.tracks[0]
    return Forecast(standard_errors={k: float(v) for k, v in errors.items()},
                    exponent_stderr=float(n_error), strength_relative_stderr=math.sqrt(max(strength_var, 0)),
                    n_points=track.n_points, duration=float(duration), rate=float(rate), noise=float(noise),
                    length_unit=length_unit, time_unit=time_unit)


def pendulum_law(
    length: float, semi_axes: Sequence[float], gravity: float = 9.81
) -> dict[str, float | tuple[float, float]]:
    """The law and launch of a long pendulum tracing an ellipse with ``semi_axes`` (a, b) (m):
    n = 1, k = g / L, from (a, 0) with velocity (0, b omega), omega = sqrt(g / L) (the small-angle
    pendulum, common practice). The keywords `forecast_precision` takes for them.

    Examples
    --------
    >>> pendulum_law(2.4525, (0.2, 0.1))["velocity"]
    (0.0, 0.2)
    """
    omega = math.sqrt(gravity / length)
    a, b = semi_axes
    return {"exponent": 1.0, "strength": omega**2, "start": (a, 0.0), "velocity": (0.0, b * omega)}


def required_duration(
    target: float,
    *,
    exponent: float,
    strength: float,
    start: Sequence[float],
    velocity: Sequence[float],
    rate: float,
    noise: float,
    free: Sequence[str] = FREE,
    length_unit: str = "m",
    time_unit: str = "s",
    longest: float = 1e4,
) -> float:
    """Shortest duration (T) whose forecast exponent error is ``target``; the plan as in
    `forecast_precision` (without ``duration``), searched up to ``longest``."""
    def gap(log_duration: float) -> float:
        forecast = forecast_precision(exponent=exponent, strength=strength, start=start, velocity=velocity,
                                      duration=math.exp(log_duration), rate=rate, noise=noise, free=free,
                                      length_unit=length_unit, time_unit=time_unit)
        return math.log(forecast.exponent_stderr / target)

    period = 2 * math.pi / math.sqrt(strength)
    low = math.log(0.5 * period)
    if gap(low) < 0:
        return math.exp(low)
    high = min(low + math.log(2.0), math.log(longest))
    while gap(high) > 0:          # double until the target is passed: a forecast costs as
        if high >= math.log(longest):   # many samples as it spans, so never try the longest first
            raise NotIdentifiable(f"even {longest:g} time units would not reach ± {target:g} in n.")
        low, high = high, min(high + math.log(2.0), math.log(longest))
    return math.exp(brentq(gap, low, high, xtol=1e-3))


def required_rate(
    target: float,
    *,
    exponent: float,
    strength: float,
    start: Sequence[float],
    velocity: Sequence[float],
    duration: float,
    rate: float,
    noise: float,
    free: Sequence[str] = FREE,
    length_unit: str = "m",
    time_unit: str = "s",
) -> float:
    """Sampling rate (1/T) whose forecast exponent error is ``target`` at the planned duration;
    ``rate`` is the planned one, the plan otherwise as in `forecast_precision`.

    The Fisher information grows in proportion to the number of samples, so the error
    falls as rate**-1/2 once the orbit is resolved; one forecast fixes the constant.
    """
    forecast = forecast_precision(exponent=exponent, strength=strength, start=start, velocity=velocity,
                                  duration=duration, rate=rate, noise=noise, free=free,
                                  length_unit=length_unit, time_unit=time_unit)
    return rate * (forecast.exponent_stderr / target) ** 2
