"""What the estimators that read a law off the smoothed path share (curvature, acceleration).

**The smoothing level** is chosen by `forcefit.geometry.levels` (Lepski's rule).

**The noise.** Without sigma, the noise is the one read from the 4th differences of the
samples (`forcefit.geometry.noise`), the very number `inspect` shows; only when the samples
are too sparse for the differences to see it does the smoothing's residual scatter stand in.
"""

from __future__ import annotations

import math
from typing import TypeVar

import numpy as np

from .._types import FloatArray
from ..errors import NotIdentifiable
from ..geometry.curves import interior
from ..geometry.levels import CONFIRMING_LEVELS, Settled
from ..geometry.pspline import SmoothedCurve
from ..track import Track
from ._checks import chi_square_diagnostic
from .result import Diagnostic

BEND_Z = 4.0
"""A change of the local exponent across the radial range beyond this many standard errors
fails the power-law check."""

RESOLVED_EXCURSION = 12.0
"""The smoothed distance from the centre must vary by more than this many of its pointwise
standard errors (peak to peak) for the exponent to be identified; noise alone makes the
smoothed radius of a circle wander by 6-8 of them."""

MIN_SAMPLES_PER_TURN = 40.0
"""Fewest samples per full turn of the path's direction (median spacing) at which the
smoothing's bias on the exponent stays below its errors; sparser tracks (20 samples per
orbit were measured 2 standard errors off on average) fail the sampling check."""

GRID_LIMITED_SPAN = 1.5
"""Fewest knot spacings each point of the chosen smoothing may average over. Below, the spline's
knot grid, not its level, sets how much it smooths: lighter levels smooth no less, their
agreement no longer shows that the smoothing's bias is gone, and the grid's own error remains (an
e = 0.36 Kepler orbit, 150 samples a turn, position noise 2.5e-6 of its size: the chosen span 0.99
knot spacings and the exponent 4 standard errors off with every check passing; the tracks of the
validation matrix settle at 2.5-5 spacings)."""

T = TypeVar("T")


def smoothing_diagnostic(settled: Settled[T], unit: str) -> Diagnostic:
    """How the smoothing level was chosen, failed when the estimate never settled."""
    chosen = settled.steps[-1]
    if len(settled.steps) == 1 and not math.isfinite(settled.agreement) and settled.settled:
        text = (f"{settled.curve.method}: each point averages about {settled.curve.span:.3g} {unit} of "
                "the path (the level was not varied)")
        return Diagnostic(None, text + ".")
    factor = settled.steps[0].level / chosen.level
    where = (f"{settled.first_curve.method}, then lightened {factor:.3g} times" if factor > 1
             else f"{settled.first_curve.method}")
    if not settled.settled and settled.exhausted:
        return Diagnostic(False, f"{where}; lighter smoothings could not be fitted (the force is "
                                 "lost in their noise), so the smoothing's bias could not be "
                                 f"checked against {CONFIRMING_LEVELS} lighter levels: where the "
                                 "path turns fastest it is not resolved. Sample faster or more "
                                 "precisely, or use the orbit fit (it needs no smoothing).")
    if not settled.settled:
        return Diagnostic(False, f"{where}, and the estimate still changed from one level to the "
                                 f"next; each point averages about {settled.curve.span:.3g} {unit} of "
                                 "the path: the smoothing's bias is not under control. Sample "
                                 "more densely or more precisely, or use the orbit fit (it needs "
                                 "no smoothing).")
    span, spacing = settled.curve.span, settled.curve.knot_spacing
    agreed = (f"{where}, until the estimate stayed within {settled.agreement:.1f} standard errors of "
              f"its change over {CONFIRMING_LEVELS} lighter levels")
    if span < GRID_LIMITED_SPAN * spacing:
        return Diagnostic(False, f"{agreed}; but each point then averages only about {span:.3g} {unit} "
                                 f"of the path, {span / spacing:.2g} times the spline's knot spacing: "
                                 "the knot grid, not the level, sets the smoothing there, so the "
                                 "lighter levels' agreement does not show that its bias is gone "
                                 "(the noise is small against what the grid resolves). Sample more "
                                 "densely, or use the orbit fit (it needs no smoothing).")
    return Diagnostic(True, f"{agreed}; each point averages about {span:.3g} {unit} of the path.")


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
