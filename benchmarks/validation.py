"""The validation matrix: scenario families x estimators, many seeded replicates.

For each cell (a scenario and an estimator): the fractions refused, flagged (a failed check)
and answered; among the answers, the fractions inside their 68% and 95% intervals, the
spread of z = (fitted n - true n) / stated error, and the count of **confident wrong**
answers: passed every check, yet more than 3 stated standard errors from the truth. A cell
may refuse or flag; it may not lie.

Usage
-----
python benchmarks/validation.py                     # every cell, 50 replicates (long: hours)
python benchmarks/validation.py --quick             # 5 replicates
python benchmarks/validation.py --slice             # one replicate of every family (the test's)
    --estimator orbit   --only "near-circle"        # a part of the matrix
    --log run.jsonl                                 # keep every replicate; resume from it
    --log run.jsonl --no-run                        # summarise a (partial) log without running
    --workers 2  --markdown                         # processes; a family table for the README

Truths. Simulated power-law orbits: their n and k. A screened force F = k e^(-r/lambda)/r^2 has
no single exponent: its local one at the reference radius is the truth, and a power-law fit
should say it is not one. A pendulum of finite swing is not exactly a power law either: with
its length given (the ``pendulum`` estimator: the orbit fit and the finite-amplitude
correction) the truth is Hooke's n = 1; without it, the truth is the best power law of the
exact motion (the same swing integrated without noise and fitted: what any fit of the path
should find). An orbit seen in projection (the ``projected`` family, on the sky at an unknown
inclination and node): its n; the ``orbit`` estimator there fits the sky path as if face-on,
which is a wrong model and must say so.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import time
import warnings
from collections.abc import Callable, Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field
from functools import cache
from typing import Any

import numpy as np
from scipy.integrate import solve_ivp

import forcefit as ff
from forcefit.analysis.apsides import measure_apsides
from forcefit.analysis.pendulum import pendulum_correction
from forcefit.astrometry import Astrometry
from forcefit.dynamics.laws import circular_speed
from forcefit.dynamics.simulate import simulate_orbit, simulate_pendulum, simulate_projected
from forcefit.errors import ForcefitError
from forcefit.estimators import fit_projected
from forcefit.track import Track

REPLICATES, QUICK = 50, 5
WRONG_Z = 3.0


@dataclass(frozen=True)
class Truth:
    exponent: float
    centre: tuple[float, float] = (0.0, 0.0)
    pendulum_length: float = math.nan


@dataclass(frozen=True)
class Scenario:
    family: str
    label: str
    make: Callable[[np.random.Generator], tuple[Track | Astrometry, Truth]]
    estimators: tuple[str, ...]
    centre_given: bool = False
    options: dict[str, Any] = field(default_factory=dict)

    @property
    def name(self) -> str:
        return f"{self.family}: {self.label}"


def _period(n: float, k: float = 1.0) -> float:
    return 2 * math.pi / math.sqrt(k)  # circular period at r = 1


def _integrate(
    force: Callable[[float], float], state: Sequence[float], t: np.ndarray, drag: float = 0.0
) -> np.ndarray:
    def rhs(_: float, s: np.ndarray) -> list[float]:
        r = math.hypot(s[0], s[1])
        a = force(r) / r
        return [s[2], s[3], a * s[0] - drag * s[2], a * s[1] - drag * s[3]]

    solution = solve_ivp(rhs, (t[0], t[-1]), list(state), t_eval=t, method="DOP853", rtol=1e-12, atol=1e-12)
    return solution.y.T


def orbit(
    n: float,
    *,
    factor: float = 0.8,
    turns: float = 3.0,
    per_turn: float = 200,
    noise: float = 1e-3,
    centre: tuple[float, float] = (0.3, -0.2),
    timed: bool = True,
    sigma_column: float | None = None,
    outliers: float = 0.0,
    drag: float = 0.0,
    ar: float = 0.0,
    uneven: bool = False,
    hidden_inside: float = 0.0,
):
    """A power-law orbit (k = 1) from r = 1 at ``factor`` times the circular speed, observed
    with Gaussian noise (per coordinate, in units of the start radius); the samples closer to
    the centre than ``hidden_inside`` are lost (a pericentre passage hidden from the camera)."""

    def make(rng: np.random.Generator) -> tuple[Track, Truth]:
        duration = turns * _period(n)
        phase = rng.uniform(0, 2 * math.pi)
        state = (math.cos(phase), math.sin(phase), -factor * math.sin(phase), factor * math.cos(phase))
        if uneven:  # gaps from ~0.001 to ~7 times the mean
            gaps = rng.exponential(1.0, int(turns * per_turn)) ** 2 + 1e-3
            t = np.concatenate(([0.0], np.cumsum(gaps)))
            t *= duration / t[-1]
        else:
            t = np.arange(int(duration * per_turn / _period(n)) + 1) * _period(n) / per_turn
        path = _integrate(lambda r: -(r**n), state, t, drag)
        if ar > 0:
            errors = np.zeros((t.size, 2))
            errors[0] = rng.standard_normal(2) * noise
            for i in range(1, t.size):
                errors[i] = ar * errors[i - 1] + math.sqrt(1 - ar * ar) * noise * rng.standard_normal(2)
        else:
            errors = rng.standard_normal((t.size, 2)) * noise
        if outliers > 0:
            where = rng.choice(t.size, int(round(outliers * t.size)), replace=False)
            angle = rng.uniform(0, 2 * math.pi, where.size)
            errors[where] += 40 * noise * np.column_stack((np.cos(angle), np.sin(angle)))
        sigma = None if sigma_column is None else np.full(t.size, sigma_column * noise)
        seen = np.hypot(path[:, 0], path[:, 1]) >= hidden_inside
        track = Track(
            t=t[seen] if timed else None,
            x=path[seen, 0] + centre[0] + errors[seen, 0],
            y=path[seen, 1] + centre[1] + errors[seen, 1],
            sigma=None if sigma is None else sigma[seen],
            length_unit="m",
            time_unit="s",
        )
        return track, Truth(n, centre)

    return make


def screened(*, length: float = 3.0, turns: float = 3.0, per_turn: float = 200, noise: float = 1e-3):
    """F = e^(-r/length)/r^2: its local exponent at the data's typical radius is the truth."""

    def make(rng: np.random.Generator) -> tuple[Track, Truth]:
        t = np.arange(int(turns * per_turn) + 1) * _period(-2.0) / per_turn
        path = _integrate(lambda r: -math.exp(-r / length) / r**2, (1.0, 0.0, 0.0, 0.75), t)
        errors = rng.standard_normal((t.size, 2)) * noise
        track = Track(t=t, x=path[:, 0] + errors[:, 0], y=path[:, 1] + errors[:, 1])
        radius = float(np.exp(np.mean(np.log(np.hypot(path[:, 0], path[:, 1])))))
        return track, Truth(-2 - radius / length)

    return make


