"""Start-up of the command line, beside the import of numpy and pandas, measured in one run.

The speed issue's target: ``forcefit --help`` and every command's ``--help`` within 1.5 times
the time ``python -c "import numpy, pandas"`` takes on the same machine, and ``import forcefit``
cheap. Each command is run in a fresh interpreter several times, interleaved with the reference,
and the medians are compared (wall-clock seconds; ratios are what matter on a noisy machine).

Usage
-----
python benchmarks/startup.py              # median of 5 runs each
python benchmarks/startup.py --repeats 9
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time

CASES = {
    "import numpy, pandas (reference)": [sys.executable, "-c", "import numpy, pandas"],
    "import forcefit": [sys.executable, "-c", "import forcefit"],
    "forcefit --help": [sys.executable, "-m", "forcefit.cli", "--help"],
    **{f"forcefit {command} --help": [sys.executable, "-m", "forcefit.cli", command, "--help"]
       for command in ("fit", "sample", "apsides", "inspect", "grade", "track")},
}
TARGET = 1.5


def _seconds(command: list[str]) -> float:
    start = time.perf_counter()
    subprocess.run(command, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - start


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    times: dict[str, list[float]] = {name: [] for name in CASES}
    for _ in range(args.repeats):                        # interleaved: drifts hit every case alike
        for name, command in CASES.items():
            times[name].append(_seconds(command))
    reference = statistics.median(times["import numpy, pandas (reference)"])
    print(f"{'case':34} {'median s':>9} {'x reference':>12}")
    worst = 0.0
    for name, values in times.items():
        ratio = statistics.median(values) / reference
        if name.startswith("forcefit"):
            worst = max(worst, ratio)
        print(f"{name:34} {statistics.median(values):9.3f} {ratio:12.2f}")
    verdict = "met" if worst <= TARGET else "NOT met"
    print(f"\nslowest help: {worst:.2f} x the reference (target <= {TARGET:g} x): {verdict}")
    return 0 if worst <= TARGET else 1


if __name__ == "__main__":
    raise SystemExit(main())
