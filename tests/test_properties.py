"""Issue #8: property-based tests. Whatever table or track comes in, forcefit answers with a
result free of NaN and infinity where it claims a value, or with a ForcefitError — nothing else."""

import math
import warnings
from datetime import timedelta

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from forcefit.dynamics.simulate import simulate_orbit
from forcefit.errors import ForcefitError, ForcefitWarning
from forcefit.estimators import fit_acceleration, fit_curvature, fit_orbit, fit_shape
from forcefit.reading.loaders import load_tracks
from forcefit.track import Track

HEADERS = ["t", "time (ms)", "T [s]", "x", "X [px]", "x_mm", "y", "y [px]", "Y_mm", "z [m]", "sigma",
           "frame", "id", "run", "notes", "x [furlong]", ""]
CELLS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True, width=64).map(repr),
    st.integers(-10**6, 10**6).map(str),
    st.sampled_from(["", "nan", "NaN", "n/a", "#DIV/0!", "1,5", "−2", "1e300", "abc", " 3 ", "0x1F",
                     "00:01:02.5", '"4"', "inf"]),
)


@st.composite
def tables(draw):
    columns = draw(st.lists(st.sampled_from(HEADERS), min_size=1, max_size=6))
    rows = draw(st.lists(st.lists(CELLS, min_size=len(columns), max_size=len(columns)),
                         min_size=0, max_size=25))
    delimiter = draw(st.sampled_from([",", ";", "\t", "  "]))
    body = [delimiter.join(columns)] + [delimiter.join(row) for row in rows]
    return "\n".join(body) + draw(st.sampled_from(["", "\n", "\r\n"]))


def _load_or_refuse(source):
    """The tracks in ``source``, or [] when forcefit refuses it (any other exception fails)."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ForcefitWarning)
            return load_tracks(source)
    except ForcefitError:
        return []


def _check_tables(text, tmp_path_factory):
    path = tmp_path_factory.mktemp("table") / "table.csv"
    path.write_text(text, encoding="utf-8")
    for track in _load_or_refuse(path):
        for array in (track.x, track.y, track.t, track.sigma):
            if array is not None:
                assert np.all(np.isfinite(array))


def _check_frames(frame):
    for track in _load_or_refuse(frame):
        assert np.all(np.isfinite(track.x)) and np.all(np.isfinite(track.y))


FRAMES = st.dictionaries(
    st.sampled_from(["t", "x", "y", "z", "sigma", "id", "x [m]", "y [m]", "other"]),
    st.lists(st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.none(), st.text(max_size=3)),
             min_size=0, max_size=12),
    min_size=1, max_size=5,
).map(lambda columns: pd.DataFrame({k: pd.Series(v, dtype=object) for k, v in columns.items()}))


@st.composite
def tracks(draw):
    """Orbits of many laws, noise levels and lengths, and degenerate paths."""
    kind = draw(st.sampled_from(["orbit", "orbit", "orbit", "line", "circle", "point", "walk"]))
    n_points = draw(st.integers(3, 160))
    t = np.linspace(0.0, draw(st.floats(0.5, 30.0)), n_points)
    rng = np.random.default_rng(draw(st.integers(0, 2**31)))
    noise = draw(st.sampled_from([0.0, 1e-4, 1e-2, 0.2]))
    if kind == "orbit":
        exponent = draw(st.floats(-2.8, 3.0))
        try:
            track = simulate_orbit(exponent=exponent, duration=float(t[-1]) + 0.01,
                                   rate=(n_points - 1) / (float(t[-1]) + 0.01), noise=noise, rng=rng,
                                   velocity=(0.0, draw(st.floats(0.3, 1.3))))
        except ForcefitError:
            return None
    else:
        x, y = {"line": (t, 2 * t + 1), "circle": (np.cos(t), np.sin(t)),
                "point": (np.ones(n_points), np.ones(n_points)),
                "walk": tuple(np.cumsum(rng.standard_normal((2, n_points)), axis=1))}[kind]
        x = x + noise * rng.standard_normal(n_points)
        y = y + noise * rng.standard_normal(n_points)
        try:
            track = Track(t=t, x=x, y=y)
        except ForcefitError:
            return None
    return track.shape_only() if draw(st.booleans()) else track


ESTIMATORS = [fit_curvature, fit_shape, fit_acceleration, fit_orbit]


def _check_estimator(track, estimator):
    if track is None:
        return
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            fit = estimator(track)
    except ForcefitError:
        return
    for name in ("exponent", "exponent_stderr", "strength_per_h2", "chi2"):
        assert math.isfinite(getattr(fit, name)), name
    assert all(math.isfinite(c) for c in fit.centre)
    if track.has_times:
        assert math.isfinite(fit.strength)
    assert np.all(np.isfinite(fit.residuals))
    for other in fit.alternatives:
        assert math.isfinite(other.exponent)


QUICK = settings(max_examples=100, deadline=None, suppress_health_check=list(HealthCheck))
LONG = settings(max_examples=5000, deadline=None, suppress_health_check=list(HealthCheck))
PATIENT = settings(LONG, deadline=timedelta(seconds=300))  # an answer, and in bounded time


@QUICK
@given(text=tables())
def test_loaders_on_random_tables(text, tmp_path_factory):
    _check_tables(text, tmp_path_factory)


@QUICK
@given(frame=FRAMES)
def test_loaders_on_random_frames(frame):
    _check_frames(frame)


@settings(QUICK, max_examples=60, derandomize=True)   # the same examples each run; the long one explores
@given(track=tracks(), estimator=st.sampled_from(ESTIMATORS))
def test_estimators_on_random_tracks(track, estimator):
    _check_estimator(track, estimator)


@pytest.mark.slow
@LONG
@given(text=tables())
def test_loaders_on_random_tables_long(text, tmp_path_factory):
    _check_tables(text, tmp_path_factory)


@pytest.mark.slow
@LONG
@given(frame=FRAMES)
def test_loaders_on_random_frames_long(frame):
    _check_frames(frame)


@pytest.mark.slow
@PATIENT
@given(track=tracks(), estimator=st.sampled_from(ESTIMATORS))
def test_estimators_on_random_tracks_long(track, estimator):
    _check_estimator(track, estimator)
