"""What a track holds, at a glance: size, timing, gaps, extent, noise, warnings."""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np

from .._json import json_safe
from .._noise import NoiseEstimate, estimate_noise
from .._types import Row
from ..formatting import plain
from ..track import Track

GAP_FACTOR = 1.5
"""An interval longer than this many median intervals counts as a gap (dropped frames)."""


@dataclass(frozen=True)
class TrackSummary:
    """Facts about a track that a user checks before fitting it.

    Lengths are in ``length_unit`` and times in ``time_unit``; nan where not
    applicable (times of a shape-only track).
    """

    name: str
    source: str
    n_points: int
    length_unit: str
    time_unit: str | None
    duration: float
    sampling_interval: float
    sample_rate: float
    n_gaps: int
    largest_gap: float
    x_range: tuple[float, float]
    y_range: tuple[float, float]
    noise_estimate: float
    median_sigma: float
    turns_about_middle: float
    dropped_rows: int
    columns: dict[str, str] = field(default_factory=dict)
    out_of_plane_rms: float = math.nan
    plane_normal: tuple[float, ...] | None = None
    calibration: dict[str, Any] | None = None
    warnings: tuple[str, ...] = ()
    units_from: dict[str, str] = field(default_factory=dict)
    unused_columns: tuple[str, ...] = ()
    unrecognised_columns: tuple[str, ...] = ()
    dropped_row_numbers: tuple[int, ...] = ()
    time_origin: str | None = None
    noise_resolved: bool = True
    noise_lag_ratio: float = math.nan
    noise_correlated: bool = False
    description: str = ""

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form (nan becomes None)."""
        return json_safe(asdict(self))

    def rows(self) -> list[Row]:
        """The facts as labelled text with units."""
        length, time = self.length_unit, self.time_unit or ""
        rows = [("read", self.description)] if self.description else []
        rows.append(("points", f"{self.n_points}" + (f"  ({self._dropped()})" if self.dropped_rows else "")))
        if self.time_unit is None:
            rows.append(("times", "none (shape-only path)"))
        else:
            if self.time_origin:
                rows.append(("first time", self.time_origin))
            rows += [
                ("duration", f"{plain(self.duration)} {time}"),
                ("sampling", f"{plain(self.sample_rate)} per {time} "
                             f"(median interval {plain(self.sampling_interval, 4)} {time})"),
                ("gaps", f"{self.n_gaps}" + (f" (largest {plain(self.largest_gap, 4)} {time})"
                                             if self.n_gaps else "")),
            ]
        rows += [
            ("x range", f"{self.x_range[0]:.6g} to {self.x_range[1]:.6g} {length}"),
            ("y range", f"{self.y_range[0]:.6g} to {self.y_range[1]:.6g} {length}"),
            ("turns", f"{self.turns_about_middle:.2f} about the middle of the path"),
            ("noise", NoiseEstimate(self.noise_estimate, self.noise_resolved, self.noise_lag_ratio,
                                    self.noise_correlated).describe(length)),
        ]
        if math.isfinite(self.median_sigma):
            rows.append(("sigma", f"{self.median_sigma:.3g} {length} median, as given"))
        if self.plane_normal is not None:
            normal = ", ".join(f"{c:+.6f}" for c in self.plane_normal)
            rows.append(("plane", f"normal ({normal}), out-of-plane RMS "
                                  f"{self.out_of_plane_rms:.3g} {length}"))
        if self.calibration:
            rows.append(("calibration", f"{self.calibration['scale']:.6g} "
                                        f"{self.calibration['unit']} per raw unit"))
        rows.append(("columns", ", ".join(f"{role}: {header}" for role, header in
                                          self.columns.items()) or "given as arrays"))
        if self.units_from:
            rows.append(("units", f"length {length} ({self.units_from.get('length', '?')}), "
                                  + (f"time {time} ({self.units_from.get('time', '?')})"
                                     if self.time_unit else "no times")))
        if self.unused_columns:
            unknown = set(self.unrecognised_columns)
            rows.append(("not used", ", ".join(
                f'"{name}"' + (" (not recognised)" if name in unknown else "")
                for name in self.unused_columns)))
        return [Row(label, value) for label, value in rows]

    def _dropped(self) -> str:
        """How many rows were left out for empty cells, and which."""
        word = "row" if self.dropped_rows == 1 else "rows"
        listed = ", ".join(map(str, self.dropped_row_numbers[:10]))
        more = " ..." if self.dropped_rows > min(10, len(self.dropped_row_numbers)) else ""
        where = f": {word} {listed}{more}" if listed else ""
        return f"{self.dropped_rows} {word} left out for empty cells{where}"

    def to_text(self) -> str:
        """A short, unit-labelled table for the terminal."""
        rows = self.rows()
        width = max(len(row.label) for row in rows)
        lines = [f"{self.name}  ({self.source})"]
        lines += [f"  {row.label:<{width}}  {row.text}" for row in rows]
        lines += [f"  warning: {text}" for text in self.warnings]
        return "\n".join(lines)


def turns_about_middle(track: Track) -> float:
    """Revolutions swept about the middle of the bounding box (a rough count)."""
    cx = 0.5 * (track.x.min() + track.x.max())
    cy = 0.5 * (track.y.min() + track.y.max())
    angle = np.unwrap(np.arctan2(track.y - cy, track.x - cx))
    return float(abs(angle[-1] - angle[0]) / (2.0 * math.pi))


def inspect_track(track: Track) -> TrackSummary:
    """Summarise a track: size, timing and gaps, extent, noise, plane, warnings.

    Examples
    --------
    >>> t = np.linspace(0.0, 10.0, 101)
    >>> summary = inspect_track(Track(t=np.delete(t, [40, 41]), x=np.delete(np.cos(t), [40, 41]),
    ...                               y=np.delete(np.sin(t), [40, 41])))
    >>> summary.n_gaps, round(summary.largest_gap, 6), round(summary.turns_about_middle, 2)
    (1, 0.3, 1.59)
    """
    meta = track.metadata
    n_gaps, largest, rate = 0, math.nan, math.nan
    if track.t is not None:
        steps = np.diff(track.t)
        is_gap = steps > GAP_FACTOR * np.median(steps)
        n_gaps = int(is_gap.sum())
        largest = float(steps[is_gap].max()) if n_gaps else math.nan
        rate = 1.0 / float(np.mean(steps[~is_gap]))
    plane = meta.get("plane")
    noise = estimate_noise(track.x, track.y, parameter=track.t)
    return TrackSummary(
        name=track.name,
        source=str(meta.get("source", "arrays")),
        n_points=track.n_points,
        length_unit=track.length_unit,
        time_unit=track.time_unit if track.has_times else None,
        duration=track.duration,
        sampling_interval=track.sampling_interval,
        sample_rate=rate,
        n_gaps=n_gaps,
        largest_gap=largest,
        x_range=(float(track.x.min()), float(track.x.max())),
        y_range=(float(track.y.min()), float(track.y.max())),
        noise_estimate=noise.sd,
        median_sigma=math.nan if track.sigma is None else float(np.median(track.sigma)),
        turns_about_middle=turns_about_middle(track),
        dropped_rows=int(meta.get("dropped_rows", 0)),
        columns=dict(meta.get("columns", {})),
        out_of_plane_rms=float(plane["out_of_plane_rms"]) if plane else math.nan,
        plane_normal=tuple(plane["normal"]) if plane else None,
        calibration=meta.get("calibration"),
        warnings=tuple(meta.get("warnings", ())),
        units_from=dict(meta.get("units_from", {})),
        unused_columns=tuple(meta.get("unused_columns", ())),
        unrecognised_columns=tuple(meta.get("unrecognised_columns", ())),
        dropped_row_numbers=tuple(int(row) for row in meta.get("dropped_row_numbers", ())),
        time_origin=_time_origin(track),
        noise_resolved=noise.resolved,
        noise_lag_ratio=noise.lag_ratio,
        noise_correlated=noise.correlated,
        description=str(meta.get("description", "")),
    )


def _time_origin(track: Track) -> str | None:
    """Where the times start, when they count from a date: a date-time column's first reading,
    or a Julian date's first epoch."""
    origin = track.metadata.get("time_origin")
    if origin:
        return f"{origin} (times count seconds from it)"
    if track.t is not None and "Julian" in str(track.metadata.get("units_from", {}).get("time", "")):
        return f"{float(track.t[0]):.12g} {track.time_unit} (Julian date of the first sample)"
    return None
