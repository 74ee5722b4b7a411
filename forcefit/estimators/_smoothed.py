"""What the estimators that read a law off the smoothed path share (curvature, acceleration).

**The smoothing level.** Generalised cross-validation picks the level that best recovers
the positions; the exponent, read from second derivatives averaged over the whole path,
needs less smoothing: at that level the smoothing's bias (it rounds off the pericentre
passages, it flattens the harmonics of an anharmonic orbit) shifts the exponent by many
of its standard errors, while the exponent's noise hardly grows when the smoothing is
lightened (it averages over the track either way). So the level is lightened LEVEL_STEP
times at a time until the exponent stops moving: until its change from the previous level
is within SETTLED_Z standard errors of that change (whose variance follows exactly from how
both estimates respond to the samples). The exponent is read at the lighter of the two
levels, where what bias is left is a quarter of a change already too small to see. This
is Lepski's rule for choosing a smoothing: the largest one whose estimate agrees with
those of all lighter ones (Lepski, Mammen & Spokoiny 1997, Ann. Statist. 25, 929).

**The noise.** Without sigma, the noise is the one read from the 4th differences of the
samples (`forcefit.geometry.noise`), the very number `inspect` shows; only when the samples
are too sparse for the differences to see it does the smoothing's residual scatter stand in.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Generic, TypeVar

import numpy as np

from .._noise import NoiseEstimate
from .._types import FloatArray
from ..errors import ForcefitError, NotIdentifiable
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
"""The exponent has settled when it changes by less than this many standard errors of the
change."""

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

    def diagnostic(self, unit: str) -> Diagnostic:
        """How the smoothing level was chosen, failed when the exponent never settled."""
        chosen = self.steps[-1]
        if len(self.steps) == 1:
            text = (f"{self.curve.method}: each point averages about {self.curve.span:.3g} {unit} of "
                    "the path (the level was not varied)")
            return Diagnostic(None, text + ".")
        factor = self.steps[0].level / chosen.level
        text = (f"{self.first_curve.method}, then lightened {factor:.3g} times until the exponent "
                f"settled (last change {chosen.change_z:+.1f} standard errors); each point averages "
                f"about {self.curve.span:.3g} {unit} of the path")
        if not self.settled:
            return Diagnostic(False, text.replace("until the exponent settled", "and the exponent "
                                                  "never settled") + ": the smoothing's bias is not "
                              "under control. Sample more densely or more precisely.")
        return Diagnostic(True, text + ".")


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
) -> Settled[T]:
    """Estimate at lighter and lighter smoothing until the exponent settles.

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
    """
    fixed = curve is not None or smoothing == "savgol"
    first = curve if curve is not None else smooth_track(track, smoothing=smoothing)
    noise = _noise_of(track, first)
    current = prepare(first, noise)
    result = estimate(current, None)
    value, stderr, influence = exponent(result)
    steps = [LevelStep(current.level, value, stderr, math.nan)]
    if fixed:
        return Settled(result, current, first, tuple(steps), True, noise)
    for _ in range(MAX_STEPS):
        level = current.level / LEVEL_STEP
        try:
            lighter = prepare(smooth_track(track, smoothing=smoothing, level=level,
                                           parameter=None if track.has_times else first.parameter),
                              noise)
            candidate = estimate(lighter, result)
        except ForcefitError:
            break
        new_value, new_stderr, new_influence = exponent(candidate)
        if lighter.response is None:
            break
        variance = float(lighter.response.covariance((influence - new_influence)[None])[0, 0])
        change_z = (value - new_value) / math.sqrt(variance) if variance > 0 else 0.0
        steps.append(LevelStep(lighter.level, new_value, new_stderr, change_z))
        current, result = lighter, candidate
        value, influence = new_value, new_influence
        if abs(change_z) < SETTLED_Z:
            return Settled(result, current, first, tuple(steps), True, noise)
    return Settled(result, current, first, tuple(steps), False, noise)


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
