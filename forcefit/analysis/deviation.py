"""How far a fitted law is from a nominal one, and what that deviation means for an orbit.

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
from ..units import format_measurement, time_factor

ARCSEC = 180.0 * 3600.0 / math.pi
"""Seconds of arc per radian."""

NEWTON = -2.0


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
    """

    nominal: float
    delta: float
    delta_stderr: float
    significance: float
    eccentricity: float = math.nan
    period: float = math.nan
    precession_per_orbit: float = math.nan
    precession_per_orbit_stderr: float = math.nan
    precession_per_century: float = math.nan
    precession_per_century_stderr: float = math.nan
    time_unit: str | None = None

    def rows(self) -> list[Row]:
        """The deviation and what it implies, as rows with units."""
        rows = [Row(f"deviation from n = {self.nominal:g}", format_measurement(self.delta, self.delta_stderr),
                    f"({self.significance:.2g} standard errors)")]
        if math.isfinite(self.precession_per_orbit):
            rows.append(Row("implied precession",
                            format_measurement(math.degrees(self.precession_per_orbit),
                                               math.degrees(self.precession_per_orbit_stderr)),
                            f"deg per orbit (e = {self.eccentricity:.3g})"))
        if math.isfinite(self.precession_per_century):
            rows.append(Row("", format_measurement(self.precession_per_century,
                                                   self.precession_per_century_stderr),
                            "arcsec per century"))
        return rows

    def to_text(self) -> str:
        """The rows as indented lines."""
        return "\n".join(f"  {row.label:<28} {row.text}" for row in self.rows())

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form (angles in rad)."""
        return json_safe(dict(vars(self)))


def deviation_from(fit: LawFit, nominal: float = NEWTON) -> Deviation:
    """The fitted exponent's deviation from ``nominal`` and, against Newton's law, the apsidal
    precession it implies.

    Parameters
    ----------
    fit : LawFit
        Any fit; the precession needs an `OrbitFit` (its fitted orbit gives e and a).
    nominal : float
        The nominal exponent.

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
    significance = abs(delta) / error if error > 0 else math.inf
    if not isinstance(fit, OrbitFit) or nominal != NEWTON:
        return Deviation(nominal=nominal, delta=delta, delta_stderr=error, significance=significance,
                         time_unit=fit.time_unit)
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
    return Deviation(nominal=nominal, delta=delta, delta_stderr=error, significance=significance,
                     eccentricity=eccentricity, period=period, precession_per_orbit=per_orbit,
                     precession_per_orbit_stderr=per_orbit_se, precession_per_century=century,
                     precession_per_century_stderr=century_se, time_unit=fit.time_unit)
