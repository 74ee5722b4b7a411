"""The shape fit's speed, this version beside an earlier one, measured side by side in one run.

The case of the speed issue: ``fit --method shape`` on 600 points without timestamps, the
centre given (and, for information, the centre free), on an n = -1.5 rosette over about five
turns with noise 0.5% of its size and on a 12.5-turn camera pendulum. Both versions fit the
same tracks on this machine, each in its own interpreter (the earlier one from
``git archive`` of the reference revision into a temporary folder), after one warm-up
call that compiles what it compiles; the figures are the median of a few calls of the fit alone,
start-up excluded. Target: the new fit below 1 s per call, centre given.

Usage
-----
python benchmarks/shape_fit.py                       # against the fit before the Binet rewrite
python benchmarks/shape_fit.py --reference <rev>     # against any other revision
python benchmarks/shape_fit.py --repeats 5            # median of 5 calls (default 2)
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

REFERENCE = "98a01be"
"""The last revision with the earlier shape fit (least squares with finite-difference
Jacobians through solve_ivp, started from the curvature fit)."""

CASES = ("rosette 600, centre given", "rosette 600, centre free", "pendulum 12.5 turns, centre given")

MEASURE = r"""
import json, math, statistics, sys, time, types, warnings
try:
    import lmfit  # noqa: F401
except ImportError:
    # the reference revision's orbit fit imports lmfit (no longer a dependency) when forcefit is
    # imported; its shape fit never calls it, so an empty module lets that revision load
    sys.modules["lmfit"] = types.ModuleType("lmfit")
import numpy as np
from forcefit import simulate_orbit
from forcefit.dynamics.simulate import simulate_pendulum
from forcefit.errors import ForcefitError
from forcefit.estimators import fit
from forcefit.track import Track

repeats = int(sys.argv[1])
truth = simulate_orbit(exponent=-1.5)
size = float(np.ptp(truth.positions, axis=0).max())
rosette = simulate_orbit(exponent=-1.5, noise=0.005 * size, rng=1, rate=599 / truth.duration,
                         duration=truth.duration).shape_only()
omega = math.sqrt(9.81 / 2.0)
swing = simulate_pendulum(length=2.0, start=(0.2, 0.0), velocity=(0.0, 0.06 * omega),
                          duration=12.5 * 2 * math.pi / omega, rate=30.0, noise=3e-4, rng=2)
pendulum = Track(x=1000.0 * swing.x + 320.0, y=1000.0 * swing.y + 240.0, length_unit="px")
cases = {"rosette 600, centre given": (rosette, (0.0, 0.0)),
         "rosette 600, centre free": (rosette, None),
         "pendulum 12.5 turns, centre given": (pendulum, (320.0, 240.0))}
out = {}
with warnings.catch_warnings():                   # the first call compiles and warms caches
    warnings.simplefilter("ignore")
    fit(rosette, "shape", centre=(0.0, 0.0))
for name, (track, centre) in cases.items():
    times, answer = [], None
    for _ in range(repeats):
        started = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                result = fit(track, "shape", centre=centre)
                answer = f"n = {result.exponent:.5f} +- {result.exponent_stderr:.5f}"
            except ForcefitError as exc:
                answer = f"{type(exc).__name__}"
        times.append(time.perf_counter() - started)
    out[name] = {"seconds": statistics.median(times), "answer": answer, "points": track.n_points}
print(json.dumps(out))
"""


def measure(source: Path, repeats: int) -> dict[str, dict[str, object]]:
    """Run the measurement in a fresh interpreter that imports forcefit from ``source``."""
    environment = {**os.environ, "PYTHONPATH": str(source)}
    completed = subprocess.run([sys.executable, "-c", MEASURE, str(repeats)], cwd=source, env=environment,
                               capture_output=True, text=True, check=True)
    return json.loads(completed.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--reference", default=REFERENCE, help=f"earlier revision (default {REFERENCE})")
    parser.add_argument("--repeats", type=int, default=2, help="timed calls per case (median)")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        archive = subprocess.run(["git", "archive", args.reference, "forcefit"], cwd=ROOT,
                                 capture_output=True, check=True).stdout
        subprocess.run(["tar", "-x", "-C", folder], input=archive, check=True)
        old = measure(Path(folder), args.repeats)
    new = measure(ROOT, args.repeats)
    print(f"shape fit, median of {args.repeats} calls after a warm-up, fit alone (start-up excluded)")
    print(f"{'case':<36}{'points':>7}{'before (s)':>12}{'now (s)':>10}{'speed-up':>10}   answers")
    for case in CASES:
        before, now = old[case], new[case]
        ratio = float(before["seconds"]) / float(now["seconds"])   # type: ignore[arg-type]
        print(f"{case:<36}{now['points']:>7}{before['seconds']:>12.3f}{now['seconds']:>10.3f}{ratio:>9.1f}x"
              f"   before {before['answer']}; now {now['answer']}")
    print("target: below 1 s per call with the centre given (600 points)")


if __name__ == "__main__":
    main()
