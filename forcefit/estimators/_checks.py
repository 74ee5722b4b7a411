"""Pieces every estimator shares: identifiability checks, h from the data, centre errors."""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import TYPE_CHECKING

import numpy as np

from .._regression import autocorrelation_time, fit_line
from .._types import FloatArray
from ..errors import GeometryError, NotIdentifiable
from ..geometry.curves import is_straight
from ..track import Track
from .result import Diagnostic

if TYPE_CHECKING:  # the smoothed path (scipy's splines) loads only for the estimators that use it
    from ..geometry.path import PathGeometry

RESOLVED_EXCURSION = 10.0
"""The fitted orbit's radial half-range must exceed this many of its standard errors (the orbit
and shape fits)."""


def require_orbit(path: PathGeometry) -> None:
    """Refuse paths from which no exponent can be read.

    Raises
    ------
    NotIdentifiable
        For a circle about the centre (r constant: a circular orbit exists for every
        exponent) and for a path that does not bend (no force).
    """
    if is_straight(path.track.x, path.track.y, path.smoothing.noise):
        raise NotIdentifiable(
            f"{path.track.label}: the path does not bend significantly; a straight path shows no "
            "force, so no exponent can be read from it. Check that the body moved under the force "
            "(and not only the camera)."
        )
    spread = float(np.ptp(path.radius))
    noise = float(np.median(path.radius_stderr))
    if spread < max(6.0 * noise, 1e-9 * float(path.radius.mean())):
        raise NotIdentifiable(
            f"{path.track.label}: the distance from the centre is constant (a circle about the "
            f"centre, r = {path.radius.mean():.6g} {path.track.length_unit}); a circular orbit "
            "exists for every exponent, so the exponent cannot be determined. Launch the body "
            "off-circular so that r varies."
        )


def require_monotonic(path: PathGeometry) -> None:
    """theta must keep turning one way about the centre on a central orbit."""
    step = np.diff(path.polar_angle)
    sense = np.sign(path.polar_angle[-1] - path.polar_angle[0])
    back = sense * step < -3.0 * (path.gamma_stderr[1:] + 1e-12)
    if back.mean() > 0.01:
        index = int(np.argmax(back)) + 1
        raise GeometryError(
            f"{path.track.label}: the path winds back about the centre "
            f"({path.centre[0]:.6g}, {path.centre[1]:.6g}) near sample {index}: the polar angle "
            "must turn one way along a central-force orbit. Check the centre, or the data."
        )


def _turns_steadily(track: Track) -> bool:
    """True when the chords between samples turn one way (by more than a quarter turn in
    all): the path bends, however sparse its samples. Noise turns them to and fro."""
    direction = np.unwrap(np.arctan2(np.diff(track.y), np.diff(track.x)))
    turning = np.diff(direction)
    net = abs(float(np.sum(turning)))
    return net > math.pi / 2 and net > 0.5 * float(np.sum(np.abs(turning)))


def require_bend(track: Track, noise: float) -> None:
    """A path that stays within the noise of a straight line shows no force. (Not asked of a
    path whose chords turn steadily one way: there the differences that measure the noise
    may measure the path's own turns, when its samples are sparse.)"""
    if _turns_steadily(track):
        return
    if is_straight(track.x, track.y, np.array([noise])):
        raise NotIdentifiable(
            f"{track.label}: the path does not bend significantly; a straight path shows no "
            "force, so no exponent can be read from it. Check that the body moved under the force "
            "(and not only the camera)."
        )


def polar_steps(track: Track, centre: tuple[float, float],
                kept: np.ndarray | None = None) -> tuple[FloatArray, float]:
    """The polar angle's steps (rad) from sample to sample about ``centre``, and the sense of
    the motion (+1 anticlockwise, -1 clockwise).

    The sense is that of most steps, not of their sum: across a gap (a pericentre passage hidden
    from the camera, dropped frames) the angle is known only modulo a turn, and a sweep of more
    than half a turn unwraps backwards. Such a step is taken the way the body moves.
    """
    from ..reading.inspection import GAP_FACTOR

    kept = np.arange(track.n_points) if kept is None else kept
    offset = track.positions[kept] - np.asarray(centre)
    step = np.diff(np.unwrap(np.arctan2(offset[:, 1], offset[:, 0])))
    sense = float(np.sign(np.median(step))) if step.size else 1.0
    if track.t is not None and step.size:
        interval = np.diff(np.asarray(track.t)[kept])
        gap = interval > GAP_FACTOR * np.median(interval)
        step = np.where(gap & (sense * step < 0.0), step + 2.0 * math.pi * sense, step)
    return step, sense


