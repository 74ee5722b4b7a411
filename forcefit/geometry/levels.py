"""Choosing how heavily to smooth a track for what is read from it: Lepski's rule over levels.

**The smoothing level.** Generalised cross-validation picks the level that best recovers
the positions; the exponent, read from second derivatives averaged over the whole path,
needs less smoothing: at that level the smoothing's bias (it rounds off the pericentre
passages, it flattens the harmonics of an anharmonic orbit) shifts the exponent by many
of its standard errors, while the exponent's noise hardly grows when the smoothing is
lightened (it averages over the track either way). So the level is lightened LEVEL_STEP
times at a time, MAX_STEPS times (or until a level cannot be fitted), and the estimate is
read at the heaviest level whose exponent -- and fitted centre, when the centre is found
from the data -- agrees with those at every lighter level: each change within SETTLED_Z
standard errors of that change (whose variance follows exactly from how both estimates
respond to the samples). This is Lepski's rule for choosing a smoothing: the largest one
whose estimate agrees with those of all lighter ones (Lepski, Mammen & Spokoiny 1997, Ann.
Statist. 25, 929). Comparing each level with the next lighter one alone is not enough: where
the information lies in one fast, close passage (an open flyby, a very eccentric orbit) the
smoothing's bias there shrinks slowly from level to level, each step's change stays within
its errors while their sum does not, and the exponent and centre were read 3-6 standard
errors off with every check passing.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Generic, TypeVar

import numpy as np

from .._noise import NoiseEstimate
from .._types import FloatArray
from ..errors import ForcefitError
from ..track import Track
from .noise import track_noise
from .pspline import SmoothedCurve
from .smoothing import Smoothing, smooth_track

LEVEL_STEP = 4.0
"""Factor by which the smoothing level is lightened at each step."""

MAX_STEPS = 6
"""Most lightening steps (a level 4**6 = 4096 times below the GCV choice)."""

SETTLED_Z = 2.0
"""The estimate has settled when it changes by less than this many standard errors of the
change."""

CONFIRMING_LEVELS = 2
"""Lighter levels (each LEVEL_STEP times lighter) a level's estimate must agree with before the
smoothing's bias counts as under control: one agreeing step can hide a bias that shrinks
slowly (a fast, close passage smoothed over at both levels)."""

T = TypeVar("T")


@dataclass(frozen=True)
class LevelStep:
    """The exponent at one smoothing level, and its change from the previous level."""

    level: float
    exponent: float
    stderr: float
    change_z: float


@dataclass(frozen=True)
class Settled(Generic[T]):
    """The estimate at the level where the exponent settled, with the steps that led there."""

    result: T
    curve: SmoothedCurve
    first_curve: SmoothedCurve
    steps: tuple[LevelStep, ...]
    settled: bool
    noise: NoiseEstimate
    agreement: float = math.nan
    """The largest disagreement (standard errors of the change) of the chosen level's estimate
    with those of the lighter levels; nan when none was lighter."""
    lighter: int = 0
    """How many lighter levels the chosen one was compared with."""
    exhausted: bool = False
    """The lightening stopped because a lighter level could not be fitted."""


def prepare(curve: SmoothedCurve, noise: NoiseEstimate) -> SmoothedCurve:
    """The curve with its error bars for the noise read from the samples (when no sigma was
    given and the samples resolve it)."""
    if curve.sigma_given or not noise.resolved or noise.sd <= 0:
        return curve
    return curve.with_noise(noise.sd)


def settle(
    track: Track,
    smoothing: Smoothing,
    estimate: Callable[[SmoothedCurve, T | None], T],
    exponent: Callable[[T], tuple[float, float, FloatArray]],
    *,
    curve: SmoothedCurve | None = None,
    watched: Callable[[T], tuple[FloatArray, FloatArray | None]] | None = None,
    start: SmoothedCurve | None = None,
) -> Settled[T]:
    """Estimate at lighter and lighter smoothing; keep the heaviest level whose estimate
    agrees with those of every lighter one (Lepski's rule).

    Parameters
    ----------
    track : Track
        The samples.
    smoothing : {"auto", "spline", "savgol"}
        Splines are lightened step by step; a Savitzky-Golay window is used as given.
    estimate : callable
        estimate(curve, previous) -> result at one level (``previous`` is the result at
        the heavier level before, or None).
    exponent : callable
        exponent(result) -> (n, its standard error, d n / d samples (n_points, 2)).
    curve : SmoothedCurve, optional
        A smoothing to use as it is (no level search).
    watched : callable, optional
        watched(result) -> (other quantities (q,), their d / d samples (q, n_points, 2), or
        None when they are not estimated): quantities that must settle with the exponent
        (a fitted centre).
    start : SmoothedCurve, optional
        The track's cross-validated smoothing, when already computed: the first level.
    """
    fixed = curve is not None or smoothing == "savgol"
    first = curve if curve is not None else start
    if first is None:
        first = smooth_track(track, smoothing=smoothing)
    noise = _noise_of(track, first)
    current = prepare(first, noise)
    result = estimate(current, None)
    value, stderr, influence = exponent(result)
    if fixed:
        return Settled(result, current, first, (LevelStep(current.level, value, stderr, math.nan),),
                       True, noise)
    levels = [_Watched(current, result, *_quantities(result, exponent, watched))]
    chosen, exhausted = None, True
    for _ in range(MAX_STEPS):
        level = current.level / LEVEL_STEP
        try:
            lighter = prepare(smooth_track(track, smoothing=smoothing, level=level,
                                           parameter=None if track.has_times else first.parameter),
                              noise)
            candidate = estimate(lighter, result)
        except ForcefitError:
            break
        if lighter.response is None:
            break
        current, result = lighter, candidate
        levels.append(_Watched(current, result, *_quantities(result, exponent, watched)))
        chosen = _confirmed(levels)
        if chosen is not None:
            break
    else:
        exhausted = False
    settled = chosen is not None
    if chosen is None:     # read where the estimate agrees with every lighter level, if anywhere
        chosen = next((i for i in range(len(levels) - 1)
                       if _worst(levels, i) < SETTLED_Z), len(levels) - 1)
    steps = []
    for i, entry in enumerate(levels[:chosen + 1]):
        n, se, _ = exponent(entry.result)
        change = math.nan if i == 0 else _disagreement(levels[i - 1], entry, signed=True)
        steps.append(LevelStep(entry.curve.level, n, se, change))
    lighter_count = len(levels) - 1 - chosen
    return Settled(levels[chosen].result, levels[chosen].curve, first, tuple(steps), settled, noise,
                   _worst(levels, chosen - 1 if settled else chosen), lighter_count,
                   exhausted and not settled)


def _worst(levels: list[_Watched[T]], index: int) -> float:
    """The largest disagreement of level ``index`` with any lighter one (nan: none lighter)."""
    if index < 0 or index >= len(levels) - 1:
        return math.nan
    return max(_disagreement(levels[index], levels[j]) for j in range(index + 1, len(levels)))


def _confirmed(levels: list[_Watched[T]]) -> int | None:
    """The level to read, once a heavier one agrees with CONFIRMING_LEVELS lighter ones in a
    row: the first of those (its bias a LEVEL_STEP-th of a heavier one's, itself too small to
    show against its lighter levels); None while no level is so confirmed."""
    for i in range(len(levels) - CONFIRMING_LEVELS):
        if _worst(levels, i) < SETTLED_Z:
            return i + 1
    return None


@dataclass(frozen=True)
class _Watched(Generic[T]):
    """One smoothing level's estimate and the quantities that must settle, with their
    responses to the samples."""

    curve: SmoothedCurve
    result: T
    values: FloatArray
    influence: FloatArray


def _quantities(result: T, exponent: Callable[[T], tuple[float, float, FloatArray]],
                watched: Callable[[T], tuple[FloatArray, FloatArray | None]] | None
                ) -> tuple[FloatArray, FloatArray]:
    value, _, influence = exponent(result)
    values, influences = np.array([value]), np.asarray(influence, dtype=float)[None]
    if watched is not None:
        more, more_influence = watched(result)
        if more_influence is not None:
            values = np.concatenate((values, np.asarray(more, dtype=float)))
            influences = np.concatenate((influences, np.asarray(more_influence, dtype=float)))
    return values, influences


def _disagreement(heavier: _Watched[T], lighter: _Watched[T], *, signed: bool = False) -> float:
    """The change of the watched quantities between two levels in standard errors of the
    change (the largest; for the exponent alone, signed, when ``signed``)."""
    response = lighter.curve.response
    if response is None or heavier.values.size != lighter.values.size:
        return math.inf
    difference = heavier.influence - lighter.influence
    variance = np.diag(response.covariance(difference))
    change = heavier.values - lighter.values
    z = np.where(variance > 0, change / np.sqrt(np.maximum(variance, 1e-300)), 0.0)
    return float(z[0]) if signed else float(np.max(np.abs(z)))


def _noise_of(track: Track, curve: SmoothedCurve) -> NoiseEstimate:
    """`track_noise`; without times, in the smoothing's arc length and across the path."""
    if track.has_times:
        return track_noise(track)
    speed = np.maximum(np.hypot(curve.first[:, 0], curve.first[:, 1]), 1e-300)
    normal = np.column_stack((-curve.first[:, 1], curve.first[:, 0])) / speed[:, None]
    return track_noise(track, arc_length=curve.parameter, normal=normal)
