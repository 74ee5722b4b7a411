"""Files, DataFrames and videos → `Track`s: column detection, units, calibration, 3-D projection.

Every refusal is an `InputError` that names the file, the row (1-based, as a
spreadsheet shows it), the column, what was found and what to do.
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Callable, Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, TypeAlias

import numpy as np
import pandas as pd

from .._atomic import write_atomic
from .._noise import position_noise
from .._types import FloatArray
from ..errors import ForcefitWarning, InputError
from ..track import ABSURD, MIN_POINTS, Track
from ..units import PIXEL, length_factor, parse_length_unit, parse_time_unit
from .columns import (
    DAY_COLUMNS,
    NUMERIC_ROLES,
    Column,
    date_time_origin,
    header_unit,
    holds_clock_readings,
    map_columns,
    normalise,
    numbers,
    track_ids,
    unused_columns,
)
from .coordinates import Calibration, project_to_plane
from .perspective import PlaneMapping
from .tables import RawTable, read_table
from .video import is_video, track_video

Source: TypeAlias = str | os.PathLike[str] | pd.DataFrame

def _refuse_bad_values(table: RawTable, column: Column, values: FloatArray, rows: np.ndarray) -> None:
    bad = ~np.isfinite(values) | (np.abs(values) > ABSURD)
    if bad.any():
        index = int(np.argmax(bad))
        raise InputError(
            f'{table.source}, {table.row_word} {rows[index]}, column "{column.header}": found '
            f"{float(values[index])!r}, expected a finite number below {ABSURD:g} in magnitude. "
            f"Correct the value or delete the {table.row_word}."
        )


@dataclass(frozen=True, kw_only=True)
class _Options:
    """What the caller asked for, besides the column names."""

    length_unit: str | None
    time_unit: str | None
    frame_rate: float | None
    calibration: Calibration | None
    name: str | None
    plane_mapping: PlaneMapping | None = None
    force_units: bool = False


def _unit_of(table: RawTable, column: Column, parse: Callable[[str], str]) -> str:
    """The unit a header states, or an `InputError` naming the file and column."""
    try:
        return parse(column.unit or "")
    except InputError as exc:
        raise InputError(f'{table.source}, column "{column.header}": {exc}') from None


def _units(
    table: RawTable, chosen: Mapping[str, Column], options: _Options, notes: list[str]
) -> dict[str, str]:
    """Length and time units with where each came from ("header", "given", "default", ...).

    A unit the header states wins over one given as an option, which only fills in where the
    header is silent, unless ``force_units`` says the option wins; a note says which was used.
    """
    header_units = {
        _unit_of(table, chosen[r], parse_length_unit) for r in ("x", "y", "z")
        if r in chosen and chosen[r].unit
    }
    if len(header_units) > 1:
        raise InputError(
            f"{table.source}: the position columns are in different units "
            f"({', '.join(sorted(header_units))}). Convert them to one unit first."
        )
    header_length = header_units.pop() if header_units else None
    given_length = parse_length_unit(options.length_unit) if options.length_unit is not None else None
    length, length_from = _choose("length", header_length, given_length, options.force_units, notes)
    time_column = chosen.get("t")
    header_time: str | None = None
    time_from_header = "header"
    if time_column is not None and options.frame_rate is None:
        name = header_unit(time_column.header)[0]
        if time_column.unit:
            header_time = _unit_of(table, time_column, parse_time_unit)
        elif normalise(name) in DAY_COLUMNS:
            header_time, time_from_header = "d", "header (Julian date)"
        elif date_time_origin(table, time_column) is not None:
            header_time, time_from_header = "s", "date-times"
        elif holds_clock_readings(table, time_column):
            header_time, time_from_header = "s", "clock readings"
    given_time = parse_time_unit(options.time_unit) if options.time_unit is not None else None
    if options.frame_rate is not None:
        time, time_from = "s", "frame rate"
    else:
        time, time_from = _choose("time", header_time, given_time, options.force_units, notes)
        if time_from == "header":
            time_from = time_from_header
    return {"length": length, "length_from": length_from, "time": time, "time_from": time_from}


def _choose(
    kind: str, header: str | None, given: str | None, force: bool, notes: list[str]
) -> tuple[str, str]:
    """The unit to use and where it came from: the header's, else the given one, else the default."""
    option = f"--{kind}-unit"
    if header is not None and given is not None and header != given:
        if force:
            notes.append(f"the header says {header} but {given} was given with force_units "
                         f"({option} with --force-units); using {given}.")
            return given, "given (forced over the header)"
        notes.append(f"the header says {header}; the {kind} unit given ({given}, {option}) fills in "
                     f"only where a header is silent, so {header} is used. Give --force-units "
                     f"(force_units=True) to use {given} instead.")
        return header, "header"
    if header is not None:
        return header, "header"
    if given is not None:
        return given, "given"
    return ("m" if kind == "length" else "s"), "default"


