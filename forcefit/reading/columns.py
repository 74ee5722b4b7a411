"""Which column holds what: role detection from headers, explicit mapping, numeric cells."""

from __future__ import annotations

import re
import unicodedata
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._types import FloatArray
from ..errors import InputError
from ..units import parse_length_unit, parse_time_unit
from .tables import RawTable

ROLE_ALIASES: Mapping[str, tuple[str, ...]] = {
    "t": ("t", "time", "times", "timestamp", "time_stamp", "epoch", "zeit", "uhrzeit", "temps", "tiempo",
          "tempo", "instant", "instante", "tijd", "czas"),
    "frame": ("frame", "frames", "frame_number", "frame_no", "frame_index", "frame_nr", "bild", "bilder",
              "bildnummer", "bild_nr", "einzelbild", "image", "images", "no_image", "numero_image",
              "cuadro", "fotograma", "numero_de_cuadro", "fotogramma", "quadro", "fotograma_n"),
    "x": ("x", "xpos", "x_pos", "pos_x", "position_x", "x_position", "x_koordinate", "abscisse",
          "posicion_x", "coordenada_x", "posizione_x", "coordinata_x", "posicao_x", "coordenada_x"),
    "y": ("y", "ypos", "y_pos", "pos_y", "position_y", "y_position", "y_koordinate", "ordonnee",
          "posicion_y", "coordenada_y", "posizione_y", "coordinata_y", "posicao_y"),
    "z": ("z", "zpos", "z_pos", "pos_z", "position_z", "z_position", "z_koordinate", "cote",
          "posicion_z", "coordenada_z", "posizione_z", "coordinata_z", "posicao_z"),
    "sigma": ("sigma", "sigma_xy", "sigma_pos", "err", "error", "pos_err", "position_error",
              "uncertainty", "std", "sd", "stderr", "fehler", "unsicherheit", "messunsicherheit",
              "erreur", "incertitude", "incertidumbre", "errore", "incertezza", "erro", "incerteza"),
    "id": ("id", "run", "run_id", "track", "track_id", "object", "body", "trajectory", "lauf",
           "versuch", "essai", "ensayo", "prova", "ensaio"),
}
"""Header names (case-insensitive, spaces as underscores) recognised for each role."""

ROLES = tuple(ROLE_ALIASES)
NUMERIC_ROLES = ("t", "frame", "x", "y", "z", "sigma")
JULIAN_COLUMNS = frozenset({
    "jd", "jd_tdb", "jdtdb", "jd_tt", "jdtt", "jd_utc", "jdutc", "jd_ut", "jd_tcb", "bjd", "bjd_tdb",
    "bjdtdb", "hjd", "hjd_utc", "mjd", "mjd_tdb", "mjdtdb", "mjd_utc", "mjdutc", "mjd_tt",
    "julian_date", "julian_day", "date_jd", "jd_date",
})
"""Julian-date headers (the time scale may follow: JD_TDB, JDTDB, BJD): times in days."""

DAY_COLUMNS = JULIAN_COLUMNS
TIME_SCALES = frozenset({"tdb", "tt", "utc", "ut", "ut1", "tcb", "tcg", "tai"})
"""Time scales written where a unit would go ("JD (TDB)"); the unit is then days."""

_ALIAS_ROLE = {alias: role for role, aliases in ROLE_ALIASES.items() for alias in aliases}
_ALIAS_ROLE.update({alias: "t" for alias in JULIAN_COLUMNS})
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
    """A header as a key: lower case, accents and outer quotes gone, spaces, dots and dashes as
    underscores.

    Examples
    --------
    >>> normalise("Posición X"), normalise("Ordonnée"), normalise("Nº image")
    ('posicion_x', 'ordonnee', 'no_image')
    """
    text = unicodedata.normalize("NFKD", name.strip().strip("\"'"))
    text = "".join(char for char in text if not unicodedata.combining(char)).lower()
    text = text.replace("º", "o").replace("°", "o")
    return re.sub(r"[\s\-.]+", "_", text).strip("_")


def header_unit(header: str) -> tuple[str, str | None]:
    """A header's name and the unit it states in brackets: ``"x [px]"`` → ``("x", "px")``.

    Examples
    --------
    >>> header_unit("abscisse (px)"), header_unit("Zeit"), header_unit("t []")
    (('abscisse', 'px'), ('Zeit', None), ('t', None))
    """
    match = _UNIT_IN_HEADER.match(header)
    if match is None:
        return header, None
    return match["name"], match["unit"].strip() or None


