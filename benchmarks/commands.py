"""The speed issue's command rows, each beside its reference, measured in one run.

(a) ``forcefit apsides``, ``inspect`` and ``fit`` on a 2 600-point pendulum, each in a fresh
    interpreter: the wall time, the same work done in this (warm) process, and what is left
    (start-up) beside the start-up of exactly the third-party libraries the command's work calls
    (`NEEDS`), which no start-up can go below -- target "start-up-free": within 1.5 times that
    floor, the factor the issue allows ``--help`` over its own floor -- and, for scale, beside
    ``python -c "import numpy, pandas"``. A compiled function's first call in a process costs
    numba about 0.4 s to set up its compiler's tables, however small the function and even when
    the machine code comes from the disk cache: the floor of a command that steps orbits therefore
    includes one such call (of a one-line cached function, `FIRST_DISPATCH`);
(b) ``forcefit sample`` on a 2 631-point pendulum: the converged posterior's wall time in a
    fresh interpreter -- target < 30 s on two cores; beside it, the same chain's steps with the
    orbits stepped onto every sample on one core (the earlier sampler), timed on a stretch of
    steps and scaled to the run;
(c) ``forcefit fit`` on a 100-year Mercury-like orbit sampled every 5 days (7 300 samples,
    centre free) -- target < 30 s; beside it, the 600-sample rosette's fit and the exponent's
    distance from the truth in its own standard errors.

Usage
-----
python benchmarks/commands.py            # all rows, about two minutes on two idle cores
python benchmarks/commands.py --only a   # one row group (a, b or c)
"""

from __future__ import annotations

import argparse
import math
import os
import statistics
import subprocess
import sys
import tempfile
import time
import warnings
from collections.abc import Callable
from pathlib import Path

from forcefit.dynamics.simulate import simulate_orbit, simulate_pendulum
from forcefit.estimators import fit, fit_orbit
from forcefit.reading.loaders import load_track, save_track
from forcefit.track import Track

GAUSS_K2 = 2.959122082855911e-4
"""Gauss's gravitational constant squared, au^3 d^-2 (IAU 1976; from memory)."""
START_UP_TARGET = 1.5
TARGET_SECONDS = 30.0
CLI = [sys.executable, "-m", "forcefit.cli"]

NEEDS = {
    "apsides": ("numpy", "pandas", "scipy.optimize", "scipy.interpolate", "scipy.sparse", "scipy.linalg",
                "scipy.fft"),
    "inspect": ("numpy", "pandas"),
    "fit": ("numpy", "pandas", "scipy.optimize", "scipy.integrate", "scipy.fft", "numba"),
}
"""The third-party modules each command's work calls into, read off a profile of the command on the
pendulum: pandas reads the file; apsides smooths the path (scipy's splines, sparse and dense
linear algebra, and a scalar minimiser for the smoothing level); fit's orbit method integrates
with the compiled kernel (numba, DOP853's tables from scipy.integrate), fits by scipy's least
squares and finds the residuals' correlation time by FFT."""

FIRST_DISPATCH = '''"""A cached compiled function: its first call in a fresh process is numba's start-up."""
import numba


@numba.njit(cache=True)
def one(x):
    return x + 1.0


one(1.0)
'''

CHILD_ENV = {name: value for name, value in os.environ.items() if name != "PYTHONDONTWRITEBYTECODE"}
"""The children's environment: Python's bytecode cache on, as an installed package has it."""


def _pendulum(points: int, rng: int) -> Track:
    """An 11 m pendulum filmed from above at 30 frames per second (m, s; noise 1 mm)."""
    return simulate_pendulum(length=11.0, gravity=9.8105, start=(0.55, 0.0), velocity=(0.0, 0.25),
                             duration=(points - 1) / 30.0, rate=30.0, latitude=52.0, noise=1e-3, rng=rng,
                             name="pendulum")


def _seconds(action: Callable[[], object]) -> float:
    start = time.perf_counter()
    action()
    return time.perf_counter() - start


