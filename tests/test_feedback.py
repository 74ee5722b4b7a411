"""The likely mistake behind a failing run, from what the fit shows."""

import math

import numpy as np
import pytest

from forcefit.apps.feedback import RunFacts, likely_mistakes
from forcefit.track import Track


def _facts(track=None, **changes):
    base = {"track": track, "load_error": "", "exponent": 1.0, "exponent_stderr": 0.002,
            "strength_ratio": 1.0, "expected_exponent": 1.0, "tolerance": 0.05, "turns": 3.0,
            "min_turns": 1.0, "fit_checks_passed": True}
    return RunFacts(**{**base, **changes})


def _track(step=1 / 30, length_unit="mm", time_unit="s"):
    t = np.arange(200) * step
    return Track(t=t, x=np.cos(t), y=np.sin(t), length_unit=length_unit, time_unit=time_unit)


@pytest.mark.parametrize("changes, expected", [
    # k = omega^2 scales as 1/time^2: ms read as s gives 10^-6 of it (common practice)
    ({"strength_ratio": 1.02e-6}, "milliseconds labelled as s"),
    ({"strength_ratio": 0.98e6}, "seconds labelled as milliseconds"),
    # times as frame / 30 from a 25 fps camera: k too large by (30/25)^2 = 1.44
    ({"strength_ratio": 1.44}, "(30/25)^2"),
    ({"turns": 0.6}, "too short"),
    ({"exponent": 0.82}, "magnet"),
])
def test_each_tell_tale_names_its_mistake(changes, expected):
    advice = likely_mistakes(_facts(_track(), **changes))
    assert advice and expected in advice[0]


def test_a_frame_counter_used_as_time_is_recognised_by_its_steps():
    # times 0, 1, 2, ... are frames: k off by the frame rate squared (here 1/30^2)
    advice = likely_mistakes(_facts(_track(step=1.0), strength_ratio=1 / 30**2))
    assert "a frame counter was used as the time" in advice[0] and "30^2" in advice[0]


def test_a_line_cut_short_and_pixels_at_another_exponent():
    error = "run.csv, row 904: 2 cells but the header names 3 columns. The line may be cut short."
    assert "cut short" in likely_mistakes(_facts(None, load_error=error))[0]
    pixels = likely_mistakes(_facts(_track(length_unit="px"), expected_exponent=-2.0, exponent=-2.0,
                                    strength_ratio=math.nan))
    assert "pixels" in pixels[0] and "--scale" in pixels[0]


def test_no_advice_when_nothing_is_recognised():
    assert likely_mistakes(_facts(_track())) == ()
    assert likely_mistakes(_facts(None, load_error="run.csv: not found")) == ()
    # a bad fit off the expected law is not blamed on the set-up
    assert likely_mistakes(_facts(_track(), exponent=0.82, fit_checks_passed=False)) == ()
