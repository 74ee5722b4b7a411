"""Posterior sampling: time to a converged posterior, the batch log-probability against a
per-walker solve_ivp one, and the coverage of the credible intervals.

(a) time to a converged posterior on an n = -1.5 rosette (600 samples, noise 0.5% of its
    size) with the default moves (half independence draws from the least-squares
    approximation, half differential evolution), with differential-evolution moves alone and
    with emcee's stretch move — target < 30 s;
(b) the same number of steps with a per-walker solve_ivp log-probability, timed on a stretch
    of steps and scaled to the whole run — target >= 50x slower than (a);
(c) with --coverage: over 200 noisy replicates, how often the 68% and 95% intervals of n
    contain the truth — targets 63-73% and 92-98% (a slow study: about 50 minutes on 2 cores).
    --coverage-only runs just (c); --replicates N changes the count; --log FILE appends each
    replicate to FILE and a rerun with the same FILE resumes where an interrupted study stopped;
    --one-worker keeps one core free. The least-squares intervals of the same fits are printed
    beside the posterior's.
(d) --lsq-coverage N: the least-squares intervals alone over N replicates (2000 take ~8 min),
    to tell a miscalibrated error from the Monte Carlo scatter of 200 replicates.
"""

from __future__ import annotations

import sys
import time

import emcee
import numpy as np
from scipy.integrate import solve_ivp

from forcefit import simulate_orbit
from forcefit.estimators import fit_orbit
from forcefit.inference.posterior import sample_posterior


def rosette(seed: int) -> object:
    truth = simulate_orbit(exponent=-1.5)
    size = float(np.ptp(truth.positions, axis=0).max())
    return simulate_orbit(exponent=-1.5, noise=0.005 * size, rng=seed, rate=599 / truth.duration,
                          duration=truth.duration)


def converged_posterior() -> tuple[float, int]:
    fit = fit_orbit(rosette(1))
    sample_posterior(fit, rng=0, progress=False, max_steps=300)                 # warm up
    print("(a) converged posterior, n = -1.5 rosette, 600 samples, noise 0.5%, 32 walkers")
    result = (0.0, 0)
    for moves in ("mixed", "de", "stretch"):
        start = time.perf_counter()
        posterior = sample_posterior(fit, rng=1, progress=False, moves=moves)
        elapsed = time.perf_counter() - start
        tau = max(posterior.autocorr_time.values())
        print(f"    {moves:<8} {elapsed:6.1f} s  {posterior.n_steps:6d} steps  tau {tau:5.0f} steps  "
              f"{1e3 * elapsed / posterior.n_steps:5.1f} ms/step  converged: {posterior.converged}")
        if moves == "mixed":
            result = (elapsed, posterior.n_steps)
            print(f"    n = {np.median(posterior.samples['exponent']):.6f}, 68% interval "
                  f"{posterior.interval('exponent')}")
    print(f"    target: under 30 s with the default (mixed) moves: {result[0]:.1f} s")
    return result


def per_walker_solve_ivp(fast_time: float, steps: int, probe: int = 15) -> None:
    track = rosette(1)
    fit = fit_orbit(track)
    model = fit.model
    t, data = np.asarray(track.t), track.positions
    sigma = np.asarray(fit.sigma)[:, None]
    epoch = model.epochs[0]
    index = int(np.argmin(np.abs(t - epoch)))
    names = list(fit.parameter_names)
    radius = model.reference_radius

    def rhs(_: float, y: np.ndarray, n: float, k: float) -> list[float]:
        r = np.hypot(y[0], y[1])
        f = -k * r ** (n - 1.0)
        return [y[2], y[3], f * y[0], f * y[1]]

    def log_probability(theta: np.ndarray) -> float:
        p = dict(zip(names, theta))
        k = np.exp(p["log_force"] - p["exponent"] * np.log(radius))
        state = [p["x0"], p["y0"], p["vx0"], p["vy0"]]
        forward = solve_ivp(rhs, (epoch, t[-1]), state, method="DOP853", t_eval=t[index:],
                            rtol=1e-10, atol=1e-12, args=(p["exponent"], k))
        backward = solve_ivp(rhs, (epoch, t[0]), state, method="DOP853", t_eval=t[:index + 1][::-1],
                             rtol=1e-10, atol=1e-12, args=(p["exponent"], k))
        model_xy = np.concatenate((backward.y[:2, ::-1][:, :-1], forward.y[:2]), axis=1).T
        model_xy = model_xy + np.array([p["centre_x"], p["centre_y"]])
        return -0.5 * float(np.sum(((data - model_xy) / sigma) ** 2))

    best = np.array([fit.values[name] for name in names])
    rng = np.random.default_rng(0)
    start_points = best + 1e-6 * np.abs(best + 1e-3) * rng.standard_normal((32, best.size))
    sampler = emcee.EnsembleSampler(32, best.size, log_probability,
                                    moves=[(emcee.moves.DEMove(), 0.8), (emcee.moves.DESnookerMove(), 0.2)])
    begin = time.perf_counter()
    sampler.run_mcmc(start_points, probe, progress=False)
    per_step = (time.perf_counter() - begin) / probe
    slow_time = per_step * steps
    print(f"\n(b) per-walker solve_ivp log-probability: {1e3 * per_step:.0f} ms/step over {probe} steps;"
          f" {steps} steps would take {slow_time / 60:.1f} min")
    print(f"    batch log-probability: {fast_time:.1f} s for the same run -> "
          f"{slow_time / fast_time:.0f}x faster (target >= 50x)")


