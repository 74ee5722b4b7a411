"""Finding the marker in one frame: the difference image, its blobs, a sub-pixel centre."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from .._types import FloatArray
from ..errors import InputError

MarkerKind = Literal["bright", "dark", "colour"]
Centroid = Literal["weighted", "gaussian"]

NAMED_HUES: dict[str, tuple[float, float]] = {
    "red": (340.0, 20.0), "orange": (20.0, 45.0), "yellow": (45.0, 70.0), "green": (75.0, 160.0),
    "cyan": (160.0, 200.0), "blue": (200.0, 260.0), "purple": (260.0, 290.0),
    "magenta": (290.0, 340.0),
}
"""Hue ranges (degrees on the colour wheel, from red at 0) of the named marker colours."""

MIN_THRESHOLD = 8.0
"""Lowest automatic threshold, in grey levels (0-255): below it 8-bit rounding and codecs speak."""

NOISE_FACTOR = 6.0
"""The automatic threshold is this many times the frame's noise (robust standard deviation)."""

_PAD = 3
"""Pixels around a blob's box that the centroid also weighs (the blob's faint edge)."""


@dataclass(frozen=True, kw_only=True)
class Settings:
    """What to look for, checked once."""

    marker: MarkerKind
    hue: tuple[float, float] | None
    min_saturation: float
    region: tuple[int, int, int, int] | None
    min_area: int
    max_area: int | None
    threshold: float | None
    background: bool
    centroid: Centroid

    def describe(self) -> str:
        what = {"bright": "a bright marker", "dark": "a dark marker"}.get(self.marker, "")
        if self.marker == "colour" and self.hue is not None:
            what = f"a coloured marker (hue {self.hue[0]:g} to {self.hue[1]:g} degrees)"
        parts = [what, "against the median frame" if self.background else "against each frame's median",
                 f"blobs of {self.min_area} px or more",
                 "intensity-weighted centroid" if self.centroid == "weighted" else "2-D Gaussian fit"]
        if self.region is not None:
            parts.append("region x={} y={} w={} h={} px".format(*self.region))
        return ", ".join(parts)


def check_settings(
    marker: str, colour: str | tuple[float, float] | None, min_saturation: float,
    region: tuple[int, int, int, int] | None, min_area: int, max_area: int | None,
    threshold: float | None, background: bool, centroid: str,
) -> Settings:
    if marker not in ("bright", "dark", "colour"):
        raise InputError(f'marker "{marker}" is not one of bright, dark, colour.')
    if centroid not in ("weighted", "gaussian"):
        raise InputError(f'centroid "{centroid}" is not one of weighted, gaussian.')
    hue: tuple[float, float] | None = None
    if marker == "colour":
        if colour is None:
            raise InputError("a colour marker needs its colour: a name (" + ", ".join(NAMED_HUES)
                             + ") or a hue range in degrees such as 90-150.")
        if isinstance(colour, str):
            if colour.lower() not in NAMED_HUES:
                raise InputError(f'unknown colour "{colour}": expected one of {", ".join(NAMED_HUES)} '
                                 "or a hue range in degrees such as 90-150.")
            hue = NAMED_HUES[colour.lower()]
        else:
            hue = (float(colour[0]) % 360.0, float(colour[1]) % 360.0)
    elif colour is not None:
        raise InputError("a colour was given for a bright or dark marker; add marker='colour' "
                         "(--marker colour) or leave the colour out.")
    if min_area < 1 or (max_area is not None and max_area < min_area):
        raise InputError(f"blob sizes must satisfy 1 <= min_area <= max_area, got {min_area} and {max_area}.")
    if threshold is not None and not (math.isfinite(threshold) and threshold > 0):
        raise InputError(f"threshold {threshold!r} must be a positive number of grey levels (0-255).")
    if region is not None:
        if len(region) != 4 or min(region[2:]) <= 0 or min(region[:2]) < 0:
            raise InputError(f"region {region!r} must be x, y, width, height in px, with positive size.")
        region = tuple(int(v) for v in region)  # type: ignore[assignment]
    return Settings(marker=marker, hue=hue, min_saturation=float(min_saturation), region=region,  # type: ignore[arg-type]
                     min_area=int(min_area), max_area=max_area, threshold=threshold,
                     background=bool(background), centroid=centroid)  # type: ignore[arg-type]


def _hue_mask(cv2: Any, frame: np.ndarray, settings: Settings) -> np.ndarray:
    hsv = cv2.cvtColor(frame, cv2.COLOR_BGR2HSV)
    hue = hsv[..., 0].astype(np.float32) * 2.0
    low, high = settings.hue or (0.0, 360.0)
    inside = (hue >= low) & (hue <= high) if low <= high else (hue >= low) | (hue <= high)
    inside &= hsv[..., 1] >= 255.0 * settings.min_saturation
    mask = cv2.dilate(inside.astype(np.uint8), np.ones((3, 3), np.uint8))
    return np.asarray(mask, dtype=np.float32)


def signal_image(
    cv2: Any, frame: np.ndarray, background: np.ndarray | None, settings: Settings
) -> np.ndarray:
    """How much each pixel looks like the marker, in grey levels; >= 0 is 'more marker'."""
    image = frame.astype(np.float32)
    if settings.marker == "colour":
        if background is not None:
            contrast = np.sqrt(np.mean((image - background) ** 2, axis=2))
        else:
            contrast = cv2.cvtColor(frame, cv2.COLOR_BGR2HSV)[..., 1].astype(np.float32)
        return np.asarray(contrast * _hue_mask(cv2, frame, settings), dtype=np.float32)
    reference = background if background is not None else np.float32(np.median(image))
    difference = image - reference
    return np.asarray(difference if settings.marker == "bright" else -difference, dtype=np.float32)


