"""Posterior sampling of an orbit fit with emcee: converged, with honest intervals.

The log-probability is evaluated for all walkers at once (emcee's ``vectorize``) on the
compiled batch propagator, its orbits spread over the processor's cores. Walkers start in
a ball drawn from the least-squares covariance; by default half the steps are independence
draws from that normal approximation (Student-t tailed, accepted by the Metropolis-Hastings
ratio, so the target stays the exact posterior) and half differential-evolution moves. The
run stops by itself once the chain is longer than ``TAU_FACTOR`` integrated autocorrelation
times and the estimate of those times has settled (emcee's own autocorrelation tools), or at
``max_steps``; burn-in is discarded and the chain thinned from the autocorrelation time.

References
----------
D. Foreman-Mackey, D. W. Hogg, D. Lang and J. Goodman (2013), emcee: the MCMC hammer,
PASP 125, 306. J. Goodman and J. Weare (2010), Ensemble samplers with affine invariance,
Comm. App. Math. Comp. Sci. 5, 65. C. J. F. ter Braak and J. A. Vrugt (2008),
Differential evolution Markov chain with snooker updater, Stat. Comput. 18, 435.
W. K. Hastings (1970), Monte Carlo sampling methods using Markov chains and their
applications, Biometrika 57, 97. L. Tierney (1994), Markov chains for exploring posterior
distributions, Ann. Statist. 22, 1701.
"""

from __future__ import annotations

import hashlib
import math
import os
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Literal

import emcee
import numpy as np
import pandas as pd

from .._types import FloatArray
from ..dynamics.orbit_model import OrbitModel, observed
from ..errors import FitError, InputError
from ..estimators.result import LawFit, OrbitFit, ProjectedFit
from ..formatting import estimate, interval
from ..units import strength_unit

TAU_FACTOR = 50.0
"""The chain must be this many autocorrelation times long to count as converged."""

TAU_SETTLED = 0.05
"""Largest relative change of the autocorrelation time between checks, once settled."""

CHECK_EVERY = 250
"""Steps between convergence checks."""

FIRST_GUESS = 2000
"""The progress bar's length until the first check estimates the autocorrelation time."""

SAMPLING_RTOL = 1e-10
"""Integration tolerance while sampling: orbit errors near 1e-8 of the size, far below any
noise, at half the cost of the fitting tolerance. While sampling, the orbits take the steps
this tolerance wants and the samples are read off the integrator's continuous extension (no
step per sample: several times faster on densely sampled tracks), the walkers' orbits spread
over the processor's cores. The tightest tolerance `sample_posterior` uses; it loosens it
when that is shown not to matter (`LOOSER_RTOLS`)."""

LOOSER_RTOLS = (1e-8, 1e-9)
"""Looser sampling tolerances tried first, loosest first: one is taken when, at the best fit and at
two standard errors either way along each principal axis of the least-squares covariance, ln p
differs from its value at the fitting tolerance (orbits stepped onto every sample) by at most
`LOG_P_TOLERANCE`. On a 2 631-point pendulum with 1 mm noise, 1e-8 halves the cost of a step,
its orbits within 1e-4 of the noise of the tight ones (benchmarks/commands.py)."""

LOG_P_TOLERANCE = 0.01
"""Largest change of ln p the integration error may make at the points checked: a posterior
density off by under 1%, far inside the Monte Carlo error of any interval."""

Prior = tuple[str, float, float]
"""("uniform", low, high) or ("normal", mean, standard deviation)."""

DEFAULT_BOUNDS: Mapping[str, tuple[float, float]] = {
    "exponent": (-20.0, 20.0),
    "drag": (0.0, math.inf),
    "log_noise_scale": (-10.0, 10.0),
    "parallax": (0.0, math.inf),
}
"""Physical bounds applied unless the caller gives a prior for the parameter."""


