"""The shape fit's least-squares problem about one centre, and where it starts.

The residual of a sample is its distance from the Binet curve, (r - 1/u(theta)) cos(gamma),
in units of its sigma; the Jacobian comes from the variational equations integrated with
the curve (`forcefit.dynamics.binet`), so a trial costs one integration. Over many turns a
small error in the exponent wraps the phase of the apses, and a least-squares fit from a
rough start lands in a wrong minimum; the start is therefore built from what the samples
resolve, stretch by stretch:

1. about a candidate centre, the samples' polar angle and the middle angle as reference;
2. ln r and d ln r/dtheta there from a local quadratic in theta;
3. for each trial exponent, k/h**2 from Binet's equation averaged over about one turn
   (the mean of u'' vanishes), then a short fit of k/h**2 and the state on that turn;
4. the best few refined with the exponent (and the centre) free, and the stretch doubled
   and refitted until it covers the path.

Every integration spends from one budget per fit (`Effort`), which scales with the
samples; a fit that exhausts it raises `FitError` instead of searching on.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from .._types import FloatArray
from ..dynamics.binet import BinetSolution, solve_binet
from ..errors import FitError

TRIAL_EXPONENTS = (-5.0, -4.0, -3.0, -2.5, -2.0, -1.5, -1.0, -0.5, 0.0, 0.5, 1.0, 1.5, 2.0, 3.0)
"""Exponents tried on the first stretch when the exponent is free."""

KEPT_TRIALS = 3
"""How many of the best trial exponents are refined with the exponent free."""

EXPONENT_RANGE = 50.0
"""|n| beyond which a trial has strayed: Binet's equation is then stiff; such a trial fails."""

FIRST_STRETCH = 12
"""Fewest samples on the first stretch (it is widened beyond one turn to hold them)."""

STAGE_POINTS = 300
"""Most samples a stretch of the start uses (every m-th of a longer one); the final fit uses all."""

LOCAL_ANGLE = 0.25
"""Half-width (rad) of the polar angles about the reference whose samples fix ln r and its
slope there, by a quadratic..."""

LOCAL_POINTS = 7
"""... through at least this many samples nearest the reference."""

EFFORT_PER_SAMPLE = 20_000
"""Integration steps one fit may spend per sample, start and all (a well-posed fit needs a
few hundred to a few thousand)."""

EFFORT_BASE = 2_000_000
"""Integration steps every fit may spend besides those per sample."""


class Effort:
    """The integration steps a fit may still spend; `spend` raises `FitError` beyond them."""

    def __init__(self, n_points: int, label: str) -> None:
        self.limit = EFFORT_BASE + EFFORT_PER_SAMPLE * n_points
        self.spent = 0
        self.integrations = 0
        self.label = label

    def spend(self, steps: int) -> None:
        self.spent += steps
        self.integrations += 1
        if self.spent > self.limit:
            raise FitError(
                f"{self.label}: the shape fit gave up after {self.spent} integration steps (its "
                f"budget for this many samples) without settling: the path is probably not an orbit "
                "in a central power law about any likely centre. Check the data, or give the centre.")


@dataclass(frozen=True)
class BinetProblem:
    """The samples and what is held while fitting them.

    Attributes
    ----------
    x, y, sigma : ndarray, shape (n_points,)
        Positions and their per-coordinate sigma (L).
    reference : float
        The polar angle (rad) where the solution starts; polar angles are taken on the branch
        that puts the middle sample within pi of it.
    centre : (float, float) or None
        The centre held fixed (L); None when it is fitted (parameters 4 and 5).
    penalty : float
        The residual given to every sample when a trial cannot be integrated.
    """

    x: FloatArray
    y: FloatArray
    sigma: FloatArray
    reference: float
    centre: tuple[float, float] | None
    penalty: float

    @property
    def n_parameters(self) -> int:
        return 4 if self.centre is not None else 6

    def centre_of(self, vector: FloatArray) -> tuple[float, float]:
        return self.centre if self.centre is not None else (float(vector[4]), float(vector[5]))


