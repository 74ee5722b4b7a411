"""The class as one measurement: the mean and spread of the passing runs, with its standard error.

Twelve students who each measured k = g/L with a pendulum of the same length together measured
it once more: the mean of their passing runs, whose standard error is the spread over the
square root of their number (common practice). A run that failed the rule is left out.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._types import Row
from ..formatting import measurement


@dataclass(frozen=True)
class ClassSummary:
    """Mean, spread (sample standard deviation) and standard error of the mean of the passing runs.

    Attributes
    ----------
    n_passing : int
        Runs that met the rule and have a value.
    exponent_mean, exponent_spread, exponent_stderr : float
        Of the fitted n (dimensionless); nan with fewer than two runs.
    strength_mean, strength_spread, strength_stderr : float
        Of k at the expected exponent, in ``strength_unit``; nan with fewer than two values.
    strength_unit : str
    """

    n_passing: int
    exponent_mean: float
    exponent_spread: float
    exponent_stderr: float
    strength_mean: float
    strength_spread: float
    strength_stderr: float
    strength_unit: str

    def rows(self) -> list[Row]:
        """The class's means with their standard errors, and the spreads, as rows."""
        if self.n_passing < 2:
            return [Row("class mean", f"needs two passing runs ({self.n_passing} so far)")]
        rows = [Row("exponent n, class mean", measurement(self.exponent_mean, self.exponent_stderr),
                    f"(spread {self.exponent_spread:.2g} over {self.n_passing} passing runs)")]
        if math.isfinite(self.strength_mean):
            rows.append(Row("k, class mean", measurement(self.strength_mean, self.strength_stderr),
                            f"{self.strength_unit} (spread {self.strength_spread:.2g} {self.strength_unit})"))
        return rows


def summarise_class(rows: Iterable[Mapping[str, Any]], strength_unit: str) -> ClassSummary:
    """The mean, spread and standard error of n and of k over the runs that met the rule.

    Examples
    --------
    >>> rows = [{"passed": True, "exponent": n, "strength_at_expected": k}
    ...         for n, k in ((0.99, 4.1), (1.01, 4.0), (1.0, 4.2))]
    >>> summary = summarise_class(rows + [{"passed": False, "exponent": 1.4}], "s^-2")
    >>> summary.n_passing, round(summary.strength_mean, 6), round(summary.strength_stderr, 6)
    (3, 4.1, 0.057735)
    """
    passing = [row for row in rows if bool(row.get("passed"))]
    exponents = _finite(row.get("exponent") for row in passing)
    strengths = _finite(row.get("strength_at_expected") for row in passing)
    n_mean, n_spread, n_error = _mean_spread_error(exponents)
    k_mean, k_spread, k_error = _mean_spread_error(strengths)
    return ClassSummary(n_passing=len(exponents), exponent_mean=n_mean, exponent_spread=n_spread,
                        exponent_stderr=n_error, strength_mean=k_mean, strength_spread=k_spread,
                        strength_stderr=k_error, strength_unit=strength_unit)


def _finite(values: Iterable[Any]) -> np.ndarray:
    numbers = np.array([float(v) for v in values if v is not None], dtype=float)
    return numbers[np.isfinite(numbers)]


def _mean_spread_error(values: np.ndarray) -> tuple[float, float, float]:
    if values.size < 2:
        return math.nan, math.nan, math.nan
    spread = float(np.std(values, ddof=1))
    return float(np.mean(values)), spread, spread / math.sqrt(values.size)