@dataclass(frozen=True)
class IntervalRow:
    """One parameter of a posterior as text: its median, 68% and 95% intervals, and unit."""

    name: str
    median: str
    interval_68: str
    interval_95: str
    unit: str


@dataclass(frozen=True)
class Posterior:
    """Samples of the orbit parameters' posterior, with their convergence record.

    Attributes
    ----------
    samples : DataFrame
        One row per kept (thinned, post-burn-in) sample; one column per sampled
        parameter, plus the derived ``strength`` (k) and, when sampled, ``noise_scale``.
    autocorr_time : dict
        Integrated autocorrelation time of each sampled parameter, in steps.
    converged : bool
        Whether the run met the convergence rule.
    reason : str
        Why it converged or did not.
    n_steps, n_walkers, burn_in, thin : int
        The run's length, ensemble size, discarded steps and thinning.
    units : dict
        The unit of each column.
    sampler : emcee.EnsembleSampler
        The sampler, for arviz and further inspection.
    """

    samples: pd.DataFrame
    autocorr_time: dict[str, float]
    converged: bool
    reason: str
    n_steps: int
    n_walkers: int
    burn_in: int
    thin: int
    units: dict[str, str]
    sampler: Any = None

    def interval(self, name: str, level: float = 0.68) -> tuple[float, float]:
        """Central credible interval of one column at probability ``level``."""
        if name not in self.samples:
            raise InputError(f"no parameter {name!r}; the columns are: {', '.join(self.samples)}.")
        tail = 50.0 * (1.0 - level)
        low, high = np.percentile(self.samples[name], [tail, 100.0 - tail])
        return float(low), float(high)

    def effective_sample_size(self) -> dict[str, float]:
        """Effective number of independent samples of each sampled parameter (arviz)."""
        return {name: float(value) for name, value in _arviz_summary(self)["ess_bulk"].items()}

    def split_rhat(self) -> dict[str, float]:
        """Split R-hat of each sampled parameter across walkers (arviz; 1 when mixed)."""
        return {name: float(value) for name, value in _arviz_summary(self)["r_hat"].items()}

    def to_arviz(self) -> Any:
        """The chain as an arviz InferenceData (walkers as chains), burn-in and thinning applied."""
        import arviz

        names = list(self.autocorr_time)
        return arviz.from_emcee(self.sampler, var_names=names).sel(draw=slice(self.burn_in, None, self.thin))

    def rows(self) -> list[IntervalRow]:
        """Median, 68% and 95% intervals of each column, as text, with units: the median and the
        68% interval to two digits of its narrower side, the 95% interval to its own; the ends of
        an interval always distinct."""
        rows = []
        for name in self.samples:
            median, interval_68 = estimate(float(np.median(self.samples[name])), *self.interval(name, 0.68))
            rows.append(IntervalRow(name=name, median=median, interval_68=interval_68,
                                    interval_95=interval(*self.interval(name, 0.95)),
                                    unit=self.units.get(name, "")))
        return rows

    @property
    def verdict(self) -> str:
        """"converged" or "NOT CONVERGED"."""
        return "converged" if self.converged else "NOT CONVERGED"

    def to_text(self) -> str:
        """Median, 68% and 95% intervals of each column, with units, and the convergence verdict."""
        lines = [f"posterior: {self.n_walkers} walkers x {self.n_steps} steps, burn-in {self.burn_in}, "
                 f"thinned by {self.thin}: {len(self.samples)} samples",
                 f"{self.verdict}: {self.reason}",
                 f"  {'parameter':<16} {'median':>14} {'68% interval':>32} {'95% interval':>32}  unit"]
        lines += [f"  {row.name:<16} {row.median:>14} {row.interval_68:>32} {row.interval_95:>32}  {row.unit}"
                  for row in self.rows()]
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe summary: medians, intervals, autocorrelation times, convergence."""
        from .._json import json_safe

        return json_safe({
            "converged": self.converged, "reason": self.reason, "n_steps": self.n_steps,
            "n_walkers": self.n_walkers, "burn_in": self.burn_in, "thin": self.thin,
            "autocorr_time": self.autocorr_time,
            "parameters": {name: {"median": float(np.median(self.samples[name])),
                                  "interval_68": list(self.interval(name, 0.68)),
                                  "interval_95": list(self.interval(name, 0.95)),
                                  "unit": self.units.get(name, "")} for name in self.samples},
        })


def _arviz_summary(posterior: Posterior) -> pd.DataFrame:
    import arviz

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return arviz.summary(posterior.to_arviz(), kind="diagnostics")


def _log_prior(theta: FloatArray, names: Sequence[str], priors: Mapping[str, Prior]) -> FloatArray:
    """Log prior density of each walker (constants dropped; -inf outside bounds)."""
    total = np.zeros(theta.shape[0])
    for column, name in enumerate(names):
        value = theta[:, column]
        if name in priors:
            kind, first, second = priors[name]
            if kind == "uniform":
                total = np.where((value < first) | (value > second), -np.inf, total)
            else:
                total = total - 0.5 * ((value - first) / second) ** 2
        elif name in DEFAULT_BOUNDS:
            low, high = DEFAULT_BOUNDS[name]
            total = np.where((value < low) | (value > high), -np.inf, total)
    return total


def _check_priors(priors: Mapping[str, Prior], names: Sequence[str]) -> None:
    for name, prior in priors.items():
        if name not in names:
            raise InputError(f"a prior was given for {name!r}, which is not sampled; the sampled "
                             f"parameters are: {', '.join(names)}.")
        if len(prior) != 3 or prior[0] not in ("uniform", "normal"):
            raise InputError(f'the prior for {name!r} must be ("uniform", low, high) or '
                             f'("normal", mean, sd), not {prior!r}.')
        if prior[0] == "uniform" and not prior[1] < prior[2] or prior[0] == "normal" and not prior[2] > 0:
            raise InputError(f"the prior for {name!r} is empty or has no width: {prior!r}.")


@dataclass(frozen=True)
class _Problem:
    """Everything the log-probability needs, fixed for a run."""

    model: OrbitModel
    template: FloatArray
    columns: np.ndarray
    names: tuple[str, ...]
    data: FloatArray
    sigma: FloatArray
    fit_noise: bool
    priors: Mapping[str, Prior]
    correlation_time: float = 1.0

    def __call__(self, theta: FloatArray) -> FloatArray:
        theta = np.atleast_2d(theta)
        log_p = _log_prior(theta, self.names, self.priors)
        alive = np.isfinite(log_p)
        if not alive.any():
            return log_p
        full = np.repeat(self.template[None, :], int(alive.sum()), axis=0)
        full[:, self.columns] = theta[alive][:, : self.columns.size]
        predictions, ok = self.model.predict(full)
        residual = (predictions[0] if len(predictions) == 1 else np.concatenate(predictions, axis=1))
        residual -= self.data[None]                    # in place: the predictions are new arrays
        residual /= self.sigma[None, :, None]
        chi2 = np.einsum("wij,wij->w", residual, residual)
        chi2 /= self.correlation_time                  # correlated residuals: 1/tau the information
        if self.fit_noise:
            scale = np.exp(theta[alive][:, -1])
            likelihood = -0.5 * chi2 / scale**2 - self.data.size / self.correlation_time * np.log(scale)
        else:
            likelihood = -0.5 * chi2
        log_p[alive] += np.where(ok & np.isfinite(likelihood), likelihood, -np.inf)
        return log_p


def _problem(
    fit: OrbitFit, noise: str, priors: Mapping[str, Prior], correlation_time: float = 1.0,
) -> tuple[_Problem, FloatArray, FloatArray]:
    """The log-probability, the best-fit point and the covariance to start the walkers from."""
    model: OrbitModel = replace(fit.model, rtol=SAMPLING_RTOL, dense=True, parallel=True)
    varying = list(fit.parameter_names)
    template = np.array([fit.values[name] for name in model.names])
    best = np.array([fit.values[name] for name in varying])
    covariance = np.array(fit.covariance, dtype=float) * correlation_time / fit.correlation_time
    fit_noise = noise == "fit"
    names = tuple(varying) + (("log_noise_scale",) if fit_noise else ())
    if fit_noise:
        scale = math.log(max(math.sqrt(fit.reduced_chi2), 1e-6))
        best = np.append(best, scale)
        covariance = np.pad(covariance, ((0, 1), (0, 1)))
        covariance[-1, -1] = correlation_time / (2.0 * fit.n_points)
    _check_priors(priors, names)
    problem = _Problem(model=model, template=template,
                       columns=np.array([model.names.index(name) for name in varying]),
                       names=names, data=observed(model.tracks), sigma=np.asarray(fit.sigma),
                       fit_noise=fit_noise, priors=priors, correlation_time=correlation_time)
    return problem, best, covariance


def _loosened(problem: _Problem, best: FloatArray, covariance: FloatArray) -> _Problem:
    """The problem at the loosest of `LOOSER_RTOLS` whose ln p stays within `LOG_P_TOLERANCE` of
    the fitting tolerance's at the best fit and two standard errors along each principal axis;
    the problem unchanged (at `SAMPLING_RTOL`) when none does."""
    from ..dynamics.propagate import BATCH_RTOL

    axes = 2.0 * _factor(covariance).T
    points = np.vstack((best, best + axes, best - axes))
    points = points[np.isfinite(_log_prior(points, problem.names, problem.priors))]
    reference = replace(problem, model=replace(problem.model, rtol=BATCH_RTOL, dense=False))(points)
    for rtol in LOOSER_RTOLS:
        trial = replace(problem, model=replace(problem.model, rtol=rtol))
        log_p = trial(points)
        same = (log_p == reference) | (np.abs(log_p - reference) <= LOG_P_TOLERANCE)
        if points.shape[0] and np.all(same):
            return trial
    return problem


def _units(fit: OrbitFit, names: Sequence[str]) -> dict[str, str]:
    length, time = fit.length_unit, fit.time_unit or "T"
    units = {"exponent": "", "log_force": f"ln({length} {time}^-2)", "rotation_rate": f"rad/{time}",
             "log_noise_scale": "", "noise_scale": "", "strength": strength_unit(length, time, fit.exponent)}
    for name in names:
        if name.startswith(("centre", "x0", "y0")):
            units[name] = length
        elif name.startswith(("vx0", "vy0")):
            units[name] = f"{length}/{time}"
        elif name == "drag":
            units[name] = f"1/{time}" if fit.model.drag == "linear" else f"1/{length}"
    return units


def _factor(covariance: FloatArray) -> FloatArray:
    """A lower-triangular L with L L^T the covariance (its correlation matrix nudged to be
    positive definite; the diagonal alone when even that fails)."""
    scale = np.sqrt(np.clip(np.diag(covariance), 1e-300, None))
    correlation = covariance / np.outer(scale, scale)
    try:
        factor = np.linalg.cholesky(correlation + 1e-9 * np.eye(scale.size))
    except np.linalg.LinAlgError:
        factor = np.eye(scale.size)
    return factor * scale[:, None]


def _start(best: FloatArray, covariance: FloatArray, walkers: int,
           in_prior: Callable[[FloatArray], np.ndarray], rng: np.random.Generator) -> FloatArray:
    """Walkers drawn from the least-squares normal approximation, kept inside the prior."""
    points = best + rng.standard_normal((walkers * 4, best.size)) @ _factor(covariance).T
    inside = points[in_prior(points)]
    if inside.shape[0] < walkers:
        raise FitError("could not place the walkers inside the prior around the least-squares fit; "
                       "widen the prior.")
    return inside[:walkers]


APPROXIMATION_DOF = 5.0
"""Degrees of freedom of the Student t the independence move draws from: tails heavier than
any near-normal posterior's, so the draws cover it."""

