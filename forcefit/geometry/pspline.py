"""A penalised-spline smoother for noisy samples of a plane curve, with GCV and error bars.

The smoother is a penalised B-spline (Eilers & Marx 1996): quintic B-splines on
uniform knots, a third-order difference penalty on their coefficients, and weights
1/sigma**2. It is linear in the data and its normal equations are banded, so a fit
costs O(N). The smoothing level is chosen by generalised cross-validation (GCV;
Craven & Wahba 1979) on a contiguous window of at most ``GCV_WINDOW`` samples with
the same knot spacing: the optimal level depends on the local sample density and
noise, not on how long the recording runs, so it transfers to the whole track,
and the exact GCV (by a Demmler-Reinsch eigen-decomposition) stays cheap.

Pointwise standard errors are Wahba's (1983) Bayesian ones: the covariance of the
spline coefficients is (B^T W B + lambda P)^-1 (times the noise variance when that
is estimated), whose band is computed exactly by the Takahashi recursion.

References
----------
P. H. C. Eilers and B. D. Marx (1996), Flexible smoothing with B-splines and
penalties, Statistical Science 11, 89-121.
P. Craven and G. Wahba (1979), Smoothing noisy data with spline functions,
Numerische Mathematik 31, 377-403.
G. Wahba (1983), Bayesian "confidence intervals" for the cross-validated smoothing
spline, J. R. Statist. Soc. B 45, 133-150.
K. Takahashi, J. Fagan and M.-S. Chen (1973), Formation of a sparse bus impedance
matrix and its application to short circuit study, Proc. PICA Conference, 63-69.
"""

from __future__ import annotations

import copy
import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np
from scipy import linalg, optimize, sparse
from scipy.interpolate import BSpline

from .._types import FloatArray
from ..errors import GeometryError

PenaltyWeight = Callable[[FloatArray], FloatArray]
"""Relative weight of the roughness penalty as a function of the curve parameter."""

DEGREE = 5
"""Degree of the B-splines (quintic: smooth second derivatives for the curvature)."""

PENALTY_ORDER = 3
"""Order of the difference penalty on neighbouring coefficients."""

MAX_INTERVALS = 20_000
"""Most knot intervals; beyond, the knots are spread further apart than two samples."""

GCV_WINDOW = 1200
"""Most samples in the window on which the smoothing level is chosen."""

MIN_WINDOW_DOF = 25.0
"""Fewest degrees of freedom the GCV window's fit must show before its level is trusted."""

LOCAL_CHUNK_VALUES = 4_000_000
"""Most values (32 MB) of the track-long gradients built at once by `LinearResponse.local_covariance`."""

SAMPLES_PER_INTERVAL = 2.0
"""Knot spacing in median sample spacings (two keeps every interval supplied with data)."""


