"""Which column holds what: role detection from headers, explicit mapping, numeric cells."""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._types import FloatArray
from ..errors import InputError
from ..units import parse_length_unit, parse_time_unit
from .tables import RawTable

ROLE_ALIASES: Mapping[str, tuple[str, ...]] = {
    "t": ("t", "time", "times", "timestamp", "time_stamp", "epoch", "jd", "mjd"),
    "frame": ("frame", "frames", "frame_number", "frame_no", "frame_index", "frame_nr"),
    "x": ("x", "xpos", "x_pos", "pos_x", "position_x", "x_position"),
    "y": ("y", "ypos", "y_pos", "pos_y", "position_y", "y_position"),
    "z": ("z", "zpos", "z_pos", "pos_z", "position_z", "z_position"),
    "sigma": ("sigma", "sigma_xy", "sigma_pos", "err", "error", "pos_err", "position_error",
              "uncertainty", "std", "sd", "stderr"),
    "id": ("id", "run", "run_id", "track", "track_id", "object", "body", "trajectory"),
}
"""Header names (case-insensitive, spaces as underscores) recognised for each role."""

ROLES = tuple(ROLE_ALIASES)
NUMERIC_ROLES = ("t", "frame", "x", "y", "z", "sigma")
DAY_COLUMNS = frozenset({"jd", "mjd"})

_ALIAS_ROLE = {alias: role for role, aliases in ROLE_ALIASES.items() for alias in aliases}
_UNIT_IN_HEADER = re.compile(r"^(?P<name>.*?)\s*[\[(](?P<unit>[^\])]*)[\])]\s*$")
_CLOCK = re.compile(r"^[+-]?\d+:\d{1,2}(:\d{1,2})?([.,]\d+)?$")
_MISSING = frozenset({"", "nan", "-nan"})


@dataclass(frozen=True)
class Column:
    """A column of the source chosen for a role, with the unit its header states."""

    header: str
    role: str
    unit: str | None


def normalise(name: str) -> str:
    """A header as a key: lower case, outer quotes gone, spaces and dashes as underscores."""
    return re.sub(r"[\s\-]+", "_", name.strip().strip("\"'").lower())


def classify(header: str) -> Column | None:
    """Role and unit of a header cell such as ``x [px]``, ``t (ms)`` or ``x_mm``."""
    match = _UNIT_IN_HEADER.match(header)
    name, unit = (match["name"], match["unit"].strip() or None) if match else (header, None)
    key = normalise(name)
    if key in _ALIAS_ROLE:
        return Column(header, _ALIAS_ROLE[key], unit)
    if "_" in key and unit is None:
        base, suffix = key.rsplit("_", 1)
        role = _ALIAS_ROLE.get(base)
        if role is not None and _is_unit_for(role, suffix):
            return Column(header, role, suffix)
    return None


def _is_unit_for(role: str, text: str) -> bool:
    if role in ("id", "frame"):
        return False
    parse = parse_time_unit if role == "t" else parse_length_unit
    try:
        parse(text)
    except InputError:
        return False
    return True


def _find(table: RawTable, role: str, wanted: str, headers: list[str]) -> str:
    """The header the caller named: an exact match first, else the only case-insensitive one."""
    if wanted in headers:
        return wanted
    matches = [h for h in headers if h.strip().lower() == wanted.strip().lower()]
    if len(matches) == 1:
        return matches[0]
    if matches:
        raise InputError(
            f'{table.source}: several columns match "{wanted}" (asked for as {role}) when case is '
            f"ignored: {', '.join(matches)}. Name one exactly as the header writes it."
        )
    raise InputError(
        f'{table.source}: no column named "{wanted}" (asked for as {role}); '
        f"the columns are: {', '.join(headers)}."
    )


