"""Smoothing and differentiation of a track's samples: the front door to the smoothers."""

from __future__ import annotations

import math
from typing import Literal

import numpy as np

from .._types import FloatArray
from ..errors import GeometryError
from ..track import Track
from .pspline import FilterResponse, PenaltyWeight, SmoothedCurve, smooth_curve

Smoothing = Literal["auto", "spline", "savgol"]
"""Ways to smooth a track: penalised splines ("auto", "spline") or Savitzky-Golay."""


def chord_length(x: FloatArray, y: FloatArray) -> FloatArray:
    """Cumulative distance along the points (L), kept strictly increasing."""
    steps = np.hypot(np.diff(x), np.diff(y))
    floor = 1e-6 * float(np.median(steps[steps > 0])) if np.any(steps > 0) else 1.0
    return np.concatenate(([0.0], np.cumsum(np.maximum(steps, floor))))


ARC_ROUNDS = 2
"""Pilot smoothings against the arc length found by the one before."""


def arc_length(track: Track) -> FloatArray:
    """Arc length (L) at each sample, read from pilot smoothings of the samples.

    The chord length of the raw points is a poor parameter for densely sampled noisy data
    (when the noise is comparable to the spacing it is mostly noise), the sample number a
    poor one for samples spaced unevenly along the path (it distorts the curve into
    kinks). So two chains of pilot smoothings start from each, every pilot smoothing
    against the arc length the one before found (each choosing its own level by GCV),
    and the chain whose last pilot lies closer to the samples wins. The result depends on
    no smoothing level of the final fit, so a track keeps one parameter however heavily
    it is later smoothed.
    """
    index = np.arange(track.n_points, dtype=float)
    chains = [_arc_chain(track, start) for start in (index, chord_length(track.x, track.y))]
    return min(chains, key=lambda chain: chain[1])[0]


def _arc_chain(track: Track, parameter: FloatArray) -> tuple[FloatArray, float]:
    """Arc length after ARC_ROUNDS + 1 pilots from ``parameter``, and the last pilot's
    sum of squared residuals."""
    rss = math.inf
    for _ in range(ARC_ROUNDS + 1):
        pilot = _pilot(parameter, track, None)
        arc = chord_length(pilot.value[:, 0], pilot.value[:, 1])
        step = max(1, math.ceil(track.n_points / PILOT_POINTS))
        residual = np.column_stack((track.x[::step], track.y[::step])) - pilot.value
        rss = float(np.sum(residual**2))
        parameter = np.interp(parameter, pilot.parameter, arc)
    return parameter, rss


PILOT_POINTS = 20_000
"""Most samples a pilot smoothing uses (every m-th sample of a longer track)."""


def _pilot(parameter: FloatArray, track: Track, level: float | None) -> SmoothedCurve:
    """A quick smoothing of every m-th sample, enough to read the speed or the arc length."""
    step = max(1, math.ceil(track.n_points / PILOT_POINTS))
    picked = slice(0, None, step)
    sigma = None if track.sigma is None else track.sigma[picked]
    return smooth_curve(parameter[picked], track.x[picked], track.y[picked], sigma=sigma,
                        level=level, with_errors=False)


