"""Validation matrix: scenario families x estimators, many seeded replicates.

For each cell: the fraction refused, flagged (a failed check), answered; among answered,
the fraction inside the 68% and 95% intervals, the spread of z = (fitted - true) / stated
error, and the count of confident wrong answers (passed, more than 3 stated standard errors
from the truth). A cell may refuse or flag; it may not lie.

Usage: python benchmarks/validation.py [--quick] [--replicates 50] [--estimator orbit]
       [--only "<family or scenario text>"] [--log run.jsonl] [--workers 2]
(--log keeps every replicate; an interrupted run resumes from it.)

The pendulum family's truth is Hooke's law n = 1, k = g/L: a finite-amplitude pendulum is
not exactly a power law, so an estimator must either find n = 1 within its errors or flag.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import time
import warnings
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field

import numpy as np
from scipy.integrate import solve_ivp

import forcefit as ff
from forcefit.dynamics.simulate import simulate_pendulum
from forcefit.errors import ForcefitError
from forcefit.track import Track


@dataclass(frozen=True)
class Truth:
    exponent: float
    strength: float
    centre: tuple[float, float]


@dataclass(frozen=True)
class Scenario:
    family: str
    label: str
    make: Callable[[np.random.Generator], tuple[Track, Truth]]
    estimators: tuple[str, ...]
    centre_given: bool = False
    options: dict = field(default_factory=dict)


def _period(n: float, k: float, r: float = 1.0) -> float:
    return 2 * math.pi * r ** ((1 - n) / 2) / math.sqrt(k)


def orbit(
    n: float,
    *,
    k: float = 1.0,
    factor: float = 0.8,
    turns: float = 3.0,
    per_turn: float = 200,
    noise: float = 1e-3,
    centre=(0.3, -0.2),
    timed: bool = True,
    sigma_column: float | None = None,
    outliers: float = 0.0,
    drag: float = 0.0,
    ar: float = 0.0,
    uneven: bool = False,
):
    """A power-law orbit starting at r = 1 with speed factor x circular speed."""

    def make(rng: np.random.Generator) -> tuple[Track, Truth]:
        period = _period(n, k)
        duration = turns * period
        rate = per_turn / period
        velocity = (0.0, factor * math.sqrt(k))
        phase = rng.uniform(0, 2 * math.pi)
        start = (math.cos(phase), math.sin(phase))
        velocity = (-factor * math.sqrt(k) * math.sin(phase), factor * math.sqrt(k) * math.cos(phase))
        if uneven:
            count = int(turns * per_turn)
            gaps = rng.exponential(1.0, count) ** 2 + 1e-3
            t = np.concatenate(([0.0], np.cumsum(gaps)))
            t *= duration / t[-1]
        else:
            t = np.arange(int(duration * rate) + 1) / rate
        state = _integrate(lambda r: -k * r**n, np.array([*start, *velocity]), t, drag)
        x, y = state[:, 0] + centre[0], state[:, 1] + centre[1]
        size = 1.0
        if ar > 0:
            e = np.zeros((t.size, 2))
            innov = rng.standard_normal((t.size, 2)) * noise * math.sqrt(1 - ar * ar)
            e[0] = rng.standard_normal(2) * noise
            for i in range(1, t.size):
                e[i] = ar * e[i - 1] + innov[i]
        else:
            e = rng.standard_normal((t.size, 2)) * noise * size
        if outliers > 0:
            count = int(round(outliers * t.size))
            where = rng.choice(t.size, count, replace=False)
            angle = rng.uniform(0, 2 * math.pi, count)
            e[where] += 40 * noise * np.column_stack((np.cos(angle), np.sin(angle)))
        sigma = None if sigma_column is None else np.full(t.size, sigma_column * noise)
        track = Track(
            t=t if timed else None, x=x + e[:, 0], y=y + e[:, 1], sigma=sigma, length_unit="m", time_unit="s"
        )
        return track, Truth(n, k, tuple(centre))

    return make


def screened(*, lam: float = 3.0, turns: float = 3.0, per_turn: float = 200, noise: float = 1e-3):
    def make(rng):
        k = 1.0

        def force(r):
            return -k * np.exp(-r / lam) / r**2

        period = _period(-2, k)
        t = np.arange(int(turns * per_turn) + 1) * period / per_turn
        state = _integrate(force, np.array([1.0, 0.0, 0.0, 0.75]), t, 0.0)
        e = rng.standard_normal((t.size, 2)) * noise
        track = Track(t=t, x=state[:, 0] + e[:, 0], y=state[:, 1] + e[:, 1], length_unit="m", time_unit="s")
        r = np.hypot(state[:, 0], state[:, 1])
        rref = float(np.exp(np.mean(np.log(r))))
        # the local exponent d ln F / d ln r at the reference radius, and k of that local law
        local = -2 - rref / lam
        return track, Truth(local, k * math.exp(-rref / lam) * rref ** (-2 - local), (0.0, 0.0))

    return make


def pendulum(
    *,
    amplitude: float = 0.1,
    length: float = 2.0,
    seconds: float = 30.0,
    fps: float = 60.0,
    noise: float = 3e-4,
):
    def make(rng):
        track = simulate_pendulum(
            length=length,
            start=(amplitude, 0.0),
            velocity=(0.0, 0.5 * amplitude * math.sqrt(9.81 / length)),
            duration=seconds,
            rate=fps,
            noise=noise,
            rng=rng,
        )
        track = Track(t=track.t, x=track.x, y=track.y, length_unit="m", time_unit="s")
        return track, Truth(1.0, 9.81 / length, (0.0, 0.0))

    return make


def _integrate(force, state0, t, drag):
    def rhs(_, s):
        r = math.hypot(s[0], s[1])
        a = force(r) / r
        return [s[2], s[3], a * s[0] - drag * s[2], a * s[1] - drag * s[3]]

    sol = solve_ivp(rhs, (t[0], t[-1]), state0, t_eval=t, method="DOP853", rtol=1e-12, atol=1e-12)
    return sol.y.T


ALL = ("orbit", "shape", "curvature", "acceleration")
TIMEFREE = ("shape", "curvature")


def scenarios() -> list[Scenario]:
    out: list[Scenario] = []
    add = out.append
    for n in (-2.5, -2.0, -1.0, 1.0, 2.0):
        add(Scenario("baseline", f"rosette n={n:g}", orbit(n), ALL))
    for e in (0.0, 0.01, 0.05):
        for given in (False, True):
            for n in (-2.0, 1.0):
                add(
                    Scenario(
                        "near-circle",
                        f"e={e:g} n={n:g}" + (" centre" if given else ""),
                        orbit(n, factor=1 + e * (n + 3) / 4, turns=2, per_turn=150, noise=2e-4),
                        ALL,
                        centre_given=given,
                    )
                )
    for turns in (0.3, 0.6, 1.0):
        for n in (-2.0, 1.0):
            add(
                Scenario(
                    "short arc", f"{turns:g} turn n={n:g}", orbit(n, turns=turns, per_turn=100 / turns), ALL
                )
            )
    for turns in (10, 20, 30):
        add(Scenario("long", f"{turns} turns timed n=-1", orbit(-1.0, turns=turns, per_turn=100), ALL))
        add(
            Scenario(
                "long",
                f"{turns} turns shape n=1",
                orbit(1.0, turns=turns, per_turn=100, timed=False),
                TIMEFREE,
            )
        )
    add(
        Scenario(
            "uneven",
            "4 turns n=-1 no time",
            orbit(-1.0, turns=4, per_turn=150, noise=2e-3, timed=False, uneven=True),
            TIMEFREE,
        )
    )
    for per in (8, 12, 20):
        add(Scenario("sparse", f"{per}/orbit n=-2", orbit(-2.0, factor=1.1, turns=10, per_turn=per), ALL))
    for e in (0.9, 0.97):
        add(
            Scenario(
                "eccentric",
                f"e={e} n=-2",
                orbit(-2.0, factor=math.sqrt(1 + e), turns=3, per_turn=500, noise=1e-4),
                ALL,
            )
        )
    for factor in (1.0, 1 / 3, 3.0):
        add(Scenario("sigma column", f"sigma x{factor:.2g} n=-1", orbit(-1.0, sigma_column=factor), ALL))
    add(Scenario("correlated", "AR(1) 0.9 n=1", orbit(1.0, ar=0.9), ALL))
    add(Scenario("glitches", "2% n=1", orbit(1.0, outliers=0.02), ("orbit",)))
    add(
        Scenario(
            "glitches", "2% n=1 robust", orbit(1.0, outliers=0.02), ("orbit",), options={"loss": "soft_l1"}
        )
    )
    add(Scenario("drag", "linear unmodelled n=1", orbit(1.0, drag=0.02, turns=5), ALL))
    add(Scenario("pendulum", "a/L=0.05", pendulum(), ALL))
    add(Scenario("screened", "lambda=3", screened(), ALL))
    return out


def run_one(args: tuple[int, str, int]) -> dict:
    index, estimator, seed = args
    scenario = scenarios()[index]
    rng = np.random.default_rng(seed + 1000 * index)
    track, truth = scenario.make(rng)
    warnings.simplefilter("ignore")
    fitter = {
        "orbit": ff.fit_orbit,
        "shape": ff.fit_shape,
        "curvature": ff.fit_curvature,
        "acceleration": ff.fit_acceleration,
    }[estimator]
    options = {}
    if scenario.centre_given:
        options["centre"] = truth.centre
    if estimator == "orbit":
        options.update(scenario.options)
    started = time.perf_counter()
    row = {"cell": index, "estimator": estimator, "seed": seed}
    try:
        fit = fitter(track, **options)
    except ForcefitError as exc:
        row.update(outcome="refused", reason=type(exc).__name__ + ": " + str(exc)[:120])
    except Exception as exc:  # noqa: BLE001 - a crash is a finding
        row.update(outcome="crash", reason=repr(exc)[:200])
    else:
        z = (fit.exponent - truth.exponent) / fit.exponent_stderr if fit.exponent_stderr > 0 else math.inf
        row.update(
            outcome="answered" if fit.passed else "flagged",
            exponent=fit.exponent,
            stderr=fit.exponent_stderr,
            z=z,
            failed=[name for name, check in fit.diagnostics.items() if check.passed is False],
        )
        if math.isfinite(fit.strength) and fit.strength_stderr > 0 and truth.exponent == fit.exponent:
            pass
    row["seconds"] = time.perf_counter() - started
    return row


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--replicates", type=int, default=50)
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--only", default="")
    parser.add_argument("--estimator", default="")
    parser.add_argument("--log", default="")
    parser.add_argument("--workers", type=int, default=2)
    args = parser.parse_args()
    reps = 5 if args.quick else args.replicates
    cells = scenarios()
    tasks = [
        (i, est, seed)
        for i, sc in enumerate(cells)
        if args.only in (sc.family + " " + sc.label)
        for est in sc.estimators
        if args.estimator in est
        for seed in range(reps)
    ]
    done = []
    if args.log and os.path.exists(args.log):
        done = [json.loads(line) for line in open(args.log)]
        seen = {(r["cell"], r["estimator"], r["seed"]) for r in done}
        tasks = [t for t in tasks if t not in seen]
    log = open(args.log, "a") if args.log else None
    with ProcessPoolExecutor(args.workers) as pool:
        for k, row in enumerate(pool.map(run_one, tasks, chunksize=1)):
            done.append(row)
            if log:
                log.write(json.dumps(row) + "\n")
                log.flush()
            print(f"\r{k + 1}/{len(tasks)}", end="", file=sys.stderr)
    print(file=sys.stderr)
    report(done, cells)


def report(rows: list[dict], cells: list[Scenario]) -> None:
    groups: dict[tuple[int, str], list[dict]] = {}
    for row in rows:
        groups.setdefault((row["cell"], row["estimator"]), []).append(row)
    print(
        f"{'family':<13}{'scenario':<26}{'estimator':<13}{'N':>4}{'refuse':>8}{'flag':>6}{'answer':>7}"
        f"{'in68':>6}{'in95':>6}{'sd z':>6}{'WRONG':>6}{'s':>6}"
    )
    for (cell, est), group in sorted(groups.items()):
        sc = cells[cell]
        n = len(group)
        refused = sum(r["outcome"] in ("refused", "crash") for r in group)
        crashed = sum(r["outcome"] == "crash" for r in group)
        flagged = sum(r["outcome"] == "flagged" for r in group)
        answered = [r for r in group if r["outcome"] == "answered"]
        z = np.array([r["z"] for r in answered])
        in68 = np.mean(np.abs(z) < 1) if z.size else math.nan
        in95 = np.mean(np.abs(z) < 1.96) if z.size else math.nan
        wrong = int(np.sum(np.abs(z) > 3))
        sd = float(np.std(z)) if z.size > 1 else math.nan
        secs = np.mean([r["seconds"] for r in group])
        print(
            f"{sc.family:<13}{sc.label:<26}{est:<13}{n:>4}{refused / n:>8.0%}{flagged / n:>6.0%}"
            f"{len(answered) / n:>7.0%}{in68:>6.0%}{in95:>6.0%}{sd:>6.2f}{wrong:>6d}{secs:>6.1f}"
            + (f"  CRASH {crashed}" if crashed else "")
        )


if __name__ == "__main__":
    main()
