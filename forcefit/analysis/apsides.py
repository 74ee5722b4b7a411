"""Apsides: where the orbit is nearest and farthest, the apsidal angle, and the precession.

Between a pericentre and the next apocentre the polar angle advances by the apsidal
angle psi, which for a power law depends only on n and r_max / r_min. A closed orbit
has psi = pi (Kepler) or pi/2 (Hooke); a small deviation from either turns the orbit,
so a measured precession is a measured exponent.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np
import pandas as pd

from .._extrema import prominent_maxima
from .._json import json_safe
from .._regression import fit_line
from .._types import FloatArray, Row
from ..dynamics.laws import exponent_from_apsidal_angle, lab_rotation_rate
from ..errors import InputError, NotIdentifiable
from ..estimators.result import Diagnostic
from ..formatting import CHECK_MARKS, measurement
from ..geometry.path import PathGeometry, describe_path
from ..track import Track
from ..units import length_factor, time_factor

WINDOW = 0.3
"""Half-width of the local fit around an apse, as a fraction of the apsidal angle."""

MIN_APSES = 3

MIN_SECULAR_ORBITS = 5.0
"""Fewer orbits than this between the first and last apse, and a turn of the apses cannot be
told from the periodic perturbations of a real orbit (they have periods of a few orbits)."""

ARCSEC = 180.0 * 3600.0 / math.pi
"""Seconds of arc per radian."""

MIN_LOCAL_POINTS = 11
"""Fewest raw points in the local fit around an apse."""

ORDER = 4
"""Degree of the polynomial in theta fitted to r around an apse (a quadratic biases r there)."""


@dataclass(frozen=True)
class Apse:
    """One pericentre or apocentre, located by a local quadratic fit of r against theta."""

    kind: str
    angle: float
    angle_stderr: float
    radius: float
    radius_stderr: float
    time: float
    time_stderr: float


@dataclass(frozen=True)
class Apsides:
    """The apses of a track and what they say about the force law.

    Angles are in rad, measured in the sense of the motion; radii in the track's length
    unit; times and rates in its time unit (nan for a shape-only track).
    """

    apses: tuple[Apse, ...]
    centre: tuple[float, float]
    sense: int
    apsidal_angle: float
    apsidal_angle_stderr: float
    closure: int
    precession_per_revolution: float
    precession_per_revolution_stderr: float
    precession_rate: float
    precession_rate_stderr: float
    radius_ratio: float
    exponent: float
    exponent_stderr: float
    exponent_near_circular: float
    length_unit: str
    time_unit: str | None
    orbits: float = math.nan
    scatter: float = math.nan
    diagnostics: Mapping[str, Diagnostic] = field(default_factory=dict)

    def __post_init__(self) -> None:
        object.__setattr__(self, "diagnostics", MappingProxyType(dict(self.diagnostics)))

    @property
    def passed(self) -> bool:
        """True when no check failed: the apses' turn is a secular one, an exponent can be read."""
        return all(check.passed is not False for check in self.diagnostics.values())

    @property
    def precession_per_century(self) -> tuple[float, float]:
        """The precession rate and its error in seconds of arc per Julian century (nan when the
        time unit is not a time, or without timestamps)."""
        if self.time_unit is None or not math.isfinite(self.precession_rate):
            return math.nan, math.nan
        century = time_factor("d", self.time_unit) * 36525.0         # the century in time units
        return self.precession_rate * century * ARCSEC, self.precession_rate_stderr * century * ARCSEC

    @property
    def pericentres(self) -> tuple[Apse, ...]:
        return tuple(apse for apse in self.apses if apse.kind == "pericentre")

    @property
    def apocentres(self) -> tuple[Apse, ...]:
        return tuple(apse for apse in self.apses if apse.kind == "apocentre")

    def apse_turns(self) -> tuple[FloatArray, FloatArray]:
        """Each apse's number along the track and how far it has turned (rad, in the sense of
        the motion) from where a closed orbit would put it."""
        angles = np.array([apse.angle for apse in self.apses])
        count = np.round((angles - angles[0]) / np.median(np.diff(angles)))
        return count, angles - count * np.pi / self.closure - angles[0]

    def rows(self) -> list[Row]:
        """The summary as rows with units: apsidal angle, precession, radius ratio, exponent."""
        per_orbit = math.degrees(self.precession_per_revolution)
        per_orbit_se = math.degrees(self.precession_per_revolution_stderr)
        rows = [
            Row("apses found", f"{len(self.apses)} over {self.orbits:.3g} orbits", brief=False),
            Row("apsidal angle", measurement(math.degrees(self.apsidal_angle),
                                                    math.degrees(self.apsidal_angle_stderr)),
                f"deg (closed orbit: {180 / self.closure:g} deg)"),
            Row("precession", measurement(per_orbit, per_orbit_se),
                "deg per orbit, in the sense of the motion"),
        ]
        if math.isfinite(self.precession_rate):
            rows.append(Row("", measurement(self.precession_rate, self.precession_rate_stderr),
                            f"rad/{self.time_unit or ''}"))
            century, century_se = self.precession_per_century
            if math.isfinite(century):
                rows.append(Row("", measurement(century, century_se), "arcsec per century"))
        rows += [
            Row("r_max / r_min", f"{self.radius_ratio:.6g}"),
            Row("exponent", measurement(self.exponent, self.exponent_stderr),
                f"(exact apsidal integral); near-circular formula gives {self.exponent_near_circular:.8g}"),
        ]
        return rows

    def to_text(self) -> str:
        """The apses and the summary, with units."""
        length, time = self.length_unit, self.time_unit or ""
        lines = [f"  {'apse':<11} {'angle [deg]':>18} {'radius [' + length + ']':>24} "
                 f"{'time [' + time + ']':>20}"]
        for apse in self.apses:
            angle = measurement(math.degrees(apse.angle), math.degrees(apse.angle_stderr))
            lines.append(f"  {apse.kind:<11} {angle:>18} "
                         f"{measurement(apse.radius, apse.radius_stderr):>24} "
                         f"{_epoch_text(apse.time, apse.time_stderr, time):>20}")
        lines += [f"  {row.label:<18} {row.text}" for row in self.rows() if row.brief]
        lines += [f"  {CHECK_MARKS[check.passed]} {name}: {check.message}"
                  for name, check in self.diagnostics.items()]
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form."""
        return json_safe({
            "centre": list(self.centre), "sense": self.sense,
            "apses": [vars(apse) for apse in self.apses],
            "apsidal_angle_rad": self.apsidal_angle, "apsidal_angle_stderr_rad": self.apsidal_angle_stderr,
            "precession_per_revolution_rad": self.precession_per_revolution,
            "precession_per_revolution_stderr_rad": self.precession_per_revolution_stderr,
            "precession_rate": self.precession_rate, "precession_rate_stderr": self.precession_rate_stderr,
            "precession_rate_unit": f"rad/{self.time_unit}" if self.time_unit else None,
            "radius_ratio": self.radius_ratio, "exponent": self.exponent,
            "exponent_stderr": self.exponent_stderr, "exponent_near_circular": self.exponent_near_circular,
            "precession_arcsec_per_century": self.precession_per_century[0],
            "precession_arcsec_per_century_stderr": self.precession_per_century[1],
            "orbits": self.orbits, "scatter": self.scatter, "passed": self.passed,
            "diagnostics": {name: {"passed": check.passed, "message": check.message}
                            for name, check in self.diagnostics.items()},
            "length_unit": self.length_unit,
        })


def _local_apse(
    kind: str, theta: FloatArray, radius: FloatArray, sigma: FloatArray, around: float,
    half_width: float, time: FloatArray | None, path_theta: FloatArray,
) -> Apse | None:
    """Fit r as a quartic in d = theta - around to the raw points near an apse and locate
    its extremum (Newton's method), with errors by the delta method."""
    near = np.abs(theta - around) <= half_width
    if near.sum() < MIN_LOCAL_POINTS:                  # a fast passage: take the nearest points
        near = np.zeros(theta.size, dtype=bool)
        near[np.argsort(np.abs(theta - around))[:MIN_LOCAL_POINTS]] = True
        half_width = float(np.abs(theta[near] - around).max())
    d = theta[near] - around
    design = np.vander(d, ORDER + 1, increasing=True) / sigma[near, None]
    coefficients, *_ = np.linalg.lstsq(design, radius[near] / sigma[near], rcond=None)
    residual = radius[near] / sigma[near] - design @ coefficients
    scale = max(float(residual @ residual) / max(d.size - ORDER - 1, 1), 1.0)
    covariance = np.linalg.inv(design.T @ design) * scale
    powers = np.arange(ORDER + 1)
    slope = powers[1:] * coefficients[1:]                        # dr/dd coefficients
    bend = powers[2:] * (powers[2:] - 1) * coefficients[2:]      # d2r/dd2 coefficients
    if (kind == "pericentre") != (coefficients[2] > 0):
        return None
    shift = -coefficients[1] / (2 * coefficients[2])
    for _ in range(20):                                          # Newton on dr/dd = 0
        step = np.polyval(slope[::-1], shift) / np.polyval(bend[::-1], shift)
        shift -= step
        if abs(step) < 1e-15:
            break
    if abs(shift) > half_width:
        return None
    curvature = float(np.polyval(bend[::-1], shift))
    gradient_angle = np.concatenate(([0.0], -powers[1:] * shift ** (powers[1:] - 1) / curvature))
    gradient_radius = shift**powers
    angle = around + shift
    angle_se = math.sqrt(float(gradient_angle @ covariance @ gradient_angle))
    time_at = time_se = math.nan
    if time is not None:
        time_at = float(np.interp(angle, path_theta, time))
        rate = float(np.gradient(path_theta, time)[np.argmin(np.abs(path_theta - angle))])
        time_se = angle_se / abs(rate)
    return Apse(kind, float(angle), angle_se, float(np.polyval(coefficients[::-1], shift)),
                math.sqrt(float(gradient_radius @ covariance @ gradient_radius)), time_at, time_se)


def _find_apses(track: Track, path: PathGeometry, sense: int) -> list[Apse]:
    theta_path = sense * path.polar_angle
    offset = track.positions - np.asarray(path.centre)
    radius = np.hypot(offset[:, 0], offset[:, 1])
    theta = sense * np.unwrap(np.arctan2(offset[:, 1], offset[:, 0]))
    theta += 2 * math.pi * np.round((theta_path - theta) / (2 * math.pi))
    sigma = track.sigma if track.sigma is not None else path.smoothing.noise
    prominence = 5.0 * float(np.median(path.radius_stderr)) + 1e-12 * float(path.radius.max())
    peaks = [("apocentre", int(i)) for i in prominent_maxima(path.radius, prominence)]
    peaks += [("pericentre", int(i)) for i in prominent_maxima(-path.radius, prominence)]
    peaks.sort(key=lambda item: item[1])
    if len(peaks) < 2:
        return []
    spacing = float(np.median(np.diff([theta_path[i] for _, i in peaks])))
    half = WINDOW * spacing
    apses = []
    for kind, index in peaks:
        around = float(theta_path[index])
        if around - half < theta_path.min() or around + half > theta_path.max():
            continue                                   # the window would run off the track
        apse = _local_apse(kind, theta, radius, sigma, around, half,
                           None if track.t is None else np.asarray(track.t), theta_path)
        if apse is not None:
            apses.append(apse)
    return apses


def measure_apsides(track: Track, *, centre: tuple[float, float] | None = None,
                    path: PathGeometry | None = None) -> Apsides:
    """Locate the peri- and apocentres and read the apsidal angle, precession and exponent.

    Parameters
    ----------
    track : Track
        Positions (L), with times (T) when known.
    centre : (float, float), optional
        The force centre (L); found from the data when not given.
    path : PathGeometry, optional
        The track's geometry, if already described.

    Returns
    -------
    Apsides

    Raises
    ------
    NotIdentifiable
        With fewer than three apses (record longer), or none of the orbit's turning points.

    Examples
    --------
    >>> from forcefit.dynamics.simulate import simulate_orbit
    >>> apsides = measure_apsides(simulate_orbit(exponent=-2.0, duration=40.0, rate=50.0))
    >>> round(math.degrees(apsides.apsidal_angle), 3)
    180.0
    """
    path = path if path is not None else describe_path(track, centre=centre)
    sense = 1 if path.polar_angle[-1] >= path.polar_angle[0] else -1
    apses = _find_apses(track, path, sense)
    if len(apses) < MIN_APSES:
        raise NotIdentifiable(
            f"{track.label}: {len(apses)} apses (peri- or apocentres) found, at least "
            f"{MIN_APSES} are needed for the apsidal angle. Record a longer stretch of the orbit."
        )
    angles = np.array([apse.angle for apse in apses])
    errors = np.array([max(apse.angle_stderr, 1e-12) for apse in apses])
    spacing = float(np.median(np.diff(angles)))
    if not (spacing > 0.0 and np.all(np.diff(angles) > 0.0)):
        raise NotIdentifiable(
            f"{track.label}: the apses found do not follow one another about the centre (their "
            "angles do not increase along the track): where samples are missing over a large part "
            "of a turn (a hidden pericentre passage) the smoothed path cannot be followed across "
            "the gap. Measure the apses on a stretch without such gaps, or fit the orbit (it "
            "integrates across them).")
    count = np.round((angles - angles[0]) / spacing)       # apse number, robust to a missed apse
    line = fit_line(count, angles, errors)
    scatter = math.sqrt(line.reduced_chi2)
    # The error comes from the apses' scatter about the line when it exceeds their local errors;
    # never from a scatter smaller than those (few apses can line up by chance).
    widen = max(1.0, 1.0 / line.reduced_chi2) if line.reduced_chi2 > 0 else 1.0
    psi, psi_se = line.slope, math.sqrt(line.covariance[0, 0] * widen)
    closure = 1 if psi > 0.75 * math.pi else 2
    per_revolution = 2 * closure * psi - 2 * math.pi
    rate = rate_se = math.nan
    if track.has_times:
        times = np.array([apse.time for apse in apses])
        turning = angles - count * math.pi / closure
        drift = fit_line(times - times.mean(), turning, errors)
        rate = drift.slope
        rate_se = math.sqrt(drift.covariance[0, 0] * (max(1.0, 1.0 / drift.reduced_chi2)
                                                      if drift.reduced_chi2 > 0 else 1.0))
    peri = np.mean([a.radius for a in apses if a.kind == "pericentre"] or [np.nan])
    apo = np.mean([a.radius for a in apses if a.kind == "apocentre"] or [np.nan])
    ratio = float(apo / peri)
    if not ratio >= 1.0:
        where = (f"about the centre ({path.centre[0]:.6g}, {path.centre[1]:.6g}) {track.length_unit} the "
                 "turning points found do not alternate as near and far ones (the far ones at "
                 f"{apo:.4g}, the near ones at {peri:.4g} {track.length_unit})")
        why = ("the path passes too close to the centre for its near points to be located, so no "
               "apsidal angle can be read from it" if centre is not None else
               "that centre is probably wrong (a thin ellipse hardly fixes it along its long axis). "
               "Give the centre (--centre X,Y)")
        raise NotIdentifiable(f"{track.label}: {where}: {why}.")
    exponent = exponent_from_apsidal_angle(psi, ratio)
    step = max(psi_se, 1e-9)
    slope = (exponent_from_apsidal_angle(psi + step, ratio)
             - exponent_from_apsidal_angle(psi - step, ratio)) / (2 * step)
    orbits = float(abs(angles[-1] - angles[0]) / (2 * math.pi))
    diagnostics = _secular_checks(orbits, scatter, len(apses))
    return Apsides(
        orbits=orbits, scatter=scatter, diagnostics=diagnostics,
        apses=tuple(apses), centre=path.centre, sense=sense, apsidal_angle=psi,
        apsidal_angle_stderr=psi_se, closure=closure, precession_per_revolution=per_revolution,
        precession_per_revolution_stderr=2 * closure * psi_se, precession_rate=rate,
        precession_rate_stderr=rate_se, radius_ratio=ratio, exponent=exponent,
        exponent_stderr=abs(slope) * psi_se, exponent_near_circular=(math.pi / psi) ** 2 - 3.0,
        length_unit=track.length_unit, time_unit=track.time_unit if track.has_times else None,
    )


def _secular_checks(orbits: float, scatter: float, count: int) -> dict[str, Diagnostic]:
    """Can the apses' turn be read as the law's? Enough orbits, and apses on their line."""
    checks = {}
    if orbits < MIN_SECULAR_ORBITS:
        checks["orbits covered"] = Diagnostic(
            False, f"the apses span {orbits:.3g} orbits; with fewer than {MIN_SECULAR_ORBITS:g}, the "
                   "periodic perturbations of a real orbit cannot be told from a secular turn, so the "
                   "exponent read from the apses is no measurement of the law. The apses themselves "
                   "are measured; record more orbits.")
    else:
        checks["orbits covered"] = Diagnostic(True, f"the apses span {orbits:.3g} orbits.")
    limit = 1.0 + 5.0 * math.sqrt(2.0 / max(count - 2, 1))
    if scatter**2 > limit:
        checks["apse scatter"] = Diagnostic(
            False, f"the apses scatter {scatter:.3g} times more about a steady turn than their own "
                   "errors allow: something moves them (perturbations, drag, a wandering centre), so "
                   "their turn is not the law's alone; the errors are taken from the scatter.")
    else:
        checks["apse scatter"] = Diagnostic(True, f"the apses follow a steady turn within their errors "
                                                  f"(scatter {scatter:.2g} of their errors).")
    return checks


def _epoch_text(time: float, stderr: float, unit: str) -> str:
    """An apse's time with the digits its error needs; a Julian date also as a calendar date."""
    if not math.isfinite(time):
        return "-"
    if math.isfinite(stderr) and stderr > 0:
        decimals = max(0, 1 - math.floor(math.log10(stderr)))
        text = f"{time:.{decimals}f} ± {stderr:.{decimals}f}"
    else:
        text = f"{time:.10g}"
    if unit == "d" and JULIAN_DATES[0] <= time <= JULIAN_DATES[1]:
        moment = pd.Timestamp("1970-01-01") + pd.to_timedelta(time - UNIX_EPOCH_JD, unit="D")
        text += f" ({moment:%Y-%m-%d %H:%M})"
    return text


JULIAN_DATES = (2_000_000.0, 2_800_000.0)
"""Times in days within this range are taken as Julian dates (years -238 to 2954)."""

UNIX_EPOCH_JD = 2_440_587.5
"""The Julian date of 1970-01-01 00:00 (common practice)."""


def precession_budget(
    apsides: Apsides,
    *,
    pendulum_length: float | None = None,
    gravity: float = 9.81,
    latitude: float | None = None,
) -> dict[str, float]:
    """The measured precession rate beside what a pendulum's finite amplitude and the Earth's
    rotation explain, and the anomalous rest; all in rad/s, in the sense of the motion.

    Parameters
    ----------
    apsides : Apsides
        Of a timestamped track.
    pendulum_length : float, optional
        The pendulum's length (m): adds the finite-amplitude rate of an ideal spherical pendulum
        of that swing (`finite_amplitude_precession`), a and b from the mean apo- and
        pericentre distances (the track must be in lengths).
    gravity : float
        Local g (m/s**2).
    latitude : float, optional
        For a camera fixed in the laboratory (degrees): adds the Earth's share.

    Returns
    -------
    dict
        ``measured`` and ``measured_stderr``; ``finite_amplitude`` and ``earth_rotation`` when
        asked for; ``expected`` (their sum), ``anomalous`` and ``anomalous_stderr``.
    """
    if apsides.time_unit is None:
        raise InputError("the expected precession needs timestamps.")
    per_second = 1.0 / time_factor(apsides.time_unit, "s")
    measured = apsides.precession_rate * per_second
    measured_se = apsides.precession_rate_stderr * per_second
    result = {"measured": measured, "measured_stderr": measured_se}
    expected = 0.0
    if pendulum_length is not None:
        try:
            metre = length_factor(apsides.length_unit, "m")
        except InputError as exc:
            raise InputError(f"{exc} The pendulum's finite-amplitude precession needs lengths in "
                             "metres: calibrate the pixels (--scale or --marks).") from None
        semi_major = sum(a.radius for a in apsides.apocentres) / len(apsides.apocentres) * metre
        semi_minor = sum(a.radius for a in apsides.pericentres) / len(apsides.pericentres) * metre
        result["finite_amplitude"] = finite_amplitude_precession(semi_major, semi_minor, pendulum_length,
                                                                 gravity)
        expected += result["finite_amplitude"]
    if latitude is not None:
        # The lab turns counter-clockwise (seen from above, north up) at Omega_E sin(latitude), so
        # the pattern turns clockwise: against a counter-clockwise motion, with a clockwise one.
        result["earth_rotation"] = -apsides.sense * lab_rotation_rate(latitude)
        expected += result["earth_rotation"]
    result["expected"] = expected
    result["anomalous"] = measured - expected
    result["anomalous_stderr"] = measured_se
    return result


def finite_amplitude_precession(semi_major: float, semi_minor: float, length: float,
                                gravity: float) -> float:
    """The apsidal precession rate (rad/s, in the sense of the motion) of an ideal spherical
    pendulum whose swing reaches ``semi_major`` and comes within ``semi_minor`` of the point
    below the pivot (m): its exact motion integrated over six swings and its apses measured.

    Airy's (3/8) a b omega / L**2 (`forcefit.dynamics.laws.pendulum_precession_rate`) is its
    small-swing limit; at a/L = 0.2 (b/a = 0.4) it is 1% short, which a precise record
    of a wide swing sees as an anomalous precession of several standard errors.

    Examples
    --------
    >>> from forcefit.dynamics.laws import pendulum_precession_rate
    >>> exact = finite_amplitude_precession(0.05, 0.02, 2.0, 9.81)
    >>> round(exact / pendulum_precession_rate(0.05, 0.02, 2.0, 9.81), 3)
    0.999
    """
    from ..dynamics.simulate import spherical_pendulum_states  # scipy.integrate: only here

    omega = math.sqrt(gravity / length)
    period = 2.0 * math.pi / omega
    times = np.arange(0.0, 6.0 * period, period / 400.0)
    speed = semi_minor * omega
    for _ in range(3):                  # the speed at the far end that brings the bob within b
        swing = spherical_pendulum_states(length=length, gravity=gravity, start=(semi_major, 0.0),
                                          velocity=(0.0, speed), times=times)
        nearest = float(np.min(np.hypot(swing[:, 0], swing[:, 1])))
        speed *= semi_minor / nearest
    ideal = Track(t=times, x=swing[:, 0], y=swing[:, 1], length_unit="m", time_unit="s",
                  name="ideal pendulum")
    return measure_apsides(ideal, centre=(0.0, 0.0)).precession_rate