@cache
def _ideal_pendulum_exponent(amplitude: float, length: float, seconds: float, fps: float) -> float:
    """The best power law of an exact swing without noise (the no-length pendulum's truth)."""
    track = simulate_pendulum(
        length=length,
        start=(amplitude, 0.0),
        velocity=(0.0, 0.5 * amplitude * math.sqrt(9.81 / length)),
        duration=seconds,
        rate=fps,
    )
    return ff.fit_orbit(Track(t=track.t, x=track.x, y=track.y), centre=(0.0, 0.0)).exponent


def pendulum(
    *,
    amplitude: float = 0.1,
    length: float = 2.0,
    seconds: float = 30.0,
    fps: float = 60.0,
    noise: float = 3e-4,
    length_given: bool = False,
):
    """A long pendulum filmed from above (m, s): a/L = amplitude/length, an elliptical swing."""

    def make(rng: np.random.Generator) -> tuple[Track, Truth]:
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
        if length_given:
            return track, Truth(1.0, pendulum_length=length)
        return track, Truth(_ideal_pendulum_exponent(amplitude, length, seconds, fps))

    return make


def projected(n: float, *, inclination: float = 60.0, count: int = 50, noise: float = 3e-3,
              errors_given: bool = True):
    """An orbit (k = 1, from r = 1 at 0.8 times the circular speed, at a random phase) seen on the
    sky at ``inclination`` and a random node, over three circular periods at uneven epochs
    (arcsec, yr), relative to its centre; errors per coordinate given or not."""

    def make(rng: np.random.Generator) -> tuple[Astrometry, Truth]:
        phase, node = rng.uniform(0, 2 * math.pi), float(rng.uniform(0, 360))
        speed = 0.8 * float(circular_speed(1.0, n, 1.0))
        data = simulate_projected(exponent=n, start=(math.cos(phase), math.sin(phase)),
                                  velocity=(-speed * math.sin(phase), speed * math.cos(phase)),
                                  inclination=inclination, node=node, count=count, noise=noise, rng=rng)
        if not errors_given:
            track = data.track
            data = data.with_track(Track(t=track.t, x=track.x, y=track.y, length_unit=track.length_unit,
                                         time_unit=track.time_unit, name=track.name))
        return data, Truth(n)

    return make


