"""Shared fixtures of forcefit's tests, and the paths of the project and its demo data."""

from __future__ import annotations

import functools
import hashlib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "datasets_demo"


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture(scope="session")
def digest():
    """A file's SHA-256 digest, to prove it was not modified."""
    return _sha256


@pytest.fixture
def write(tmp_path: Path):
    """Write text (or bytes) to a file in a fresh folder and return its path."""

    def _write(name: str, content: str | bytes) -> Path:
        path = tmp_path / name
        if isinstance(content, bytes):
            path.write_bytes(content)
        else:
            path.write_text(content, encoding="utf-8", newline="")
        return path

    return _write


@functools.cache                         # tracks are immutable: share them within a worker
def _screened_track(n_points: int = 750, *, with_sigma: bool = True, scale: float = 1.0):
    """A noisy orbit in the screened force F = exp(-r/scale)/r^2, which no power law describes
    (its local exponent is -2 - r/scale; a Yukawa-like force, common practice)."""
    import numpy as np
    from scipy.integrate import solve_ivp

    from forcefit.track import Track

    def derivative(_, s):
        r = np.hypot(s[0], s[1])
        a = -np.exp(-r / scale) / r**2
        return [s[2], s[3], a * s[0] / r, a * s[1] / r]

    t = np.linspace(0.0, 80.0, n_points)
    solution = solve_ivp(derivative, (0, 80), [1.5, 0, 0, 0.28], t_eval=t, rtol=1e-11, atol=1e-13,
                         method="DOP853")
    rng = np.random.default_rng(2)
    return Track(t=t, x=solution.y[0] + 0.002 * rng.standard_normal(t.size),
                 y=solution.y[1] + 0.002 * rng.standard_normal(t.size),
                 sigma=0.002 if with_sigma else None, name="screened")


def _bent_track(bend: float = 0.15):
    """A noisy orbit (noise 0.002, sigma given) in F = r^(-2 + bend ln r), whose local exponent
    d ln F / d ln r = -2 + 2 bend ln r is exactly linear in ln r, integrated by scipy's DOP853.
    Returns the track and the true change of the local exponent across its radial range,
    2 bend ln(r_max / r_min)."""
    import numpy as np
    from scipy.integrate import solve_ivp

    from forcefit.track import Track

    def derivative(_, s):
        r = np.hypot(s[0], s[1])
        a = -(r ** (-2.0 + bend * np.log(r)))
        return [s[2], s[3], a * s[0] / r, a * s[1] / r]

    t = np.linspace(0.0, 60.0, 1500)
    solution = solve_ivp(derivative, (0, 60), [1.5, 0, 0, 0.5], t_eval=t, rtol=1e-11, atol=1e-13,
                         method="DOP853")
    r = np.hypot(solution.y[0], solution.y[1])
    rng = np.random.default_rng(4)
    track = Track(t=t, x=solution.y[0] + 0.002 * rng.standard_normal(t.size),
                  y=solution.y[1] + 0.002 * rng.standard_normal(t.size), sigma=0.002, name="bent")
    return track, 2 * bend * float(np.log(r.max() / r.min()))


@pytest.fixture(scope="session")
def bent():
    """`_bent_track()`: an orbit whose local exponent changes by a known amount."""
    return _bent_track()


@functools.cache
def _noisy_orbit(exponent: float, rng: int, n_points: int = 1000):
    """Three circular periods of F = r^n (k = 1), n_points samples, noise 0.2% of the orbit's
    size, centre at (0.25, -0.15) m."""
    import numpy as np

    from forcefit.dynamics.laws import circular_period
    from forcefit.dynamics.simulate import simulate_orbit

    duration = 3.0 * float(circular_period(1.0, exponent, 1.0))
    clean = simulate_orbit(exponent=exponent, duration=duration, rate=(n_points - 1) / duration)
    size = max(float(np.ptp(clean.x)), float(np.ptp(clean.y)))
    return simulate_orbit(exponent=exponent, duration=duration, rate=(n_points - 1) / duration,
                          noise=0.002 * size, centre=(0.25, -0.15), rng=rng)


@pytest.fixture(scope="session")
def noisy_orbit():
    """`_noisy_orbit`: a noisy simulated orbit with a known law and centre."""
    return _noisy_orbit


@pytest.fixture(scope="session")
def screened():
    """`_screened_track`: a noisy orbit in a force no power law describes."""
    return _screened_track


@pytest.fixture(scope="session")
def sharp_posterior():
    """A short posterior (200 steps) of a nearly noise-free orbit with n = -2.0004: its 68%
    interval of n is about 1e-8 wide, so printing it needs many digits."""
    from forcefit.dynamics.simulate import simulate_orbit
    from forcefit.estimators import fit_orbit
    from forcefit.inference.posterior import sample_posterior

    track = simulate_orbit(exponent=-2.0004, noise=2e-7, duration=20.0, rate=15.0, rng=11, name="sharp")
    return sample_posterior(fit_orbit(track), rng=3, progress=False, max_steps=200, min_steps=200)