Z68, Z95 = 0.9945, 1.9600          # two-sided normal quantiles of the 68% and 95% intervals


def _covers(seed: int) -> tuple[bool, bool, bool, bool]:
    """Whether the 68% and 95% intervals of n from one noisy replicate contain the truth: the
    posterior's credible intervals, then the least-squares ones (n ± z·stderr) of the same fit."""
    fit = fit_orbit(rosette(1000 + seed))
    posterior = sample_posterior(fit, rng=seed, progress=False)
    low68, high68 = posterior.interval("exponent", 0.68)
    low95, high95 = posterior.interval("exponent", 0.95)
    z = abs(fit.exponent + 1.5) / fit.exponent_stderr
    return (bool(low68 <= -1.5 <= high68), bool(low95 <= -1.5 <= high95),
            bool(z <= Z68), bool(z <= Z95))


def _line(name: str, inside: int, total: int, target: str) -> str:
    share = inside / total
    return (f"    {name} contains the truth in {share:6.1%} ± {np.sqrt(share * (1 - share) / total):.1%}"
            f" (binomial s.e.; target {target})")


def coverage(replicates: int = 200, workers: int = 2, log: str | None = None) -> None:
    """Coverage of the n intervals over noisy replicates, posterior and least squares side by side.

    With ``log``, each finished replicate is appended to that file (seed and four 0/1 flags) and
    a rerun skips the seeds already there, so an interrupted study resumes.
    """
    import os
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from multiprocessing import get_context

    for name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS"):
        os.environ[name] = "1"
    finished: dict[int, tuple[bool, ...]] = {}
    if log and os.path.exists(log):
        for line in open(log, encoding="utf-8"):
            seed, *flags = (int(word) for word in line.split())
            finished[seed] = tuple(bool(flag) for flag in flags)
    remaining = [seed for seed in range(replicates) if seed not in finished]
    with ProcessPoolExecutor(workers, mp_context=get_context("spawn")) as pool:
        futures = {pool.submit(_covers, seed): seed for seed in remaining}
        for future in as_completed(futures):
            flags = future.result()
            finished[futures[future]] = flags
            if log:
                with open(log, "a", encoding="utf-8") as handle:
                    handle.write(f"{futures[future]} " + " ".join(str(int(f)) for f in flags) + "\n")
            counts = np.sum([finished[seed] for seed in finished if seed < replicates], axis=0)
            done = sum(seed < replicates for seed in finished)
            print(f"    {done:4d} replicates: 68% covers {counts[0] / done:.1%}, "
                  f"95% covers {counts[1] / done:.1%}", end="\r", flush=True)
    counts = np.sum([finished[seed] for seed in range(replicates)], axis=0)
    print(f"\n(c) coverage of n = -1.5 over {replicates} noisy replicates")
    print(_line("posterior 68% interval", counts[0], replicates, "63-73%"))
    print(_line("posterior 95% interval", counts[1], replicates, "92-98%"))
    print(_line("least-squares 68%     ", counts[2], replicates, "63-73%"))
    print(_line("least-squares 95%     ", counts[3], replicates, "92-98%"))


def least_squares_coverage(replicates: int) -> None:
    """The least-squares intervals alone over many replicates (a fit takes a quarter second):
    separates a miscalibrated error from the Monte Carlo scatter of a 200-replicate study."""
    from tqdm import tqdm

    z = np.array([(fit.exponent + 1.5) / fit.exponent_stderr
                  for fit in (fit_orbit(rosette(1000 + seed)) for seed in tqdm(range(replicates)))])
    print(f"\n(d) least-squares z = (n - truth) / stderr over {replicates} replicates: "
          f"mean {z.mean():+.3f}, std {z.std(ddof=1):.3f} (1 if the errors are right)")
    print(_line("68% interval", int(np.sum(np.abs(z) <= Z68)), replicates, "63-73%"))
    print(_line("95% interval", int(np.sum(np.abs(z) <= Z95)), replicates, "92-98%"))


if __name__ == "__main__":
    def option(name: str, default: str | None) -> str | None:
        return sys.argv[sys.argv.index(name) + 1] if name in sys.argv else default

    replicates = int(option("--replicates", "200"))
    if "--lsq-coverage" in sys.argv:
        least_squares_coverage(int(option("--lsq-coverage", "2000")))
        sys.exit()
    if "--coverage-only" in sys.argv:
        coverage(replicates, workers=1 if "--one-worker" in sys.argv else 2, log=option("--log", None))
        sys.exit()
    elapsed, steps = converged_posterior()
    per_walker_solve_ivp(elapsed, steps)
    if "--coverage" in sys.argv:
        coverage(replicates, log=option("--log", None))
    else:
        print("\n(c) coverage: run with --coverage (about 45 minutes on 2 cores)")