@dataclass(frozen=True)
class SmoothedCurve:
    """A smoothed plane curve and its derivatives at the samples, with standard errors.

    Arrays have shape (n_points, 2): columns are x and y. Derivatives are with
    respect to the parameter (time, or arc length for a shape-only path).

    Attributes
    ----------
    parameter : ndarray, shape (n_points,)
        The curve parameter at the samples.
    value, first, second : ndarray
        Smoothed position and its first and second derivatives.
    value_var, first_var, second_var : ndarray
        Their variances.
    first_second_cov : ndarray
        Covariance of the first and second derivative of each coordinate.
    noise : ndarray, shape (n_points,)
        Position noise per coordinate: the given sigma, or the estimate from the
        residuals.
    level : float
        The smoothing parameter lambda used (per the knot spacing).
    knot_spacing : float
        Distance between knots, in parameter units.
    dof : float
        Effective degrees of freedom of each coordinate's fit (trace of the hat matrix).
    span : float
        Parameter range per degree of freedom: roughly the stretch of the curve
        each smoothed value averages over, in parameter units.
    method : str
        How the level was chosen.
    covariance : ndarray, shape (n_points, 3, 3), optional
        Covariance of (value, first, second) of one coordinate at each sample (the same
        for x and y); see `pointwise_covariance`.
    response : LinearResponse, optional
        How the smoothed values respond to the data, for propagating errors exactly.
    sigma_given : bool
        True when the noise came with the data (sigma), False when it was estimated.
    """

    parameter: FloatArray
    value: FloatArray
    first: FloatArray
    second: FloatArray
    value_var: FloatArray
    first_var: FloatArray
    second_var: FloatArray
    first_second_cov: FloatArray
    noise: FloatArray
    level: float
    knot_spacing: float
    dof: float
    span: float
    method: str
    covariance: FloatArray | None = None
    response: LinearResponse | None = None
    sigma_given: bool = False

    def with_noise(self, noise: float) -> SmoothedCurve:
        """The same smoothing with its error bars for a noise of ``noise`` (L) per
        coordinate, instead of the one estimated from its residuals.

        Only for a curve whose noise was estimated (no sigma with the data).
        """
        if self.sigma_given:
            raise GeometryError("the noise came with the data (sigma); it is not replaced.")
        old = float(np.mean(self.noise))
        factor = (noise / old) ** 2 if old > 0 else 1.0
        return replace(
            self, value_var=self.value_var * factor, first_var=self.first_var * factor,
            second_var=self.second_var * factor, first_second_cov=self.first_second_cov * factor,
            covariance=None if self.covariance is None else self.covariance * factor,
            response=None if self.response is None else self.response.scaled(factor),
            noise=np.full_like(self.noise, noise))

    @property
    def pointwise_covariance(self) -> FloatArray:
        """Covariance of (value, first, second) of one coordinate at each sample, shape
        (n_points, 3, 3), in the units of the parameter's derivatives (same for x and y)."""
        if self.covariance is not None:
            return self.covariance
        out = np.zeros((self.parameter.size, 3, 3))
        out[:, 0, 0], out[:, 1, 1] = self.value_var[:, 0], self.first_var[:, 0]
        out[:, 2, 2] = self.second_var[:, 0]
        out[:, 1, 2] = out[:, 2, 1] = self.first_second_cov[:, 0]
        return out


