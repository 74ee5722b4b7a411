"""Track one marked body through a video: sub-pixel positions with the frames' own times.

Each frame is compared with the scene without the body (the median of frames spread
over the video, so whatever moves vanishes from it); the pixels that differ by more
than a threshold form blobs, the strongest blob of at least ``min_area`` pixels is the
body, and its position is the intensity-weighted centroid of the difference (or the
centre of a fitted 2-D Gaussian). Times come from the container's timestamps
(presentation time x time base, read with PyAV), so a phone's variable frame rate is
kept. Frames where no blob qualifies are kept as lost frames (empty cells in the track
file), which the loader counts as dropped rows.

Pixel coordinates: x to the right, y downwards, the centre of the top-left pixel at
(0, 0), as OpenCV counts them; a video that a phone marked as turned is turned upright
first, as players show it.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from .._types import FloatArray
from ..errors import InputError
from ..track import Track
from ._blobs import (
    MIN_THRESHOLD,
    NAMED_HUES,
    NOISE_FACTOR,
    Centroid,
    MarkerKind,
    Settings,
    check_settings,
    crop,
    locate,
    noise_level,
    signal_image,
)
from ._decode import Reader, StreamInfo, cv2_module, frames

__all__ = ["NAMED_HUES", "VIDEO_SUFFIXES", "VideoTrack", "is_video", "track_video"]

VIDEO_SUFFIXES = frozenset({".mp4", ".avi", ".mov", ".mkv"})
"""File endings read as videos."""

BACKGROUND_FRAMES = 31
"""Most frames whose median makes the background (spread evenly over the video)."""


def is_video(path: str | os.PathLike[str]) -> bool:
    """True for a path whose ending is one of `VIDEO_SUFFIXES` (.mp4 .avi .mov .mkv)."""
    return Path(path).suffix.lower() in VIDEO_SUFFIXES


@dataclass(frozen=True, eq=False, kw_only=True)
class VideoTrack:
    """Where the marker was in every frame of a video, and how it was found.

    Parameters
    ----------
    source : str
        The video file.
    frame : ndarray of int, shape (n_frames,)
        Frame number, counted from 0 in decoding order.
    t : ndarray, shape (n_frames,)
        Time of each frame in s, from the container's timestamps.
    x, y : ndarray, shape (n_frames,)
        Marker position in px (x right, y down); nan where the marker was lost.
    area : ndarray, shape (n_frames,)
        Pixels of the marker's blob above the threshold; 0 where lost.
    width, height : int
        Frame size in px (after turning a phone video upright).
    nominal_rate : float
        Frames per second the container states (nan if it states none).
    timestamps : str
        Where the times came from: ``"container (PyAV)"``, ``"OpenCV"`` or ``"frame rate"``.
    time_resolution : float
        The container's time step in s (its time base), nan if unknown.
    threshold : float
        Median threshold used, in grey levels (0-255) of the difference image.
    noise : float
        Median noise of the difference image (robust standard deviation), grey levels.
    settings : str
        The marker, background and centroid settings, in words.
    notes : tuple of str
        What deserves a second look (turned video, duplicate times, ambiguous frames, ...).
    still : ndarray of uint8, shape (height, width, 3)
        A picture of the scene (the background, or the middle frame) for the overlay.
    """

    source: str
    frame: NDArray[np.int64]
    t: FloatArray
    x: FloatArray
    y: FloatArray
    area: FloatArray
    width: int
    height: int
    nominal_rate: float
    timestamps: str
    time_resolution: float
    threshold: float
    noise: float
    settings: str
    notes: tuple[str, ...] = ()
    still: NDArray[np.uint8] = field(repr=False, default_factory=lambda: np.zeros((1, 1, 3), np.uint8))

    @property
    def n_frames(self) -> int:
        """Frames read."""
        return int(self.t.size)

    @property
    def found(self) -> NDArray[np.bool_]:
        """True where the marker was found."""
        return np.isfinite(self.x)

    @property
    def lost_frames(self) -> tuple[int, ...]:
        """Numbers of the frames where the marker was lost."""
        return tuple(int(f) for f in self.frame[~self.found])

    @property
    def frame_intervals(self) -> tuple[float, float, float]:
        """Shortest, median and longest interval between frames, s."""
        steps = np.diff(self.t)
        if steps.size == 0:
            return (math.nan, math.nan, math.nan)
        return float(steps.min()), float(np.median(steps)), float(steps.max())

    @property
    def variable_rate(self) -> bool:
        """True when the frame intervals differ by more than the container's time step."""
        shortest, _, longest = self.frame_intervals
        resolution = self.time_resolution if math.isfinite(self.time_resolution) else 1e-6
        return bool(longest - shortest > 2.0 * resolution + 1e-9)

    def describe(self) -> dict[str, Any]:
        """The tracking report as plain values (for metadata and JSON)."""
        shortest, median, longest = self.frame_intervals
        return {
            "source": self.source, "frames": self.n_frames, "found": int(self.found.sum()),
            "lost_frames": list(self.lost_frames[:50]), "n_lost": len(self.lost_frames),
            "frame_size_px": [self.width, self.height], "nominal_rate": self.nominal_rate,
            "timestamps": self.timestamps, "frame_interval_s": [shortest, median, longest],
            "variable_rate": self.variable_rate, "threshold": self.threshold, "noise": self.noise,
            "median_blob_area_px": float(np.median(self.area[self.found])) if self.found.any() else math.nan,
            "settings": self.settings, "notes": list(self.notes),
        }

    def to_text(self) -> str:
        """A few lines for the terminal."""
        shortest, median, longest = self.frame_intervals
        lost = self.lost_frames
        lines = [f"{self.source}: {self.n_frames} frames of {self.width} x {self.height} px; marker found in "
                 f"{self.n_frames - len(lost)}, lost in {len(lost)}"
                 + (f" (frames {_ranges(lost)})" if lost else "")]
        rate = "variable frame rate" if self.variable_rate else "constant frame rate"
        lines.append(f"  times: {self.timestamps}, {rate}, intervals {1e3 * shortest:.4g} to "
                     f"{1e3 * longest:.4g} ms (median {1e3 * median:.4g} ms)")
        lines.append(f"  found: {self.settings}; threshold {self.threshold:.3g}, noise {self.noise:.3g} "
                     "grey levels")
        lines += [f"  note: {note}" for note in self.notes]
        return "\n".join(lines)

    def to_frame(self) -> pd.DataFrame:
        """The track as a table: ``frame``, ``t (s)``, ``x (px)``, ``y (px)`` (nan where lost)."""
        return pd.DataFrame({"frame": self.frame, "t (s)": self.t, "x (px)": self.x, "y (px)": self.y})

    def to_csv(self, *, name: str | None = None) -> str:
        """The track file's text: comment lines saying how it was made, then the table.

        Lost frames have empty x and y cells, so `forcefit.load_track` counts them as
        dropped rows.
        """
        label = name or Path(self.source).stem
        lines = [
            f"# forcefit track: {label}",
            f"# tracked from {Path(self.source).name}: {self.settings}",
            f"# times: {self.timestamps}; frame size {self.width} x {self.height} px; x to the right,"
            " y downwards, (0, 0) at the top-left pixel's centre",
            f"# frames: {self.n_frames}, marker found in {int(self.found.sum())}, lost in "
            f"{len(self.lost_frames)} (empty cells)",
            "frame,t (s),x (px),y (px)",
        ]
        for frame, t, x, y in zip(self.frame, self.t, self.x, self.y):
            cells = ("", "") if not math.isfinite(x) else (f"{x:.4f}", f"{y:.4f}")
            lines.append(f"{int(frame)},{t:.6f},{cells[0]},{cells[1]}")
        return "\n".join(lines) + "\n"

    def to_track(self, *, name: str | None = None) -> Track:
        """The frames where the marker was found, as a `Track` in px and s."""
        keep = self.found
        if int(keep.sum()) < 3:
            raise InputError(f"{self.source}: the marker was found in {int(keep.sum())} frames, at least 3 "
                             "are needed. Check the marker options (--marker, --threshold, --region).")
        return Track(t=self.t[keep], x=self.x[keep], y=self.y[keep], length_unit="px", time_unit="s",
                     name=name or Path(self.source).stem,
                     metadata={"source": self.source, "video": self.describe(),
                               "dropped_rows": len(self.lost_frames)})

    def overlay_png(self, *, marks: Any = None) -> bytes:
        """A PNG of the scene with the tracked path drawn on it (and numbered ``marks``, px)."""
        cv2 = cv2_module()
        picture = np.ascontiguousarray(self.still.copy())
        shift = 4
        scale = float(1 << shift)
        found = self.found
        for start in range(self.n_frames - 1):
            if found[start] and found[start + 1]:
                ends = [(int(round(self.x[i] * scale)), int(round(self.y[i] * scale)))
                        for i in (start, start + 1)]
                cv2.line(picture, ends[0], ends[1], (0, 200, 255), 1, cv2.LINE_AA, shift)
        where = np.flatnonzero(found)
        if where.size:
            for index, colour in ((where[0], (80, 220, 80)), (where[-1], (80, 80, 255))):
                centre = (int(round(self.x[index] * scale)), int(round(self.y[index] * scale)))
                cv2.circle(picture, centre, int(4 * scale), colour, 1, cv2.LINE_AA, shift)
        for number, (mx, my) in enumerate(marks or (), start=1):
            centre = (int(round(mx)), int(round(my)))
            cv2.drawMarker(picture, centre, (255, 120, 0), cv2.MARKER_CROSS, 9, 1, cv2.LINE_AA)
            cv2.putText(picture, str(number), (centre[0] + 4, centre[1] - 4), cv2.FONT_HERSHEY_SIMPLEX,
                        0.4, (255, 120, 0), 1, cv2.LINE_AA)
        ok, encoded = cv2.imencode(".png", picture)
        if not ok:  # pragma: no cover - OpenCV always encodes an 8-bit picture
            raise InputError(f"{self.source}: the overlay picture could not be encoded as PNG.")
        return bytes(encoded.tobytes())