def noise_level(signal: np.ndarray) -> float:
    """Robust standard deviation (1.4826 x median absolute deviation) of a sample of pixels."""
    step = max(1, int(math.sqrt(signal.size / 4000)))
    sample = signal[::step, ::step]
    middle = float(np.median(sample))
    return 1.4826 * float(np.median(np.abs(sample - middle)))


def _gaussian_centre(
    box: np.ndarray, weights: np.ndarray, start: tuple[float, float]
) -> tuple[float, float] | None:
    """Centre of an elliptical 2-D Gaussian plus a constant fitted to the box; None if it fails."""
    from scipy.optimize import least_squares

    rows, cols = np.indices(box.shape, dtype=np.float64)
    values = box.astype(np.float64).ravel()

    def residual(p: FloatArray) -> FloatArray:
        amplitude, x0, y0, sx, sy, level = p
        model = amplitude * np.exp(-0.5 * (((cols - x0) / sx) ** 2 + ((rows - y0) / sy) ** 2)) + level
        return np.asarray(model.ravel() - values, dtype=np.float64)

    size = max(1.0, math.sqrt(float((weights > 0).sum()) / math.pi))
    guess = [float(box.max()), start[0], start[1], size, size, 0.0]
    lower = [0.0, -0.5, -0.5, 0.3, 0.3, -np.inf]
    widest = float(max(box.shape))
    upper = [np.inf, box.shape[1] - 0.5, box.shape[0] - 0.5, widest, widest, np.inf]
    guess[1:3] = [min(max(g, lo + 1e-6), hi - 1e-6) for g, lo, hi in zip(start, lower[1:3], upper[1:3])]
    result = least_squares(residual, guess, bounds=(lower, upper), x_scale="jac")
    if not result.success:
        return None
    return float(result.x[1]), float(result.x[2])


def locate(
    cv2: Any, signal: np.ndarray, threshold: float, noise: float, settings: Settings
) -> tuple[float, float, float, int]:
    """(x, y, area, candidates) of the strongest blob in ``signal``; nan position when none qualifies."""
    rows_hot, cols_hot = np.nonzero(signal > threshold)
    if rows_hot.size < settings.min_area:
        return math.nan, math.nan, 0.0, 0
    top, left = max(int(rows_hot.min()) - _PAD - 1, 0), max(int(cols_hot.min()) - _PAD - 1, 0)
    bottom = min(int(rows_hot.max()) + _PAD + 2, signal.shape[0])
    right = min(int(cols_hot.max()) + _PAD + 2, signal.shape[1])
    x, y, area, candidates = _strongest(cv2, signal[top:bottom, left:right], threshold, noise, settings)
    return x + left, y + top, area, candidates


def _strongest(
    cv2: Any, signal: np.ndarray, threshold: float, noise: float, settings: Settings
) -> tuple[float, float, float, int]:
    """`_locate` within the box that holds every pixel above the threshold."""
    binary = (signal > threshold).astype(np.uint8)
    count, labels, stats, _ = cv2.connectedComponentsWithStats(binary, connectivity=8)
    areas = stats[1:, cv2.CC_STAT_AREA]
    keep = areas >= settings.min_area
    if settings.max_area is not None:
        keep &= areas <= settings.max_area
    if count <= 1 or not keep.any():
        return math.nan, math.nan, 0.0, 0
    flux = np.bincount(labels.ravel(), weights=np.clip(signal, 0, None).ravel(), minlength=count)[1:]
    flux[~keep] = -1.0
    label = int(np.argmax(flux)) + 1
    left, top, width, height = (int(v) for v in stats[label, :4])
    x0, y0 = max(0, left - _PAD), max(0, top - _PAD)
    x1, y1 = min(signal.shape[1], left + width + _PAD), min(signal.shape[0], top + height + _PAD)
    box = signal[y0:y1, x0:x1]
    blob = (labels[y0:y1, x0:x1] == label).astype(np.uint8)
    near = cv2.dilate(blob, cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * _PAD - 1, 2 * _PAD - 1))) > 0
    ring = ~cv2.dilate(blob, np.ones((3, 3), np.uint8)).astype(bool)
    level = float(np.median(box[ring])) if ring.any() else 0.0
    weights = np.clip(box - level - 2.0 * noise, 0.0, None) * near
    total = float(weights.sum())
    if total <= 0.0:                          # the surroundings are as bright: weigh the blob alone
        weights, total = blob.astype(np.float64), float(blob.sum())
    rows, cols = np.indices(box.shape, dtype=np.float64)
    x, y = float((weights * cols).sum() / total), float((weights * rows).sum() / total)
    if settings.centroid == "gaussian":
        fitted = _gaussian_centre(np.where(near, box - level, 0.0), weights, (x, y))
        if fitted is not None:
            x, y = fitted
    return x0 + x, y0 + y, float(areas[label - 1]), int(keep.sum())


def crop(array: np.ndarray, region: tuple[int, int, int, int] | None) -> np.ndarray:
    if region is None:
        return array
    left, top, width, height = region
    return array[top:top + height, left:left + width]