def polar(x: FloatArray, y: FloatArray, centre: tuple[float, float], reference: float
          ) -> tuple[FloatArray, FloatArray]:
    """r and the polar angle about ``centre``, unwrapped along the path, on the branch where
    the middle sample lies within pi of ``reference`` (small moves of the centre never jump)."""
    radius = np.hypot(x - centre[0], y - centre[1])
    theta = np.unwrap(np.arctan2(y - centre[1], x - centre[0]))
    theta -= 2.0 * math.pi * round((theta[theta.size // 2] - reference) / (2.0 * math.pi))
    return radius, theta


@dataclass(frozen=True)
class Evaluation:
    """Residuals and Jacobian of one parameter vector on some samples."""

    residual: FloatArray          # (n_rows,), in units of sigma
    jacobian: FloatArray          # (n_rows, n_parameters)
    solution: BinetSolution
    theta: FloatArray             # polar angle of the rows (rad)
    radius: FloatArray            # r of the rows (L)


def evaluate(problem: BinetProblem, vector: FloatArray, effort: Effort,
             rows: np.ndarray | None = None) -> Evaluation:
    """Distances of the samples (``rows``, default all) from the Binet curve of ``vector``, and
    their derivatives: d/dp through the variational equations, d/d(centre) through r and theta."""
    centre = problem.centre_of(vector)
    radius, theta = polar(problem.x, problem.y, centre, problem.reference)
    if rows is not None:
        radius, theta = radius[rows], theta[rows]
    sigma = problem.sigma if rows is None else problem.sigma[rows]
    if abs(float(vector[0])) <= EXPONENT_RANGE:
        solution = solve_binet(theta, problem.reference, vector[:4])
        effort.spend(solution.steps)
    else:
        nothing = np.full(theta.size, np.nan)
        solution = BinetSolution(nothing, nothing, np.full((theta.size, 4), np.nan), nothing, 0, False)
    jacobian = np.zeros((theta.size, problem.n_parameters))
    if not solution.ok:
        return Evaluation(np.full(theta.size, problem.penalty), jacobian, solution, theta, radius)
    u, slope = solution.u, solution.slope
    weight = solution.cos_gamma / sigma
    residual = (radius - 1.0 / u) * weight
    jacobian[:, :4] = solution.sensitivity / (u * u)[:, None] * weight[:, None]
    if problem.centre is None:
        dx, dy = problem.x - centre[0], problem.y - centre[1]
        if rows is not None:
            dx, dy = dx[rows], dy[rows]
        turn = slope / (u * u * radius * radius)           # -(d r_model/d theta) / r**2
        jacobian[:, 4] = (-dx / radius + turn * dy) * weight
        jacobian[:, 5] = (-dy / radius - turn * dx) * weight
    if not np.all(np.isfinite(residual)) or not np.all(np.isfinite(jacobian)):
        return Evaluation(np.full(theta.size, problem.penalty), np.zeros_like(jacobian), solution,
                          theta, radius)
    return Evaluation(residual, jacobian, solution, theta, radius)


@dataclass(frozen=True)
class Solved:
    """Where a least-squares fit ended: the full vector, its chi-square (inf when the curve
    could not be integrated there) and whether the optimiser settled."""

    vector: FloatArray
    chi2: float
    settled: bool


def solve(problem: BinetProblem, vector: FloatArray, free: list[int], effort: Effort, *,
          rows: np.ndarray | None = None, max_nfev: int = 60) -> Solved:
    """Least squares over the ``free`` entries of ``vector`` on ``rows`` (default all)."""
    cache: dict[bytes, Evaluation] = {}

    def full(values: FloatArray) -> FloatArray:
        out = np.array(vector, dtype=float)
        out[free] = values
        return out

    def evaluated(values: FloatArray) -> Evaluation:
        key = values.tobytes()
        if key not in cache:
            cache.clear()
            cache[key] = evaluate(problem, full(values), effort, rows)
        return cache[key]

    start = np.asarray(vector, dtype=float)[free]
    if not evaluated(start).solution.ok:
        return Solved(np.asarray(vector, dtype=float), math.inf, False)
    with np.errstate(all="ignore"):
        result = least_squares(lambda v: evaluated(v).residual, start,
                               jac=lambda v: evaluated(v).jacobian[:, free],
                               method="trf", x_scale="jac", max_nfev=max_nfev)
    final = evaluated(result.x)
    if not final.solution.ok:
        return Solved(np.asarray(vector, dtype=float), math.inf, False)
    return Solved(full(result.x), float(final.residual @ final.residual), bool(result.status > 0))


def _local_state(theta: FloatArray, radius: FloatArray, reference: float) -> tuple[float, float]:
    """ln r and d ln r/dtheta at ``reference``: a quadratic in theta through the samples within
    LOCAL_ANGLE of it (at least the LOCAL_POINTS nearest)."""
    distance = np.abs(theta - reference)
    near = np.flatnonzero(distance <= LOCAL_ANGLE)
    if near.size < LOCAL_POINTS:
        near = np.argsort(distance)[:LOCAL_POINTS]
    offset = theta[near] - reference
    degree = 2 if near.size > 3 and np.ptp(offset) > 0 else 0
    coefficients = np.polyfit(offset, np.log(radius[near]), degree)
    return float(coefficients[-1]), float(coefficients[-2]) if degree else 0.0


def _averaged_ratio(theta: FloatArray, radius: FloatArray, exponent: float) -> float:
    """ln(k/h**2) from Binet's equation averaged over the stretch: <u> = (k/h**2) <u**(-n-2)>."""
    order = np.argsort(theta)
    angle, u = theta[order], 1.0 / radius[order]
    step = np.gradient(angle) if angle.size > 1 else np.ones(1)
    with np.errstate(all="ignore"):
        ratio = float(np.sum(step * u) / np.sum(step * u ** (-exponent - 2.0)))
    return math.log(ratio) if math.isfinite(ratio) and ratio > 0 else math.nan


def stretches(theta: FloatArray, reference: float) -> list[np.ndarray]:
    """Sample indices within 1/2, 1, 2, ... turns of ``reference`` (the first holding at least
    FIRST_STRETCH samples), the last all of them."""
    distance = np.abs(theta - reference)
    out: list[np.ndarray] = []
    half_turns = 0.5
    wanted = min(FIRST_STRETCH, theta.size)
    while True:
        rows = np.flatnonzero(distance <= 2.0 * math.pi * half_turns)
        if rows.size >= wanted and (not out or rows.size > out[-1].size):
            out.append(rows)
        if rows.size == theta.size:
            return out
        half_turns *= 2.0


def _thinned(rows: np.ndarray) -> np.ndarray:
    """Every m-th of ``rows``, at most STAGE_POINTS of them."""
    return rows[:: max(1, math.ceil(rows.size / STAGE_POINTS))]


def fit_binet(problem: BinetProblem, centre: tuple[float, float], effort: Effort) -> Solved:
    """The least-squares Binet curve through all samples: trial exponents on the first stretch
    about ``centre``, the best refined, then the stretch doubled until it covers the path
    (module notes). When a solution cannot be carried onto a longer stretch (a trial law that
    only one turn could not tell from another), the next best is carried instead.

    Parameters
    ----------
    problem : BinetProblem
        The samples; its own centre when held, else ``centre`` starts the fitted one.
    centre : (float, float)
        The centre (L) whose polar angles fix the stretches.
    effort : Effort
        The fit's budget of integration steps.

    Returns
    -------
    Solved
        On all samples; chi-square inf when no trial could be carried through them.
    """
    radius, theta = polar(problem.x, problem.y, centre, problem.reference)
    windows = [_thinned(rows) for rows in stretches(theta, problem.reference)]
    log_radius, slope = _local_state(theta, radius, problem.reference)
    every = list(range(problem.n_parameters))
    trials: list[Solved] = []
    for exponent in TRIAL_EXPONENTS:
        log_ratio = _averaged_ratio(theta[windows[0]], radius[windows[0]], exponent)
        if not math.isfinite(log_ratio):
            continue
        vector = np.array([exponent, log_ratio, log_radius, slope, *centre][: problem.n_parameters])
        trial = solve(problem, vector, [1, 2, 3], effort, rows=windows[0], max_nfev=30)
        if math.isfinite(trial.chi2):
            trials.append(trial)
    trials.sort(key=lambda trial: trial.chi2)
    refined = [solve(problem, trial.vector, every, effort, rows=windows[0]) for trial in trials[:KEPT_TRIALS]]
    ranked = sorted((one for one in refined if math.isfinite(one.chi2)), key=lambda one: one.chi2) + trials
    last = Solved(np.array([math.nan, 0.0, log_radius, slope, *centre][: problem.n_parameters]),
                  math.inf, False)
    for stage, rows in enumerate(windows[1:] if len(windows) > 1 else windows, start=1):
        final = stage == max(len(windows) - 1, 1)
        for k, candidate in enumerate(ranked):
            last = solve(problem, candidate.vector, every, effort, rows=None if final else rows,
                         max_nfev=100 if final else 60)
            if math.isfinite(last.chi2):
                ranked = [last, *ranked[k + 1:]]
                break
        else:
            return last
    return last
