"""Decoding a video frame by frame, with each frame's time (PyAV, or OpenCV as a fallback)."""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

import numpy as np

from ..errors import InputError

Reader = Literal["auto", "pyav", "opencv"]


def cv2_module() -> Any:
    """OpenCV, imported on first use (it takes a moment, and only videos and lenses need it)."""
    try:
        import cv2
    except ImportError as exc:  # pragma: no cover - a dependency
        raise ImportError("forcefit needs OpenCV for videos and lenses: pip install "
                          "opencv-python-headless") from exc
    return cv2


@dataclass
class StreamInfo:
    """What the reader learnt about the video while decoding (filled in as it goes).

    Attributes
    ----------
    rate : float
        Frames per second the container states; nan if none.
    resolution : float
        The container's time step (time base) in s; nan if unknown.
    count : int
        Frames the container says it holds; 0 if it does not say.
    timestamps : str
        Where the frames' times come from, in words.
    turned : int
        Degrees by which the frames were turned upright (0, 90, 180, 270).
    missing_times : int
        Frames that carried no timestamp.
    """

    rate: float = math.nan
    resolution: float = math.nan
    count: int = 0
    timestamps: str = "container (PyAV)"
    turned: int = 0
    missing_times: int = 0


def _unreadable(path: Path) -> InputError:
    return InputError(
        f"{path}: cannot be read as a video. Expected an .mp4, .avi, .mov or .mkv file as a camera "
        "or phone writes it; copy the file again (it may be incomplete) or convert it to .mp4."
    )


def _pyav_frames(path: Path, colour: bool, info: StreamInfo) -> Iterator[tuple[float | None, np.ndarray]]:
    import av

    try:
        container = av.open(str(path))
    except (av.FFmpegError, OSError, UnicodeDecodeError):
        raise _unreadable(path) from None
    with container:
        if not container.streams.video:
            raise InputError(f"{path}: the file holds no video stream (audio only?). Give the video file.")
        stream = container.streams.video[0]
        stream.thread_type = "AUTO"
        info.rate = float(stream.average_rate) if stream.average_rate else math.nan
        info.resolution = float(stream.time_base) if stream.time_base else math.nan
        info.count = int(stream.frames or 0)
        try:
            for frame in container.decode(stream):
                base = frame.time_base or stream.time_base
                time = float(frame.pts * base) if frame.pts is not None and base is not None else None
                array: np.ndarray = frame.to_ndarray(format="bgr24" if colour else "gray")
                turn = int(round(float(getattr(frame, "rotation", 0) or 0) / 90.0)) % 4
                if turn:
                    info.turned = 90 * turn
                    array = np.ascontiguousarray(np.rot90(array, turn))
                yield time, array
        except av.FFmpegError:
            raise InputError(f"{path}: the video breaks off or is damaged after some frames. Copy the "
                             "file again or convert it to .mp4.") from None


def _opencv_frames(path: Path, colour: bool, info: StreamInfo) -> Iterator[tuple[float | None, np.ndarray]]:
    cv2 = cv2_module()
    capture = cv2.VideoCapture(str(path))
    if not capture.isOpened():
        raise _unreadable(path)
    if info.timestamps.startswith("container"):      # unless the caller already said why OpenCV reads
        info.timestamps = "OpenCV (frame positions; may be uneven for a variable frame rate)"
    info.rate = float(capture.get(cv2.CAP_PROP_FPS)) or math.nan
    info.count = int(capture.get(cv2.CAP_PROP_FRAME_COUNT) or 0)
    try:
        while True:
            ok, frame = capture.read()
            if not ok:
                break
            time = float(capture.get(cv2.CAP_PROP_POS_MSEC)) / 1e3
            yield time, (frame if colour else cv2.cvtColor(frame, cv2.COLOR_BGR2GRAY))
    finally:
        capture.release()


def frames(
    path: Path, reader: Reader, colour: bool, info: StreamInfo
) -> Iterator[tuple[float | None, np.ndarray]]:
    if reader == "opencv":
        return _opencv_frames(path, colour, info)
    try:
        import av  # noqa: F401
    except ImportError:
        if reader == "pyav":
            raise ImportError("reader='pyav' needs PyAV: pip install av") from None
        info.timestamps = "OpenCV (PyAV is not installed; install av for the container's own times)"
        return _opencv_frames(path, colour, info)
    return _pyav_frames(path, colour, info)
