"""What the estimators that read a law off the smoothed path share (curvature, acceleration).

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

**The noise.** Without sigma, the noise is the one read from the 4th differences of the
samples (`forcefit.geometry.noise`), the very number `inspect` shows; only when the samples
are too sparse for the differences to see it does the smoothing's residual scatter stand in.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Generic, TypeVar

import numpy as np

from .._noise import NoiseEstimate
from .._types import FloatArray
from ..errors import ForcefitError, NotIdentifiable
from ..geometry.centre import CentreEstimate
from ..geometry.curves import interior
from ..geometry.noise import track_noise
from ..geometry.pspline import SmoothedCurve
from ..geometry.smoothing import Smoothing, smooth_track
from ..track import Track
from ._checks import chi_square_diagnostic
from .result import Diagnostic

BEND_Z = 4.0
"""A change of the local exponent across the radial range beyond this many standard errors
fails the power-law check."""

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

RESOLVED_EXCURSION = 12.0
"""The smoothed distance from the centre must vary by more than this many of its pointwise
standard errors (peak to peak) for the exponent to be identified; noise alone makes the
smoothed radius of a circle wander by 6-8 of them."""

MIN_SAMPLES_PER_TURN = 40.0
"""Fewest samples per full turn of the path's direction (median spacing) at which the
smoothing's bias on the exponent stays below its errors; sparser tracks (20 samples per
orbit were measured 2 standard errors off on average) fail the sampling check."""

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

    def diagnostic(self, unit: str) -> Diagnostic:
        """How the smoothing level was chosen, failed when the estimate never settled."""
        chosen = self.steps[-1]
        if len(self.steps) == 1 and not math.isfinite(self.agreement) and self.settled:
            text = (f"{self.curve.method}: each point averages about {self.curve.span:.3g} {unit} of "
                    "the path (the level was not varied)")
            return Diagnostic(None, text + ".")
        factor = self.steps[0].level / chosen.level
        where = (f"{self.first_curve.method}, then lightened {factor:.3g} times" if factor > 1
                 else f"{self.first_curve.method}")
        if not self.settled and self.exhausted:
            return Diagnostic(False, f"{where}; lighter smoothings could not be fitted (the force is "
                                     "lost in their noise), so the smoothing's bias could not be "
                                     f"checked against {CONFIRMING_LEVELS} lighter levels: where the "
                                     "path turns fastest it is not resolved. Sample faster or more "
                                     "precisely, or use the orbit fit (it needs no smoothing).")
        if not self.settled:
            return Diagnostic(False, f"{where}, and the estimate still changed from one level to the "
                                     f"next; each point averages about {self.curve.span:.3g} {unit} of "
                                     "the path: the smoothing's bias is not under control. Sample "
                                     "more densely or more precisely, or use the orbit fit (it needs "
                                     "no smoothing).")
        return Diagnostic(True, f"{where}, until the estimate stayed within {self.agreement:.1f} "
                                f"standard errors of its change over {CONFIRMING_LEVELS} lighter "
                                f"levels; each point averages about {self.curve.span:.3g} {unit} of "
                                "the path.")


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
    """
    fixed = curve is not None or smoothing == "savgol"
    first = curve if curve is not None else smooth_track(track, smoothing=smoothing)
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


def settled_centre(track: Track, smoothing: Smoothing = "auto") -> CentreEstimate:
    """The force centre of a track at the smoothing level Lepski's rule settles on (`settle`,
    the centre's two coordinates watched): what `forcefit.geometry.find_centre` returns when it
    is not handed a smoothing.

    At the level generalised cross-validation picks, a fast, close passage is rounded off and
    the acceleration lines meet off the centre: on 24 simulated flybys (speeds 1.2-2 where
    escape needs 1.4, noise 0.2-0.5% of the size) that centre lay more than 3 of its errors off
    in 71% of the coordinates. Where no level settles (lighter levels keep moving the centre:
    nearly parallel acceleration lines, as on a narrow ellipse, whose noise bias grows as the
    smoothing lightens), the errors are widened by the largest move of the centre over the
    levels tried, and a note says so.
    """
    from ..geometry.centre import find_centre

    seen: list[CentreEstimate] = []

    def estimate(curve: SmoothedCurve, previous: CentreEstimate | None) -> CentreEstimate:
        starts = None if previous is None else [previous.centre, *(a.centre for a in previous.alternatives)]
        found = find_centre(track, curve=curve, starts=starts)
        seen.append(found)
        return found

    def x(found: CentreEstimate) -> tuple[float, float, FloatArray]:
        return found.centre[0], found.stderr[0], found.influence[0]

    def y(found: CentreEstimate) -> tuple[FloatArray, FloatArray | None]:
        return np.array([found.centre[1]]), found.influence[1:2]

    settled = settle(track, smoothing, estimate, x, watched=y)
    found = settled.result
    if settled.settled or len(seen) < 2:
        return found
    moves = np.max(np.abs(np.array([one.centre for one in seen]) - np.asarray(found.centre)), axis=0)
    covariance = np.asarray(found.covariance) + np.diag(moves**2)
    stderr = np.sqrt(np.diag(covariance))
    note = (f"the centre did not settle as the smoothing was lightened ({len(seen)} levels; it moved by "
            f"up to {float(np.max(moves)):.3g} {track.length_unit}): its errors include that move")
    return replace(found, stderr=(float(stderr[0]), float(stderr[1])), covariance=covariance,
                   notes=(*found.notes, note))


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