def _run(command: list[str], env: dict[str, str] | None = None) -> float:
    """Wall seconds of a command; exit 0 or 1 (a fit that failed its checks) count, 2 is an error."""
    start = time.perf_counter()
    done = subprocess.run(command, check=False, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True,
                          env=CHILD_ENV if env is None else env)
    if done.returncode not in (0, 1):
        raise SystemExit(f"{' '.join(command)} failed: {done.stderr.strip()}")
    return time.perf_counter() - start


def commands(folder: Path, repeats: int) -> None:
    from forcefit.analysis.apsides import measure_apsides
    from forcefit.reading.inspection import inspect_track

    path = save_track(_pendulum(2600, 1), folder / "pendulum.csv")
    track = load_track(path)
    work: dict[str, Callable[[], object]] = {
        "apsides": lambda: measure_apsides(load_track(path)),
        "inspect": lambda: inspect_track(load_track(path)),
        "fit": lambda: fit(load_track(path)),
    }
    for name, action in work.items():                    # warm: compiled, imported, bytecode cached
        action()
        _run([*CLI, name, str(path), "--json"])
    (folder / "first_dispatch.py").write_text(FIRST_DISPATCH)
    dispatch = [sys.executable, str(folder / "first_dispatch.py")]
    _run(dispatch)                                                    # compile once, to the cache
    numpy_pandas = [sys.executable, "-c", "import numpy, pandas"]
    print(f"(a) commands on a {track.n_points}-point pendulum (median of {repeats} runs, seconds; load "
          f"{os.getloadavg()[0]:.1f})")
    print(f"    {'command':10} {'wall':>7} {'work':>7} {'start-up':>9} {'libs':>7} {'x np+pd':>8} "
          f"{'x libs':>7} {'beyond':>7}")
    worst, beyond, reference = 0.0, {}, math.nan
    for name, action in work.items():
        walls, references, needed = [], [], []
        libraries = [sys.executable, "-c", "import " + ", ".join(NEEDS[name])]
        for _ in range(repeats):                                 # interleaved with the references
            references.append(_run(numpy_pandas))
            needed.append(_run(libraries) + (_run(dispatch) - _run([sys.executable, "-c", "import numba"])
                                             if "numba" in NEEDS[name] else 0.0))
            walls.append(_run([*CLI, name, str(path), "--json"]))
        reference = statistics.median(references)
        floor = statistics.median(needed)
        wall = statistics.median(walls)
        busy = statistics.median(_seconds(action) for _ in range(repeats))
        start_up = max(wall - busy, 0.0)
        worst = max(worst, start_up / floor)
        beyond[name] = start_up - floor
        print(f"    {name:10} {wall:7.2f} {busy:7.2f} {start_up:9.2f} {floor:7.2f} "
              f"{start_up / reference:8.2f} "
              f"{start_up / floor:7.2f} {beyond[name]:+7.2f}")
    print("    libs: the start-up of the libraries the command's work needs (" +
          "; ".join(f"{name} {' '.join(NEEDS[name])}" for name in NEEDS) +
          "; with numba, one cached compiled function's first call)")
    print("    start-up beyond those libraries: " + ", ".join(f"{name} {value:+.2f} s" for name, value in
                                                           beyond.items()) +
          f"; slowest {worst:.2f} x its libraries (target <= {START_UP_TARGET:g} x): "
          f"{'met' if worst <= START_UP_TARGET else 'NOT met'}")
    print(f"    for scale: import numpy, pandas {reference:.2f} s")
    if "PYTHONDONTWRITEBYTECODE" in os.environ:
        uncached = statistics.median(_run([*CLI, "fit", str(path), "--json"], env=dict(os.environ))
                                     for _ in range(repeats))
        print(f"    (children ran with Python's bytecode cache; PYTHONDONTWRITEBYTECODE is set here, and "
              f"without the cache fit's wall is {uncached:.2f} s)")


