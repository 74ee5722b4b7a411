"""Least squares on residuals defined sample by sample on a smoothed curve, with errors
propagated exactly to the raw samples.

An estimator that reads a law from a smoothed path (the curvature relation, the radial
acceleration, the lines of the accelerations through the centre) has one residual per
sample, a function of the parameters and of the smoothed position, velocity and
acceleration there. Its parameters follow by weighted least squares. Their errors do not
follow from the scatter of those residuals: neighbouring smoothed samples share their
data, and the smoother's bias is not noise. Instead the fitted parameters are, to first
order, a linear function of the raw samples (the smoother is linear in the data), and
their covariance is that linear map applied to the noise (the delta method; Wasserman
2006, All of Nonparametric Statistics, Sect. 5.7, for linear smoothers).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from .._types import FloatArray
from ..errors import GeometryError
from .pspline import SmoothedCurve

Residual = Callable[[FloatArray, FloatArray, FloatArray, FloatArray], FloatArray]
"""residual(parameters, value, first, second) -> one residual per sample; value, first and
second are the smoothed position and its derivatives at the used samples, shape (m, 2)."""

RELATIVE_STEP = 1e-3
"""Step of the numerical derivatives, in standard errors of the smoothed quantity."""

PROBES = 40
"""Samples at which the pointwise variance is computed exactly (see `_frequentist_scale`)."""


@dataclass(frozen=True)
class PointwiseFit:
    """Parameters fitted to per-sample residuals, with their propagated covariance.

    Attributes
    ----------
    parameters : ndarray, shape (n_parameters,)
        The fitted parameters followed by any held ones (as passed).
    covariance : ndarray, shape (n_fitted, n_fitted)
        Covariance of the fitted parameters from the noise of the raw samples (including
        the held parameters' own uncertainty, when their influence is given).
    influence : ndarray, shape (n_fitted, n_points, 2)
        d parameter / d raw sample (x and y) at every sample of the track.
    residuals : ndarray, shape (m,)
        Residuals at the used samples divided by their standard deviation.
    sigma : ndarray, shape (m,)
        Standard deviation of each used sample's residual from the noise.
    used : ndarray of int
        Indices of the samples used.
    chi2 : float
        Sum of squared normalised residuals.
    """

    parameters: FloatArray
    covariance: FloatArray
    influence: FloatArray
    residuals: FloatArray
    sigma: FloatArray
    used: np.ndarray
    chi2: float
    contributions: FloatArray | None = None

    def empirical_covariance(self) -> FloatArray:
        """Covariance from the residuals themselves: the lag sums of the samples'
        contributions to the estimating equations, over the lags at which the residuals
        stay positively correlated (a heteroscedasticity and autocorrelation consistent
        estimate; Newey & West 1987, Econometrica 55, 703, with a Bartlett taper)."""
        psi = self.contributions
        if psi is None:
            return np.full_like(self.covariance, np.nan)
        lags = _correlated_lags(self.residuals)
        out = psi @ psi.T
        for lag in range(1, lags + 1):
            taper = 1.0 - lag / (lags + 1.0)
            cross = psi[:, :-lag] @ psi[:, lag:].T
            out += taper * (cross + cross.T)
        return out

    @property
    def stderr(self) -> FloatArray:
        """Standard errors of the fitted parameters."""
        return np.sqrt(np.maximum(np.diag(self.covariance), 0.0))

    @property
    def reduced_chi2(self) -> float:
        """chi2 per degree of freedom (used samples minus fitted parameters)."""
        return self.chi2 / max(self.used.size - self.influence.shape[0], 1)


def _quantities(curve: SmoothedCurve, used: np.ndarray) -> list[FloatArray]:
    return [curve.value[used], curve.first[used], curve.second[used]]


def sensitivity(curve: SmoothedCurve, used: np.ndarray, residual: Residual,
                parameters: FloatArray) -> FloatArray:
    """d residual_i / d(value, first, second) of (x, y) at each used sample, shape (m, 3, 2).

    By central differences, all samples at once: each sample's residual depends on that
    sample's smoothed quantities only.
    """
    base = _quantities(curve, used)
    scale = np.sqrt(np.maximum(np.diagonal(curve.pointwise_covariance[used], axis1=1, axis2=2), 0.0))
    out = np.empty((used.size, 3, 2))
    for order in range(3):
        typical = float(np.median(np.abs(base[order]))) or 1.0
        step = RELATIVE_STEP * np.where(scale[:, order] > 0, scale[:, order], 1e-6 * typical)
        for axis in range(2):
            shifted = []
            for sign in (1.0, -1.0):
                moved = [q.copy() for q in base]
                moved[order][:, axis] += sign * step
                shifted.append(residual(parameters, *moved))
            out[:, order, axis] = (shifted[0] - shifted[1]) / (2.0 * step)
    return out


def _pointwise_sd(curve: SmoothedCurve, used: np.ndarray, gradient: FloatArray) -> FloatArray:
    """Standard deviation of each residual from the smoother's pointwise covariance."""
    covariance = curve.pointwise_covariance[used]
    variance = np.einsum("mac,mab,mbc->m", gradient, covariance, gradient)
    return np.sqrt(np.maximum(variance, 0.0))


def _probes(size: int) -> np.ndarray:
    """PROBES evenly spread positions among ``size`` used samples (all of them when fewer)."""
    return np.unique(np.linspace(0, size - 1, min(PROBES, size)).round().astype(int))


def _frequentist_scale(curve: SmoothedCurve, used: np.ndarray, gradient: FloatArray,
                       sd: FloatArray) -> FloatArray:
    """Factor turning the smoother's pointwise (Bayesian) standard deviations into the
    sampling standard deviations of the residuals, interpolated between probe samples.

    The penalised spline's pointwise covariance (Wahba 1983) includes the prior's share,
    a stand-in for the smoothing bias; the sampling variance of a residual is the
    smaller sum_j var_j |d residual / d data_j|**2, computed exactly at PROBES samples.
    """
    if curve.response is None:
        return np.ones(used.size)
    picks = _probes(used.size)
    local = gradient[picks] / np.maximum(sd[picks], 1e-300)[:, None, None]
    ratio = np.sqrt(curve.response.local_covariance(used[picks], local[:, None])[:, 0, 0])
    return np.interp(np.arange(used.size), picks, ratio)


def fit_pointwise(
    curve: SmoothedCurve,
    used: np.ndarray,
    residual: Residual,
    start: FloatArray,
    *,
    held: FloatArray | None = None,
    held_influence: FloatArray | None = None,
    correlation: FloatArray | None = None,
    rounds: int = 3,
    correct_noise_bias: bool = True,
) -> PointwiseFit:
    """Weighted least squares of per-sample residuals, errors by the delta method.

    Parameters
    ----------
    curve : SmoothedCurve
        The smoothed track (with its linear response).
    used : ndarray of int
        Samples whose residuals enter.
    residual : callable
        residual(parameters, value, first, second); the parameters are the fitted ones
        followed by the ``held`` ones.
    start : ndarray
        Starting values of the fitted parameters.
    held : ndarray, optional
        Parameters held at given values (e.g. a centre found beforehand).
    held_influence : ndarray, shape (n_held, n_points, 2), optional
        d held / d raw samples, when the held values were estimated from the same samples:
        their uncertainty then enters the covariance, with its correlations.
    correlation : ndarray, optional
        The noise's autocorrelation by lag in samples (None: independent noise).
    rounds : int
        Reweighting rounds (the weights depend on the parameters).
    correct_noise_bias : bool
        Remove the estimate's second-order bias from the noise (`_noise_bias`).

    Returns
    -------
    PointwiseFit
    """
    if curve.response is None:
        raise GeometryError("the smoothing carries no linear response; errors cannot be propagated.")
    held = np.zeros(0) if held is None else np.asarray(held, dtype=float)
    n_fit = np.asarray(start).size
    used = np.asarray(used)
    values = _quantities(curve, used)

    def full(theta: FloatArray) -> FloatArray:
        return np.concatenate((theta, held))

    theta = np.asarray(start, dtype=float)
    sd = np.ones(used.size)
    factor = None
    for _ in range(max(rounds, 1)):
        gradient = sensitivity(curve, used, residual, full(theta))
        sd = _pointwise_sd(curve, used, gradient)
        factor = _frequentist_scale(curve, used, gradient, sd) if factor is None else factor
        sd = sd * factor
        if not np.all(np.isfinite(sd)) or np.any(sd <= 0):
            raise GeometryError("a residual's standard error is zero or not finite.")
        weight = 1.0 / sd

        def normalised(parameters: FloatArray, weight: FloatArray = weight) -> FloatArray:
            return residual(full(parameters), *values) * weight

        solution = least_squares(normalised, theta, method="lm")
        theta = solution.x
    scaled = residual(full(theta), *values) / sd
    jacobian = _row_jacobian(residual, full(theta), n_fit, values) / sd[:, None]   # (m, n_fit)
    try:
        inverse = np.linalg.inv(jacobian.T @ jacobian)
    except np.linalg.LinAlgError:
        raise GeometryError("the fitted parameters are not determined by these samples.") from None
    gradient = sensitivity(curve, used, residual, full(theta)) / sd[:, None, None]
    mixed = _mixed(curve, used, residual, full(theta), n_fit) / sd[:, None, None, None]
    # d theta / d q_i = -H^-1 (J_i^T d e_i/d q_i + e_i d J_i / d q_i), H = J^T J (the exact
    # first-order response of the solution: the second term matters where a sample's
    # residual is not small against its signal).
    per_sample = (jacobian[:, :, None, None] * gradient[:, None] + scaled[:, None, None, None] * mixed)
    local = -np.einsum("ab,mbkc->amkc", inverse, per_sample)
    if not np.all(np.isfinite(local)):
        raise GeometryError("the fitted parameters' response to the samples is not finite: the "
                            "fit is not determined by these samples.")
    whole = np.zeros((n_fit, curve.parameter.size, 3, 2))
    whole[:, used] = local
    influence = curve.response.influence(whole)
    if correct_noise_bias:
        theta = theta - _noise_bias(curve, used, gradient, mixed, inverse)
    if held.size and held_influence is not None:
        influence = influence + _held_effect(residual, full(theta), values, sd, inverse, n_fit,
                                             held_influence)
    covariance = curve.response.covariance(influence, correlation)
    normalised_residuals = scaled
    contributions = inverse @ (jacobian * scaled[:, None]).T
    return PointwiseFit(
        parameters=full(theta), covariance=covariance, influence=influence,
        residuals=normalised_residuals, sigma=sd, used=used,
        chi2=float(normalised_residuals @ normalised_residuals), contributions=contributions,
    )


def _noise_bias(curve: SmoothedCurve, used: np.ndarray, gradient: FloatArray, mixed: FloatArray,
                inverse: FloatArray) -> FloatArray:
    """The fitted parameters' bias from the noise, to second order (subtract it).

    A residual and its derivative in the parameters are read from the same smoothed
    quantities, so their noise is correlated: a wiggle of the smoothed path that bulges
    outwards also bends more sharply, and it reads as a force that grows with r. The
    estimating equations U(theta) = sum_i e_i J_i = 0 (J_i = d e_i / d theta) then vanish on
    average not at the truth but where U = E[U] = sum_i g_i^T C_i m_i, with g_i = d e_i / d q_i,
    m_i = d J_i / d q_i and C_i the sampling covariance of the smoothed quantities q_i at
    sample i; the estimate is off by -H^-1 E[U] (the corrected score for errors in
    variables: Nakamura 1990, Biometrika 77, 127; the expansion of Cox & Snell 1968,
    J. R. Statist. Soc. B 30, 248). Where the path's radius varies little this bias is one
    to several standard errors (a near-circle: measured 0.8 on average at e = 0.01, and
    removed by this correction); elsewhere it is a small fraction of one. The expansion's
    other second-order terms (the residual's curvature in q, 0.5 tr(d2 e_i / d q_i2 C_i), and
    the covariance of the noise of H with the estimate's) were measured below 1% of this
    one and are left out.

    ``gradient`` and ``mixed`` are per unit standard error of each residual and ``inverse``
    is H^-1, of the normalised problem.
    """
    covariance = _sampling_covariance(curve, used)                       # (m, 3, 3), one axis
    expected = np.einsum("mkoa,mop,mpa->k", mixed, covariance, gradient)
    return np.asarray(-inverse @ expected)


def _sampling_covariance(curve: SmoothedCurve, used: np.ndarray) -> FloatArray:
    """Sampling covariance of the smoothed (value, first, second) of one coordinate at each
    used sample, shape (m, 3, 3).

    The smoother's pointwise covariance (Wahba 1983) includes the prior's share; the
    sampling covariance sum_j var_j R_ij R_ij^T (R_ij: how sample j moves the smoothed
    quantities at i) is computed exactly at PROBES samples and carried to the others as the
    ratio of the two, entry by entry, interpolated along the track.
    """
    bayes = curve.pointwise_covariance[used]
    if curve.response is None:
        return np.asarray(bayes)
    picks = _probes(used.size)
    unit = np.zeros((picks.size, 3, 3, 2))
    unit[:, [0, 1, 2], [0, 1, 2], 0] = 1.0                               # x's value, first, second
    sampled = curve.response.local_covariance(used[picks], unit)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(np.abs(bayes[picks]) > 0, sampled / bayes[picks], 0.0)
    out = np.empty_like(bayes)
    for a in range(3):
        for b in range(3):
            out[:, a, b] = bayes[:, a, b] * np.interp(np.arange(used.size), picks, ratio[:, a, b])
    return out


def _correlated_lags(residuals: FloatArray) -> int:
    """Lags (in used samples) over which the residuals stay positively correlated."""
    centred = residuals - residuals.mean()
    size = centred.size
    if size < 4 or not np.any(centred):
        return 0
    length = 1 << int(math.ceil(math.log2(2 * size)))
    spectrum = np.fft.rfft(centred, length)
    correlation = np.fft.irfft(spectrum * np.conj(spectrum), length)[:size]
    correlation = correlation / correlation[0]
    negative = np.flatnonzero(correlation[1:] <= 0.0)
    return int(negative[0]) if negative.size else size - 1


def _row_jacobian(residual: Residual, parameters: FloatArray, n_fit: int,
                  values: list[FloatArray]) -> FloatArray:
    """d residual_i / d theta_a for the fitted parameters, shape (m, n_fit), by central
    differences."""
    columns = []
    for a in range(n_fit):
        step = 1e-6 * max(1.0, abs(float(parameters[a])))
        plus, minus = parameters.copy(), parameters.copy()
        plus[a] += step
        minus[a] -= step
        columns.append((residual(plus, *values) - residual(minus, *values)) / (2.0 * step))
    return np.column_stack(columns)


def _mixed(curve: SmoothedCurve, used: np.ndarray, residual: Residual, parameters: FloatArray,
           n_fit: int) -> FloatArray:
    """d/d q_i of d residual_i / d theta, shape (m, n_fit, 3, 2)."""
    base = _quantities(curve, used)
    scale = np.sqrt(np.maximum(np.diagonal(curve.pointwise_covariance[used], axis1=1, axis2=2), 0.0))
    out = np.empty((used.size, n_fit, 3, 2))
    for order in range(3):
        typical = float(np.median(np.abs(base[order]))) or 1.0
        step = RELATIVE_STEP * np.where(scale[:, order] > 0, scale[:, order], 1e-6 * typical)
        for axis in range(2):
            rows = []
            for sign in (1.0, -1.0):
                moved = [q.copy() for q in base]
                moved[order][:, axis] += sign * step
                rows.append(_row_jacobian(residual, parameters, n_fit, moved))
            out[:, :, order, axis] = (rows[0] - rows[1]) / (2.0 * step[:, None])
    return out


def _held_effect(residual: Residual, parameters: FloatArray, values: list[FloatArray],
                 sd: FloatArray, inverse: FloatArray, n_fit: int,
                 held_influence: FloatArray) -> FloatArray:
    """How the held parameters' own dependence on the data moves the fitted ones:
    d theta / d data += (d theta / d held) (d held / d data), with
    d theta / d held = -H^-1 sum_i (J_i^T d e_i / d held + e_i d J_i / d held)."""
    scaled = residual(parameters, *values) / sd
    jacobian = _row_jacobian(residual, parameters, n_fit, values) / sd[:, None]
    columns = []
    for j in range(parameters.size - n_fit):
        step = 1e-6 * max(1.0, abs(float(parameters[n_fit + j])))
        plus, minus = parameters.copy(), parameters.copy()
        plus[n_fit + j] += step
        minus[n_fit + j] -= step
        d_residual = (residual(plus, *values) - residual(minus, *values)) / (2.0 * step) / sd
        d_jacobian = (_row_jacobian(residual, plus, n_fit, values)
                      - _row_jacobian(residual, minus, n_fit, values)) / (2.0 * step) / sd[:, None]
        columns.append(jacobian.T @ d_residual + d_jacobian.T @ scaled)
    derivative = -inverse @ np.column_stack(columns)                      # (n_fit, n_held)
    return np.einsum("ah,hic->aic", derivative, held_influence)