def classify(header: str) -> Column | None:
    """Role and unit of a header cell such as ``x [px]``, ``t (ms)`` or ``x_mm``."""
    name, unit = header_unit(header)
    key = normalise(name)
    if key in JULIAN_COLUMNS and unit is not None and unit.lower() in TIME_SCALES:
        unit = None                                   # "JD (TDB)": a time scale, in days
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
    """Choose the column for each role: explicit names first, then detected headers.

    A unit in brackets after a name (``"abscisse (px)"``) is read whether or not the name
    itself is one forcefit recognises.
    """
    headers = [str(column) for column in table.frame.columns]
    chosen: dict[str, Column] = {}
    for role, wanted in explicit.items():
        if wanted is None:
            continue
        header = _find(table, role, wanted, headers)
        detected = classify(header)
        chosen[role] = Column(header, role, detected.unit if detected else header_unit(header)[1])
    taken = {column.header for column in chosen.values()}
    for header in headers:
        column = classify(header)
        if column is None or header in taken or explicit.get(column.role) is not None:
            continue
        if column.role in chosen:
            raise InputError(
                f'{table.source}: columns "{chosen[column.role].header}" and "{header}" both '
                f"look like {column.role}. Name the one to use: --column {column.role}=\"{header}\" "
                f'on the command line ({column.role}="{header}" in Python).'
            )
        chosen[column.role] = column
    for role in ("x", "y"):
        if role not in chosen:
            raise InputError(
                f"{table.source}: found no {role} column among: {', '.join(headers)}. "
                f"{_naming_hint(role, headers, chosen)}"
            )
    return chosen


def _naming_hint(role: str, headers: list[str], chosen: Mapping[str, Column]) -> str:
    """How to name the column for ``role``: the CLI syntax with a column no other role took."""
    taken = {column.header for column in chosen.values()}
    free = [h for h in headers if h not in taken and classify(h) is None]
    if free:
        return (f'Name it with --column {role}="{free[0]}" on the command line ({role}="{free[0]}" in '
                f'Python), or write a header such as "{role} [px]".')
    return f'Write a header such as "{role} [px]" above its values.'


def unused_columns(table: RawTable, chosen: Mapping[str, Column]) -> tuple[list[str], list[str]]:
    """The columns no role uses: those forcefit recognised (a frame column beside a time
    column) and those it did not recognise at all."""
    used = {column.header for column in chosen.values()}
    rest = [str(header) for header in table.frame.columns if str(header) not in used]
    recognised = [header for header in rest if classify(header) is not None]
    return recognised, [header for header in rest if classify(header) is None]


def _clock_seconds(text: pd.Series) -> FloatArray:
    """Seconds of ``[h:]mm:ss[.f]`` clock readings (nan where a cell is not one)."""
    values = np.full(text.size, np.nan)
    for index, cell in enumerate(text):
        if _CLOCK.match(cell):
            parts = [float(part.replace(",", ".")) for part in cell.lstrip("+-").split(":")]
            seconds = sum(part * 60.0**power for power, part in enumerate(reversed(parts)))
            values[index] = -seconds if cell.startswith("-") else seconds
    return values


def _date_times(text: pd.Series, missing: np.ndarray) -> pd.Series | None:
    """The cells as date-times when every filled one is an ISO 8601 date-time, else None."""
    filled = text[~missing]
    if filled.empty or not filled.str.match(r"^\d{4}-\d{2}-\d{2}[T ]\d").all():
        return None
    stamps = pd.to_datetime(text.where(~missing, None), errors="coerce", format="ISO8601", utc=True)
    return None if stamps[~missing].isna().any() else stamps


def date_time_origin(table: RawTable, column: Column) -> str | None:
    """The first date-time of a time column that holds date-times (times then count seconds
    from it), as ISO 8601 text; None for a column of numbers or clock readings."""
    cells = table.frame[column.header]
    if pd.api.types.is_datetime64_any_dtype(cells):
        return str(cells.dropna().iloc[0].isoformat())
    if pd.api.types.is_numeric_dtype(cells):
        return None
    text = cells.astype(object).where(cells.notna(), "").astype(str).str.strip()
    stamps = _date_times(text, text.str.lower().isin(_MISSING).to_numpy())
    return None if stamps is None else str(stamps.dropna().iloc[0].isoformat())


def holds_clock_readings(table: RawTable, column: Column) -> bool:
    """Whether a column holds ``[h:]mm:ss[.f]`` clock readings (which count seconds)."""
    cells = table.frame[column.header]
    if pd.api.types.is_timedelta64_dtype(cells):
        return True
    if pd.api.types.is_numeric_dtype(cells) or pd.api.types.is_datetime64_any_dtype(cells):
        return False
    text = cells.astype(object).where(cells.notna(), "").astype(str).str.strip()
    filled = text[~text.str.lower().isin(_MISSING)]
    return bool(filled.size) and bool(filled.str.match(_CLOCK.pattern).all())


def numbers(table: RawTable, column: Column) -> tuple[FloatArray, np.ndarray]:
    """Values of a column as floats, and a mask of the empty (dropped-frame) cells.

    Dates and durations (a time column of datetimes, ISO 8601 date-time text or ``h:mm:ss``
    clock readings) become seconds since the first sample.
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
    if bad.any() and column.role == "t":
        stamps = _date_times(text, missing)
        if stamps is not None:
            seconds = (stamps - stamps.dropna().iloc[0]).dt.total_seconds().to_numpy(np.float64)
            return seconds, missing
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