APPROXIMATION_WIDENING = 1.2
"""Factor on the least-squares standard errors of the independence move's draws."""

APPROXIMATION_SHARE = 0.5
"""Share of the steps that are independence draws in the "mixed" moves; the others are
differential-evolution moves, which carry the chain where the approximation is poor."""


class _ApproximationDraws:
    """Independence Metropolis-Hastings proposals (Hastings 1970, Biometrika 57, 97; Tierney 1994,
    Ann. Statist. 22, 1701, section 2.3.3): every walker proposes a fresh point from a Student t
    centred on the least-squares fit with its (widened) covariance, whatever its current place;
    the log ratio ln g(x) - ln g(x') of the proposal densities enters the acceptance, so the
    chain's target stays the posterior, whether or not the approximation is good. Where it is
    good (most orbit fits: many samples, a near-normal posterior) half the draws are accepted and
    successive samples are almost independent; where it is poor they are rejected and the
    chain moves by the other moves alone."""

    def __init__(self, best: FloatArray, covariance: FloatArray,
                 dof: float = APPROXIMATION_DOF, widening: float = APPROXIMATION_WIDENING) -> None:
        self.best = np.asarray(best, dtype=float)
        self.factor = widening * _factor(np.asarray(covariance, dtype=float))
        self.dof = dof

    def log_density(self, points: FloatArray) -> FloatArray:
        """ln g of the proposal at each point, constants dropped."""
        whitened = np.linalg.solve(self.factor, (points - self.best).T).T
        return -0.5 * (self.dof + self.best.size) * np.log1p(np.sum(whitened**2, axis=1) / self.dof)

    def __call__(self, coords: FloatArray, random: np.random.RandomState) -> tuple[FloatArray, FloatArray]:
        count = coords.shape[0]
        normal = random.standard_normal((count, self.best.size))
        stretch = np.sqrt(self.dof / random.chisquare(self.dof, count))
        proposed = self.best + (normal * stretch[:, None]) @ self.factor.T
        return proposed, self.log_density(coords) - self.log_density(proposed)