def require_one_sense(track: Track, centre: tuple[float, float], sigma: FloatArray,
                      kept: np.ndarray | None = None) -> None:
    """The samples (those ``kept``, outliers aside) must turn one way about the centre, as on
    every central orbit."""
    kept = np.arange(track.n_points) if kept is None else kept
    if kept.size < 3:
        return
    offset = track.positions[kept] - np.asarray(centre)
    radius = np.hypot(offset[:, 0], offset[:, 1])
    step, sense = polar_steps(track, centre, kept)
    back = sense * step < -3.0 * math.sqrt(2.0) * sigma[kept][1:] / np.maximum(radius[1:], 1e-300)
    if back.mean() > 0.01:
        index = int(kept[int(np.argmax(back)) + 1])
        raise GeometryError(
            f"{track.label}: the path winds back about the centre ({centre[0]:.6g}, "
            f"{centre[1]:.6g}) near sample {index}: the polar angle must turn one way along "
            "a central-force orbit. Check the centre, or the data.")


def angular_momentum(path: PathGeometry) -> tuple[float, float, float]:
    """Mean specific angular momentum h (L**2/T), its standard error, and its drift.

    The drift is the fitted relative change of h over the track; a central force keeps
    h constant, drag or a non-central force make it drift.
    """
    h, sigma = path.angular_momentum, path.angular_momentum_stderr
    if not np.all(np.isfinite(h)):
        return math.nan, math.nan, math.nan
    time = path.parameter - path.parameter.mean()
    line = fit_line(time, h, sigma)
    weight = 1.0 / sigma**2
    mean = float(np.sum(weight * h) / np.sum(weight))
    scatter = float(np.sum(weight * (h - mean) ** 2) / max(h.size - 1, 1))
    stderr = math.sqrt(scatter * autocorrelation_time(h - mean) / np.sum(weight))
    drift = line.slope * float(np.ptp(path.parameter)) / mean if mean else math.nan
    return mean, stderr, drift


def centre_covariance(
    compute: Callable[[tuple[float, float]], FloatArray], path: PathGeometry
) -> FloatArray:
    """Covariance the centre's uncertainty adds to parameters computed about it.

    ``compute`` maps a centre to the parameter vector; its derivative is taken by
    central differences and combined with the centre's (independent) standard errors.
    """
    stderr = np.asarray(path.centre_stderr, dtype=float)
    base = np.asarray(compute(path.centre))
    if not np.any(stderr > 0):
        return np.zeros((base.size, base.size))
    columns = []
    for axis in range(2):
        step = np.zeros(2)
        step[axis] = max(stderr[axis], 1e-9)
        plus = np.asarray(compute(tuple(np.asarray(path.centre) + step)))
        minus = np.asarray(compute(tuple(np.asarray(path.centre) - step)))
        columns.append((plus - minus) / (2.0 * step[axis]))
    jacobian = np.column_stack(columns)
    return jacobian @ np.diag(stderr**2) @ jacobian.T


def constancy_diagnostic(drift: float, *, error: float = 0.0) -> Diagnostic:
    """Verdict on the angular momentum's drift over the track (central forces keep h).

    A drift beyond 2% fails, unless its standard error ``error`` (when known) leaves it
    within 4 of them of zero: a short stretch does not resolve it.
    """
    if not math.isfinite(drift):
        return Diagnostic(None, "not checked (no timestamps).")
    text = f"h changes by {100 * drift:+.2g}% over the track"
    if error > 0:
        text += f" (± {100 * error:.2g}%)"
    if abs(drift) > 0.02 and not abs(drift) <= 4.0 * error:
        return Diagnostic(False, text + ": not a conservative central force (drag, or the "
                                        "wrong centre).")
    return Diagnostic(True, text + ".")


