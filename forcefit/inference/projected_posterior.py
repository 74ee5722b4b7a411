"""Posterior sampling of a projected-orbit fit: the law, the state, the inclination and node.

The same machinery as `forcefit.inference.posterior` (emcee on the compiled batch propagator,
walkers started from the least-squares covariance, the run stopped once converged, burn-in
dropped and the chain thinned from the autocorrelation time). The log-likelihood is the fit's:
each position weighed by its error ellipse (as given, or at the noise scale the residuals
showed, which is then sampled too), each radial velocity by its sigma, and the whole divided
by the residuals' correlation time. The prior is flat in the model's parameters (the law, the
projection matrix's entries, the canonical velocity, the centre), as the least squares is;
the derived columns -- the inclination, the node and the true strength, and with the exponent
held at -2 the Kepler elements -- are read off each sample.
"""

from __future__ import annotations

import hashlib
import math
import os
from collections.abc import Mapping
from dataclasses import dataclass, replace
from typing import Literal

import numpy as np
import pandas as pd

from .._types import FloatArray
from ..dynamics.sky import ProjectedOrbitModel
from ..errors import InputError
from ..estimators.projected import physical_values
from ..estimators.result import ProjectedFit
from ..units import strength_unit
from .posterior import SAMPLING_RTOL, Posterior, Prior, _check_priors, _log_prior, kept_chain, run_ensemble

ANGLES = ("inclination", "node", "periastron_argument")
"""Derived columns in degrees."""

KEPLER = ("semi_major_axis", "eccentricity", "periastron_argument", "period", "periastron_time")
"""Derived columns when the exponent is held at -2."""


@dataclass(frozen=True, eq=False)
class _SkyProblem:
    """The log-probability of a projected orbit's parameters, fixed for a run."""

    model: ProjectedOrbitModel
    template: FloatArray
    columns: np.ndarray
    names: tuple[str, ...]
    observed: FloatArray
    whitening: FloatArray
    velocity_sigma: FloatArray
    fit_noise: bool
    priors: Mapping[str, Prior]
    correlation_time: float = 1.0

    def chi_squares(self, full: FloatArray) -> tuple[FloatArray, FloatArray, np.ndarray]:
        """Chi-square of the positions and of the velocities of each parameter set (divided by
        the correlation time), and which orbits succeeded."""
        flat, ok = self.model.observe(full)
        difference = self.observed[None, :] - flat
        count = self.whitening.shape[0]
        positions = difference[:, :2 * count].reshape(-1, count, 2)
        white = np.einsum("pij,spj->spi", self.whitening, positions)
        velocities = difference[:, 2 * count:] / self.velocity_sigma[None, :]
        return (np.sum(white**2, axis=(1, 2)) / self.correlation_time,
                np.sum(velocities**2, axis=1) / self.correlation_time, ok)

    def __call__(self, theta: FloatArray) -> FloatArray:
        theta = np.atleast_2d(theta)
        log_p = _log_prior(theta, self.names, self.priors)
        alive = np.isfinite(log_p)
        if not alive.any():
            return log_p
        full = np.repeat(self.template[None, :], int(alive.sum()), axis=0)
        full[:, self.columns] = theta[alive][:, :self.columns.size]
        with np.errstate(all="ignore"):
            positions, velocities, ok = self.chi_squares(full)
            if self.fit_noise:
                scale = np.exp(theta[alive][:, -1])
                count = 2 * self.whitening.shape[0] / self.correlation_time
                likelihood = -0.5 * positions / scale**2 - count * np.log(scale) - 0.5 * velocities
            else:
                likelihood = -0.5 * (positions + velocities)
        log_p[alive] += np.where(ok & np.isfinite(likelihood), likelihood, -np.inf)
        return log_p


def _problem(fit: ProjectedFit, noise: str, priors: Mapping[str, Prior], correlation_time: float,
             ) -> tuple[_SkyProblem, FloatArray, FloatArray]:
    """The log-probability, the best-fit point and the covariance to start the walkers from."""
    model = replace(fit.model, rtol=SAMPLING_RTOL)
    varying = list(fit.parameter_names)
    template = np.array([fit.values[name] for name in model.names])
    best = np.array([fit.values[name] for name in varying])
    covariance = np.array(fit.covariance, dtype=float) * correlation_time / fit.correlation_time
    fit_noise = noise == "fit"
    names = tuple(varying) + (("log_noise_scale",) if fit_noise else ())
    if fit_noise:
        count = 2 * fit.whitening.shape[0]
        head = np.asarray(fit.residuals)[:count]
        spread = math.sqrt(float(head @ head) / max(count - len(varying), 1))
        best = np.append(best, math.log(max(spread, 1e-6)))
        covariance = np.pad(covariance, ((0, 1), (0, 1)))
        covariance[-1, -1] = correlation_time / (2.0 * count)
    _check_priors(priors, names)
    problem = _SkyProblem(model=model, template=template,
                          columns=np.array([model.names.index(name) for name in varying]), names=names,
                          observed=np.asarray(fit.observed), whitening=np.asarray(fit.whitening),
                          velocity_sigma=np.asarray(fit.velocity_sigma), fit_noise=fit_noise,
                          priors=priors, correlation_time=correlation_time)
    return problem, best, covariance


def _fingerprint(problem: _SkyProblem) -> str:
    """A digest of what a chain samples: the data and their weights, the values held fixed,
    the parameters, the priors and the noise model."""
    digest = hashlib.sha256()
    for array in (problem.observed, problem.whitening, problem.velocity_sigma, problem.template):
        digest.update(np.ascontiguousarray(array, dtype=float).tobytes())
    digest.update(repr(("projected", problem.names, problem.model.names, sorted(problem.priors.items()),
                        problem.fit_noise, problem.correlation_time)).encode("utf-8"))
    return digest.hexdigest()[:32]