class LinearResponse:
    """How a linear smoother's output responds to its data, for propagating errors exactly.

    A quantity Q computed from the smoothed values, first and second derivatives at the
    samples has, to first order, dQ = sum_i g_i . d(smoothed_i); the smoother being
    linear, dQ = sum_j u_j . d(data_j) with u = `influence`(g). The variance of Q is then
    sum_j var_j |u_j|**2 for independent noise of variance var_j per coordinate
    (correlated noise: `covariance`). Subclasses implement `_adjoint`.

    Attributes
    ----------
    noise_var : ndarray, shape (n_points,)
        Noise variance per coordinate at each sample (L**2).
    """

    def __init__(self, noise_var: FloatArray) -> None:
        self.noise_var = np.asarray(noise_var, dtype=float)

    def _adjoint(self, gradient: FloatArray) -> FloatArray:
        raise NotImplementedError

    def scaled(self, factor: float) -> LinearResponse:
        """The same response for a noise variance ``factor`` times larger."""
        out = copy.copy(self)
        out.noise_var = self.noise_var * factor
        return out

    def influence(self, gradient: FloatArray) -> FloatArray:
        """d Q / d data for quantities with the given gradients.

        Parameters
        ----------
        gradient : ndarray, shape (n_quantities, n_points, 3, 2)
            dQ / d(value, first, second) of (x, y) at each sample (zero where unused).

        Returns
        -------
        ndarray, shape (n_quantities, n_points, 2)
        """
        return self._adjoint(np.asarray(gradient, dtype=float))

    def local_covariance(self, samples: np.ndarray, gradient: FloatArray) -> FloatArray:
        """Sampling covariance of small groups of quantities, each group read off one sample.

        Quantity (k, a) is ``gradient[k, a] . (value, first, second)`` of the smoothed (x, y)
        at sample ``samples[k]``; the noise is independent. Only the covariances within a
        group are returned: what `covariance` of their `influence` would give on its
        diagonal blocks, without an array as long as the track per quantity.

        Parameters
        ----------
        samples : ndarray of int, shape (n_groups,)
        gradient : ndarray, shape (n_groups, n_per_group, 3, 2)

        Returns
        -------
        ndarray, shape (n_groups, n_per_group, n_per_group)
        """
        gradient = np.asarray(gradient, dtype=float)
        n_groups, per_group = gradient.shape[:2]
        n_points = self.noise_var.size
        out = np.empty((n_groups, per_group, per_group))
        chunk = max(1, LOCAL_CHUNK_VALUES // max(n_points * 6 * per_group, 1))
        for first in range(0, n_groups, chunk):
            picked = slice(first, min(first + chunk, n_groups))
            count = picked.stop - first
            whole = np.zeros((count, per_group, n_points, 3, 2))
            whole[np.arange(count), :, samples[picked]] = gradient[picked]
            influence = self.influence(whole.reshape(count * per_group, n_points, 3, 2))
            scaled = influence * np.sqrt(self.noise_var)[None, :, None]
            scaled = scaled.reshape(count, per_group, n_points, 2)
            out[picked] = np.einsum("kaic,kbic->kab", scaled, scaled)
        return out

    def covariance(self, influence: FloatArray, correlation: FloatArray | None = None) -> FloatArray:
        """Covariance of quantities with data influences ``influence`` (n_q, n_points, 2).

        ``correlation`` (lags 0, 1, ...) is the noise's autocorrelation from one sample to
        the next along the track; None for independent noise.
        """
        scaled = influence * np.sqrt(self.noise_var)[None, :, None]
        out = np.einsum("aic,bic->ab", scaled, scaled)
        if correlation is not None:
            for lag in range(1, correlation.size):
                if correlation[lag] == 0.0:
                    continue
                cross = np.einsum("aic,bic->ab", scaled[:, :-lag], scaled[:, lag:])
                out += correlation[lag] * (cross + cross.T)
        return out


class _SplineResponse(LinearResponse):
    """The penalised spline's response: influence = W B M^-1 sum_d B_d^T g_d."""

    def __init__(self, basis: _Basis, upper: FloatArray, weight: FloatArray, noise_var: FloatArray):
        super().__init__(noise_var)
        self._basis, self._upper, self._weight = basis, upper, weight

    def _design(self, order: int) -> sparse.csr_array:
        """B_d (n_points, n_basis): the d-th derivatives of the six live B-splines at each sample.

        Built when asked for from the basis it shares with the curve, not kept: a curve of 10^6
        samples would otherwise hold three more copies of its basis (over 200 MB)."""
        basis = self._basis
        n_points = basis.first_index.size
        columns = (basis.first_index[:, None] + np.arange(DEGREE + 1)).ravel()
        starts = np.arange(0, (DEGREE + 1) * n_points + 1, DEGREE + 1)
        return sparse.csr_array((basis.weights[order].ravel(), columns, starts),
                                shape=(n_points, basis.n_basis))

    def _adjoint(self, gradient: FloatArray) -> FloatArray:
        n_quantities, n_points = gradient.shape[0], gradient.shape[1]
        columns = gradient.transpose(1, 2, 0, 3).reshape(n_points, 3, 2 * n_quantities)
        right = sum(self._design(order).T @ columns[:, order] for order in range(3))
        solution = linalg.cho_solve_banded((self._upper, False), right)
        out = self._weight[:, None] * (self._design(0) @ solution)
        return out.reshape(n_points, n_quantities, 2).transpose(1, 0, 2)

    def local_covariance(self, samples: np.ndarray, gradient: FloatArray) -> FloatArray:
        # Quantity q's influence is u_q = W B S_q with S_q = M^-1 sum_d B_d^T g_q,d, so the
        # covariance sum_j var_j u_p,j u_q,j = S_p^T G S_q with the banded G = B^T W V W B:
        # everything stays on the spline's coefficients (at most MAX_INTERVALS + DEGREE of
        # them), however many samples the track has.
        gradient = np.asarray(gradient, dtype=float)
        n_groups, per_group = gradient.shape[:2]
        basis = self._basis
        samples = np.asarray(samples)
        right = np.zeros((basis.n_basis, n_groups, per_group, 2))
        for m in range(DEGREE + 1):
            loading = sum(basis.weights[order][samples, m][:, None, None] * gradient[:, :, order]
                          for order in range(3))                            # (n_groups, per_group, 2)
            right[basis.first_index[samples] + m, np.arange(n_groups)] = loading
        columns = right.reshape(basis.n_basis, -1)
        live = np.flatnonzero(np.any(columns != 0.0, axis=0))              # e.g. only x asked for
        solution = np.zeros_like(columns)
        solution[:, live] = linalg.cho_solve_banded((self._upper, False), columns[:, live])
        design = self._design(0)
        gram = (design.T @ sparse.diags_array(self._weight**2 * self.noise_var) @ design).tocsr()
        spread = (gram @ solution).reshape(basis.n_basis, n_groups, per_group, 2)
        return np.einsum("jkac,jkbc->kab", solution.reshape(spread.shape), spread)


class FilterResponse(LinearResponse):
    """The response of a fixed convolution filter (Savitzky-Golay): the smoothed derivative
    of order d at sample i is sum_k coefficients[d][k] data[i + k - half] away from the ends.

    Exact for quantities that use samples at least half a window from either end.
    """

    def __init__(self, coefficients: tuple[FloatArray, FloatArray, FloatArray], noise_var: FloatArray):
        super().__init__(noise_var)
        self._coefficients = coefficients

    def _adjoint(self, gradient: FloatArray) -> FloatArray:
        out = np.zeros((gradient.shape[0], gradient.shape[1], 2))
        for order, taps in enumerate(self._coefficients):
            # sum_i g[i] c[j - i + half] for every j: a convolution with the taps.
            for quantity in range(gradient.shape[0]):
                for axis in range(2):
                    out[quantity, :, axis] += np.convolve(gradient[quantity, :, order, axis],
                                                          taps, mode="same")
        return out


@lru_cache(maxsize=1)
def _cardinal_pieces() -> tuple[FloatArray, FloatArray, FloatArray]:
    """Polynomial coefficients of the cardinal quintic B-spline and its derivatives.

    Returns three (DEGREE + 1, DEGREE + 1) arrays C_d with ``u**p @ C_d[p, m]`` the d-th
    derivative (per knot spacing) of the m-th basis function alive on a knot interval,
    at the fractional position u in [0, 1).
    """
    element = BSpline.basis_element(np.arange(DEGREE + 2, dtype=float), extrapolate=False)
    u = np.linspace(0.0, 1.0, 2 * DEGREE + 3)[:-1]
    powers = np.vander(u, DEGREE + 1, increasing=True)
    pieces = []
    for order in range(3):
        function = element.derivative(order) if order else element
        samples = np.column_stack([function(u + DEGREE - m) for m in range(DEGREE + 1)])
        pieces.append(np.linalg.lstsq(powers, samples, rcond=None)[0])
    return pieces[0], pieces[1], pieces[2]


@dataclass(frozen=True)
class _Basis:
    """The six non-zero B-splines at each sample: first index and weights per order."""

    first_index: np.ndarray
    weights: tuple[FloatArray, FloatArray, FloatArray]
    n_basis: int
    spacing: float


def _basis(s: FloatArray, start: float, spacing: float, n_intervals: int) -> _Basis:
    position = (s - start) / spacing
    index = np.clip(np.floor(position).astype(np.int64), 0, n_intervals - 1)
    powers = np.vander(position - index, DEGREE + 1, increasing=True)
    pieces = _cardinal_pieces()
    weights = tuple(powers @ pieces[d] / spacing**d for d in range(3))
    return _Basis(index, weights, n_intervals + DEGREE, spacing)  # type: ignore[arg-type]


def _normal_band(basis: _Basis, w: FloatArray) -> FloatArray:
    """B^T W B in upper banded storage (DEGREE + 1, n_basis)."""
    band = np.zeros((DEGREE + 1, basis.n_basis))
    b0 = basis.weights[0]
    for m in range(DEGREE + 1):
        for m2 in range(m, DEGREE + 1):
            band[DEGREE - (m2 - m)] += np.bincount(
                basis.first_index + m2, weights=w * b0[:, m] * b0[:, m2], minlength=basis.n_basis
            )
    return band


def _right_side(basis: _Basis, w: FloatArray, data: FloatArray) -> FloatArray:
    """B^T W y for each column of ``data`` (n_points, n_columns)."""
    b0 = basis.weights[0]
    out = np.zeros((basis.n_basis, data.shape[1]))
    for m in range(DEGREE + 1):
        for column in range(data.shape[1]):
            out[:, column] += np.bincount(
                basis.first_index + m, weights=w * b0[:, m] * data[:, column],
                minlength=basis.n_basis,
            )
    return out


def _penalty_band(basis: _Basis, start: float, weight: PenaltyWeight | None) -> FloatArray:
    """D^T diag(w) D of the third-order difference matrix D, in upper banded storage.

    Row j of D differences coefficients j..j+3, whose B-splines centre near
    ``start + (j - 0.5) * spacing``; ``weight`` is evaluated there.
    """
    n_basis = basis.n_basis
    difference = sparse.eye_array(n_basis, format="csr")
    for _ in range(PENALTY_ORDER):
        difference = difference[1:] - difference[:-1]
    if weight is not None:
        where = start + (np.arange(difference.shape[0]) - 0.5) * basis.spacing
        difference = sparse.diags_array(np.sqrt(weight(where))) @ difference
    full = (difference.T @ difference).tocsr()
    band = np.zeros((DEGREE + 1, n_basis))
    for offset in range(PENALTY_ORDER + 1):
        band[DEGREE - offset, offset:] = full.diagonal(offset)
    return band


def _evaluate(basis: _Basis, coefficients: FloatArray, order: int) -> FloatArray:
    weights = basis.weights[order]
    out = np.zeros((weights.shape[0], coefficients.shape[1]))
    for m in range(DEGREE + 1):
        out += weights[:, m, None] * coefficients[basis.first_index + m]
    return out


def _band_to_dense(band: FloatArray) -> FloatArray:
    size = band.shape[1]
    dense = np.zeros((size, size))
    for offset in range(DEGREE + 1):
        diagonal = band[DEGREE - offset, offset:]
        dense += np.diag(diagonal, offset)
        if offset:
            dense += np.diag(diagonal, -offset)
    return dense


def _selected_inverse(upper: FloatArray) -> FloatArray:
    """Band of M^-1 from the banded upper Cholesky factor of M (Takahashi recursion).

    Returns S with S[i, o] = (M^-1)[i, i + o] for o = 0..DEGREE.
    """
    size = upper.shape[1]
    b = DEGREE
    u = np.zeros((size, b + 1))                    # u[i, o] = U[i, i + o]
    for offset in range(b + 1):
        u[: size - offset, offset] = upper[b - offset, offset:]
    result = np.zeros((size + b, b + 1))
    window = np.zeros((b, b))                      # (M^-1)[i+1 : i+1+b, i+1 : i+1+b]
    for i in range(size - 1, -1, -1):
        diagonal = u[i, 0]
        row = u[i, 1:]
        new = -(row @ window) / diagonal           # (M^-1)[i, i+1 .. i+b]
        result[i, 1:] = new
        result[i, 0] = (1.0 / diagonal - row @ new) / diagonal
        window[1:, 1:] = window[:-1, :-1]
        window[0, 1:] = new[:-1]
        window[1:, 0] = new[:-1]
        window[0, 0] = result[i, 0]
    return result[:size]


def _pointwise(
    basis: _Basis, inverse_band: FloatArray, pairs: tuple[tuple[int, int], ...], chunk: int = 65_536
) -> dict[tuple[int, int], FloatArray]:
    """b_a(s)^T C b_b(s) at every sample for each derivative-order pair (a, b), where C is
    the symmetric banded matrix with upper band ``inverse_band``."""
    n_points = basis.first_index.size
    out = {pair: np.empty(n_points) for pair in pairs}
    offsets = np.arange(DEGREE + 1)
    lower, upper = np.minimum.outer(offsets, offsets), np.abs(np.subtract.outer(offsets, offsets))
    for begin in range(0, n_points, chunk):
        part = slice(begin, begin + chunk)
        block = inverse_band[basis.first_index[part, None, None] + lower, upper]
        for a, b in pairs:
            out[a, b][part] = np.einsum(
                "nm,nmk,nk->n", basis.weights[a][part], block, basis.weights[b][part])
    return out


def _gcv_level(
    basis: _Basis, start: float, w: FloatArray, data: FloatArray, weight: PenaltyWeight | None,
    interior: slice,
) -> tuple[float, float]:
    """Lambda minimising GCV, and the degrees of freedom it leaves, by Demmler-Reinsch
    diagonalisation of a small problem.

    The score counts only the ``interior`` samples (residuals and leverages): the ends
    of a window cut from a longer track are not ends of the track, and their extra
    variance would push the choice towards too little smoothing.

    The data are taken about their weighted mean first: a constant lies in the penalty's null
    space, so the score is the same in exact arithmetic, but a track far from the origin would
    otherwise lose the score's flat minimum to rounding (the level moved by 11% for an orbit
    of size 1 m moved 29 m away).
    """
    data = data - np.average(data, axis=0, weights=w)
    normal = _band_to_dense(_normal_band(basis, w))
    penalty = _band_to_dense(_penalty_band(basis, start, weight))
    jitter = 1e-10 * float(np.mean(np.diag(normal)))
    lower = linalg.cholesky(normal + jitter * np.eye(basis.n_basis), lower=True)
    inverse_lower = linalg.solve_triangular(lower, np.eye(basis.n_basis), lower=True)
    eigenvalues, vectors = linalg.eigh(inverse_lower @ penalty @ inverse_lower.T)
    eigenvalues = np.clip(eigenvalues, 0.0, None)
    rotation = inverse_lower.T @ vectors
    # the design matrix has DEGREE + 1 neighbouring non-zeros per row: sum them
    mapped = sum(basis.weights[0][:, m, None] * rotation[basis.first_index + m] for m in range(DEGREE + 1))
    projected = vectors.T @ inverse_lower @ _right_side(basis, w, data)
    inner_mapped, inner_data, inner_w = mapped[interior], data[interior], w[interior]
    leverage_terms = inner_w[:, None] * inner_mapped**2
    n_values = inner_data.size

    def gcv_scores(log_levels: FloatArray) -> FloatArray:
        """The score at each of ``log_levels`` (one matrix product per coordinate)."""
        shrink = 1.0 / (1.0 + 10.0 ** log_levels[None, :] * eigenvalues[:, None])   # (basis, levels)
        rss = np.zeros(log_levels.size)
        for column in range(data.shape[1]):
            fitted = inner_mapped @ (projected[:, column, None] * shrink)
            rss += inner_w @ (inner_data[:, column, None] - fitted) ** 2
        trace = data.shape[1] * np.sum(leverage_terms @ shrink, axis=0)
        return n_values * rss / np.maximum(n_values - trace, 1e-12) ** 2

    def gcv(log_level: float) -> float:
        return float(gcv_scores(np.array([log_level]))[0])

    positive = eigenvalues[eigenvalues > 1e-12 * eigenvalues.max()]
    grid = np.linspace(math.log10(1e-3 / positive.max()), math.log10(1e4 / positive.min()), 121)
    scores = gcv_scores(grid)
    best = int(np.argmin(scores))
    low, high = grid[max(best - 1, 0)], grid[min(best + 1, grid.size - 1)]
    log_level = float(grid[best])
    if high > low:
        log_level = float(optimize.minimize_scalar(
            gcv, bounds=(low, high), method="bounded", options={"xatol": 1e-3}).x)
    return 10.0**log_level, float(np.sum(1.0 / (1.0 + 10.0**log_level * eigenvalues)))


def _choose_level(
    parameter: FloatArray, weight: FloatArray, data: FloatArray, spacing: float,
    penalty_weight: PenaltyWeight | None,
) -> tuple[float, str]:
    """Lambda for knots ``spacing`` apart, from GCV on a window of at most GCV_WINDOW samples.

    The window starts as the middle GCV_WINDOW samples. When its fit has fewer than
    MIN_WINDOW_DOF degrees of freedom it sees too little of the curve's structure, so
    the window is widened fourfold and thinned to every fourth sample, and so on. The
    level found on a window thinned by m transfers to the full density as
    mu_full = mu_window * m**(1/7), with mu = lambda * spacing**5 the continuous
    smoothing level: the GCV-optimal level grows as density**(1/(2q+1)) for a
    penalty of order q = 3 (equivalent-kernel argument; Silverman 1984, Ann. Stat. 12,
    898).
    """
    n_points = parameter.size
    thinning = 1
    while True:
        length = min(n_points, GCV_WINDOW * thinning)
        start = (n_points - length) // 2
        picked = slice(start, start + length, thinning)
        local = parameter[picked]
        local_spacing = max(spacing, SAMPLES_PER_INTERVAL * float(np.median(np.diff(local))))
        intervals = max(int(round((local[-1] - local[0]) / local_spacing)), 1)
        local_spacing = (local[-1] - local[0]) / intervals
        basis = _basis(local, float(local[0]), local_spacing, intervals)
        whole = length == n_points
        count = local.size
        interior = slice(0, count) if whole else slice(count // 4, count - count // 4)
        level, dof = _gcv_level(basis, float(local[0]), weight[picked], data[picked],
                                penalty_weight, interior)
        if dof >= MIN_WINDOW_DOF or whole:
            break
        thinning *= 4
    scale = (local_spacing / spacing) ** (2 * PENALTY_ORDER - 1) * thinning ** (1 / (2 * PENALTY_ORDER + 1))
    where = "all samples" if length == n_points and thinning == 1 else (
        f"samples {start}-{start + length - 1}" + (f", every {thinning}th" if thinning > 1 else ""))
    return level * scale, f"GCV on {where}"


def smooth_curve(
    parameter: FloatArray,
    x: FloatArray,
    y: FloatArray,
    *,
    sigma: FloatArray | None = None,
    level: float | None = None,
    penalty_weight: PenaltyWeight | None = None,
    with_errors: bool = True,
) -> SmoothedCurve:
    """Smooth a noisy plane curve and differentiate it, with pointwise standard errors.

    Parameters
    ----------
    parameter : ndarray, shape (n_points,)
        Strictly increasing curve parameter: time (T), or arc length (L).
    x, y : ndarray, shape (n_points,)
        Noisy positions (L).
    sigma : ndarray, shape (n_points,), optional
        Position standard error per coordinate (L); estimated from the residuals
        when not given.
    level : float, optional
        Smoothing parameter lambda to use instead of choosing it by GCV.
    penalty_weight : callable, optional
        Relative weight of the roughness penalty along the parameter (default 1):
        smooth harder where it is larger.
    with_errors : bool
        Compute the standard errors (and degrees of freedom); False leaves them nan,
        for a quick pilot.

    Returns
    -------
    SmoothedCurve
        Derivatives with respect to ``parameter``.

    Examples
    --------
    >>> s = np.linspace(0.0, 2 * np.pi, 400)
    >>> curve = smooth_curve(s, 2 * np.cos(s), 2 * np.sin(s))
    >>> bool(np.allclose(curve.second[50:-50], -curve.value[50:-50], atol=1e-6))
    True
    """
    n_points = parameter.size
    if n_points < 2 * (DEGREE + 1):
        raise GeometryError(
            f"{n_points} points are too few to smooth and differentiate; at least "
            f"{2 * (DEGREE + 1)} are needed."
        )
    data = np.column_stack((x, y))
    weight = np.ones(n_points) if sigma is None else 1.0 / np.asarray(sigma) ** 2
    start, extent = float(parameter[0]), float(parameter[-1] - parameter[0])
    # Knots SAMPLES_PER_INTERVAL mean spacings apart: the median would put thousands of
    # knots along samples crowded unevenly (and the GCV's dense algebra grows as their cube).
    spacing = max(SAMPLES_PER_INTERVAL * extent / max(n_points - 1, 1), extent / MAX_INTERVALS)
    n_intervals = max(int(math.ceil(extent / spacing - 1e-9)), 1)
    spacing = extent / n_intervals
    basis = _basis(parameter, start, spacing, n_intervals)
    method = "given level"
    if level is None:
        level, method = _choose_level(parameter, weight, data, spacing, penalty_weight)
    normal = _normal_band(basis, weight)
    system = normal + level * _penalty_band(basis, start, penalty_weight)
    try:
        upper = linalg.cholesky_banded(system, lower=False)
    except linalg.LinAlgError:
        raise GeometryError(
            "the smoothing problem is singular: too few samples along part of the path."
        ) from None
    coefficients = linalg.cho_solve_banded((upper, False), _right_side(basis, weight, data))
    value = _evaluate(basis, coefficients, 0)
    first, second = _evaluate(basis, coefficients, 1), _evaluate(basis, coefficients, 2)
    if not with_errors:
        unknown = np.full_like(value, np.nan)
        return SmoothedCurve(
            parameter=parameter, value=value, first=first, second=second, value_var=unknown,
            first_var=unknown, second_var=unknown, first_second_cov=unknown,
            noise=np.full(n_points, np.nan), level=float(level), knot_spacing=spacing,
            dof=math.nan, span=math.nan, method=method)
    inverse = _selected_inverse(upper)
    dof = float(np.sum(inverse[:, 0] * normal[DEGREE]) + 2.0 * sum(
        np.sum(inverse[: basis.n_basis - o, o] * normal[DEGREE - o, o:]) for o in range(1, DEGREE + 1)
    ))
    if sigma is None:
        rss = float(np.sum((data - value) ** 2))
        noise_var = rss / max(2.0 * (n_points - dof), 1.0)
        noise = np.full(n_points, math.sqrt(noise_var))
    else:
        noise_var, noise = 1.0, np.asarray(sigma, dtype=float)
    pairs = ((0, 0), (1, 1), (2, 2), (0, 1), (0, 2), (1, 2))
    variance = {pair: noise_var * values for pair, values in _pointwise(basis, inverse, pairs).items()}
    covariance = np.empty((n_points, 3, 3))
    for a, b in pairs:
        covariance[:, a, b] = covariance[:, b, a] = variance[a, b]
    return SmoothedCurve(
        parameter=parameter,
        value=value,
        first=first,
        second=second,
        value_var=np.repeat(variance[0, 0][:, None], 2, axis=1),
        first_var=np.repeat(variance[1, 1][:, None], 2, axis=1),
        second_var=np.repeat(variance[2, 2][:, None], 2, axis=1),
        first_second_cov=np.repeat(variance[1, 2][:, None], 2, axis=1),
        noise=noise,
        level=float(level),
        knot_spacing=spacing,
        dof=dof,
        span=extent / max(dof, 1.0),
        method=method,
        covariance=covariance,
        response=_SplineResponse(basis, upper, weight, noise_var / weight),
        sigma_given=sigma is not None,
    )
