"""A pendulum is Hooke's law only for small swings: the finite-amplitude correction.

A bob on a rod of length L swings on a sphere; seen from above its path is close to an
orbit of F = -(g/L) r, but not exactly: the restoring force grows more slowly than r and
the ellipse turns (Airy's precession), so a power-law fit of a real swing gives
n ≈ 1 - 1.1 (a/L)**2 and a slightly low k (CHECKS.md §6, derived). Rather than a formula
for one shape of swing, the correction here is exact for any: an ideal spherical pendulum of
the same length, started in the fitted state, is integrated (`spherical_pendulum_states`,
the exact equations of motion) and fitted the same way; what that fit finds instead of
n = 1 and k = g/L is the finite-amplitude offset, taken off the measured values.

The ideal pendulum's g/L and starting state are those whose power-law fit reproduces the
data's (indirect inference: C. Gourieroux, A. Monfort & E. Renault 1993, J. Appl.
Econometrics 8, S85): started at the fitted omega^2 and state, refined by what its fit
misses until the miss is a fiftieth of the errors. Started at the fitted values alone, the
correction is first-order in the offset: at a/L = 0.15 it left g/L 12 standard errors high.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._json import json_safe
from .._types import Row
from ..dynamics.laws import EARTH_ROTATION_RATE
from ..dynamics.simulate import spherical_pendulum_states
from ..errors import FitError, InputError
from ..estimators.orbit import fit_orbit
from ..estimators.result import OrbitFit
from ..formatting import measurement
from ..track import Track
from ..units import PIXEL, length_factor, strength_unit, time_factor

MAX_ITERATIONS = 8
"""Most refinements of the ideal pendulum's g/L and state (two to four suffice up to a/L = 0.3)."""