def flyby(speed: float, *, noise: float, rate: float = 100.0, centre: tuple[float, float] = (0.3, -0.2)):
    """An open passage past an attractor (n = -2, k = 1, m, s): from 3 m out, 0.4 m off the line
    through the centre, at ``speed`` (hyperbolic: the escape speed there is 0.81 m/s), for the 3.6
    m of its run at that speed, turned to a random direction; the closest passage is 0.08-0.18 m
    from the centre and is crossed in a few samples."""

    def make(rng: np.random.Generator) -> tuple[Track, Truth]:
        turn = rng.uniform(0, 2 * math.pi)
        rotation = np.array([[math.cos(turn), -math.sin(turn)], [math.sin(turn), math.cos(turn)]])
        track = simulate_orbit(exponent=-2.0, start=tuple(rotation @ (-3.0, 0.4)),
                               velocity=tuple(rotation @ (speed, 0.0)), duration=3.6 / speed,
                               rate=rate, noise=noise, centre=centre, rng=rng)
        return Track(t=track.t, x=track.x, y=track.y, length_unit="m", time_unit="s"), Truth(-2.0, centre)

    return make


TIMED = ("orbit", "shape", "curvature", "acceleration")
TIME_FREE = ("shape", "curvature")


def scenarios() -> list[Scenario]:
    """Every cell's scenario, in a fixed order (the index is part of each replicate's seed)."""
    cells: list[Scenario] = []
    add = cells.append
    for n in (-2.5, -2.0, -1.0, 1.0, 2.0):
        add(Scenario("baseline", f"rosette n={n:g}", orbit(n), TIMED))
    for e in (0.0, 0.01, 0.05):
        for given in (False, True):
            for n in (-2.0, 1.0):
                add(
                    Scenario(
                        "near-circle",
                        f"e={e:g} n={n:g}" + (", centre given" if given else ""),
                        orbit(n, factor=1 + e * (n + 3) / 4, turns=2, per_turn=150, noise=2e-4),
                        TIMED,
                        centre_given=given,
                    )
                )
    for turns in (0.3, 0.6, 1.0):
        for n in (-2.0, 1.0):
            add(
                Scenario(
                    "short arc",
                    f"{turns:g} turn n={n:g}",
                    orbit(n, turns=turns, per_turn=100 / turns),
                    TIMED,
                )
            )
    for turns in (10, 20, 30):
        add(
            Scenario(
                "long",
                f"{turns} turns n=-1, timed",
                orbit(-1.0, turns=turns, per_turn=100),
                TIMED + ("apsides",),
            )
        )
        add(
            Scenario(
                "long",
                f"{turns} turns n=1, no time",
                orbit(1.0, turns=turns, per_turn=100, timed=False),
                TIME_FREE,
            )
        )
    add(
        Scenario(
            "uneven",
            "4 turns n=-1, no time",
            orbit(-1.0, turns=4, per_turn=150, noise=2e-3, timed=False, uneven=True),
            TIME_FREE,
        )
    )
    for per in (8, 12, 20):
        add(
            Scenario(
                "sparse", f"{per} per orbit n=-2", orbit(-2.0, factor=1.1, turns=10, per_turn=per), TIMED
            )
        )
    for e in (0.9, 0.97):
        add(
            Scenario(
                "eccentric",
                f"e={e} n=-2",
                orbit(-2.0, factor=math.sqrt(1 + e), turns=3, per_turn=500, noise=1e-4),
                TIMED,
            )
        )
    for factor, text in ((1.0, "right"), (1 / 3, "3x too small"), (3.0, "3x too large")):
        add(Scenario("sigma column", f"{text}, n=-1", orbit(-1.0, sigma_column=factor), TIMED))
    add(Scenario("correlated", "AR(1) rho=0.9, n=1", orbit(1.0, ar=0.9), TIMED))
    add(Scenario("glitches", "2% at 40 sigma, n=1", orbit(1.0, outliers=0.02), ("orbit",)))
    add(
        Scenario(
            "glitches",
            "2% at 40 sigma, n=1, robust",
            orbit(1.0, outliers=0.02),
            ("orbit",),
            options={"loss": "soft_l1"},
        )
    )
    add(Scenario("drag", "linear, not modelled, n=1", orbit(1.0, drag=0.02, turns=5), TIMED))
    add(
        Scenario(
            "drag",
            "linear, modelled, n=1",
            orbit(1.0, drag=0.02, turns=5),
            ("orbit",),
            options={"drag": "linear"},
        )
    )
    add(Scenario("pendulum", "a/L=0.05, length given", pendulum(length_given=True), ("pendulum",)))
    add(Scenario("pendulum", "a/L=0.05, length not given", pendulum(), TIMED))
    add(Scenario("screened", "range 3 r0", screened(), TIMED))
    # New families go below this line, never above: a cell's index is part of its replicates' seeds.
    # The orbit fit of one of them shows what fitting a sky path as if face-on does (it is slow).
    for n, inclination, given, estimators in ((-2.0, 60.0, True, ("projected",)),
                                              (-1.5, 60.0, True, ("projected", "orbit")),
                                              (-1.5, 60.0, False, ("projected",)),
                                              (-2.0, 80.0, True, ("projected",))):
        add(Scenario("projected", f"n={n:g} i={inclination:g} uneven" + ("" if given else ", no sigma"),
                     projected(n, inclination=inclination, errors_given=given), estimators))
    for speed, noise in ((1.6, 5e-3), (1.2, 2e-3)):   # open passages: one fast, close turn
        add(Scenario("flyby", f"speed {speed:g}, noise {noise:g}", flyby(speed, noise=noise), TIMED))
    # Launched at apocentre at sqrt(1 - e) times the circular speed: e = 0.9, whole orbits whose
    # pericentres (r = 0.053) are crossed in a few samples.
    add(Scenario("eccentric", "e=0.9 n=-2, whole orbits, coarse",
                 orbit(-2.0, factor=math.sqrt(0.1), turns=3, per_turn=200, noise=1e-3), TIMED))
    for ratio in (0.1, 0.2):     # wide swings: the finite-amplitude correction must hold in full
        add(Scenario("pendulum", f"a/L={ratio:g}, length given",
                     pendulum(amplitude=ratio * 1.2, length=1.2, noise=2e-4, length_given=True),
                     ("pendulum",)))
    # Very precise positions (2.5e-6 of the size) at 95 samples a turn: the smoothed fits smooth
    # as lightly as their knot grid allows, and the grid's error is not measured there.
    add(Scenario("precise", "noise 2.5e-6, e=0.36 n=-2", orbit(-2.0, turns=2.5, per_turn=150, noise=2.5e-6),
                 TIMED))
    # Launched at apocentre at half the circular speed (e = 0.75): every pericentre passage, where
    # the body turns by more than half a turn, is lost (r < 0.6).
    add(Scenario("hidden pericentre", "e=0.75 n=-2, r < 0.6 lost",
                 orbit(-2.0, factor=0.5, turns=3, per_turn=300, hidden_inside=0.6), TIMED))
    return cells


