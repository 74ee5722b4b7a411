"""How far a fitted law is from a nominal one: its strength there, and what the deviation means.

A lab expects a nominal law (Hooke's n = 1 for a pendulum or a tethered puck, the inverse square
n = -2 for an orbit about a star). The fitted k belongs to the fitted n, so its unit carries a
stray power of length (px**0.0095 s**-2 at n = 0.9905); the strength at the nominal exponent,
k0 = |F(r_ref)| / r_ref**n0, is the number to compare with the nominal one: at n0 = 1 it is
omega**2 (1/time**2, whatever the length unit), and for a pendulum of length L it gives g = k0 L.

An astronomer's question: does the orbit deviate from inverse-square? A small change of the
exponent, n = -2 - delta, turns the orbit: the apses advance by 2 pi delta / (1 + sqrt(1 - e**2))
per orbit (CHECKS.md §5: derived, and verified numerically to 2e-6). So a fitted exponent is
also a predicted precession, to set beside a measured one.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._json import json_safe
from .._types import Row
from ..errors import InputError
from ..estimators.result import LawFit, OrbitFit
from ..formatting import measurement, p_phrase, significance
from ..units import length_factor, strength_unit, time_factor

ARCSEC = 180.0 * 3600.0 / math.pi
"""Seconds of arc per radian."""

NEWTON = -2.0

AGREEMENT = 3.0
"""A deviation within this many standard errors is consistent with the nominal law."""

NOMINAL_NAMES = {1.0: "Hooke's law (a linear restoring force)", -2.0: "the inverse-square law",
                 0.0: "a constant pull", -1.0: "an inverse-distance force"}
"""Names of the nominal laws the trade uses (common practice)."""


@dataclass(frozen=True)
class Deviation:
    """The fitted exponent against a nominal one.

    Attributes
    ----------
    nominal : float
        The nominal exponent (Newton's -2, Hooke's 1, ...).
    delta, delta_stderr : float
        n - nominal and its standard error (the fit's stated error: corrected for correlated
        residuals where the fit did so).
    significance : float
        |delta| / delta_stderr.
    p_value : float
        The two-sided normal probability of a deviation at least this large if the nominal law
        held.
    strength, strength_stderr : float
        k0 = |F(r_ref)| / r_ref**nominal in ``strength_unit`` (length**(1 - nominal) time**-2);
        nan without timestamps.
    strength_unit : str
    angular_frequency, angular_frequency_stderr : float
        sqrt(k0) in rad per time unit (nominal 1 only; nan otherwise).
    pendulum_length, pendulum_length_stderr : float
        L as given, in ``pendulum_length_unit``; nan when not given.
    gravity, gravity_stderr : float
        g = k0 L in ``gravity_unit`` (nominal 1 and a length given; nan otherwise).
    eccentricity : float
        (r_max - r_min) / (r_max + r_min) of the fitted orbit (nan without one).
    period : float
        The orbital period from Kepler's third law with the fitted strength, 2 pi sqrt(a**3 / k)
        with a = (r_max + r_min) / 2, in the time unit (nan unless the nominal law is Newton's).
    precession_per_orbit, precession_per_orbit_stderr : float
        The apsidal advance the deviation implies (rad per orbit, positive in the sense of the
        motion), 2 pi (-delta) / (1 + sqrt(1 - e**2)); nan unless the nominal law is Newton's.
    precession_per_century, precession_per_century_stderr : float
        The same in seconds of arc per Julian century, when the time unit is a time.
    time_unit : str or None
    fit_passed : bool
        Whether the fit passed its checks; when not, the verdict says the law was not tested.
    """

    nominal: float
    delta: float
    delta_stderr: float
    significance: float
    p_value: float = math.nan
    strength: float = math.nan
    strength_stderr: float = math.nan
    strength_unit: str = ""
    angular_frequency: float = math.nan
    angular_frequency_stderr: float = math.nan
    pendulum_length: float = math.nan
    pendulum_length_stderr: float = math.nan
    pendulum_length_unit: str = ""
    gravity: float = math.nan
    gravity_stderr: float = math.nan
    gravity_unit: str = ""
    eccentricity: float = math.nan
    period: float = math.nan
    precession_per_orbit: float = math.nan
    precession_per_orbit_stderr: float = math.nan
    precession_per_century: float = math.nan
    precession_per_century_stderr: float = math.nan
    time_unit: str | None = None
    fit_passed: bool = True

    @property
    def name(self) -> str:
        """The nominal law in words."""
        return NOMINAL_NAMES.get(self.nominal, f"n = {self.nominal:g}")

    @property
    def consistent(self) -> bool:
        """Whether n lies within `AGREEMENT` standard errors of the nominal exponent."""
        return self.significance <= AGREEMENT

    def verdict(self) -> str:
        """The deviation's significance in words, with its p-value and what it says of the law."""
        size = significance(self.delta, self.delta_stderr)
        if not math.isfinite(self.p_value):
            return size
        if not self.fit_passed:
            return (f"({size}, {p_phrase(self.p_value)}): not a test of {self.name}, for the fit "
                    "failed its checks and its errors may not hold")
        word = "consistent with" if self.consistent else "differs from"
        return f"({size}, {p_phrase(self.p_value)}): {word} {self.name}"

    def rows(self) -> list[Row]:
        """The strength at the nominal exponent (omega and g where they apply), the deviation and
        what it implies, as rows with units."""
        n0 = f"{self.nominal:g}"
        if math.isfinite(self.strength):
            rows = [Row(f"k at n = {n0}", measurement(self.strength, self.strength_stderr),
                        self.strength_unit)]
        else:
            rows = [Row(f"k at n = {n0}", "not determined (no timestamps)")]
        if math.isfinite(self.angular_frequency):
            rows.append(Row("angular frequency", measurement(self.angular_frequency,
                                                             self.angular_frequency_stderr),
                            f"rad/{self.time_unit}"))
        if math.isfinite(self.gravity):
            caution = "" if self.consistent else (" (n differs from 1 beyond its errors, so this k and g "
                                                  "are biased: use g with the finite swing taken off)")
            rows.append(Row("g = k L", measurement(self.gravity, self.gravity_stderr),
                            self.gravity_unit + caution))
            rows.append(Row("with L", measurement(self.pendulum_length, self.pendulum_length_stderr or None),
                            self.pendulum_length_unit))
        rows.append(Row(f"deviation from n = {n0}", measurement(self.delta, self.delta_stderr),
                        self.verdict()))
        if math.isfinite(self.precession_per_orbit):
            rows.append(Row("implied precession",
                            measurement(math.degrees(self.precession_per_orbit),
                                        math.degrees(self.precession_per_orbit_stderr)),
                            f"deg per orbit (e = {self.eccentricity:.3g})"))
        if math.isfinite(self.precession_per_century):
            rows.append(Row("", measurement(self.precession_per_century, self.precession_per_century_stderr),
                            "arcsec per century"))
        return rows

    def to_text(self) -> str:
        """A heading naming the law, then the rows as indented lines."""
        return "\n".join([f"  against {self.name}, n = {self.nominal:g}:"]
                         + [f"  {row.label:<28} {row.text}" for row in self.rows()])

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form (angles in rad), numbers at full precision."""
        return json_safe({**vars(self), "name": self.name, "consistent": self.consistent})


def deviation_from(
    fit: LawFit,
    nominal: float = NEWTON,
    *,
    pendulum_length: tuple[float, str] | None = None,
    pendulum_length_stderr: float = 0.0,
) -> Deviation:
    """The fitted exponent's deviation from ``nominal``, the strength at ``nominal`` and, against
    Newton's law, the apsidal precession the deviation implies.

    Parameters
    ----------
    fit : LawFit
        Any fit; the precession needs an `OrbitFit` (its fitted orbit gives e and a), the
        strength timestamps.
    nominal : float
        The nominal exponent.
    pendulum_length : (float, str), optional
        A pendulum's length and its unit, e.g. ``(2.40, "m")``: against n = 1, g = k0 L is
        given too (in m/s**2 when the units convert to metres and seconds).
    pendulum_length_stderr : float
        Standard error of the length, same unit; added in quadrature to g's error.

    Returns
    -------
    Deviation

    Examples
    --------
    >>> from forcefit.dynamics.simulate import simulate_orbit
    >>> from forcefit.estimators import fit_orbit
    >>> fit = fit_orbit(simulate_orbit(exponent=-2.0, noise=1e-4, velocity=(0.0, 1.2), rng=3))
    >>> deviation_from(fit).significance < 3
    True
    """
    delta, error = fit.exponent - nominal, fit.exponent_stderr
    size = abs(delta) / error if error > 0 else (math.inf if delta else 0.0)
    p_value = math.erfc(size / math.sqrt(2.0))          # two-sided tail of the normal distribution
    common: dict[str, Any] = {"nominal": nominal, "delta": delta, "delta_stderr": error, "significance": size,
              "p_value": p_value, "time_unit": fit.time_unit,
              "fit_passed": bool(fit.passed),
              **_strength_at_nominal(fit, nominal, pendulum_length, pendulum_length_stderr)}
    if not isinstance(fit, OrbitFit) or nominal != NEWTON:
        return Deviation(**common)
    positions = fit.fitted_positions - np.asarray(fit.centre)
    radius = np.hypot(positions[:, 0], positions[:, 1])
    low, high = float(np.nanmin(radius)), float(np.nanmax(radius))
    eccentricity = (high - low) / (high + low)
    semi_major = 0.5 * (high + low)
    period = 2.0 * math.pi * math.sqrt(semi_major**3 / fit.strength)
    factor = 2.0 * math.pi / (1.0 + math.sqrt(max(1.0 - eccentricity**2, 0.0)))
    per_orbit, per_orbit_se = -factor * delta, factor * error
    century = century_se = math.nan
    if fit.time_unit is not None:
        try:
            orbits = 36525.0 * time_factor("d", fit.time_unit) / period
        except InputError:                 # a time unit that is no time (frames): no rate per century
            orbits = math.nan
        century, century_se = per_orbit * orbits * ARCSEC, per_orbit_se * orbits * ARCSEC
    return Deviation(**common, eccentricity=eccentricity, period=period, precession_per_orbit=per_orbit,
                     precession_per_orbit_stderr=per_orbit_se, precession_per_century=century,
                     precession_per_century_stderr=century_se)


def _strength_at_nominal(fit: LawFit, nominal: float, length: tuple[float, str] | None,
                         length_error: float) -> dict[str, Any]:
    """k at the nominal exponent, and at n = 1 omega and (with a length) g, as `Deviation` fields."""
    if not fit.time_unit:
        return {}
    k0, k0_error = fit.strength_at_exponent(nominal)
    fields: dict[str, Any] = {"strength": k0, "strength_stderr": k0_error,
                              "strength_unit": strength_unit(fit.length_unit, fit.time_unit, nominal)}
    if nominal != 1.0 or not (math.isfinite(k0) and k0 > 0):
        return fields
    omega = math.sqrt(k0)
    fields.update(angular_frequency=omega, angular_frequency_stderr=0.5 * k0_error / omega)
    if length is None:
        return fields
    value, unit = length
    try:
        factor, gravity_unit = length_factor(unit, "m") * time_factor("s", fit.time_unit) ** 2, "m/s^2"
    except InputError:                              # pixels, or a time unit that is no time
        factor, gravity_unit = 1.0, f"{unit}/{fit.time_unit}^2"
    fields.update(pendulum_length=value, pendulum_length_stderr=length_error, pendulum_length_unit=unit,
                  gravity=k0 * value * factor, gravity_unit=gravity_unit,
                  gravity_stderr=math.hypot(k0_error * value, k0 * length_error) * factor)
    return fields