def _times(
    table: RawTable, chosen: Mapping[str, Column], values: Mapping[str, FloatArray],
    options: _Options,
) -> FloatArray | None:
    """Timestamps from the time column, or frame numbers over the frame rate, or None."""
    if options.frame_rate is not None:
        if "frame" not in values:
            raise InputError(
                f"{table.source}: a frame rate was given but there is no frame column. "
                'Name it (e.g. frame="Frame") or drop the frame rate and use the time column.'
            )
        if not (np.isfinite(options.frame_rate) and options.frame_rate > 0):
            raise InputError(
                f"frame rate {options.frame_rate!r} must be a positive number of frames per second."
            )
        return values["frame"] / options.frame_rate
    if "t" in values:
        return values["t"]
    if "frame" in values:
        raise InputError(
            f'{table.source}: column "{chosen["frame"].header}" holds frame numbers but no frame '
            "rate was given. Give it (frame_rate=30, or --frame-rate 30 on the command line)."
        )
    return None


def _refuse_bad_times(table: RawTable, column: str, t: FloatArray, rows: np.ndarray) -> None:
    steps = np.diff(t)
    if (steps <= 0).any():
        index = int(np.argmax(steps <= 0)) + 1
        if steps[index - 1] == 0:
            problem = f"time {float(t[index])!r} repeats {table.row_word} {rows[index - 1]}"
            fix = f"Delete the duplicate {table.row_word}"
        else:
            problem = (f"time {float(t[index])!r} is earlier than {float(t[index - 1])!r} in "
                       f"{table.row_word} {rows[index - 1]}")
            fix = "Sort the samples by time or correct the value"
        raise InputError(
            f'{table.source}, {table.row_word} {rows[index]}, column "{column}": {problem}; '
            f"times must increase. {fix}."
        )


def _to_plane(
    x: FloatArray, y: FloatArray, z: FloatArray, sigma: FloatArray | None, source: str,
    unit: str, notes: list[str],
) -> tuple[FloatArray, FloatArray, dict[str, Any]]:
    plane = project_to_plane(x, y, z)
    rms, extent = plane.out_of_plane_rms, plane.in_plane_extent
    if rms > 0.1 * extent:
        raise InputError(
            f"{source}: the 3-D points are far from any plane (RMS {rms:.3g} {unit} out of plane, "
            f"{extent:.3g} {unit} across); a central-force orbit is planar. Check the z column "
            "and the coordinate frame."
        )
    noise = position_noise(plane.u, plane.v) if sigma is None else float(np.median(sigma))
    if rms > 3.0 * noise:
        notes.append(
            f"the points lie {rms:.3g} {unit} (RMS) off their best-fit plane, more than three "
            f"times the position noise ({noise:.3g} {unit}): the orbit may not be planar."
        )
    info = {
        "normal": plane.normal.tolist(),
        "first_axis": plane.first_axis.tolist(),
        "second_axis": plane.second_axis.tolist(),
        "out_of_plane_rms": rms,
        "offset_from_origin": float(abs(plane.centroid @ plane.normal)),
    }
    return plane.u, plane.v, info


