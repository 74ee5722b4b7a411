"""Vector tables exported by JPL's Horizons ephemeris service, read as they are saved.

Horizons writes a header of ``Name : value`` lines, then the table between the markers
``$$SOE`` and ``$$EOE``, in one of two layouts:

* comma-separated (``CSV format = YES``): a header line (``JDTDB, Calendar Date (TDB), X, Y,
  Z, VX, ...``) above the first marker and one row per epoch, each ending in a comma;
* labelled (the default): per epoch a line ``2451545.000000000 = A.D. 2000-Jan-01 ... TDB``
  followed by lines such as ``X =-1.77E-01 Y = 2.87E-01 Z = 4.01E-02``.

Positions are in km or au (``Output units : KM-S``, ``AU-D`` or ``KM-D``), epochs are Julian
dates (days). The API's JSON reply, whose ``result`` holds the same text, reads alike. Only
the epoch and the position columns are kept: x, y, z about the table's centre body, which the
reader names (a barycentre is not the attracting body; the reader warns).
"""

from __future__ import annotations

import datetime
import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import InputError

START, END = "$$SOE", "$$EOE"
_LABELLED = re.compile(r"([A-Z]{1,2})\s*=\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[Ee][-+]?\d+)?)")
_EPOCH = re.compile(r"^\s*(\d+(?:\.\d*)?)\s*=\s*(.*)$")
_CALENDAR = re.compile(r"^\s*(?:A\.D\.\s*)?(\d{4})-([A-Za-z]{3})-(\d{1,2})"
                       r"(?:\s+(\d{1,2}):(\d{2})(?::(\d{2}(?:\.\d*)?))?)?\s*([A-Z]{2,3})?\s*$")
_MONTHS = ("jan", "feb", "mar", "apr", "may", "jun", "jul", "aug", "sep", "oct", "nov", "dec")
_UNITS = {"KM-S": "km", "KM-D": "km", "AU-D": "au"}
J2000, EPOCH_2000 = 2451545.0, datetime.datetime(2000, 1, 1)   # JD of 2000-Jan-01 12:00


@dataclass(frozen=True)
class HorizonsTable:
    """The positions of a Horizons vector table and what its header says of them.

    Attributes
    ----------
    frame : DataFrame
        Columns ``jd [d]``, ``x [unit]``, ``y [unit]``, ``z [unit]`` (floats).
    rows : ndarray of int
        1-based line of the text where each epoch's record starts.
    target, centre, frame_name, time_scale, length_unit : str
        The header's target and centre bodies, reference frame, the epochs' time scale
        (``TDB`` unless the table says otherwise) and the positions' unit (km or au).
    """

    frame: pd.DataFrame
    rows: np.ndarray
    target: str
    centre: str
    frame_name: str
    time_scale: str
    length_unit: str

    @property
    def about_barycentre(self) -> bool:
        """True when the positions are taken about a barycentre, not a body."""
        return "barycent" in self.centre.lower()

    def describe(self) -> str:
        """One line for the reading notes: what the table holds."""
        return (f"a JPL Horizons vector table of {self.target or 'an unnamed target'} about "
                f"{self.centre or 'an unnamed centre'}{f' ({self.frame_name})' if self.frame_name else ''}; "
                f"{self.frame.shape[0]} epochs as Julian dates ({self.time_scale}), positions in "
                f"{self.length_unit}")


def is_horizons(text: str) -> bool:
    """True for text holding a Horizons table (its start-of-ephemeris marker on a line)."""
    return re.search(r"^\s*\$\$SOE\s*$", text, flags=re.MULTILINE) is not None


def read_horizons(text: str, source: str) -> HorizonsTable:
    """Parse a Horizons vector table (either layout) from its text.

    Parameters
    ----------
    text : str
        The whole export (or the ``result`` of the API's JSON reply).
    source : str
        The file, for messages.

    Raises
    ------
    InputError
        An observer or elements table, a table cut short, or records without positions,
        each named by its line and with what to ask Horizons for instead.
    """
    lines = text.splitlines()
    start = next(i for i, line in enumerate(lines) if line.strip() == START)
    end = next((i for i in range(start + 1, len(lines)) if lines[i].strip() == END), None)
    if end is None:
        raise InputError(
            f"{source}: the Horizons table starts at line {start + 1} ({START}) but never ends "
            f"(no {END} line): the export was cut short. Save the whole reply again.")
    header = {key.strip().lower(): value.strip() for key, _, value in
              (line.partition(":") for line in lines[:start] if ":" in line)}
    kind = header.get("output type", "") + " " + header.get("ephemeris", "")
    column_line = next((lines[i] for i in range(start - 1, -1, -1)
                        if lines[i].strip() and not set(lines[i].strip()) <= {"*"}), "")
    names = {cell.strip().upper() for cell in column_line.split(",")}
    if ("cartesian" not in kind.lower() and not {"X", "Y", "Z"} <= names
            and not _has_positions(lines[start + 1:end])):
        raise InputError(
            f"{source}: a Horizons table without x, y, z positions (lines {start + 2}-{end}); it looks "
            "like an observer (RA/Dec) or orbital-elements table. Ask Horizons for a vector table "
            "('Vector Table', position and velocity) about the attracting body, e.g. the Sun.")
    units_text = (header.get("output units") or "AU-D").split()[0].upper()
    if units_text not in _UNITS:
        raise InputError(
            f"{source}: the Horizons header says 'Output units : {units_text}'; forcefit reads KM-S, "
            "KM-D and AU-D. Ask for one of those.")
    length = _UNITS[units_text]
    body = [(i, lines[i]) for i in range(start + 1, end) if lines[i].strip()]
    if not body:
        raise InputError(f"{source}: the Horizons table between lines {start + 1} and {end + 1} is "
                         "empty. Widen the time span or shorten the step.")
    if "," in body[0][1]:
        epochs, positions, rows, scale = _comma_rows(body, column_line, source)
    else:
        epochs, positions, rows, scale = _labelled_rows(body, source)
    frame = pd.DataFrame({"jd [d]": epochs, f"x [{length}]": positions[:, 0],
                          f"y [{length}]": positions[:, 1], f"z [{length}]": positions[:, 2]})
    return HorizonsTable(
        frame=frame, rows=np.asarray(rows), target=_body(header.get("target body name", "")),
        centre=_body(header.get("center body name", "")), frame_name=header.get("reference frame", ""),
        time_scale=scale, length_unit=length)