@dataclass(frozen=True)
class PendulumCorrection:
    """A pendulum fit with its finite-amplitude offsets taken off.

    Attributes
    ----------
    length : float
        The pendulum's length, in the track's length unit.
    ideal_exponent : float
        What the same fit finds on an ideal spherical pendulum of this length and swing.
    ideal_strength_ratio : float
        That fit's omega**2 (k at n = 1, at the reference radius) over the true g/L.
    exponent, exponent_stderr : float
        The measured exponent less (ideal_exponent - 1).
    omega_squared, omega_squared_stderr : float
        g/L (T**-2): the measured k at n = 1 divided by ``ideal_strength_ratio``.
    gravity, gravity_stderr : float
        g = omega**2 L (L T**-2); the error includes the length's.
    length_unit, time_unit : str
    length_stderr : float
        The standard error of the length as given (0 when exact).
    """

    length: float
    ideal_exponent: float
    ideal_strength_ratio: float
    exponent: float
    exponent_stderr: float
    omega_squared: float
    omega_squared_stderr: float
    gravity: float
    gravity_stderr: float
    length_unit: str
    time_unit: str
    length_stderr: float = 0.0
    notes: tuple[str, ...] = ()

    def _si(self) -> tuple[float, float] | None:
        """Factors to metres and to seconds, or None when the units are not lengths and times."""
        try:
            return length_factor(self.length_unit, "m"), time_factor(self.time_unit, "s")
        except InputError:
            return None

    def rows(self) -> list[Row]:
        """The correction as rows with units (g/L in s^-2 and g in m/s^2 when the track's units
        convert, else in its own)."""
        si = self._si()
        per_time, per_g = (1.0, 1.0) if si is None else (1.0 / si[1] ** 2, si[0] / si[1] ** 2)
        omega_unit = strength_unit(self.length_unit, self.time_unit, 1.0) if si is None else "s^-2"
        g_unit = f"{self.length_unit} {self.time_unit}^-2" if si is None else "m/s^2"
        return [
            Row("ideal pendulum of this swing", f"n = {self.ideal_exponent:.6f}, "
                                                f"omega^2 x {self.ideal_strength_ratio:.6f}",
                "(what the fit finds on the exact motion)"),
            Row("exponent, finite amplitude removed",
                measurement(self.exponent, self.exponent_stderr)),
            Row("g / L", measurement(self.omega_squared * per_time, self.omega_squared_stderr * per_time),
                omega_unit),
            Row("g", measurement(self.gravity * per_g, self.gravity_stderr * per_g),
                f"{g_unit} (with L = "
                f"{measurement(self.length, self.length_stderr or None, self.length_unit)})"),
            *(Row("note", note) for note in self.notes),
        ]

    def to_text(self) -> str:
        """The rows as indented lines."""
        return "\n".join(f"  {row.label:<36} {row.text}" for row in self.rows())

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form."""
        return json_safe(dict(vars(self)))


def pendulum_correction(
    fit: OrbitFit, track: Track, *, length: float, length_stderr: float = 0.0
) -> PendulumCorrection:
    """Take a finite swing's offsets off an orbit fit of a pendulum bob's path.

    Parameters
    ----------
    fit : OrbitFit
        The orbit fit of ``track`` (one track, timestamped).
    track : Track
        The bob's positions, in a length unit (not pixels) and a time unit.
    length : float
        Pivot to bob centre, in the track's length unit.
    length_stderr : float
        Its standard error, same unit; added in quadrature to g's error (g = omega**2 L).

    Returns
    -------
    PendulumCorrection

    Examples
    --------
    >>> from forcefit.dynamics.simulate import simulate_pendulum
    >>> swing = simulate_pendulum(length=2.0, start=(0.1, 0.0), velocity=(0.0, 0.1), duration=20.0,
    ...                           rate=50.0, noise=2e-4, rng=1)
    >>> fit = fit_orbit(swing)
    >>> abs(fit.exponent - 1.0) > 5 * fit.exponent_stderr          # not Hooke's law at face value
    True
    >>> corrected = pendulum_correction(fit, swing, length=2.0)
    >>> abs(corrected.exponent - 1.0) < 3 * corrected.exponent_stderr
    True
    """
    if fit.n_tracks != 1 or track.t is None:
        raise InputError("the pendulum correction takes the orbit fit of one timestamped track.")
    if track.length_unit == PIXEL:
        raise InputError(f"{track.label}: the pendulum's finite-amplitude correction needs lengths, not "
                         "pixels; calibrate the track (a scale or two marks) first.")
    if not (math.isfinite(length) and length > 0):
        raise InputError(f"the pendulum length {length!r} must be a positive number.")
    omega2, omega2_se = fit.strength_at_exponent(1.0)
    t = np.asarray(track.t)
    _, _, first = fit.model.track_columns(0)
    measured = np.concatenate(([omega2], fit.vector[first:first + 4]))
    tolerance = _tolerance(omega2, omega2_se, fit.noise)
    ideal = measured.copy()
    model = fit
    for _ in range(MAX_ITERATIONS):
        swing = _ideal_swing(fit, t, length, ideal, track)
        synthetic = Track(t=t, x=swing[:, 0], y=swing[:, 1], length_unit=track.length_unit,
                          time_unit=track.time_unit, name=f"{track.name} (ideal pendulum)")
        # each ideal swing is close to the last fit's: start there (its own start search is
        # seconds on a noise-free swing, which no power law follows to its rounding)
        model = fit_orbit(synthetic, centre=(0.0, 0.0), start=model)
        found = np.concatenate(([model.strength_at_exponent(1.0)[0]], model.vector[first:first + 4]))
        miss = measured - found
        if np.all(np.abs(miss) <= tolerance):
            break
        ideal = ideal + miss
    else:
        raise FitError(
            f"{track.label}: no ideal pendulum of length {length:g} {track.length_unit} reproduces the "
            f"fitted swing (after {MAX_ITERATIONS} tries the power-law fit of the ideal swing still "
            f"misses the data's by {float(miss[0]):.3g} in omega^2); the swing is too wide for the "
            "correction, or the length is wrong. Check the length and its unit.")
    ratio = model.strength_at_exponent(1.0)[0] / ideal[0]
    exponent = fit.exponent - (model.exponent - 1.0)
    corrected, corrected_se = omega2 / ratio, omega2_se / ratio
    return PendulumCorrection(
        notes=_notes(fit, track, corrected * length, length),
        length=float(length), ideal_exponent=model.exponent, ideal_strength_ratio=ratio, exponent=exponent,
        exponent_stderr=fit.exponent_stderr, omega_squared=corrected, omega_squared_stderr=corrected_se,
        gravity=corrected * length, length_stderr=float(length_stderr),
        gravity_stderr=math.hypot(corrected_se * length, corrected * length_stderr),
        length_unit=track.length_unit, time_unit=track.time_unit)


def _notes(fit: OrbitFit, track: Track, gravity: float, length: float) -> tuple[str, ...]:
    """What the user may have got wrong: a g far from the Earth's (the time or length unit), an
    Earth's rotation left out that moves n beyond its errors, a mirrored picture in a turning lab."""
    notes: list[str] = []
    try:
        metre, second = length_factor(track.length_unit, "m"), time_factor(track.time_unit, "s")
    except InputError:
        return ()
    g = gravity * metre / second**2
    if not 2.0 < g < 50.0:
        return (
            f"g = {g:.3g} m/s^2 is far from the Earth's 9.8 m/s^2: check the time unit (ms "
            f"read as s?), the length unit and the scale ({track.time_unit} and "
            f"{track.length_unit} were used).",)
    omega = math.sqrt(max(gravity / length, 0.0))                 # rad per time unit
    turning = fit.model.fit_rotation or fit.model.rotation_rate != 0.0
    shift = 4.0 * EARTH_ROTATION_RATE * second / omega if omega > 0 else 0.0
    if not turning and shift > 0.5 * fit.exponent_stderr:
        notes.append(f"a camera fixed in the lab turns with the Earth (Omega_E sin(latitude)), which "
                     f"moves n by up to {shift:.2g} ({shift / fit.exponent_stderr:.2g} standard errors) "
                     "and g with it; give the latitude (--latitude) to take it out.")
    calibration = track.metadata.get("calibration")
    if turning and isinstance(calibration, dict) and not calibration.get("flip_y", True):
        notes.append("the positions are image pixels calibrated without flipping y: image rows count "
                     "downwards, so the picture is mirrored and the lab's rotation runs the wrong "
                     "way; give --flip-y if y pointed down in the video.")
    return tuple(notes)