def _fit(estimator: str, data: Track | Astrometry, truth: Truth, options: dict[str, Any]) -> Any:
    if estimator == "projected":
        return fit_projected(data, **options), None
    track = data.track if isinstance(data, Astrometry) else data   # a sky path fitted as if face-on
    if estimator == "pendulum":
        fit = ff.fit_orbit(track, **options)
        return fit, pendulum_correction(fit, track, length=truth.pendulum_length)
    if estimator == "apsides":
        return measure_apsides(track, **options), None
    fitter = {
        "orbit": ff.fit_orbit,
        "shape": ff.fit_shape,
        "curvature": ff.fit_curvature,
        "acceleration": ff.fit_acceleration,
    }[estimator]
    return fitter(track, **options), None


def run_one(task: tuple[int, str, int]) -> dict[str, Any]:
    """One replicate of one cell: its outcome, and z when it answered."""
    return run_replicate(task[0], task[2], (task[1],))[0]


def run_replicate(index: int, seed: int, estimators: Sequence[str]) -> list[dict[str, Any]]:
    """One replicate of a scenario (one simulated track) through each of ``estimators``."""
    scenario = scenarios()[index]
    data, truth = scenario.make(np.random.default_rng([index, seed]))
    return [_outcome(index, estimator, seed, scenario, data, truth) for estimator in estimators]