def _moves(kind: str, best: FloatArray | None = None, covariance: FloatArray | None = None) -> Any:
    if kind == "stretch":
        return emcee.moves.StretchMove()
    if kind == "de":
        return [(emcee.moves.DEMove(), 0.8), (emcee.moves.DESnookerMove(), 0.2)]
    if kind == "mixed":
        if best is None or covariance is None:
            raise InputError('moves "mixed" needs the least-squares fit and its covariance.')
        rest = 1.0 - APPROXIMATION_SHARE
        return [(emcee.moves.DEMove(), 0.8 * rest), (emcee.moves.DESnookerMove(), 0.2 * rest),
                (emcee.moves.MHMove(_ApproximationDraws(best, covariance)), APPROXIMATION_SHARE)]
    raise InputError(f'moves {kind!r} is unknown; use "mixed", "de" or "stretch".')


def sample_posterior(
    fit: LawFit,
    *,
    walkers: int | None = None,
    max_steps: int = 20_000,
    min_steps: int = 0,
    priors: Mapping[str, Prior] | None = None,
    noise: Literal["known", "fit"] | None = None,
    correlated: bool = True,
    moves: Literal["mixed", "de", "stretch"] = "mixed",
    progress: bool = True,
    rng: np.random.Generator | int | None = None,
    save: str | os.PathLike[str] | None = None,
    resume: bool = False,
) -> Posterior:
    """Sample the posterior of an orbit fit's parameters with emcee.

    Parameters
    ----------
    fit : OrbitFit or ProjectedFit
        A fit from `fit_orbit`, or from `fit_projected` (then `sample_projected` runs); its
        least-squares covariance places the walkers.
    walkers : int, optional
        Ensemble size; default max(32, 2 x parameters + 2).
    max_steps : int
        Longest run; the run stops earlier once converged.
    min_steps : int
        Shortest run, converged or not (for tests and for resuming).
    priors : mapping, optional
        Per parameter ("uniform", low, high) or ("normal", mean, sd); other parameters
        get flat priors within physical bounds (n in [-20, 20], drag >= 0, parallax > 0).
    noise : {"known", "fit"}, optional
        Take sigma as given, or sample a noise scale factor too (default: "known" when
        the tracks carry sigma, else "fit").
    correlated : bool
        Use the fit's correlated-noise model (default): residuals that stay alike over tau
        samples (the fit's ``correlation_time``) carry 1/tau as much information, so the
        log-likelihood is divided by tau -- the same widening as the fit's errors (the
        effective-sample-size approximation; e.g. B. Efron & R. Tibshirani 1993, An
        Introduction to the Bootstrap, §8.5, for dependent data). False takes the
        residuals as independent.
    moves : {"mixed", "de", "stretch"}
        Half independence draws from the least-squares approximation and half
        differential-evolution moves (default: on orbit fits' near-normal posteriors an
        autocorrelation time of a few steps, see benchmarks/posterior.py), the
        differential-evolution moves alone, or emcee's stretch move.
    progress : bool
        Show a progress bar.
    rng : Generator or int, optional
        Source of the run's random numbers (walker start and moves), or its seed.
    save : path, optional
        HDF5 file that keeps the chain as it grows (emcee's HDFBackend).
    resume : bool
        Continue the chain stored in ``save`` instead of starting afresh.

    Returns
    -------
    Posterior
    """
    if isinstance(fit, ProjectedFit):
        from .projected_posterior import sample_projected

        return sample_projected(fit, walkers=walkers, max_steps=max_steps, min_steps=min_steps,
                                priors=priors, noise=noise, correlated=correlated, moves=moves,
                                progress=progress, rng=rng, save=save, resume=resume)
    if not isinstance(fit, OrbitFit):
        raise InputError("sampling needs a fit from fit_orbit (the orbit method) or fit_projected; "
                         f"this one is a {fit.method} fit.")
    noise = noise or ("known" if fit.sigma_known else "fit")
    problem, best, covariance = _problem(fit, noise, dict(priors or {}),
                                         fit.correlation_time if correlated else 1.0)
    fingerprint = _fingerprint(problem)
    problem = _loosened(problem, best, covariance)

    def in_prior(points: FloatArray) -> np.ndarray:
        return np.isfinite(_log_prior(points, problem.names, problem.priors))

    sampler, converged, reason = run_ensemble(
        problem, best, covariance, in_prior=in_prior, walkers=walkers, max_steps=max_steps,
        min_steps=min_steps, moves=moves, progress=progress, rng=rng, save=save, resume=resume,
        fingerprint=fingerprint)
    return _collect(sampler, problem, fit, converged, reason)