def sample_projected(
    fit: ProjectedFit,
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
    """Sample the posterior of a projected-orbit fit with emcee.

    Parameters
    ----------
    fit : ProjectedFit
        A fit from `fit_projected` with the linear loss; its covariance places the walkers.
    walkers, max_steps, min_steps, moves, progress, rng, save, resume
        As in `sample_posterior`.
    priors : mapping, optional
        Per sampled parameter (``fit.parameter_names``, and ``log_noise_scale``):
        ("uniform", low, high) or ("normal", mean, sd). Others are flat within physical
        bounds (n in [-20, 20], parallax > 0). The derived angles take no prior of their own.
    noise : {"known", "fit"}, optional
        The position errors as the fit weighed them, or a scale factor on them sampled too
        (default: "known" when the data came with their errors, else "fit"). Radial
        velocities always keep their sigma.
    correlated : bool
        Divide the log-likelihood by the fit's ``correlation_time`` (default), as the fit
        widens its errors; False takes the residuals as independent.

    Returns
    -------
    Posterior
        Columns: the sampled parameters; the true ``strength``; ``inclination`` and ``node``
        in degrees (left out when the fit found the orbit nearly face-on, where neither is
        fixed); with the exponent held at -2, the Kepler elements (`kepler_elements`);
        ``noise_scale`` when sampled. The node (and the periastron argument) are continuous
        about the fit's value: the fit's [0, 180) range is not imposed on each sample, so an
        interval near 0 or 180 deg stays one interval.

    Examples
    --------
    >>> from forcefit.dynamics.simulate import simulate_projected
    >>> from forcefit.estimators import fit_projected
    >>> fit = fit_projected(simulate_projected(exponent=-2.0, inclination=60.0, node=30.0, count=30,
    ...                                        duration=5.0, noise=3e-3, rng=1))
    >>> posterior = sample_projected(fit, max_steps=100, progress=False, rng=1)   # too short to converge
    >>> sorted({"exponent", "inclination", "node", "strength"} - set(posterior.samples))
    []
    """
    if not isinstance(fit, ProjectedFit):
        raise InputError(f"sample_projected needs a fit from fit_projected; this one is a {fit.method} fit.")
    if fit.loss != "linear":
        raise InputError(f"{fit.track_name}: the posterior assumes Gaussian errors, but this fit used the "
                         f"{fit.loss} loss against wild points; remove the wild points and fit with the "
                         "linear loss (no --robust) before sampling.")
    if fit.observed.size == 0:
        raise InputError(f"{fit.track_name}: this fit does not carry its data; fit it again with "
                         "fit_projected.")
    noise = noise or ("known" if fit.sigma_known else "fit")
    problem, best, covariance = _problem(fit, noise, dict(priors or {}),
                                         fit.correlation_time if correlated else 1.0)

    def in_prior(points: FloatArray) -> np.ndarray:
        return np.isfinite(_log_prior(points, problem.names, problem.priors))

    sampler, converged, reason = run_ensemble(
        problem, best, covariance, in_prior=in_prior, walkers=walkers, max_steps=max_steps,
        min_steps=min_steps, moves=moves, progress=progress, rng=rng, save=save, resume=resume,
        fingerprint=_fingerprint(problem))
    chain, tau, burn_in, thin = kept_chain(sampler)
    return Posterior(
        samples=_samples(chain, problem, fit), autocorr_time=dict(zip(problem.names, map(float, tau))),
        converged=converged, reason=reason, n_steps=int(sampler.iteration),
        n_walkers=int(sampler.nwalkers), burn_in=burn_in, thin=thin, units=_units(fit, problem.names),
        sampler=sampler)


def _samples(chain: FloatArray, problem: _SkyProblem, fit: ProjectedFit) -> pd.DataFrame:
    """The sampled columns and the physical numbers derived from each sample."""
    samples = pd.DataFrame(chain, columns=list(problem.names))
    full = np.repeat(problem.template[None, :], chain.shape[0], axis=0)
    full[:, problem.columns] = chain[:, :problem.columns.size]
    wanted = ["strength"] + ([] if math.isnan(fit.inclination) else ["inclination", "node"])
    if "exponent" not in fit.parameter_names and fit.exponent == -2.0:
        wanted += [name for name in KEPLER if not (name in ANGLES and math.isnan(fit.inclination))]
    derived = [physical_values(fit, vector) for vector in full]
    for name in wanted:
        values = np.array([row[name] for row in derived])
        if name in ANGLES or name == "periastron_time":      # continuous about the fit's value
            period = (np.array([row["period"] for row in derived]) if name == "periastron_time"
                      else np.full(values.size, 180.0 if name == "node" and fit.node_ambiguous else 360.0))
            centre = fit.elements[name]
            values = centre + (values - centre + period / 2) % period - period / 2
        samples[name] = values
    if problem.fit_noise:
        samples["noise_scale"] = np.exp(samples["log_noise_scale"])
    return samples


def _units(fit: ProjectedFit, names: tuple[str, ...]) -> dict[str, str]:
    length, time = fit.length_unit, fit.time_unit or "T"
    units = {"exponent": "", "log_force": f"ln({length} {time}^-2)", "log_noise_scale": "", "noise_scale": "",
             "strength": strength_unit(length, time, fit.exponent), "inclination": "deg", "node": "deg",
             "periastron_argument": "deg", "semi_major_axis": length, "eccentricity": "", "period": time,
             "periastron_time": time, "parallax": length}
    for name in names:
        if name.startswith("proj_"):
            units[name] = ""
        elif name.startswith("centre"):
            units[name] = length
        elif name in ("vx0", "vy0"):
            units[name] = f"{length}/{time}"
    return units
