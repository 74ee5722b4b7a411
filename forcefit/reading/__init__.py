"""Reading: files, DataFrames and videos to `Track`s — tables, column roles, calibration,
camera geometry (plane marks, lens), video tracking, inspection."""

from __future__ import annotations

from typing import TYPE_CHECKING

from .._lazy import lazy_exports

if TYPE_CHECKING:
    from .coordinates import Calibration, PlaneProjection, project_to_plane
    from .inspection import TrackSummary, inspect_track
    from .lens import LensModel, calibrate_lens, load_lens
    from .loaders import load_track, load_tracks, save_track
    from .perspective import PlaneMapping, fit_homography
    from .video import VideoTrack, track_video

__getattr__, __dir__ = lazy_exports(__name__, {
    "Calibration": ".coordinates",
    "PlaneProjection": ".coordinates",
    "project_to_plane": ".coordinates",
    "TrackSummary": ".inspection",
    "inspect_track": ".inspection",
    "LensModel": ".lens",
    "calibrate_lens": ".lens",
    "load_lens": ".lens",
    "load_track": ".loaders",
    "load_tracks": ".loaders",
    "save_track": ".loaders",
    "PlaneMapping": ".perspective",
    "fit_homography": ".perspective",
    "VideoTrack": ".video",
    "track_video": ".video",
})

__all__ = [
    "Calibration",
    "LensModel",
    "PlaneMapping",
    "PlaneProjection",
    "TrackSummary",
    "VideoTrack",
    "calibrate_lens",
    "fit_homography",
    "inspect_track",
    "load_lens",
    "load_track",
    "load_tracks",
    "project_to_plane",
    "save_track",
    "track_video",
]