def _run_group(group: tuple[int, int, tuple[str, ...]]) -> list[dict[str, Any]]:
    return run_replicate(*group)


def _outcome(
    index: int, estimator: str, seed: int, scenario: Scenario, data: Track | Astrometry, truth: Truth
) -> dict[str, Any]:
    options = dict(scenario.options) if estimator in ("orbit", "pendulum") else {}
    if scenario.centre_given:
        options["centre"] = truth.centre
    row: dict[str, Any] = {"cell": index, "estimator": estimator, "seed": seed}
    started = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            fit, corrected = _fit(estimator, data, truth, options)
        except ForcefitError as exc:
            row.update(outcome="refused", reason=f"{type(exc).__name__}: {str(exc)[:160]}")
        except Exception as exc:  # noqa: BLE001 - a crash is a finding, never a lost batch
            row.update(outcome="crash", reason=repr(exc)[:200])
        else:
            value, error = (
                (corrected.exponent, corrected.exponent_stderr)
                if corrected is not None
                else (fit.exponent, fit.exponent_stderr)
            )
            z = (value - truth.exponent) / error if error > 0 else math.inf
            row.update(
                outcome="answered" if fit.passed else "flagged",
                exponent=value,
                stderr=error,
                z=z,
                centre_z=_centre_z(fit, truth, scenario),
                failed=[name for name, check in fit.diagnostics.items() if check.passed is False],
            )
    row["seconds"] = time.perf_counter() - started
    return row


def _centre_z(fit: Any, truth: Truth, scenario: Scenario) -> float | None:
    """The larger |fitted - true| / stated error of the centre's coordinates, when the centre
    was fitted (None otherwise)."""
    errors = getattr(fit, "centre_stderr", None)
    centre = getattr(fit, "centre", None)
    if scenario.centre_given or errors is None or centre is None or not all(e > 0 for e in errors):
        return None
    return max(abs(c - t) / e for c, t, e in zip(centre, truth.centre, errors))


@dataclass(frozen=True)
class Cell:
    """What the replicates of one cell came to."""

    scenario: Scenario
    estimator: str
    count: int
    refused: int
    flagged: int
    crashed: int
    z: np.ndarray
    seconds: float
    centre_wrong: int = 0
    """Answers whose fitted centre lies more than WRONG_Z stated errors from the truth."""

    @property
    def answered(self) -> int:
        return int(self.z.size)

    @property
    def wrong(self) -> int:
        return int(np.sum(np.abs(self.z) > WRONG_Z))

    def inside(self, level: float) -> float:
        return float(np.mean(np.abs(self.z) < level)) if self.z.size else math.nan


