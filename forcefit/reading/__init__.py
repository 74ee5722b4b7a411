"""Reading: files and DataFrames to `Track`s — tables, column roles, calibration, inspection."""

from .coordinates import Calibration, PlaneProjection, project_to_plane
from .inspection import TrackSummary, inspect_track
from .loaders import load_track, load_tracks, save_track

__all__ = [
    "Calibration",
    "PlaneProjection",
    "TrackSummary",
    "inspect_track",
    "load_track",
    "load_tracks",
    "project_to_plane",
    "save_track",
]