def require_resolved_excursion(track: Track, radius: FloatArray, radius_stderr: FloatArray) -> None:
    """Refuse a path whose distance from the centre does not vary beyond the noise.

    A circular orbit exists for every exponent; the exponent shows only through how r
    varies with the force, so when the smoothed r wanders no more than noise makes it,
    the exponent is not identified (and a linearised error bar would be meaningless).
    """
    spread = float(np.ptp(radius))
    resolution = float(np.sqrt(np.mean(radius_stderr**2)))
    if spread <= max(RESOLVED_EXCURSION * resolution, 1e-9 * float(np.mean(radius))):
        raise NotIdentifiable(
            f"{track.label}: the distance from the centre hardly changes (by {spread:.3g} "
            f"{track.length_unit} about r = {np.mean(radius):.6g} {track.length_unit}, where noise "
            f"alone moves it by about {8 * resolution:.2g}); a circular orbit exists for every "
            "exponent, so the exponent cannot be read from this path. Launch the body off-circular "
            "so that r varies, or measure more precisely.")


def noise_diagnostics(track: Track, settled: Settled[T]) -> dict[str, Diagnostic]:
    """The noise the errors assume, and (with a sigma column) whether the samples scatter
    about the smoothed path as that sigma says."""
    noise, curve = settled.noise, settled.first_curve
    unit = track.length_unit
    out: dict[str, Diagnostic] = {}
    if curve.sigma_given:
        weight = 1.0 / np.asarray(track.sigma, dtype=float) ** 2
        residual = np.column_stack((track.x, track.y)) - curve.value
        dof = max(2.0 * (track.n_points - curve.dof), 1.0)
        reduced = float(np.sum(weight[:, None] * residual**2)) / dof
        out["chi-square"] = chi_square_diagnostic(reduced, int(dof))
        text = (f"sigma as given (median {np.median(np.asarray(track.sigma)):.3g} {unit}); the "
                f"samples' own differences show {noise.describe(unit)}")
    elif noise.resolved:
        text = f"{noise.describe(unit)}, used for the error bars"
    else:
        text = (f"{float(np.mean(settled.curve.noise)):.3g} {unit} from the scatter about the "
                f"smoothed path (the samples' differences give only an upper bound, {noise.sd:.3g} "
                f"{unit}: they are too far apart)")
    if noise.correlated:
        return {**out, "noise": Diagnostic(False, text + ": the errors assume independent noise and "
                                           "would be too small. Check the tracking (a filter or "
                                           "interpolation smooths it?), or thin the samples.")}
    return {**out, "noise": Diagnostic(None, text + ".")}


def sampling_diagnostic(curve: SmoothedCurve) -> Diagnostic:
    """How far the path's direction turns from one sample to the next (median), failed when
    the samples are too sparse for a smoothing to follow the bending without bias."""
    keep = interior(curve)
    heading = np.unwrap(np.arctan2(curve.first[keep, 1], curve.first[keep, 0]))
    turn = float(np.median(np.abs(np.diff(heading)))) if heading.size > 1 else 0.0
    per_turn = 2.0 * math.pi / turn if turn > 0 else math.inf
    text = f"about {per_turn:.3g} samples per turn of the path's direction"
    if per_turn < MIN_SAMPLES_PER_TURN:
        return Diagnostic(False, text + f", fewer than {MIN_SAMPLES_PER_TURN:g}: a smoothing cannot "
                          "follow the bending without bias. Sample more densely, or use the orbit "
                          "fit (it needs no smoothing).")
    return Diagnostic(True, text + ".")


def noise_level(settled: Settled[T]) -> float:
    """The noise per coordinate the errors assume (L)."""
    return float(np.median(settled.curve.noise))
