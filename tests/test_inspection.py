"""What a track holds: timing, gaps, turns, the noise estimate, the text and JSON forms."""

import json

import numpy as np
import pytest

from forcefit.errors import ForcefitWarning
from forcefit.geometry.noise import difference_noise
from forcefit.reading.inspection import inspect_track, turns_about_middle
from forcefit.reading.loaders import load_track
from forcefit.track import Track


def _two_turns(drop=()):
    t = np.arange(0.0, 10.0, 0.01)                            # 100 samples per second
    keep = np.setdiff1d(np.arange(t.size), drop)
    t = t[keep]
    return Track(t=t, x=np.cos(0.4 * np.pi * t), y=0.5 * np.sin(0.4 * np.pi * t), name="ellipse")


def test_noise_from_fourth_differences():
    # White noise of sd s gives normalised 4th differences of sd s, which a smooth curve
    # sampled densely hardly changes (Gasser, Sroka & Jennen-Steinmetz 1986, Biometrika 73, 625).
    rng = np.random.default_rng(3)
    s = np.linspace(0.0, 1.0, 20_000)
    x = np.cos(s) + 0.01 * rng.standard_normal(s.size)
    y = np.sin(s) + 0.01 * rng.standard_normal(s.size)
    summary = inspect_track(Track(t=None, x=x, y=y))
    assert summary.noise_estimate == pytest.approx(0.01, rel=0.03)
    assert summary.noise_resolved and not summary.noise_correlated


def test_inspect_and_the_fits_agree_on_the_noise():
    # Issue 13, failure mode 10: one noise estimate for inspect and every fit.
    from forcefit.estimators.curvature import fit_curvature
    rng = np.random.default_rng(4)
    t = np.linspace(0.0, 20.0, 2000)
    track = Track(t=t, x=np.cos(t) + 2e-3 * rng.standard_normal(t.size),
                  y=0.6 * np.sin(t) + 2e-3 * rng.standard_normal(t.size))
    summary = inspect_track(track)
    assert summary.noise_estimate == difference_noise(track)
    fit = fit_curvature(track, centre=(0.0, 0.0))
    assert fit.noise == pytest.approx(summary.noise_estimate, rel=1e-9)


def test_timing_gaps_and_turns():
    summary = inspect_track(_two_turns(drop=[200, 201, 500]))
    assert summary.n_points == 997 and summary.duration == pytest.approx(9.99)
    assert summary.sample_rate == pytest.approx(100.0) and summary.sampling_interval == pytest.approx(0.01)
    assert summary.n_gaps == 2 and summary.largest_gap == pytest.approx(0.03)   # two frames lost at 2 s
    assert summary.turns_about_middle == pytest.approx(2.0, abs=0.01)          # 0.2 turns per second
    assert turns_about_middle(_two_turns()) == pytest.approx(2.0, abs=0.01)
    assert summary.x_range == pytest.approx((-1.0, 1.0), abs=1e-3)


def test_text_and_json_say_the_same():
    summary = inspect_track(_two_turns())
    text = summary.to_text()
    assert "ellipse" in text and "100 per s" in text and "2.00 about the middle" in text
    report = json.loads(json.dumps(summary.to_dict()))
    assert report["n_points"] == 1000 and report["time_unit"] == "s" and report["n_gaps"] == 0
    shape_only = inspect_track(_two_turns().shape_only())
    assert "none (shape-only path)" in shape_only.to_text() and shape_only.to_dict()["duration"] is None


def test_dropped_rows_and_unused_columns_are_named(write):
    # issue 15: "1 rows dropped" without saying which row; unrecognised columns dropped silently
    text = "t [s],x [mm],y [mm],Kommentar\n" + "\n".join(
        f"{t / 10},{'' if t == 4 else np.cos(t)},{np.sin(t)},ok" for t in range(8))
    with pytest.warns(ForcefitWarning):
        track = load_track(write("run.csv", text))
    text = inspect_track(track).to_text()
    assert "1 row left out for empty cells: row 6" in text
    assert 'not used  "Kommentar" (not recognised)' in text
    assert "units     length mm (header), time s (header)" in text