def _fingerprint(problem: _Problem) -> str:
    """A digest of what a chain samples: the data and their sigma, the model's parameters and the
    values held fixed, the priors and the noise model."""
    digest = hashlib.sha256()
    for array in (problem.data, problem.sigma, problem.template):
        digest.update(np.ascontiguousarray(array, dtype=float).tobytes())
    digest.update(repr((problem.names, problem.model.names, sorted(problem.priors.items()),
                        problem.fit_noise, problem.correlation_time)).encode("utf-8"))
    return digest.hexdigest()[:32]


def run_ensemble(
    log_probability: Callable[[FloatArray], FloatArray],
    best: FloatArray,
    covariance: FloatArray,
    *,
    in_prior: Callable[[FloatArray], np.ndarray] | None = None,
    walkers: int | None = None,
    max_steps: int = 20_000,
    min_steps: int = 0,
    moves: str = "mixed",
    progress: bool = False,
    rng: np.random.Generator | int | None = None,
    save: str | os.PathLike[str] | None = None,
    resume: bool = False,
    fingerprint: str | None = None,
) -> tuple[emcee.EnsembleSampler, bool, str]:
    """Run emcee on a vectorised log-probability until converged; the engine behind
    `sample_posterior`, usable on any problem.

    Parameters
    ----------
    log_probability : callable
        Maps walker positions of shape (n_walkers, n_dim) to log densities (n_walkers,).
    best, covariance : ndarray
        Centre and covariance of the normal ball the walkers start in, and of the approximation
        the "mixed" moves draw from.
    in_prior : callable, optional
        Maps positions to a mask of those inside the prior's support.
    walkers, max_steps, min_steps, moves, progress, rng, save, resume
        As in `sample_posterior`.
    fingerprint : str, optional
        What the chain samples (the track, model and priors), kept in the saved file; a resumed
        chain whose file holds another fingerprint is refused.

    Returns
    -------
    sampler, converged, reason
    """
    ndim = best.size
    walkers = walkers or max(32, 2 * ndim + 2)
    walkers += walkers % 2
    backend = None
    if save is not None:
        backend = emcee.backends.HDFBackend(os.fspath(save))
        if resume:
            _check_chain(backend, save, fingerprint)
        else:
            backend.reset(walkers, ndim)
            with backend.open("a") as stored:
                stored[backend.name].attrs["fingerprint"] = fingerprint or ""
    elif resume:
        raise InputError("resume needs the chain file: give save=... (--resume FILE).")
    sampler = emcee.EnsembleSampler(walkers, ndim, log_probability, vectorize=True,
                                    moves=_moves(moves, best, covariance), backend=backend)
    if resume and backend is not None and backend.iteration > 0:
        state = sampler.get_last_sample()
    else:
        generator, legacy = _random_sources(rng)
        inside = in_prior or (lambda points: np.ones(points.shape[0], dtype=bool))
        state = emcee.State(_start(best, covariance, walkers, inside, generator),
                            random_state=legacy.get_state())
    done = backend.iteration if backend is not None and resume else 0
    converged, reason = _run(sampler, state, max_steps - done, min_steps, progress)
    return sampler, converged, reason