def _tolerance(omega2: float, omega2_se: float, noise: float) -> np.ndarray:
    """How closely the ideal swing's power-law fit must match the data's: 2% of omega^2's
    standard error, 2% of the noise in position, and in velocity the same over a radian of
    the swing (noise * omega)."""
    omega = math.sqrt(max(omega2, 0.0))
    return np.array([0.02 * omega2_se, 0.02 * noise, 0.02 * noise, 0.02 * noise * omega,
                     0.02 * noise * omega])


def _ideal_swing(fit: OrbitFit, t: np.ndarray, length: float, ideal: np.ndarray,
                 track: Track) -> np.ndarray:
    """An ideal pendulum's horizontal positions at ``t``: ``ideal`` holds its g/L and its state
    at the fit's epoch; integrated forwards from the epoch, and backwards as the forward motion
    with the velocity reversed (the undamped pendulum runs the same path backwards in time)."""
    gravity, state = float(ideal[0]) * length, ideal[1:]
    if math.hypot(*state[:2]) >= length:
        raise InputError(f"{track.label}: the bob swings {math.hypot(*state[:2]):.4g} {track.length_unit} "
                         f"from the centre, more than the pendulum length {length:g}; check the length "
                         "and its unit.")
    epoch = fit.model.epochs[0]
    positions = np.empty((t.size, 2))
    for picked, direction in ((t >= epoch, 1.0), (t < epoch, -1.0)):
        if not picked.any():
            continue
        elapsed = np.abs(t[picked] - epoch)
        order = np.argsort(elapsed)
        times = elapsed[order]
        lead = 0 if times[0] == 0.0 else 1                  # the solver starts at the epoch
        times = np.concatenate(([0.0], times)) if lead else times
        swing = spherical_pendulum_states(length=length, gravity=gravity, start=list(state[:2]),
                                          velocity=list(direction * state[2:]), times=times)[lead:]
        chosen = np.flatnonzero(picked)[order]
        positions[chosen] = swing
    return positions