def cells_of(rows: Sequence[dict[str, Any]]) -> list[Cell]:
    cells = scenarios()
    groups: dict[tuple[int, str], list[dict[str, Any]]] = {}
    for row in rows:
        groups.setdefault((row["cell"], row["estimator"]), []).append(row)
    out = []
    for (index, estimator), group in sorted(groups.items()):
        z = np.array([r["z"] for r in group if r["outcome"] == "answered"], dtype=float)
        out.append(
            Cell(
                cells[index],
                estimator,
                len(group),
                sum(r["outcome"] == "refused" for r in group),
                sum(r["outcome"] == "flagged" for r in group),
                sum(r["outcome"] == "crash" for r in group),
                z,
                float(np.mean([r["seconds"] for r in group])),
                sum(r["outcome"] == "answered" and (r.get("centre_z") or 0.0) > WRONG_Z for r in group),
            )
        )
    return out


def table(cells: Sequence[Cell]) -> str:
    lines = [
        f"{'family':<13}{'scenario':<32}{'estimator':<13}{'N':>4}{'refuse':>8}{'flag':>6}{'answer':>7}"
        f"{'in68':>6}{'in95':>6}{'sd z':>6}{'WRONG':>6}{'s':>6}"
    ]
    for cell in cells:
        sd = float(np.std(cell.z)) if cell.z.size > 1 else math.nan
        lines.append(
            f"{cell.scenario.family:<13}{cell.scenario.label:<32}{cell.estimator:<13}{cell.count:>4}"
            f"{(cell.refused + cell.crashed) / cell.count:>8.0%}{cell.flagged / cell.count:>6.0%}"
            f"{cell.answered / cell.count:>7.0%}{cell.inside(1.0):>6.0%}{cell.inside(1.96):>6.0%}"
            f"{sd:>6.2f}{cell.wrong:>6d}{cell.seconds:>6.1f}"
            + (f"  CRASHED {cell.crashed}" if cell.crashed else "")
            + (f"  CENTRE WRONG {cell.centre_wrong}" if cell.centre_wrong else "")
        )
    total = sum(cell.wrong for cell in cells)
    lines.append(
        f"\nconfident wrong answers in all: {total} of {sum(cell.count for cell in cells)} replicates"
        f" (and {sum(cell.centre_wrong for cell in cells)} whose centre is more than {WRONG_Z:g} "
        "stated errors off)"
    )
    return "\n".join(lines)


def calibration(cells: Sequence[Cell]) -> str:
    """Per estimator, all its answers pooled: coverage of the 68% and 95% intervals and the
    spread of z; then every cell whose 95% coverage is outside the range a correct interval
    gives its number of answers 99% of the time (binomial, p = 0.95)."""
    from scipy.stats import binom

    lines = [f"{'estimator':<13}{'answers':>8}{'in68':>7}{'in95':>7}{'sd z':>7}{'mean z':>8}{'WRONG':>7}"]
    odd = []
    for estimator in sorted({cell.estimator for cell in cells}):
        own = [cell for cell in cells if cell.estimator == estimator]
        z = np.concatenate([cell.z for cell in own]) if own else np.array([])
        if z.size:
            lines.append(f"{estimator:<13}{z.size:>8}{np.mean(np.abs(z) < 1):>7.1%}"
                         f"{np.mean(np.abs(z) < 1.96):>7.1%}{np.std(z):>7.2f}{np.mean(z):>8.2f}"
                         f"{int(np.sum(np.abs(z) > WRONG_Z)):>7}")
        for cell in own:
            if cell.answered >= 10:
                inside = int(np.sum(np.abs(cell.z) < 1.96))
                low, high = binom.ppf(0.005, cell.answered, 0.95), binom.ppf(0.995, cell.answered, 0.95)
                if not low <= inside <= high:
                    odd.append(f"  {cell.scenario.name} / {estimator}: {inside} of {cell.answered} inside "
                               f"95% (expected {low:.0f} to {high:.0f})")
    lines.append("cells whose 95% coverage a correct interval would give less than 1% of the time:")
    lines += odd or ["  none"]
    return "\n".join(lines)