def _check_chain(backend: emcee.backends.HDFBackend, path: str | os.PathLike[str],
                 fingerprint: str | None) -> None:
    """Refuse to resume a chain file that is missing or samples another problem."""
    if not Path(path).is_file():
        raise InputError(f"{path}: no chain to resume. Start one with --save {path}.")
    with backend.open() as stored:
        group = stored.get(backend.name)
        kept = None if group is None else group.attrs.get("fingerprint")
    if fingerprint is not None and kept != fingerprint:
        raise InputError(f"{path}: this chain belongs to another run (its track, model, priors or noise "
                         "model differ from this one's), so continuing it would report that run's "
                         "precision. Start a new chain with --save, or resume with the options the chain "
                         "was started with.")


def _random_sources(
    rng: np.random.Generator | int | None,
) -> tuple[np.random.Generator, np.random.RandomState]:
    """The generator that places the walkers and the legacy generator emcee's moves draw from:
    both from the seed when one is given (or none), else the second seeded from the first."""
    if isinstance(rng, np.random.Generator):
        return rng, np.random.RandomState(int(rng.integers(2**32)))
    return np.random.default_rng(rng), np.random.RandomState(rng)


def _run(sampler: emcee.EnsembleSampler, state: Any, steps: int, min_total: int,
         progress: bool) -> tuple[bool, str]:
    """Advance the chain until converged (or ``steps`` more steps); return the verdict."""
    from tqdm.auto import tqdm

    previous: FloatArray | None = None
    change = math.inf
    if steps > 0:
        start = sampler.iteration
        with tqdm(total=min(steps, FIRST_GUESS), disable=not progress, unit="step", desc="sampling",
                  leave=False, mininterval=0.5) as bar:
            for _ in sampler.sample(state, iterations=steps, store=True):
                bar.update(1)
                if sampler.iteration % CHECK_EVERY:
                    continue
                tau = sampler.get_autocorr_time(tol=0)
                if previous is not None:
                    change = float(np.max(np.abs(previous - tau) / tau))
                previous = tau
                bar.total = expected_steps(float(np.max(tau)), sampler.iteration, start + steps) - start
                bar.set_postfix_str(f"tau {np.max(tau):.0f} steps, about {bar.total} in all")
                bar.refresh()
                if (sampler.iteration >= min_total and sampler.iteration > TAU_FACTOR * np.max(tau)
                        and change < TAU_SETTLED):
                    break
    tau = sampler.get_autocorr_time(tol=0)
    length = sampler.iteration / float(np.max(tau))
    if length > TAU_FACTOR and change < TAU_SETTLED:
        return True, (f"the chain is {length:.0f} autocorrelation times long (tau up to "
                      f"{np.max(tau):.0f} steps) and tau changed by {100 * change:.1f}% at the last check.")
    if length <= TAU_FACTOR:
        return False, (f"after {sampler.iteration} steps the chain is only {length:.0f} autocorrelation "
                       f"times long ({TAU_FACTOR:.0f} needed; tau up to {np.max(tau):.0f} steps). Run "
                       "longer (raise max_steps, or resume the saved chain).")
    if math.isinf(change):
        return False, (f"after {sampler.iteration} steps the chain is {length:.0f} autocorrelation times "
                       f"long, but tau was estimated at one check only; it must also hold steady between "
                       f"two checks {CHECK_EVERY} steps apart. Run longer (raise max_steps, or resume the "
                       "saved chain).")
    return False, (f"tau is still changing ({100 * change:.0f}% between checks); run longer.")