def _make_track(
    table: RawTable, chosen: Mapping[str, Column], values: Mapping[str, FloatArray],
    rows: np.ndarray, units: Mapping[str, str], options: _Options, label: str,
    notes: list[str], emptiest: str,
) -> Track:
    source = table.source
    if rows.size < MIN_POINTS:
        raise InputError(
            f"{source}{label}: {rows.size} usable {_plural(rows.size, table.row_word)}, at least "
            f"{MIN_POINTS} are needed (rows with empty cells are dropped{emptiest}). Record a "
            "longer stretch of the path, or fill the empty cells."
        )
    t = _times(table, chosen, values, options)
    if t is not None:
        _refuse_bad_times(table, (chosen.get("t") or chosen["frame"]).header, t, rows)
    x, y = values["x"], values["y"]
    sigma = values.get("sigma")
    if sigma is not None:
        if (sigma <= 0).any():
            index = int(np.argmax(sigma <= 0))
            raise InputError(
                f'{source}, {table.row_word} {rows[index]}, column "{chosen["sigma"].header}": '
                f"found {float(sigma[index])!r}, expected a positive standard error. Correct it or "
                "leave the sigma column out."
            )
        if chosen["sigma"].unit:
            unit = _unit_of(table, chosen["sigma"], parse_length_unit)
            try:
                sigma = sigma * length_factor(unit, units["length"])
            except InputError as exc:
                raise InputError(f'{source}, column "{chosen["sigma"].header}": {exc}') from None
    if np.ptp(x) == 0 and np.ptp(y) == 0 and ("z" not in values or np.ptp(values["z"]) == 0):
        raise InputError(
            f"{source}{label}: all {x.size} positions are the same; the body never moved. "
            "Check that the tracker followed the body."
        )
    notes = list(notes)
    metadata: dict[str, Any] = {}
    length_unit = units["length"]
    if "z" in values:
        if options.calibration is not None or options.plane_mapping is not None:
            raise InputError(
                "a calibration applies to 2-D image positions, but the data have a z column. "
                "Calibrate before exporting 3-D positions, or drop the calibration."
            )
        x, y, metadata["plane"] = _to_plane(x, y, values["z"], sigma, source, length_unit, notes)
    if options.plane_mapping is not None:
        x, y, sigma, length_unit = _to_plane_of_motion(options.plane_mapping, x, y, sigma, source, metadata)
    elif options.calibration is not None:
        x, y = options.calibration.apply(x, y)
        sigma = None if sigma is None else sigma * options.calibration.scale
        metadata["calibration"] = options.calibration.describe()
        length_unit = options.calibration.unit
    elif length_unit == PIXEL and units["length_from"] != "default":
        metadata["calibration"] = None
    if units["length_from"] == "default" and options.calibration is None and options.plane_mapping is None:
        notes.append("no length unit in the header or the options; assuming m.")
    if t is not None and units["time_from"] == "default":
        notes.append("no time unit in the header or the options; assuming s.")
    if not table.has_header:
        notes.append("no header: the columns were read by position as "
                     f"{', '.join(str(c) for c in table.frame.columns)}.")
    notes.extend(table.notes)
    if table.title_lines:
        notes.append(f"the header is the line below the title ({'; '.join(table.title_lines)}); "
                     "the title was skipped.")
    for note in notes:
        warnings.warn(f"{source}{label}: {note}", ForcefitWarning, stacklevel=4)
    recognised, unknown = unused_columns(table, chosen)
    metadata.update(
        source=source,
        layout=table.layout,
        decimal_comma=table.decimal_comma,
        columns={role: column.header for role, column in chosen.items()},
        units_from={"length": units["length_from"], "time": units["time_from"]},
        first_row=int(rows[0]),
        last_row=int(rows[-1]),
        unused_columns=recognised + unknown,
        unrecognised_columns=unknown,
        title_lines=list(table.title_lines),
        description=table.description,
        warnings=notes,
    )
    if units["time_from"] == "date-times" and "t" in chosen:
        metadata["time_origin"] = date_time_origin(table, chosen["t"])
    name = options.name or (Path(source).stem if source != "<DataFrame>" else "track")
    return Track(
        t=t, x=x, y=y, sigma=sigma, length_unit=length_unit, time_unit=units["time"],
        name=f"{name}{label}", metadata=metadata, source_rows=rows,
    )


def _column_notes(table: RawTable, chosen: Mapping[str, Column], options: _Options) -> list[str]:
    """Notes on the columns: those not recognised (and so not used), and a path left without
    times when one of them may hold the times."""
    _, unknown = unused_columns(table, chosen)
    if not unknown:
        return []
    listed = ", ".join(f'"{header}"' for header in unknown)
    which = f"the column {listed} was" if len(unknown) == 1 else f"the columns {listed} were"
    if "t" not in chosen and "frame" not in chosen and options.frame_rate is None:
        return [f"no time column was recognised, so the path is read without times (shape only); "
                f"{which} not recognised. If one holds the times, name it: "
                f'--column t="{unknown[0]}" (t="{unknown[0]}" in Python).']
    return [f"{which[4:]} not recognised and not used. If one holds t, x, y or sigma, name it "
            f'with --column ROLE=NAME (e.g. --column sigma="{unknown[0]}").']


def _dropped_note(table: RawTable, chosen: Mapping[str, Column],
                  numeric: Mapping[str, tuple[FloatArray, np.ndarray]], index: np.ndarray) -> str:
    """Which rows were left out for an empty cell: their row numbers, the empty columns and,
    where known, their times."""
    time_role = "t" if "t" in numeric else "frame" if "frame" in numeric else None
    named = []
    for position in index[:8]:
        empty = [chosen[role].header for role, (_, missing) in numeric.items() if missing[position]]
        text = f"{table.row_word} {table.rows[position]} (empty: {', '.join(empty)}"
        if time_role is not None and not numeric[time_role][1][position]:
            text += f"; {chosen[time_role].header} = {numeric[time_role][0][position]:.12g}"
        named.append(text + ")")
    more = f" and {index.size - 8} more" if index.size > 8 else ""
    return (f"{index.size} {_plural(index.size, table.row_word)} left out for empty cells (lost "
            f"frames): {', '.join(named)}{more}.")