def _ranges(numbers: tuple[int, ...], most: int = 8) -> str:
    """``(3, 4, 5, 9)`` → ``"3-5, 9"``, the first ``most`` runs only."""
    runs: list[list[int]] = []
    for number in numbers:
        if runs and number == runs[-1][1] + 1:
            runs[-1][1] = number
        else:
            runs.append([number, number])
    text = ", ".join(f"{a}" if a == b else f"{a}-{b}" for a, b in runs[:most])
    return text + (", ..." if len(runs) > most else "")


def _background(path: Path, reader: Reader, colour: bool, info: StreamInfo, progress: bool) -> np.ndarray:
    """Median of up to `BACKGROUND_FRAMES` frames spread evenly over the video (first pass)."""
    from tqdm import tqdm

    kept: list[np.ndarray] = []
    stride = 1
    decoded = frames(path, reader, colour, info)
    for index, (_, array) in enumerate(tqdm(decoded, desc="background", unit="frame", disable=not progress,
                                             leave=False)):
        if index % stride == 0:
            kept.append(array)
            if len(kept) >= 2 * BACKGROUND_FRAMES:
                kept, stride = kept[::2], 2 * stride
    if not kept:
        raise InputError(f"{path}: the video holds no frames. Copy the file again.")
    sample = np.stack(kept[:: max(1, len(kept) // BACKGROUND_FRAMES)])
    middle = len(sample) // 2                  # the median of an odd count, the upper one of an even
    return np.partition(sample, middle, axis=0)[middle].astype(np.float32)


def track_video(
    path: str | os.PathLike[str],
    *,
    marker: MarkerKind = "bright",
    colour: str | tuple[float, float] | None = None,
    min_saturation: float = 0.35,
    region: tuple[int, int, int, int] | None = None,
    min_area: int = 5,
    max_area: int | None = None,
    threshold: float | None = None,
    background: bool = True,
    centroid: Centroid = "weighted",
    reader: Reader = "auto",
    progress: bool = False,
) -> VideoTrack:
    """Find a marked body in every frame of a video; positions in px, times in s.

    Parameters
    ----------
    path : path-like
        An .mp4, .avi, .mov or .mkv video; never modified.
    marker : {"bright", "dark", "colour"}
        A marker brighter or darker than what lies behind it, or of a colour.
    colour : str or (float, float), optional
        For ``marker="colour"``: a name (red, orange, yellow, green, cyan, blue, purple,
        magenta) or a hue range in degrees (0 = red, 120 = green, 240 = blue; wraps past 360).
    min_saturation : float
        For a colour marker: least saturation (0-1) a pixel needs to count as coloured.
    region : (int, int, int, int), optional
        x, y, width, height (px) of the part of the frame to search.
    min_area, max_area : int
        Smallest (and largest) blob, in pixels above the threshold, taken for the marker.
    threshold : float, optional
        Grey levels (0-255) by which a pixel must differ from the background; by default
        six times the frame's noise, and at least 8.
    background : bool
        Subtract the median of frames spread over the video (default), which removes
        everything that does not move; else compare with each frame's median level.
    centroid : {"weighted", "gaussian"}
        Intensity-weighted centroid of the blob (default), or the centre of a fitted
        elliptical 2-D Gaussian.
    reader : {"auto", "pyav", "opencv"}
        PyAV (the container's timestamps; the default when installed) or OpenCV.
    progress : bool
        Show a progress bar (tqdm) on standard error.

    Returns
    -------
    VideoTrack
        Every frame's time and position (nan where lost) and the tracking report.

    Raises
    ------
    InputError
        A missing or unreadable file, bad options, or too few frames with the marker.

    Examples
    --------
    A bright dot moving 2 px per frame to the right, written losslessly at 25 frames per s:

    >>> import pathlib, tempfile
    >>> from forcefit.reading.scenes import add_marker, to_pixels, write_video
    >>> floor, rng = np.full((48, 64), 40.0), np.random.default_rng(0)
    >>> frames = [to_pixels(add_marker(floor, np.array([10.0 + 2 * i]), np.array([24.0]), radius=3.0,
    ...                                contrast=150.0), noise=0.0, rng=rng) for i in range(20)]
    >>> path = write_video(pathlib.Path(tempfile.mkdtemp()) / "dot.mkv", frames, np.arange(20) / 25.0,
    ...                    codec="ffv1")
    >>> tracked = track_video(path)
    >>> tracked.n_frames, float(tracked.t[3]), round(float(tracked.x[3]), 3), round(float(tracked.y[3]), 3)
    (20, 0.12, 16.0, 24.0)
    """
    file = Path(path)
    if not file.is_file():
        raise InputError(f"{file}: file not found. Check the path of the video.")
    settings = check_settings(marker, colour, min_saturation, region, min_area, max_area, threshold,
                               background, centroid)
    colour_frames = settings.marker == "colour"
    info = StreamInfo()
    backdrop = _background(file, reader, colour_frames, info, progress) if settings.background else None
    return _track_frames(file, reader, settings, backdrop, info, progress)


def _track_frames(
    file: Path, reader: Reader, settings: Settings, backdrop: np.ndarray | None, info: StreamInfo,
    progress: bool,
) -> VideoTrack:
    """The second pass: every frame's time and marker position."""
    from tqdm import tqdm

    cv2 = cv2_module()
    colour_frames = settings.marker == "colour"
    times, xs, ys, areas, thresholds, noises = [], [], [], [], [], []
    ambiguous, middle_frame, size = 0, None, (0, 0)
    reference = None if backdrop is None else crop(backdrop, settings.region)
    decoded = frames(file, reader, colour_frames, info)
    total = info.count or None
    for index, (time, array) in enumerate(tqdm(decoded, total=total, desc="tracking", unit="frame",
                                               disable=not progress, leave=False)):
        size = (array.shape[1], array.shape[0])
        if index == 0:
            _check_region(settings.region, size, file)
        if index == (info.count or 1) // 2 or middle_frame is None:
            middle_frame = array
        if time is None:
            info.missing_times += 1
        signal = signal_image(cv2, crop(array, settings.region), reference, settings)
        noise = noise_level(signal)
        level = settings.threshold if settings.threshold is not None else max(NOISE_FACTOR * noise,
                                                                              MIN_THRESHOLD)
        x, y, area, candidates = locate(cv2, signal, level, noise, settings)
        if settings.region is not None:
            x, y = x + settings.region[0], y + settings.region[1]
        ambiguous += candidates > 1
        times.append(math.nan if time is None else time)
        xs.append(x)
        ys.append(y)
        areas.append(area)
        thresholds.append(level)
        noises.append(noise)
    if not times:
        raise InputError(f"{file}: the video holds no frames. Copy the file again.")
    return _assemble(file, info, settings, backdrop, middle_frame, size, times, xs, ys, areas,
                     thresholds, noises, ambiguous)


def _check_region(region: tuple[int, int, int, int] | None, size: tuple[int, int], file: Path) -> None:
    if region is not None and (region[0] + region[2] > size[0] or region[1] + region[3] > size[1]):
        raise InputError(f"{file}: the region x={region[0]} y={region[1]} w={region[2]} h={region[3]} "
                         f"px reaches outside the {size[0]} x {size[1]} px frame. Choose a region inside it.")


def _assemble(
    file: Path, info: StreamInfo, settings: Settings, backdrop: np.ndarray | None,
    middle_frame: np.ndarray | None, size: tuple[int, int], times: list[float], xs: list[float],
    ys: list[float], areas: list[float], thresholds: list[float], noises: list[float], ambiguous: int,
) -> VideoTrack:
    notes = []
    t = np.array(times, dtype=np.float64)
    frame = np.arange(t.size, dtype=np.int64)
    timestamps = info.timestamps
    if info.missing_times:
        if not math.isfinite(info.rate):
            raise InputError(f"{file}: {info.missing_times} frames carry no time and the video states no "
                             "frame rate. Convert the video to .mp4 and track it again.")
        t = frame / info.rate
        timestamps = f"frame rate ({info.rate:g} per s; {info.missing_times} frames carry no time)"
        notes.append(f"{info.missing_times} frames carry no timestamp: times are frame numbers over the "
                     f"stated rate of {info.rate:g} frames per s.")
    keep, latest = np.ones(t.size, dtype=bool), -math.inf
    for index, value in enumerate(t):        # times must increase: drop repeats and steps back
        keep[index] = value > latest
        latest = max(latest, value)
    if not keep.all():
        notes.append(f"{int((~keep).sum())} frames repeat or precede an earlier time and were left out "
                     f"(frames {_ranges(tuple(int(f) for f in frame[~keep]))}).")
    if info.turned:
        notes.append(f"the video is marked as turned by {info.turned} degrees; frames were turned upright "
                     "as players show them, and positions refer to the upright picture.")
    found = np.isfinite(np.array(xs))
    if ambiguous:
        notes.append(f"in {ambiguous} frames more than one blob qualified; the strongest was taken. "
                     "A region (--region) or a larger minimum blob size excludes the others.")
    if found.sum() < 3:
        raise InputError(
            f"{file}: the marker was found in {int(found.sum())} of {t.size} frames. Check the marker kind "
            "(bright, dark or colour), lower the threshold or the minimum blob size, or set a region."
        )
    still = backdrop if backdrop is not None else middle_frame
    still_bgr = np.clip(np.rint(np.asarray(still)), 0, 255).astype(np.uint8)
    if still_bgr.ndim == 2:
        still_bgr = np.repeat(still_bgr[:, :, None], 3, axis=2)
    return VideoTrack(
        source=str(file), frame=frame[keep], t=t[keep], x=np.array(xs)[keep], y=np.array(ys)[keep],
        area=np.array(areas)[keep], width=size[0], height=size[1], nominal_rate=info.rate,
        timestamps=timestamps, time_resolution=info.resolution,
        threshold=float(np.median(thresholds)), noise=float(np.median(noises)),
        settings=settings.describe(), notes=tuple(notes), still=still_bgr,
    )