def expected_steps(tau: float, done: int, cap: int) -> int:
    """How long the chain is expected to run: `TAU_FACTOR` autocorrelation times (with a tenth
    more for tau to settle), at least one more check than done, at most the cap.

    Examples
    --------
    >>> expected_steps(40.0, 500, 20_000), expected_steps(900.0, 500, 20_000)
    (2250, 20000)
    """
    wanted = math.ceil(1.1 * TAU_FACTOR * tau / CHECK_EVERY) * CHECK_EVERY
    return int(min(cap, max(wanted, done + CHECK_EVERY)))


def kept_chain(sampler: emcee.EnsembleSampler) -> tuple[FloatArray, FloatArray, int, int]:
    """The chain that counts: burn-in (two autocorrelation times, at most half the run) dropped
    and thinned by half the shortest one; returns it flat, with tau, the burn-in and the thinning."""
    tau = sampler.get_autocorr_time(tol=0)
    burn_in = min(int(2 * np.max(tau)), sampler.iteration // 2)
    thin = max(1, int(0.5 * np.min(tau)))
    return sampler.get_chain(discard=burn_in, thin=thin, flat=True), tau, burn_in, thin


def _collect(sampler: emcee.EnsembleSampler, problem: _Problem, fit: OrbitFit, converged: bool,
             reason: str) -> Posterior:
    chain, tau, burn_in, thin = kept_chain(sampler)
    samples = pd.DataFrame(chain, columns=list(problem.names))
    model = problem.model
    exponent = samples["exponent"] if "exponent" in samples else problem.template[0]
    log_force = samples["log_force"] if "log_force" in samples else problem.template[1]
    samples["strength"] = np.exp(log_force - exponent * math.log(model.reference_radius))
    if problem.fit_noise:
        samples["noise_scale"] = np.exp(samples["log_noise_scale"])
    return Posterior(
        samples=samples, autocorr_time=dict(zip(problem.names, map(float, tau))),
        converged=converged, reason=reason, n_steps=int(sampler.iteration),
        n_walkers=int(sampler.nwalkers), burn_in=burn_in, thin=thin,
        units=_units(fit, problem.names), sampler=sampler,
    )