def bend_diagnostic(x: FloatArray, y: FloatArray, sigma: FloatArray) -> Diagnostic:
    """Does log F bend against log r? A quadratic term beyond 3 sigma says 'not a power law'."""
    centred = x - np.average(x, weights=1 / sigma**2)
    design = np.column_stack((np.ones_like(x), centred, centred**2)) / sigma[:, None]
    solution, *_ = np.linalg.lstsq(design, y / sigma, rcond=None)
    residual = y / sigma - design @ solution
    scale = float(residual @ residual) / max(x.size - 3, 1) * autocorrelation_time(residual)
    covariance = np.linalg.pinv(design.T @ design) * scale
    bend = solution[2] / math.sqrt(covariance[2, 2]) if covariance[2, 2] > 0 else 0.0
    span = float(np.ptp(x))
    change = 2 * solution[2] * span
    text = (f"the local exponent changes by {change:+.3g} across the radial range "
            f"({abs(bend):.1f} standard errors)")
    if abs(bend) > 4.0 and abs(change) > 0.1:
        return Diagnostic(False, text + ": the force is not a single power law.")
    return Diagnostic(True, text + ": consistent with a power law.")


def leverage_diagnostic(radius: FloatArray) -> Diagnostic:
    """Radial range r_max / r_min: the leverage the data give on the exponent."""
    ratio = float(radius.max() / radius.min())
    if ratio < 1.05:
        return Diagnostic(False, f"r varies only by a factor {ratio:.3f}; the exponent is weakly "
                                 "determined. Launch further from circular.")
    return Diagnostic(True, f"r spans a factor {ratio:.3g}.")


def runs_diagnostic(residuals: FloatArray) -> Diagnostic:
    """Wald-Wolfowitz runs test on the signs of residuals taken in path order.

    Residuals of a model that describes the path change sign often; long runs of one
    sign mean systematic misfit. Fails when the runs are fewer than expected by more
    than 4 standard deviations (Wald & Wolfowitz 1940, Ann. Math. Stat. 11, 147).
    """
    signs = residuals[residuals != 0] > 0
    positive, negative = int(signs.sum()), int((~signs).sum())
    if positive == 0 or negative == 0:
        return Diagnostic(False, "every residual has the same sign: the model misses the path.")
    total = positive + negative
    runs = 1 + int(np.count_nonzero(signs[1:] != signs[:-1]))
    expected = 1 + 2.0 * positive * negative / total
    variance = (expected - 1) * (expected - 2) / (total - 1)
    z = (runs - expected) / math.sqrt(variance) if variance > 0 else 0.0
    text = f"{runs} runs of residual signs, {expected:.0f} expected (z = {z:+.1f})"
    if z < -4.0:
        return Diagnostic(False, text + ": the residuals wander systematically; the model does "
                                        "not describe the path.")
    return Diagnostic(True, text + ".")


CHI_SQUARE_TAIL = 2.9e-7
"""The chance below which a reduced chi-square too small fails the check: the one-sided tail of
5 standard deviations of a normal distribution (common practice)."""


def chi_square_diagnostic(reduced: float, dof: int) -> Diagnostic:
    """Do the residuals scatter as the given sigma says? Fails beyond 5 standard deviations
    of the reduced chi-square (sqrt(2/dof)) either way, or below the chi-square distribution's
    own 5-standard-deviation tail: too large means the model misses the points, too small means
    sigma is overstated and so are the errors."""
    from scipy.special import chdtr

    spread = math.sqrt(2.0 / max(dof, 1))
    text = f"reduced chi-square {reduced:.3g} (expected 1 ± {spread:.2g})"
    if reduced > 1.0 + 5.0 * spread:
        return Diagnostic(False, text + ": the model misses the points by more than their sigma.")
    # Below, the chi-square distribution's own tail: with few degrees of freedom it is far
    # narrower than 5 of its standard deviations (a sigma stated twice too large over 73 degrees
    # of freedom reads 0.25, inside 1 - 5 * 0.17, yet has a chance below 1e-15).
    if reduced < 1.0 - 5.0 * spread or chdtr(max(dof, 1), reduced * max(dof, 1)) < CHI_SQUARE_TAIL:
        return Diagnostic(False, text + f": the points scatter {math.sqrt(max(reduced, 0.0)):.2g} "
                                        "times their given sigma, so sigma and the stated errors are "
                                        "too large. Correct the sigma column or leave it out.")
    return Diagnostic(True, text + ".")
