"""Speed, memory and accuracy of `describe_path` (smoothing, derivatives, geometry, centre).

Targets: 10**6 points in under 5 s and 1 GB on this 2-core machine, and curvature as
accurate as with a full generalised cross-validation (scipy's make_smoothing_spline with
its own GCV), measured side by side in this run. Prints the scaling exponent of time with
the number of points.
"""

from __future__ import annotations

import subprocess
import sys
import time

import numpy as np
from scipy.interpolate import make_smoothing_spline

CHILD = """
import sys, time, resource
import numpy as np
from forcefit import Track
from forcefit.geometry.path import describe_path
n = int(sys.argv[1])
t = np.linspace(0.0, 40 * np.pi, n)                    # 20 turns of a Hooke ellipse
rng = np.random.default_rng(1)
track = Track(t=t, x=np.cos(t) + 1e-3 * rng.standard_normal(n),
              y=0.5 * np.sin(t) + 1e-3 * rng.standard_normal(n))
before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
start = time.perf_counter()
path = describe_path(track)
elapsed = time.perf_counter() - start
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
exact = 0.5 / (np.sin(t) ** 2 + 0.25 * np.cos(t) ** 2) ** 1.5
inner = slice(n // 20, -n // 20)
error = np.sqrt(np.mean((path.curvature[inner] / exact[inner] - 1) ** 2))
print(elapsed, peak / 1024, before / 1024, error)
"""


def run_child(n_points: int) -> tuple[float, float, float, float]:
    output = subprocess.run([sys.executable, "-c", CHILD, str(n_points)], capture_output=True,
                            text=True, check=True).stdout.split()
    return tuple(float(value) for value in output)  # type: ignore[return-value]


def accuracy_against_full_gcv(n_points: int = 10_000) -> None:
    """Curvature error of forcefit's windowed-GCV smoothing vs scipy's full GCV, same data."""
    from forcefit import Track
    from forcefit.geometry.path import describe_path

    t = np.linspace(0.0, 40 * np.pi, n_points)
    rng = np.random.default_rng(2)
    x = np.cos(t) + 1e-3 * rng.standard_normal(n_points)
    y = 0.5 * np.sin(t) + 1e-3 * rng.standard_normal(n_points)
    exact = 0.5 / (np.sin(t) ** 2 + 0.25 * np.cos(t) ** 2) ** 1.5
    inner = slice(n_points // 20, -n_points // 20)

    start = time.perf_counter()
    ours = describe_path(Track(t=t, x=x, y=y), centre=(0.0, 0.0)).curvature
    ours_time = time.perf_counter() - start

    start = time.perf_counter()
    spline_x, spline_y = make_smoothing_spline(t, x), make_smoothing_spline(t, y)
    dx, dy = spline_x.derivative()(t), spline_y.derivative()(t)
    ddx, ddy = spline_x.derivative(2)(t), spline_y.derivative(2)(t)
    full = (dx * ddy - dy * ddx) / (dx**2 + dy**2) ** 1.5
    full_time = time.perf_counter() - start

    def rms(kappa: np.ndarray) -> float:
        return float(np.sqrt(np.mean((kappa[inner] / exact[inner] - 1) ** 2)))

    print(f"\naccuracy at {n_points:,} points (RMS relative curvature error, interior):")
    print(f"  scipy make_smoothing_spline, full GCV   {rms(full):.3e}   {full_time:6.2f} s")
    print(f"  forcefit describe_path, windowed GCV    {rms(ours):.3e}   {ours_time:6.2f} s")
    print(f"  error ratio forcefit / full GCV          {rms(ours) / rms(full):.2f}  (target <= 1.2)")
    print(f"  time ratio full GCV / forcefit           {full_time / ours_time:.1f}x")


def main() -> None:
    print("points      time      peak memory   curvature error")
    sizes, times = [], []
    for n_points in (10_000, 100_000, 1_000_000):
        elapsed, peak_mb, base_mb, error = run_child(n_points)
        sizes.append(n_points)
        times.append(elapsed)
        print(f"{n_points:>9,d}  {elapsed:6.2f} s  {peak_mb:8.0f} MB   {error:.2e}"
              f"   (interpreter and imports alone: {base_mb:.0f} MB)")
    slope = np.polyfit(np.log(sizes), np.log(times), 1)[0]
    print(f"time grows as N^{slope:.2f} from 10^4 to 10^6 points")
    verdict = "meets" if times[-1] < 5.0 else "misses"
    print(f"10^6 points: {times[-1]:.2f} s — {verdict} the 5 s target")
    accuracy_against_full_gcv()


if __name__ == "__main__":
    main()