def load_tracks(
    source: Source,
    *,
    t: str | None = None,
    x: str | None = None,
    y: str | None = None,
    z: str | None = None,
    sigma: str | None = None,
    frame: str | None = None,
    id: str | None = None,  # noqa: A002 - the column's role is called id
    length_unit: str | None = None,
    time_unit: str | None = None,
    frame_rate: float | None = None,
    calibration: Calibration | None = None,
    name: str | None = None,
    sheet: str | int = 0,
    track_id: str | None = None,
    plane_mapping: PlaneMapping | None = None,
    video: Mapping[str, Any] | None = None,
    force_units: bool = False,
) -> list[Track]:
    """Read every track in a file or DataFrame (one per value of the id column).

    Parameters
    ----------
    source : path-like or DataFrame
        CSV, TSV, semicolon-separated (decimal commas allowed), whitespace-separated
        text, Excel (.xlsx), Parquet, JSON records, a DataFrame, or a video (.mp4,
        .avi, .mov, .mkv: the marker is tracked first, see `forcefit.track_video`).
    t, x, y, z, sigma, frame, id : str, optional
        Column names to use, overriding detection (case-insensitive).
    length_unit, time_unit : str, optional
        Units of the raw positions and times where the header states none.
    frame_rate : float, optional
        Frames per second, to turn a frame-number column into times in s.
    calibration : Calibration, optional
        Converts raw (pixel) positions to lengths.
    name : str, optional
        Name of the track(s); default the file name without its ending.
    sheet : str or int
        Excel sheet.
    track_id : str, optional
        Read only the track with this id.
    plane_mapping : PlaneMapping, optional
        Maps image positions onto the plane of motion (a camera looking at it from an
        angle); instead of ``calibration``.
    video : mapping, optional
        Keyword options of `forcefit.track_video` for a video source.
    force_units : bool
        Use ``length_unit`` and ``time_unit`` even where a header states another unit
        (by default the header wins, with a note).

    Returns
    -------
    list of Track
        In the order the ids first appear; each track's metadata records the source,
        the columns used, where the units came from and the rows dropped.

    Examples
    --------
    >>> frame = pd.DataFrame({"run": ["a"] * 3 + ["b"] * 3, "x [mm]": [0, 1, 2, 5, 6, 8],
    ...                       "y [mm]": [0, 1, 0, 0, 2, 1]})
    >>> [(track.name, track.length_unit) for track in load_tracks(frame)]
    [('track[a]', 'mm'), ('track[b]', 'mm')]
    """
    table, tracked = _read_source(source, sheet, video, plane_mapping, calibration)
    explicit = {"t": t, "x": x, "y": y, "z": z, "sigma": sigma, "frame": frame, "id": id}
    chosen = map_columns(table, explicit)
    options = _Options(
        length_unit=length_unit, time_unit=time_unit, frame_rate=frame_rate,
        calibration=calibration, name=name, plane_mapping=plane_mapping, force_units=force_units,
    )
    notes: list[str] = _column_notes(table, chosen, options)
    units = _units(table, chosen, options, notes)
    used = [role for role in NUMERIC_ROLES if role in chosen and _is_used(role, chosen, options)]
    numeric = {role: numbers(table, chosen[role]) for role in used}
    missing = np.zeros(len(table.frame), dtype=bool)
    for _, empty in numeric.values():
        missing |= empty
    emptiest = ""
    if numeric:
        role = max(numeric, key=lambda r: int(numeric[r][1].sum()))
        if numeric[role][1].any():
            emptiest = f'; column "{chosen[role].header}" has {int(numeric[role][1].sum())} empty cells'
    ids = track_ids(table, chosen["id"]) if "id" in chosen else np.full(len(table.frame), "")
    wanted = [value for value in pd.unique(ids) if track_id is None or value == str(track_id)]
    if not wanted:
        raise InputError(f"{table.source}: no track with id {track_id!r}; the ids are: "
                         f"{', '.join(map(str, pd.unique(ids)))}.")
    tracks = []
    for value in wanted:
        member = (ids == value) & ~missing
        rows = table.rows[member]
        values = {role: array[member] for role, (array, _) in numeric.items()}
        for role, array in values.items():
            _refuse_bad_values(table, chosen[role], array, rows)
        label = f"[{value}]" if "id" in chosen else ""
        lost = np.flatnonzero((ids == value) & missing)
        own = notes + ([_dropped_note(table, chosen, numeric, lost)] if lost.size else [])
        track = _make_track(table, chosen, values, rows, units, options, label, own, emptiest)
        dropped = table.rows[(ids == value) & missing]
        tracks.append(track.with_metadata(
            n_rows_read=int(member.sum() + dropped.size),
            dropped_rows=int(dropped.size),
            dropped_row_numbers=dropped[:50].tolist(),
            **({"video": tracked} if tracked is not None else {}),
        ))
    return tracks


