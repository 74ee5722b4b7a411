"""Feedback that names the likely mistake behind a failing run, in plain words, with what to do.

A technician grading a class looks for a handful of slips that recur every term: times in
milliseconds labelled seconds, a frame counter exported as the time, positions left in pixels, a
recording too short, an export cut off mid-line, and a set-up that bends the law (a magnet near
the bob, a tilted table). Each leaves a fingerprint in the fit: the strength off by a power of a
time factor, times that step by exactly one, a fit that is good but of another law. These
functions read the fingerprint; they never change a grade, only explain it.
"""

from __future__ import annotations

import itertools
import math
import re
from dataclasses import dataclass

import numpy as np

from ..track import Track
from ..units import PIXEL

FRAME_RATES = (24.0, 25.0, 30.0, 50.0, 60.0, 100.0, 120.0, 240.0)
"""Frame rates of common cameras and phones, frames per second (common practice)."""

RATIO_SLACK = 0.25
"""How far (in log10) a strength ratio may sit from a tell-tale factor and still be read as it."""

FRAME_RATIO_SLACK = 0.015
"""How close (relative) a strength ratio must be to (f_used / f_true)**2 to name a wrong frame rate."""


@dataclass(frozen=True)
class RunFacts:
    """What the grader knows of one run, for `likely_mistakes`.

    Attributes
    ----------
    track : Track or None
        The run as loaded (None when it could not be loaded).
    load_error : str
        The loader's message when it could not be loaded ("" otherwise).
    exponent, exponent_stderr : float
        The fitted n and its standard error (nan when not fitted).
    strength_ratio : float
        The run's strength at the expected exponent over the expected strength, both in the
        class's unit (nan when no strength is expected or none was found).
    expected_exponent, tolerance : float
        The rule's n and its tolerance.
    turns, min_turns : float
        Turns covered, and the least the rule asks for.
    fit_checks_passed : bool
        Whether the fit passed its own checks (a good fit of some law).
    """

    track: Track | None
    load_error: str
    exponent: float
    exponent_stderr: float
    strength_ratio: float
    expected_exponent: float
    tolerance: float
    turns: float
    min_turns: float
    fit_checks_passed: bool


def likely_mistakes(facts: RunFacts) -> tuple[str, ...]:
    """The likely mistakes behind a run's failure, each a sentence with what to do; () when none
    is recognised.

    Examples
    --------
    >>> facts = RunFacts(track=None, load_error="runs/a.csv, row 41: 2 cells but the header names 3 "
    ...                  "columns. The line may be cut short. Complete it or delete the row.",
    ...                  exponent=math.nan, exponent_stderr=math.nan, strength_ratio=math.nan,
    ...                  expected_exponent=1.0, tolerance=0.05, turns=math.nan, min_turns=1.0,
    ...                  fit_checks_passed=False)
    >>> likely_mistakes(facts)[0].startswith("the file ends in a line cut short")
    True
    """
    if facts.track is None:
        return _load_mistakes(facts.load_error)
    found = [*_time_mistakes(facts), *_scale_mistakes(facts)]
    if math.isfinite(facts.turns) and facts.turns < facts.min_turns:
        found.append(f"the recording is too short ({facts.turns:.2f} turns of the {facts.min_turns:g} "
                     "needed): record for longer, or start recording before releasing the bob.")
    off = abs(facts.exponent - facts.expected_exponent) > facts.tolerance
    if off and facts.fit_checks_passed and not found:
        found.append("the fit is good but the law is not the expected one: look for a magnet or iron "
                     "near the bob, a tilted table or camera, or a swing too wide for the small-angle "
                     "law, and check the set-up before recording again.")
    return tuple(found)


def _load_mistakes(message: str) -> tuple[str, ...]:
    if re.search(r"cut short", message):
        return ("the file ends in a line cut short (the export or the recording stopped mid-line): "
                "delete that last row, or export the run again.",)
    return ()


def _time_mistakes(facts: RunFacts) -> list[str]:
    """Times in the wrong unit, or a frame counter used as time."""
    track = facts.track
    if track is None or track.t is None or track.n_points < 3:
        return []
    steps = np.diff(np.asarray(track.t))
    if np.all(np.abs(steps - 1.0) < 1e-9):
        rate = _frame_rate(facts.strength_ratio)
        off = f" (the strength is off by the frame rate squared, about {rate:g}^2)" if rate else ""
        return [f"the times step by exactly 1: a frame counter was used as the time{off}. Give the "
                "frame rate (--frame-rate) with the column named as a frame (--column frame=NAME), "
                "or export the times in seconds."]
    ratio = facts.strength_ratio
    if not (math.isfinite(ratio) and ratio > 0):
        return []
    power = math.log10(ratio)
    if abs(power + 6.0) < RATIO_SLACK:
        return [f"the strength is 10^-6 of the expected one: times in milliseconds labelled as "
                f"{track.time_unit} (10^3 squared). Write the unit in the time column's header "
                "(t [ms]) or give --time-unit ms --force-units."]
    if abs(power - 6.0) < RATIO_SLACK:
        return ["the strength is 10^6 times the expected one: times in seconds labelled as "
                "milliseconds. Correct the unit in the time column's header."]
    for used, true in itertools.permutations(FRAME_RATES, 2):
        if abs(ratio - 1.0) > 0.05 and abs(ratio * (true / used) ** 2 - 1.0) < FRAME_RATIO_SLACK:
            return [f"the strength is {ratio:.3g} times the expected one, ({used:g}/{true:g})^2: times "
                    f"computed as frame / {used:g} from a camera that ran at {true:g} frames per "
                    "second. Check the frame rate in the video's properties and give --frame-rate."]
    return []


def _frame_rate(ratio: float) -> float | None:
    """The common frame rate f with ratio close to 1/f**2, if any."""
    if not (math.isfinite(ratio) and ratio > 0):
        return None
    for rate in FRAME_RATES:
        if abs(math.log10(ratio * rate**2)) < RATIO_SLACK / 2:
            return rate
    return None


def _scale_mistakes(facts: RunFacts) -> list[str]:
    """Positions left in pixels where the rule's strength depends on the length scale."""
    track = facts.track
    if track is None or track.length_unit != PIXEL or facts.expected_exponent == 1.0:
        return []
    return ["the positions are in pixels: the exponent does not depend on the scale, but the "
            f"strength at n = {facts.expected_exponent:g} does. Give the scale (--scale, e.g. "
            '"1.6 mm" per pixel) or mark two points of known distance.']