def map_columns(table: RawTable, explicit: Mapping[str, str | None]) -> dict[str, Column]:
    """Choose the column for each role: explicit names first, then detected headers."""
    headers = [str(column) for column in table.frame.columns]
    chosen: dict[str, Column] = {}
    for role, wanted in explicit.items():
        if wanted is None:
            continue
        header = _find(table, role, wanted, headers)
        detected = classify(header)
        chosen[role] = Column(header, role, detected.unit if detected else None)
    taken = {column.header for column in chosen.values()}
    for header in headers:
        column = classify(header)
        if column is None or header in taken or explicit.get(column.role) is not None:
            continue
        if column.role in chosen:
            raise InputError(
                f'{table.source}: columns "{chosen[column.role].header}" and "{header}" both '
                f"look like {column.role}. Name the one to use (e.g. {column.role}=\"{header}\")."
            )
        chosen[column.role] = column
    for role in ("x", "y"):
        if role not in chosen:
            raise InputError(
                f"{table.source}: found no {role} column among: {', '.join(headers)}. "
                f'Name it (e.g. {role}="{headers[0]}") or write a header such as "{role} [px]".'
            )
    return chosen


def _clock_seconds(text: pd.Series) -> FloatArray:
    """Seconds of ``[h:]mm:ss[.f]`` clock readings (nan where a cell is not one)."""
    values = np.full(text.size, np.nan)
    for index, cell in enumerate(text):
        if _CLOCK.match(cell):
            parts = [float(part.replace(",", ".")) for part in cell.lstrip("+-").split(":")]
            seconds = sum(part * 60.0**power for power, part in enumerate(reversed(parts)))
            values[index] = -seconds if cell.startswith("-") else seconds
    return values


def numbers(table: RawTable, column: Column) -> tuple[FloatArray, np.ndarray]:
    """Values of a column as floats, and a mask of the empty (dropped-frame) cells.

    Dates and durations (a time column of datetimes or ``h:mm:ss`` clock readings)
    become seconds since the first sample.
    """
    cells = table.frame[column.header]
    if pd.api.types.is_datetime64_any_dtype(cells):
        seconds = (cells - cells.dropna().iloc[0]).dt.total_seconds().to_numpy(np.float64)
        return seconds, np.isnan(seconds)
    if pd.api.types.is_timedelta64_dtype(cells):
        seconds = cells.dt.total_seconds().to_numpy(np.float64)
        return seconds, np.isnan(seconds)
    if pd.api.types.is_numeric_dtype(cells) and not pd.api.types.is_bool_dtype(cells):
        values = cells.to_numpy(dtype=np.float64, na_value=np.nan)
        return values, np.isnan(values)
    text = cells.astype(object).where(cells.notna(), "").astype(str).str.strip()
    text = text.str.replace("\u2212", "-", regex=False)            # the minus sign
    if table.decimal_comma:
        text = text.str.replace(",", ".", regex=False)
    missing = text.str.lower().isin(_MISSING).to_numpy()
    values = pd.to_numeric(text.where(~missing, "nan"), errors="coerce").to_numpy(np.float64)
    bad = np.isnan(values) & ~missing
    if bad.any() and column.role == "t":
        clock = _clock_seconds(text)
        values = np.where(bad, clock, values)
        bad = np.isnan(values) & ~missing
    if bad.any():
        index = int(np.argmax(bad))
        hint = " (times as numbers, e.g. seconds 1.5, or as h:mm:ss.s)" if column.role == "t" else ""
        raise InputError(
            f'{table.source}, {table.row_word} {table.rows[index]}, column "{column.header}": '
            f'found "{text.iloc[index]}", expected a number{hint}. Fill the value in or delete the '
            f"{table.row_word}."
        )
    return values, missing


def track_ids(table: RawTable, column: Column) -> np.ndarray:
    """The id of each record as text (whole numbers without a decimal point).

    Raises `InputError` for an empty id cell: which run a row belongs to must be said.
    """
    cells = table.frame[column.header]
    if pd.api.types.is_float_dtype(cells) and np.all(np.isnan(cells) | (cells == np.round(cells))):
        text = cells.map(lambda v: "" if pd.isna(v) else str(int(v)))
    else:
        text = cells.astype(object).where(cells.notna(), "").astype(str).str.strip()
    empty = (text == "").to_numpy()
    if empty.any():
        index = int(np.argmax(empty))
        raise InputError(
            f'{table.source}, {table.row_word} {table.rows[index]}, column "{column.header}": the '
            "id is empty, so the row belongs to no track. Fill in the run's id or delete the row."
        )
    return text.to_numpy(dtype=str)
