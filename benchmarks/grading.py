"""Batch grading: 40 simulated pendulum runs with 1 worker, with 2 worker processes, and on a
dask LocalCluster of 2 processes — the speed-up measured side by side (target >= 1.7 on 2 cores).
"""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

import numpy as np

from forcefit import save_track
from forcefit.apps.grading import GradingRule, grade_runs
from forcefit.dynamics import simulate_pendulum


def make_runs(folder: Path, count: int = 40) -> None:
    rng = np.random.default_rng(0)
    for i in range(count):
        a, b = rng.uniform(0.1, 0.25), rng.uniform(0.03, 0.12)
        track = simulate_pendulum(length=2.4, gravity=9.81, start=(a, 0.0),
                                  velocity=(0.0, b * np.sqrt(9.81 / 2.4)), duration=25.0, rate=30.0,
                                  noise=0.0008, rng=i, name=f"run_{i:02d}")
        save_track(track, folder / f"run_{i:02d}.csv")


def timed(label: str, action) -> float:  # type: ignore[no-untyped-def]
    start = time.perf_counter()
    frame = action()
    elapsed = time.perf_counter() - start
    print(f"  {label:<34} {elapsed:7.1f} s   {int(frame['passed'].sum())}/{len(frame)} passed")
    return elapsed


def main() -> None:
    rule = GradingRule(expect=1.0, tolerance=0.05, strength=9.81 / 2.4, strength_tolerance=0.03)
    with tempfile.TemporaryDirectory() as folder:
        root = Path(folder)
        runs = root / "runs"
        runs.mkdir()
        make_runs(runs)
        print("grading 40 simulated pendulum runs (fit, checks and a report with figures each)")
        one = timed("1 worker (this process)",
                    lambda: grade_runs(runs, rule, root / "one", workers=1, progress=False))
        two = timed("2 worker processes",
                    lambda: grade_runs(runs, rule, root / "two", workers=2, progress=False))
        from dask.distributed import LocalCluster

        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                          dashboard_address=None) as cluster:
            dask = timed("dask LocalCluster, 2 processes",
                         lambda: grade_runs(runs, rule, root / "dask", scheduler=cluster.scheduler_address,
                                            progress=False))
        print(f"  speed-up with 2 workers: {one / two:.2f}x (target >= 1.7)")
        print(f"  speed-up on dask:        {one / dask:.2f}x")


if __name__ == "__main__":
    main()
