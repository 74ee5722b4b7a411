"""Posterior sampling: time to a converged posterior, the batch log-probability against a
per-walker solve_ivp one, and the coverage of the credible intervals.

(a) time to a converged posterior on an n = -1.5 rosette (600 samples, noise 0.5% of its
    size) with differential-evolution moves and with emcee's stretch move — target < 30 s;
(b) the same number of steps with a per-walker solve_ivp log-probability, timed on a stretch
    of steps and scaled to the whole run — target >= 50x slower than (a);
(c) with --coverage: over 200 noisy replicates, how often the 68% and 95% intervals of n
    contain the truth — targets 63-73% and 92-98% (a slow study: about 50 minutes on 2 cores).
    --coverage-only runs just (c); --log FILE appends each replicate to FILE and a rerun with the
    same FILE resumes where an interrupted study stopped; --one-worker keeps one core free.
"""

from __future__ import annotations

import sys
import time

import emcee
import numpy as np
from scipy.integrate import solve_ivp

from forcefit import simulate_orbit
from forcefit.estimators import fit_orbit
from forcefit.posterior import sample_posterior


def rosette(seed: int) -> object:
    truth = simulate_orbit(exponent=-1.5)
    size = float(np.ptp(truth.positions, axis=0).max())
    return simulate_orbit(exponent=-1.5, noise=0.005 * size, rng=seed, rate=599 / truth.duration,
                          duration=truth.duration)


def converged_posterior() -> tuple[float, int]:
    fit = fit_orbit(rosette(1))
    sample_posterior(fit, seed=0, progress=False, max_steps=300)                 # warm up
    print("(a) converged posterior, n = -1.5 rosette, 600 samples, noise 0.5%, 32 walkers")
    result = (0.0, 0)
    for moves in ("de", "stretch"):
        start = time.perf_counter()
        posterior = sample_posterior(fit, seed=1, progress=False, moves=moves)
        elapsed = time.perf_counter() - start
        tau = max(posterior.autocorr_time.values())
        print(f"    {moves:<8} {elapsed:6.1f} s  {posterior.n_steps:6d} steps  tau {tau:5.0f} steps  "
              f"{1e3 * elapsed / posterior.n_steps:5.1f} ms/step  converged: {posterior.converged}")
        if moves == "de":
            result = (elapsed, posterior.n_steps)
            print(f"    n = {np.median(posterior.samples['exponent']):.6f}, 68% interval "
                  f"{posterior.interval('exponent')}")
    print(f"    target: under 30 s with the default (de) moves: {result[0]:.1f} s")
    return result


def per_walker_solve_ivp(fast_time: float, steps: int, probe: int = 15) -> None:
    track = rosette(1)
    fit = fit_orbit(track)
    model = fit.details["model"]
    result = fit.details["lmfit"]
    t, data = np.asarray(track.t), track.positions
    sigma = np.asarray(fit.details["sigma"])[:, None]
    epoch = model.epochs[0]
    index = int(np.argmin(np.abs(t - epoch)))
    names = list(result.var_names)
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

    best = np.array([result.params[name].value for name in names])
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


def _covers(seed: int) -> tuple[bool, bool]:
    """Whether the 68% and 95% intervals of n from one noisy replicate contain the truth."""
    posterior = sample_posterior(fit_orbit(rosette(1000 + seed)), seed=seed, progress=False)
    low68, high68 = posterior.interval("exponent", 0.68)
    low95, high95 = posterior.interval("exponent", 0.95)
    return bool(low68 <= -1.5 <= high68), bool(low95 <= -1.5 <= high95)


def coverage(replicates: int = 200, workers: int = 2, log: str | None = None) -> None:
    """Coverage of the n intervals over noisy replicates.

    With ``log``, each finished replicate is appended to that file (seed, in68, in95) and a rerun
    skips the seeds already there, so an interrupted study resumes.
    """
    import os
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from multiprocessing import get_context

    for name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS"):
        os.environ[name] = "1"
    finished: dict[int, tuple[bool, bool]] = {}
    if log and os.path.exists(log):
        for line in open(log, encoding="utf-8"):
            seed, in68, in95 = (int(word) for word in line.split())
            finished[seed] = (bool(in68), bool(in95))
    inside68 = sum(a for a, _ in finished.values())
    inside95 = sum(b for _, b in finished.values())
    done = len(finished)
    remaining = [seed for seed in range(replicates) if seed not in finished]
    with ProcessPoolExecutor(workers, mp_context=get_context("spawn")) as pool:
        futures = {pool.submit(_covers, seed): seed for seed in remaining}
        for future in as_completed(futures):
            in68, in95 = future.result()
            if log:
                with open(log, "a", encoding="utf-8") as handle:
                    handle.write(f"{futures[future]} {int(in68)} {int(in95)}\n")
            inside68 += in68
            inside95 += in95
            done += 1
            print(f"    {done:4d} replicates: 68% covers {inside68 / done:.1%}, "
                  f"95% covers {inside95 / done:.1%}", end="\r", flush=True)
    print(f"\n(c) coverage over {replicates} replicates")
    print(f"    68% interval contains the truth in {inside68 / replicates:.1%} (target 63-73%)")
    print(f"    95% interval contains the truth in {inside95 / replicates:.1%} (target 92-98%)")


if __name__ == "__main__":
    if "--coverage-only" in sys.argv:                     # e.g. while another job holds a core
        log = sys.argv[sys.argv.index("--log") + 1] if "--log" in sys.argv else None
        coverage(workers=1 if "--one-worker" in sys.argv else 2, log=log)
        sys.exit()
    elapsed, steps = converged_posterior()
    per_walker_solve_ivp(elapsed, steps)
    if "--coverage" in sys.argv:
        coverage()
    else:
        print("\n(c) coverage: run with --coverage (about 20 minutes on 2 cores)")