def _is_used(role: str, chosen: Mapping[str, Column], options: _Options) -> bool:
    """Whether a detected column is read at all (a frame column only stands in for times)."""
    if role == "frame":
        return options.frame_rate is not None or "t" not in chosen
    if role == "t":
        return options.frame_rate is None
    return True


def _plural(count: int, word: str) -> str:
    return word if count == 1 else f"{word}s"


def load_track(source: Source, *, track_id: str | None = None, **options: Any) -> Track:
    """Read one track from a file or DataFrame.

    Takes the same options as `load_tracks`. When the file holds several tracks
    (an id column), ``track_id`` picks one.

    Examples
    --------
    >>> frame = pd.DataFrame({"t (ms)": [0, 40, 80, 120], "X": [0.0, 1.0, 2.0, 2.5],
    ...                       "Y": [0.0, 0.8, 1.2, 1.3]})
    >>> track = load_track(frame, length_unit="px")
    >>> track.time_unit, track.length_unit, track.n_points
    ('ms', 'px', 4)
    """
    tracks = load_tracks(source, track_id=track_id, **options)
    if len(tracks) > 1:
        names = ", ".join(track.name for track in tracks)
        raise InputError(
            f"the source holds {len(tracks)} tracks ({names}). Pick one with track_id "
            "(--track-id on the command line) or read them all with load_tracks."
        )
    return tracks[0]


def save_track(track: Track, path: str | os.PathLike[str]) -> Path:
    """Write a track as CSV with units in the header, whole or not at all.

    Comment lines (``#``) at the top carry the track's name and any simulation
    truth, so a file states what it holds. `load_track` reads it back.
    """
    lines = [f"# forcefit track: {track.name}"]
    for key, value in track.metadata.items():
        if key in ("truth", "scenario", "expected"):
            lines.append(f"# {key}: {value}")
    body = track.to_frame().to_csv(index=False, float_format="%.10g", lineterminator="\n")
    return write_atomic(path, "\n".join(lines) + "\n" + body)


# Videos and perspective: a video is tracked into a table first; plane marks map image
# positions onto the plane of motion instead of a calibration.


def _read_source(
    source: Source, sheet: str | int, video: Mapping[str, Any] | None,
    plane_mapping: PlaneMapping | None, calibration: Calibration | None,
) -> tuple[RawTable, dict[str, Any] | None]:
    """The raw table of a file or DataFrame, tracking a video first; and the tracking report."""
    if plane_mapping is not None and calibration is not None:
        raise InputError("plane marks and a calibration were both given; the plane marks already fix "
                         "the scale, origin and axes. Give one of them (--plane-marks or --scale/--marks).")
    if isinstance(source, pd.DataFrame) or not is_video(source):
        if set(video or ()) - {"progress"}:
            raise InputError(f"{source if not isinstance(source, pd.DataFrame) else '<DataFrame>'}: "
                             "tracking options apply to videos (.mp4, .avi, .mov, .mkv) only; drop them.")
        return read_table(source, sheet=sheet), None
    tracked = track_video(source, **dict(video or {}))
    if plane_mapping is not None:
        plane_mapping.check_image_size((tracked.width, tracked.height), str(source))
    table = read_table(tracked.to_frame(), sheet=sheet)
    return replace(table, source=str(source), layout="video"), tracked.describe()


def _to_plane_of_motion(
    mapping: PlaneMapping, x: FloatArray, y: FloatArray, sigma: FloatArray | None, source: str,
    metadata: dict[str, Any],
) -> tuple[FloatArray, FloatArray, FloatArray | None, str]:
    """Plane positions, their sigma (scaled by the local pixel size) and unit; records the mapping."""
    if sigma is not None:
        sigma = sigma * mapping.local_scale(x, y)
    x, y = mapping.apply(x, y, source=source)
    metadata["plane_mapping"] = mapping.describe()
    return x, y, sigma, mapping.unit
