"""Loading speed: forcefit's load_track against a bare pandas.read_csv of the same file.

forcefit adds column detection, unit parsing, row-numbered validation and dropped-row
bookkeeping on top of reading; this prints what that costs, as a ratio measured in one run.
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from forcefit import load_track


def best_of(repeats: int, action) -> float:  # type: ignore[no-untyped-def]
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        action()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    print("rows      pandas.read_csv   forcefit.load_track   ratio")
    with tempfile.TemporaryDirectory() as folder:
        for rows in (10_000, 100_000, 1_000_000):
            t = np.arange(rows) / 240.0
            frame = pd.DataFrame({"t [s]": t, "x [px]": 500 + 300 * np.cos(t),
                                  "y [px]": 400 + 200 * np.sin(t)})
            path = Path(folder) / f"run_{rows}.csv"
            frame.to_csv(path, index=False, float_format="%.4f")
            bare = best_of(3, lambda path=path: pd.read_csv(path))
            ours = best_of(3, lambda path=path: load_track(path))
            print(f"{rows:>9,d}   {bare:12.3f} s   {ours:14.3f} s   {ours / bare:7.1f}x")


if __name__ == "__main__":
    main()
