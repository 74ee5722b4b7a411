"""Weighted straight-line fits whose errors allow for correlated residuals."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._types import FloatArray
from .errors import NotIdentifiable


def autocorrelation_time(residuals: FloatArray) -> float:
    """Integrated autocorrelation time tau = 1 + 2 sum_k rho_k of a residual sequence.

    The sum runs over lags until the first non-positive autocorrelation (the
    initial-positive-sequence rule; Geyer 1992, Statistical Science 7, 473). Samples
    that are smoothed together are not independent: the variance of a fitted
    parameter grows by about tau.

    Examples
    --------
    >>> round(autocorrelation_time(np.random.default_rng(0).standard_normal(20000)), 1)
    1.0
    """
    centred = residuals - residuals.mean()
    n = centred.size
    if n < 4 or not np.any(centred):
        return 1.0
    from scipy.fft import irfft, next_fast_len, rfft  # scipy.fft is slow to import: only when used

    size = next_fast_len(2 * n, real=True)
    spectrum = rfft(centred, size)
    correlation = irfft(spectrum * np.conj(spectrum), size)[:n]
    correlation /= correlation[0]
    positive = np.flatnonzero(correlation[1:] <= 0.0)
    stop = int(positive[0]) + 1 if positive.size else n
    return float(max(1.0, 1.0 + 2.0 * np.sum(correlation[1:stop])))


@dataclass(frozen=True)
class LineFit:
    """y = intercept + slope x, fitted by weighted least squares."""

    slope: float
    intercept: float
    covariance: FloatArray          # of (slope, intercept), scaled by chi2_red and tau
    residuals: FloatArray           # normalised: (y - fit) / sigma
    chi2: float
    reduced_chi2: float
    correlation_time: float


def fit_line(x: FloatArray, y: FloatArray, sigma: FloatArray) -> LineFit:
    """Weighted least-squares line with empirical error scaling.

    The parameter covariance (X^T W X)^-1 is multiplied by the reduced chi-square
    (the scatter the data actually show) and by the residuals' autocorrelation time
    (neighbouring points that share smoothing are not independent).

    Examples
    --------
    >>> x = np.linspace(0.0, 1.0, 50)
    >>> line = fit_line(x, 2.0 * x + 1.0, np.full(50, 0.1))
    >>> round(line.slope, 12), round(line.intercept, 12)
    (2.0, 1.0)
    """
    weight = 1.0 / sigma**2
    design = np.column_stack((x, np.ones_like(x)))
    normal = design.T @ (weight[:, None] * design)
    try:
        slope, intercept = np.linalg.solve(normal, design.T @ (weight * y))
    except np.linalg.LinAlgError:
        raise NotIdentifiable(f"a line through {x.size} points that share one abscissa is not "
                              "determined.") from None
    residuals = (y - slope * x - intercept) / sigma
    chi2 = float(residuals @ residuals)
    reduced = chi2 / max(x.size - 2, 1)
    tau = autocorrelation_time(residuals)
    covariance = np.linalg.inv(normal) * reduced * tau
    return LineFit(float(slope), float(intercept), covariance, residuals, chi2, reduced, tau)