def markdown(cells: Sequence[Cell]) -> str:
    """One row per family and estimator: refuses / flags / answers, 95% coverage, wrong."""
    groups: dict[tuple[str, str], list[Cell]] = {}
    for cell in cells:
        groups.setdefault((cell.scenario.family, cell.estimator), []).append(cell)
    lines = [
        "| family | estimator | refuses | flags | answers | inside 95% | confident wrong |",
        "|---|---|---:|---:|---:|---:|---:|",
    ]
    for (family, estimator), group in groups.items():
        count = sum(c.count for c in group)
        z = np.concatenate([c.z for c in group]) if group else np.array([])
        inside = f"{np.mean(np.abs(z) < 1.96):.0%}" if z.size else "–"
        lines.append(
            f"| {family} | {estimator} | {sum(c.refused + c.crashed for c in group) / count:.0%} | "
            f"{sum(c.flagged for c in group) / count:.0%} | {z.size / count:.0%} | {inside} | "
            f"{sum(c.wrong for c in group)} |"
        )
    return "\n".join(lines)


def tasks(
    *, replicates: int, only: str = "", estimator: str = "", slice_: bool = False
) -> list[tuple[int, str, int]]:
    chosen, families = [], set()
    for index, scenario in enumerate(scenarios()):
        if only and only not in scenario.name:
            continue
        if slice_:
            if scenario.family in families:
                continue
            families.add(scenario.family)
        for name in scenario.estimators:
            if estimator and name not in estimator.split(","):
                continue
            chosen += [(index, name, seed) for seed in range(1 if slice_ else replicates)]
    # Replicate after replicate over every cell: an interrupted run covers the cells evenly.
    return sorted(chosen, key=lambda task: (task[2], task[0], task[1]))


def run(
    todo: Sequence[tuple[int, str, int]], *, workers: int = 2, log: str = "", progress: bool = True
) -> list[dict[str, Any]]:
    done: list[dict[str, Any]] = []
    if log and os.path.exists(log):
        with open(log, encoding="utf-8") as handle:
            done = [json.loads(line) for line in handle if line.strip()]
        seen = {(r["cell"], r["estimator"], r["seed"]) for r in done}
        todo = [task for task in todo if task not in seen]
    # One simulated track serves every estimator of its cell and seed.
    groups: dict[tuple[int, int], list[str]] = {}
    for index, estimator, seed in todo:
        groups.setdefault((index, seed), []).append(estimator)
    out = open(log, "a", encoding="utf-8") if log else None
    count = 0
    try:
        with ProcessPoolExecutor(workers) as pool:
            jobs = [(index, seed, tuple(names)) for (index, seed), names in groups.items()]
            for rows in pool.map(_run_group, jobs, chunksize=1):
                for row in rows:
                    done.append(row)
                    if out:
                        out.write(json.dumps(row) + "\n")
                        out.flush()
                count += len(rows)
                if progress:
                    print(f"\r{count}/{len(todo)} replicates", end="", file=sys.stderr)
    finally:
        if out:
            out.close()
    if progress:
        print(file=sys.stderr)
    return done


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--replicates", type=int, default=REPLICATES)
    parser.add_argument("--quick", action="store_true", help=f"{QUICK} replicates per cell")
    parser.add_argument("--slice", action="store_true", help="one replicate of every family")
    parser.add_argument("--only", default="", help="cells whose 'family: scenario' holds this text")
    parser.add_argument("--estimator", default="", help="only these estimators (comma-separated)")
    parser.add_argument("--log", default="", help="JSON lines of every replicate; resumes from it")
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--markdown", action="store_true", help="also print the family table")
    parser.add_argument("--no-run", action="store_true", help="only summarise what --log holds")
    args = parser.parse_args()
    if args.no_run:
        with open(args.log, encoding="utf-8") as handle:
            cells = cells_of([json.loads(line) for line in handle if line.strip()])
        print(table(cells), calibration(cells), sep="\n\n")
        if args.markdown:
            print("\n" + markdown(cells))
        return
    todo = tasks(
        replicates=QUICK if args.quick else args.replicates,
        only=args.only,
        estimator=args.estimator,
        slice_=args.slice,
    )
    cells = cells_of(run(todo, workers=args.workers, log=args.log))
    print(table(cells), calibration(cells), sep="\n\n")
    if args.markdown:
        print()
        print(markdown(cells))


if __name__ == "__main__":
    main()