def _savgol(parameter: FloatArray, track: Track, window: int) -> SmoothedCurve:
    from scipy.signal import savgol_coeffs, savgol_filter  # scipy.signal is slow to import: only here

    steps = np.diff(parameter)
    if track.t is not None and np.ptp(steps) > 0.01 * np.median(steps):
        raise GeometryError(
            f"{track.label}: Savitzky-Golay smoothing needs evenly spaced samples, but "
            "the spacing varies (dropped frames?). Use the default spline smoothing."
        )
    window = min(window | 1, (track.n_points - 1) | 1 if track.n_points % 2 == 0 else track.n_points)
    order, delta = 4, float(np.mean(steps))
    if window <= order + 1:
        raise GeometryError(f"{track.label}: too few points for Savitzky-Golay smoothing.")
    data = np.column_stack((track.x, track.y))
    derivative = [savgol_filter(data, window, order, deriv=d, delta=delta, axis=0) for d in range(3)]
    coefficients = [savgol_coeffs(window, order, deriv=d, delta=delta, use="dot") for d in range(3)]
    if track.sigma is None:
        noise = np.full(track.n_points, math.sqrt(
            float(np.sum((data - derivative[0]) ** 2)) / max(2 * (track.n_points - window), 1)))
    else:
        noise = np.asarray(track.sigma)
    scale = (noise**2)[:, None] * np.ones((1, 2))
    products = np.array([[a @ b for b in coefficients] for a in coefficients])
    return SmoothedCurve(
        parameter=parameter, value=derivative[0], first=derivative[1], second=derivative[2],
        value_var=scale * float(coefficients[0] @ coefficients[0]),
        first_var=scale * float(coefficients[1] @ coefficients[1]),
        second_var=scale * float(coefficients[2] @ coefficients[2]),
        first_second_cov=scale * float(coefficients[1] @ coefficients[2]),
        noise=noise, level=float(window), knot_spacing=delta,
        dof=track.n_points / window * (order + 1), span=window * delta,
        method=f"Savitzky-Golay, {window} samples, order {order}",
        covariance=(noise**2)[:, None, None] * products[None], sigma_given=track.sigma is not None,
        response=FilterResponse((coefficients[0], coefficients[1], coefficients[2]), noise**2),
    )


def smooth_track(
    track: Track, *, smoothing: Smoothing = "auto", level: float | None = None, window: int = 31,
    parameter: FloatArray | None = None,
) -> SmoothedCurve:
    """Smooth and differentiate a track's positions.

    Parameters
    ----------
    track : Track
        The samples; their sigma, when given, weights the fit.
    smoothing : {"auto", "spline", "savgol"}
        Penalised splines with a GCV-chosen level ("auto", "spline"), or a
        Savitzky-Golay filter of ``window`` samples (evenly spaced samples only).
    level : float, optional
        A fixed spline smoothing level instead of GCV.
    window : int
        Savitzky-Golay window length in samples.
    parameter : ndarray, shape (n_points,), optional
        For a track without times, the arc length (L) to smooth against (e.g. that of an
        earlier smoothing of the same track, `SmoothedCurve.parameter`); by default
        `arc_length`.
    """
    if smoothing == "savgol":
        parameter = track.t if track.t is not None else chord_length(track.x, track.y)
        return _savgol(np.asarray(parameter, dtype=float), track, window)
    if smoothing not in ("auto", "spline"):
        raise GeometryError(f'smoothing {smoothing!r} is unknown; use "spline" or "savgol".')
    try:
        if track.t is None:
            arc = arc_length(track) if parameter is None else np.asarray(parameter, dtype=float)
            return smooth_curve(arc, track.x, track.y, sigma=track.sigma, level=level)
        parameter = np.asarray(track.t, dtype=float)
        pilot = _pilot(parameter, track, level)
        return smooth_curve(parameter, track.x, track.y, sigma=track.sigma, level=level,
                            penalty_weight=_arc_length_weight(pilot))
    except GeometryError as exc:
        raise GeometryError(f"{track.label}: {exc} Record a longer stretch of the path.") from None


def _arc_length_weight(pilot: SmoothedCurve) -> PenaltyWeight:
    """Penalty weight (v / median v)**-5 that makes smoothing in time act like smoothing
    in arc length.

    For a roughness penalty on the third derivative, d/dt = v d/ds and ds = v dt turn
    the integral of (d3x/ds3)**2 ds into that of (d3x/dt3)**2 v**-5 dt (neglecting
    dv/dt). Without the weight one level over-smooths the fast stretches (pericentre
    passages) and under-smooths the slow ones.
    """
    speed = np.hypot(pilot.first[:, 0], pilot.first[:, 1])
    relative = np.clip(speed / np.median(speed), 1e-2, 1e2) ** (-5.0)

    def weight(where: FloatArray) -> FloatArray:
        return np.interp(where, pilot.parameter, relative)

    return weight