def _body(text: str) -> str:
    """``Mars (499)    {source: DE441}`` -> ``Mars (499)``."""
    return text.split("{")[0].strip()


def _has_positions(lines: list[str]) -> bool:
    return any(name == "X" for line in lines[:8] for name, _ in _LABELLED.findall(line))


def _comma_rows(body: list[tuple[int, str]], column_line: str, source: str
                ) -> tuple[np.ndarray, np.ndarray, list[int], str]:
    names = [cell.strip().upper() for cell in column_line.split(",")]
    try:
        where = [names.index(name) for name in ("X", "Y", "Z")]
    except ValueError:
        raise InputError(
            f"{source}: the Horizons column line ({column_line.strip()[:80]}) names no X, Y and Z "
            "columns. Ask for a vector table with positions.") from None
    julian = next((k for k, name in enumerate(names) if name.startswith("JD")), None)
    calendar = next((k for k, name in enumerate(names) if name.startswith("CALENDAR")), None)
    epoch_column = julian if julian is not None else calendar if calendar is not None else 0
    scale = names[julian][2:] if julian is not None else names[epoch_column].partition("(")[2].rstrip(")")
    epochs, positions, rows = [], [], []
    for index, line in body:
        cells = [cell.strip() for cell in line.split(",")]
        try:
            epochs.append(float(cells[epoch_column]) if julian is not None
                          else _julian_date(cells[epoch_column], source, index + 1))
            positions.append([float(cells[k]) for k in where])
        except (ValueError, IndexError):
            raise InputError(
                f"{source}, line {index + 1}: expected the epoch and X, Y, Z as numbers in columns "
                f"{epoch_column + 1} and {', '.join(str(k + 1) for k in where)}, found "
                f"'{line.strip()[:80]}'. Save the Horizons reply unedited.") from None
        rows.append(index + 1)
    return np.array(epochs), np.array(positions), rows, scale or "TDB"


def _labelled_rows(body: list[tuple[int, str]], source: str
                   ) -> tuple[np.ndarray, np.ndarray, list[int], str]:
    epochs: list[float] = []
    positions: list[list[float]] = []
    rows: list[int] = []
    scale = "TDB"
    current: dict[str, float] = {}

    def close(line_number: int) -> None:
        if not epochs:
            return
        if not {"X", "Y", "Z"} <= current.keys():
            raise InputError(
                f"{source}, line {line_number}: the record of JD {epochs[-1]:.9f} holds no X, Y and Z. "
                "Ask Horizons for a vector table with positions and save the reply unedited.")
        positions.append([current["X"], current["Y"], current["Z"]])

    for index, line in body:
        epoch, calendar = _EPOCH.match(line), _CALENDAR.match(line)
        if epoch is not None or calendar is not None:
            close(rows[-1] if rows else index + 1)
            epochs.append(float(epoch.group(1)) if epoch is not None
                          else _julian_date(line, source, index + 1))
            rows.append(index + 1)
            current = {}
            words = (epoch.group(2) if epoch is not None else line).split()
            if words and words[-1].isalpha() and words[-1].isupper():
                scale = words[-1]
            continue
        if not epochs:
            raise InputError(f"{source}, line {index + 1}: expected an epoch line "
                             f"('2451545.000000000 = A.D. ...'), found '{line.strip()[:80]}'.")
        current.update({name: float(value) for name, value in _LABELLED.findall(line)})
    close(rows[-1])
    return np.array(epochs), np.array(positions), rows, scale


def _julian_date(text: str, source: str, line: int) -> float:
    """``A.D. 2000-Jan-01 12:00:00.0000`` as a Julian date (days), for tables without JD.

    The Gregorian calendar throughout, so dates before 1583 are refused (Horizons writes
    them in the Julian calendar)."""
    match = _CALENDAR.match(text)
    if match is None or match.group(2).lower() not in _MONTHS:
        raise InputError(f"{source}, line {line}: expected a date such as 'A.D. 2000-Jan-01 12:00:00', "
                         f"found '{text.strip()[:60]}'. Save the Horizons reply unedited.")
    year, day = int(match.group(1)), int(match.group(3))
    if year < 1583:
        raise InputError(f"{source}, line {line}: a calendar date before 1583 ({text.strip()[:40]}) is in "
                         "the Julian calendar. Ask Horizons for Julian dates (JD) as well.")
    moment = datetime.datetime(year, _MONTHS.index(match.group(2).lower()) + 1, day)
    seconds = (int(match.group(4) or 0) * 3600 + int(match.group(5) or 0) * 60
               + float(match.group(6) or 0.0))
    return J2000 + (moment - EPOCH_2000).days + (seconds - 43200.0) / 86400.0