def sampling(folder: Path) -> None:
    from dataclasses import replace

    from forcefit.inference.posterior import _problem, run_ensemble

    track = _pendulum(2631, 2)
    path = save_track(track, folder / "pendulum_2631.csv")
    subprocess.run([*CLI, "sample", str(path), "--max-steps", "20", "--json"], check=False,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)       # compile, cache
    import resource

    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    done = subprocess.run([*CLI, "sample", str(path), "--json"], check=False, capture_output=True,
                          text=True)
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    busy = after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime
    import json

    (report,) = json.loads(done.stdout)
    steps = int(report["posterior"]["n_steps"])
    walkers = int(report["posterior"]["n_walkers"])
    fitted = fit_orbit(load_track(path))
    problem, best, covariance = _problem(fitted, "known" if fitted.sigma_known else "fit", {})
    earlier = replace(problem, model=replace(problem.model, dense=False, parallel=False))
    probe = 20
    with warnings.catch_warnings():                      # two steps leave emcee's tau undefined
        warnings.simplefilter("ignore", RuntimeWarning)
        run_ensemble(earlier, best, covariance, rng=1, max_steps=2, min_steps=2, moves="de")   # warm
    per_step = _seconds(lambda: run_ensemble(earlier, best, covariance, rng=1, max_steps=probe, moves="de",
                                             min_steps=probe)) / probe
    print(f"\n(b) forcefit sample, {track.n_points}-point pendulum, {walkers} walkers")
    print(f"    converged: {report['posterior']['converged']} after {steps} steps")
    print(f"    this sampler (fresh interpreter, fit included)  {wall:7.1f} s "
          f"(target < {TARGET_SECONDS:g} s): {'met' if wall < TARGET_SECONDS else 'NOT met'}")
    print(f"    its processor time {busy:.1f} s over {wall:.1f} s wall (on a busy machine the wall "
          f"time is the larger; load {os.getloadavg()[0]:.1f})")
    print(f"    earlier sampler, one core, stepped onto every sample: {1e3 * per_step:.0f} ms/step over "
          f"{probe} steps, {per_step * steps:7.1f} s for {steps} steps ({per_step * steps / wall:.1f} x)")


def century(folder: Path) -> None:
    a, e = 0.387, 0.206
    pericentre = a * (1 - e)
    speed = math.sqrt(GAUSS_K2 * (1 + e) / pericentre)
    truth = simulate_orbit(exponent=-2.0, strength=GAUSS_K2, start=(pericentre, 0.0), velocity=(0.0, speed),
                           duration=100 * 365.25 - 1, rate=0.2, noise=1e-6, length_unit="au", time_unit="d",
                           rng=5)
    track = Track(t=truth.t, x=truth.x, y=truth.y, length_unit="au", time_unit="d", name="century")
    path = save_track(track, folder / "century.csv")
    rosette = simulate_orbit(exponent=-1.5, noise=0.005, rng=1)
    fit_orbit(rosette)                                                          # warm
    wall = _run([*CLI, "fit", str(path), "--json"])
    result = None

    def work() -> None:
        nonlocal result
        result = fit_orbit(load_track(path))

    busy = _seconds(work)
    small = _seconds(lambda: fit_orbit(rosette))
    assert result is not None
    print(f"\n(c) fit, Mercury-like orbit every 5 days for 100 years ({track.n_points} samples, centre free)")
    print(f"    forcefit fit (fresh interpreter)  {wall:6.1f} s (target < {TARGET_SECONDS:g} s): "
          f"{'met' if wall < TARGET_SECONDS else 'NOT met'}")
    print(f"    fit_orbit in this process        {busy:6.1f} s; the {rosette.n_points}-sample rosette's "
          f"{small:.2f} s ({busy / small:.0f} x)")
    print(f"    n = {result.exponent:.12f} +- {result.exponent_stderr:.1e}: "
          f"{(result.exponent + 2.0) / result.exponent_stderr:+.1f} standard errors from -2; "
          f"checks {'passed' if result.passed else 'FAILED'}")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--only", choices=("a", "b", "c"))
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        if args.only in (None, "a"):
            commands(folder, args.repeats)
        if args.only in (None, "b"):
            sampling(folder)
        if args.only in (None, "c"):
            century(folder)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
