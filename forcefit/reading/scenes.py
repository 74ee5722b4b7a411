"""Invented video scenes for the tests and the demo: a marker drawn where a path puts it.

A marker is a disc with a soft edge (a slightly defocused camera), integrated over
each pixel's area, and averaged over the exposure (motion blur): its light-weighted
centre is then the mean of the path's positions during the exposure, which is the
truth a tracker should return.
"""

from __future__ import annotations

import fractions
import os
from collections.abc import Iterable
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .._types import FloatArray
from ..errors import InputError

SUPERSAMPLE = 4
"""Samples per pixel side when integrating the marker over a pixel's area."""


def add_marker(
    image: FloatArray, x: FloatArray, y: FloatArray, *, radius: float, contrast: float | FloatArray,
    edge: float = 0.5,
) -> FloatArray:
    """``image`` (grey levels) plus a motion-blurred disc that visits positions ``x``, ``y`` (px).

    Parameters
    ----------
    image : ndarray, shape (height, width) or (height, width, 3)
        The scene without the marker (not modified).
    x, y : ndarray, shape (n_steps,)
        Positions of the disc's centre during the exposure, px (x right, y down, the
        top-left pixel's centre at (0, 0)); each holds the disc for an equal time.
    radius : float
        Disc radius in px.
    contrast : float or ndarray, shape (3,)
        Grey levels added at the disc's centre (negative for a dark marker; one per
        channel for colour).
    edge : float
        Width of the disc's soft edge in px (a logistic profile).

    Returns
    -------
    ndarray
        A new float image.
    """
    picture = np.array(image, dtype=np.float64)
    reach = radius + 8.0 * edge + 1.0
    left, right = int(np.floor(np.min(x) - reach)), int(np.ceil(np.max(x) + reach))
    top, bottom = int(np.floor(np.min(y) - reach)), int(np.ceil(np.max(y) + reach))
    left, top = max(left, 0), max(top, 0)
    right, bottom = min(right, picture.shape[1] - 1), min(bottom, picture.shape[0] - 1)
    if right < left or bottom < top:
        return picture
    offsets = (np.arange(SUPERSAMPLE) + 0.5) / SUPERSAMPLE - 0.5
    cols = (np.arange(left, right + 1)[:, None] + offsets[None, :]).ravel()
    rows = (np.arange(top, bottom + 1)[:, None] + offsets[None, :]).ravel()
    coverage = np.zeros((rows.size, cols.size))
    for cx, cy in zip(x, y):
        distance = np.hypot(cols[None, :] - cx, rows[:, None] - cy)
        coverage += 0.5 * (1.0 - np.tanh((distance - radius) / (2.0 * edge)))
    coverage /= len(x)
    shape = (bottom - top + 1, SUPERSAMPLE, right - left + 1, SUPERSAMPLE)
    pixel = coverage.reshape(shape).mean(axis=(1, 3))
    weight = np.asarray(contrast, dtype=np.float64)
    spot = pixel[..., None] * weight if picture.ndim == 3 else pixel * weight
    picture[top:bottom + 1, left:right + 1] += spot
    return picture


def to_pixels(image: FloatArray, *, noise: float, rng: np.random.Generator) -> NDArray[np.uint8]:
    """Add camera noise (``noise`` grey levels, Gaussian) and round to 8-bit pixels."""
    noisy = image + noise * rng.standard_normal(image.shape) if noise > 0 else image
    return np.clip(np.rint(noisy), 0, 255).astype(np.uint8)


def write_video(
    path: str | os.PathLike[str], frames: Iterable[NDArray[np.uint8]], times: FloatArray, *,
    codec: str = "libx264", quality: int = 18, clock: int = 90000,
) -> Path:
    """Write frames at the given times (s) with PyAV, reproducibly (bit-exact, one thread).

    Parameters
    ----------
    path : path-like
        Destination (.mp4, .mkv, ...).
    frames : iterable of uint8 arrays, shape (height, width) or (height, width, 3) (BGR)
        The pictures, in order.
    times : ndarray
        Presentation time of each frame in s, increasing (a variable frame rate is kept).
    codec : str
        ``"libx264"`` (H.264, as phones write; lossy) or ``"ffv1"`` (lossless).
    quality : int
        x264's constant rate factor (lower is better; 18 is visually lossless).
    clock : int
        Ticks per second of the container's time base.
    """
    import av

    target = Path(path)
    base = fractions.Fraction(1, clock)
    ticks = np.rint(np.asarray(times) * clock).astype(np.int64)
    container = av.open(str(target), "w", options={"fflags": "+bitexact"})
    with container:
        stream: Any = None
        for frame_array, tick in zip(frames, ticks):
            if stream is None:
                step = max(float(np.median(np.diff(ticks))), 1.0) if len(ticks) > 1 else clock / 30.0
                if codec != "ffv1" and (frame_array.shape[0] % 2 or frame_array.shape[1] % 2):
                    raise InputError(f"{target}: H.264 needs an even width and height, got "
                                     f"{frame_array.shape[1]} x {frame_array.shape[0]} px.")
                rate = fractions.Fraction(clock / step).limit_denominator(1001)
                stream = container.add_stream(codec, rate=rate)
                stream.width, stream.height = frame_array.shape[1], frame_array.shape[0]
                stream.time_base = base
                stream.codec_context.time_base = base
                stream.codec_context.thread_count = 1       # one thread: the same bytes on every run
                stream.codec_context.thread_type = "NONE"
                stream.pix_fmt = _pixel_format(codec, frame_array)
                options = {"flags": "+bitexact"}
                if codec == "libx264":
                    options.update(crf=str(quality), preset="medium")
                stream.options = options
            frame = av.VideoFrame.from_ndarray(_planes(stream.pix_fmt, frame_array), format=stream.pix_fmt)
            frame.pts = int(tick)
            frame.time_base = base
            for packet in stream.encode(frame):
                container.mux(packet)
        if stream is not None:
            for packet in stream.encode():
                container.mux(packet)
    return target


def _pixel_format(codec: str, picture: NDArray[np.uint8]) -> str:
    if codec == "ffv1":
        return "bgra" if picture.ndim == 3 else "gray"
    return "yuv420p"


def _planes(pixel_format: str, picture: NDArray[np.uint8]) -> NDArray[np.uint8]:
    """The picture already in the stream's pixel format (FFmpeg's own conversion is threaded and
    does not give the same bytes on every run)."""
    import cv2

    picture = np.ascontiguousarray(picture)
    if pixel_format == "gray":
        return picture
    if pixel_format == "bgra":
        return np.ascontiguousarray(np.dstack((picture, np.full(picture.shape[:2], 255, np.uint8))))
    if picture.ndim == 3:
        return np.asarray(cv2.cvtColor(picture, cv2.COLOR_BGR2YUV_I420), dtype=np.uint8)
    height, width = picture.shape
    chroma = np.full((height // 2, width), 128, np.uint8)     # two quarter-size planes, grey
    return np.ascontiguousarray(np.vstack((picture, chroma)))
