"""Read a table of samples from any supported format, keeping each row's number.

Row numbers are 1-based, as a spreadsheet or a text editor shows them, so that an
error can point at the exact line of the file.
"""

from __future__ import annotations

import csv
import io
import json
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ..errors import InputError
from .horizons import is_horizons, read_horizons

EXCEL_SUFFIXES = frozenset({".xlsx", ".xlsm", ".xls"})
PARQUET_SUFFIXES = frozenset({".parquet", ".pq"})
JSON_SUFFIXES = frozenset({".json"})

_DECIMAL_COMMA = re.compile(r"^[+-]?\d*,\d+([eE][+-]?\d+)?$")
_NA_TOKENS = frozenset({"", "nan", "NaN", "NAN", "-nan"})
_DELIMITER_NAMES = {",": "comma", ";": "semicolon", "\t": "tab", None: "whitespace"}


@dataclass(frozen=True)
class RawTable:
    """Cells exactly as read, with the row number of each.

    Attributes
    ----------
    frame : DataFrame
        One column per header cell; cells are strings (text files) or as the format
        stores them.
    rows : ndarray of int
        1-based row (line) number of each record in the source.
    source : str
        The file path, or ``"<DataFrame>"``.
    layout : str
        How it was read: ``"comma"``, ``"semicolon"``, ``"tab"``, ``"whitespace"``,
        ``"excel"``, ``"parquet"``, ``"json"``, ``"horizons"`` or ``"frame"``.
    decimal_comma : bool
        True when numbers were written with decimal commas (converted on reading).
    has_header : bool
        False when the file starts with numbers and columns were named by position.
    title_lines : tuple of str
        Lines above the header that were skipped as a title ("row 1: object: bob 1").
    description : str
        What a recognised export holds (a Horizons table's target and centre), or "".
    notes : tuple of str
        What the reader warns of (positions about a barycentre, say).
    """

    frame: pd.DataFrame
    rows: np.ndarray
    source: str
    layout: str
    decimal_comma: bool = False
    has_header: bool = True
    title_lines: tuple[str, ...] = ()
    description: str = ""
    notes: tuple[str, ...] = ()

    @property
    def row_word(self) -> str:
        """How a user finds a record: a row (text, spreadsheet) or a record (JSON)."""
        return "record" if self.layout == "json" else "row"


def read_table(source: str | os.PathLike[str] | pd.DataFrame, *, sheet: str | int = 0) -> RawTable:
    """Read ``source`` into a `RawTable`; never modifies the file.

    Parameters
    ----------
    source : path-like or DataFrame
        A CSV/TSV/semicolon/whitespace text file, an Excel workbook, a Parquet
        file, a JSON file of records, or a DataFrame.
    sheet : str or int
        Excel sheet name or 0-based index.
    """
    if isinstance(source, pd.DataFrame):
        frame = _tidy(source, "<DataFrame>")
        return RawTable(frame, np.arange(1, len(frame) + 1), "<DataFrame>", "frame")
    path = Path(source)
    if not path.exists():
        raise InputError(f"{path}: file not found. Check the path and its spelling.")
    if not path.is_file():
        raise InputError(f"{path}: is a folder, not a file. Name one file of samples.")
    if path.stat().st_size == 0:
        raise InputError(f"{path}: the file is empty. Export the tracked samples into it again.")
    suffix = path.suffix.lower()
    if suffix in EXCEL_SUFFIXES:
        return _read_excel(path, sheet)
    if suffix in PARQUET_SUFFIXES:
        return _read_parquet(path)
    if suffix in JSON_SUFFIXES:
        return _read_json(path)
    return _read_text(path)


def _tidy(frame: pd.DataFrame, source: str) -> pd.DataFrame:
    """Columns as unique strings (MultiIndex levels joined), a named index kept as a column."""
    if frame.columns.size == 0 or len(frame) == 0:
        raise InputError(f"{source}: the table is empty (no rows or no columns). Fill it with "
                         "the tracked samples.")
    named = any(name is not None for name in frame.index.names)
    frame = frame.reset_index(drop=not named)
    if isinstance(frame.columns, pd.MultiIndex):
        frame.columns = [" ".join(str(part) for part in column if str(part)) for column in frame.columns]
    frame.columns = [str(column) for column in frame.columns]
    _refuse_duplicates(list(frame.columns), source)
    return frame


def _refuse_duplicates(header: list[str], source: str) -> None:
    seen: dict[str, int] = {}
    for position, name in enumerate(header, start=1):
        if name in seen:
            raise InputError(
                f'{source}: columns {seen[name]} and {position} are both named "{name}". '
                "Rename one so that each column has its own name."
            )
        seen[name] = position


def _missing_library(path: Path, library: str, exc: ImportError) -> InputError:
    return InputError(
        f"{path}: reading this format needs the {library} package ({exc}). Install it with "
        f"pip install 'forcefit[formats]', or export the samples as CSV."
    )


def _read_excel(path: Path, sheet: str | int) -> RawTable:
    try:
        workbook = pd.ExcelFile(path)
    except ImportError as exc:
        raise _missing_library(path, "openpyxl", exc) from None
    except Exception as exc:  # openpyxl/xlrd raise many unrelated types on damaged files
        raise InputError(
            f"{path}: could not be read as an Excel workbook ({type(exc).__name__}: {exc}). "
            "Open it in a spreadsheet program and save it again as .xlsx, or export CSV."
        ) from None
    with workbook:
        names = workbook.sheet_names
        if (isinstance(sheet, int) and not 0 <= sheet < len(names)) or (
                isinstance(sheet, str) and sheet not in names):
            raise InputError(f"{path}: has no sheet {sheet!r}; its sheets are "
                             f"{', '.join(map(repr, names))}. Pick one with --sheet NAME.")
        frame = workbook.parse(sheet_name=sheet, dtype=object)
    if frame.columns.size == 0 or len(frame) == 0:
        label = names[sheet] if isinstance(sheet, int) else sheet
        raise InputError(f"{path}: sheet {label!r} is empty; the sheets are "
                         f"{', '.join(map(repr, names))}. Pick the one with data with --sheet NAME.")
    return RawTable(_tidy(frame, str(path)), np.arange(2, len(frame) + 2), str(path), "excel")


def _read_parquet(path: Path) -> RawTable:
    try:
        frame = pd.read_parquet(path)
    except ImportError as exc:
        raise _missing_library(path, "pyarrow", exc) from None
    except Exception as exc:  # pyarrow raises its own error types
        raise InputError(
            f"{path}: could not be read as a Parquet file ({type(exc).__name__}: {exc}). "
            "Write it again, or export CSV."
        ) from None
    frame = _tidy(frame, str(path))
    return RawTable(frame, np.arange(1, len(frame) + 1), str(path), "parquet")


def _read_json(path: Path) -> RawTable:
    try:
        content: Any = json.loads(path.read_text(encoding="utf-8-sig"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(
            f"{path}: is not valid JSON ({exc}). Write a list of records such as "
            '[{"t": 0.0, "x": 1.0, "y": 0.0}, ...].'
        ) from None
    if content in ({}, []):
        raise InputError(f"{path}: the table is empty (no records). Fill it with the tracked samples.")
    reply = content.get("result") if isinstance(content, dict) else None
    if isinstance(reply, str) and is_horizons(reply):
        return _horizons_table(reply, str(path), "rows are lines of the reply's result text")
    if isinstance(content, dict) and isinstance(content.get("records"), list):
        content = content["records"]
    if isinstance(content, dict) and content and all(isinstance(v, list) for v in content.values()):
        lengths = {len(v) for v in content.values()}
        if len(lengths) > 1:
            raise InputError(f"{path}: the JSON columns have different lengths "
                             f"({', '.join(f'{k}: {len(v)}' for k, v in content.items())}); "
                             "every column needs one value per sample.")
        content = pd.DataFrame(content).to_dict("records")
    if not isinstance(content, list) or not all(isinstance(item, dict) for item in content):
        raise InputError(
            f"{path}: expected a JSON list of records such as "
            '[{"t": 0.0, "x": 1.0, "y": 0.0}, ...], or an object of equal-length columns.'
        )
    frame = _tidy(pd.DataFrame.from_records(content), str(path))
    return RawTable(frame, np.arange(1, len(frame) + 1), str(path), "json")


def _decode(path: Path) -> str:
    raw = path.read_bytes()
    if raw[:2] in (b"\xff\xfe", b"\xfe\xff"):
        return raw.decode("utf-16")
    if b"\x00" in raw[:4096]:
        raise InputError(
            f"{path}: holds binary data, not text. Export the samples as CSV, Excel or Parquet "
            "with the matching file ending."
        )
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        return raw.decode("cp1252", errors="replace")


def _is_number(cell: str) -> bool:
    try:
        float(cell.replace(",", ".") if _DECIMAL_COMMA.match(cell) else cell)
    except ValueError:
        return False
    return True


def _delimiter(line: str) -> str | None:
    """Tab, semicolon or comma, whichever the line holds first in that order; else
    whitespace (also for a line of whitespace-separated numbers with decimal commas)."""
    tokens = line.split()
    if len(tokens) > 1 and all(_DECIMAL_COMMA.match(t) or _is_number(t) for t in tokens) \
            and ";" not in line and "\t" not in line:
        return None
    for candidate in ("\t", ";", ","):
        if candidate in line:
            return candidate
    return None


def _split(lines: list[str], delimiter: str | None) -> list[list[str]]:
    if delimiter is None:
        return [line.split() for line in lines]
    return [[cell.strip() for cell in row] for row in csv.reader(lines, delimiter=delimiter)]


def _horizons_table(text: str, source: str, where: str = "") -> RawTable:
    """A Horizons vector table as a table of epochs and positions."""
    table = read_horizons(text, source)
    notes = []
    if table.about_barycentre:
        notes.append(f"the positions are about {table.centre}, not about a body: the attracting body "
                     "itself moves about it, which a power-law fit sees as a perturbation. Ask "
                     "Horizons for positions about the body (for planets, the Sun: centre @10).")
    description = table.describe() + (f" ({where})" if where else "")
    return RawTable(table.frame, table.rows, source, "horizons", description=description,
                    notes=tuple(notes))


def _read_text(path: Path) -> RawTable:
    text = _decode(path)
    if is_horizons(text):
        return _horizons_table(text, str(path))
    lines = text.splitlines()
    kept = [i for i, line in enumerate(lines) if line.strip() and not line.lstrip().startswith("#")]
    if not kept:
        raise InputError(f"{path}: holds no rows, only comments or blank lines. Add the samples.")
    titles = _title_lines(lines, kept)
    kept = kept[len(titles):]
    delimiter = _delimiter(lines[kept[0]])
    comma_header = delimiter == "," and len(kept) > 1 and _delimiter(lines[kept[1]]) is None
    if comma_header:
        delimiter = None  # a lone header with commas above whitespace-separated numbers
    if delimiter == "\t" and _consistent_whitespace([lines[i] for i in kept[:200]]):
        delimiter = None  # tabs and spaces mixed as separators
    first = _split([lines[kept[0]]], "," if comma_header else delimiter)[0]
    has_header = not all(_is_number(cell) for cell in first if cell)
    if has_header:
        header = _join_unit_tokens(first) if delimiter is None and not comma_header else first
        _refuse_duplicates(header, str(path))
        body_index = kept[1:]
    else:
        comments = [(i + 1, line) for i, line in enumerate(lines[: kept[0]]) if line.strip()]
        header, body_index = _header_from_comment(path, comments, delimiter, len(first)), kept
    if not body_index:
        raise InputError(
            f"{path}: has a header ({', '.join(header)}) but no data rows. "
            "Export the samples under it."
        )
    body = [lines[i] for i in body_index]
    numbers = np.asarray(body_index) + 1
    _check_widths(path, body, numbers, delimiter, len(header))
    decimal_comma = _decimal_comma(path, body, numbers, delimiter)
    frame = pd.read_csv(
        io.StringIO("\n".join(body)), sep=r"\s+" if delimiter is None else delimiter,
        header=None, names=header, keep_default_na=False, na_values=sorted(_NA_TOKENS),
        decimal="," if decimal_comma else ".", skipinitialspace=True, index_col=False,
    )
    return RawTable(
        frame, numbers, str(path), _DELIMITER_NAMES[delimiter], decimal_comma, has_header,
        tuple(f"row {i + 1}: {lines[i].strip()}" for i in titles),
    )


def _numeric_line(line: str) -> bool:
    cells = _split([line], _delimiter(line))[0]
    return bool(cells) and all(_is_number(cell) for cell in cells if cell)


def _title_lines(lines: list[str], kept: list[int]) -> list[int]:
    """Lines above the header that are not part of the table ("object: bob 1", an export's
    title): the header is the last text line above the first row of numbers, when it has as
    many cells as that row and the first line does not."""
    first_data = next((j for j, i in enumerate(kept[:50]) if _numeric_line(lines[i])), None)
    if first_data is None or first_data < 2:
        return []
    delimiter = _delimiter(lines[kept[first_data]])
    width = len(_split([lines[kept[first_data]]], delimiter)[0])
    header = _split([lines[kept[first_data - 1]]], delimiter)[0]
    first = _split([lines[kept[0]]], delimiter)[0]
    if delimiter is None:
        header, first = _join_unit_tokens(header), _join_unit_tokens(first)
    if len(header) == width and len(first) != width:
        return kept[: first_data - 1]
    return []


def _consistent_whitespace(lines: list[str]) -> bool:
    """True when tabs and spaces both separate the data: tab-splitting gives ragged rows or
    cells with spaces inside, whitespace-splitting gives rows of one width."""
    data = lines[1:]
    by_tab = {len(line.split("\t")) for line in data}
    spaced = any(" " in cell.strip() for line in data for cell in line.split("\t"))
    by_space = {len(line.split()) for line in data}
    return (len(by_tab) > 1 or spaced) and len(by_space) == 1


def _decimal_comma(path: Path, body: list[str], numbers: np.ndarray, delimiter: str | None) -> bool:
    """Whether numbers use decimal commas, refusing the thousands-separator look-alike.

    In a file that is not comma-separated, "1,5" is a decimal comma. But when every such
    cell of a column has exactly three digits after the comma and other cells of that
    column are whole numbers without one ("1,024" above "980"), the commas may be
    thousands separators: forcefit will not guess.
    """
    if delimiter == ",":
        return False
    rows = _split(body[:500], delimiter)
    columns = [[row[i] for row in rows if i < len(row)] for i in range(max(map(len, rows)))]
    found = False
    for column in columns:
        commas = [cell for cell in column if _DECIMAL_COMMA.match(cell)]
        if not commas:
            continue
        found = True
        three = all(len(re.split("[eE]", cell.split(",")[1])[0]) == 3 for cell in commas)
        whole = [cell for cell in column if re.fullmatch(r"[+-]?\d+", cell)]
        if three and whole:
            index = next(i for i, row in enumerate(rows) if commas[0] in row)
            raise InputError(
                f'{path}, row {numbers[index]}: "{commas[0]}" may be a decimal comma (1.024) or a '
                f"thousands separator (1024), and its column mixes it with whole numbers such as "
                f'"{whole[0]}". Write numbers with a decimal point and no thousands separators.'
            )
    return found


def _check_widths(
    path: Path, body: list[str], numbers: np.ndarray, delimiter: str | None, width: int
) -> None:
    """Refuse a row with more or fewer cells than the header names."""
    if delimiter is None:
        counts = np.fromiter((len(line.split()) for line in body), dtype=int, count=len(body))
    else:
        counts = np.fromiter((line.count(delimiter) + 1 for line in body), int, count=len(body))
    for index in np.flatnonzero(counts != width):
        found = len(_split([body[index]], delimiter)[0])   # quoted cells may hold delimiters
        if found == width:
            continue
        problem = "Remove the extra cells or add a header for them." if found > width else (
            "The line may be cut short. Complete it or delete the row.")
        raise InputError(
            f"{path}, row {numbers[index]}: {_cells(found)} but the header names {width} "
            f"columns. {problem}"
        )


def _cells(count: int) -> str:
    return f"{count} cell" if count == 1 else f"{count} cells"


def _header_from_comment(
    path: Path, comments: list[tuple[int, str]], delimiter: str | None, width: int
) -> list[str]:
    """Column names from a ``# t x y`` comment line, or by position (t, x, y / x, y)."""
    if comments:
        last = comments[-1][1].lstrip().lstrip("#")
        names = _split([last], delimiter)[0] if last.strip() else []
        names = _join_unit_tokens(names) if delimiter is None else names
        if len(names) == width and not any(_is_number(name) for name in names):
            return names
    by_position = {2: ["x", "y"], 3: ["t", "x", "y"]}
    if width in by_position:
        return by_position[width]
    raise InputError(
        f"{path}: the file has no header and {width} columns, so forcefit cannot tell which is which. "
        "Add a header line such as: t [s], x [m], y [m]."
    )


def _join_unit_tokens(tokens: list[str]) -> list[str]:
    """Rejoin ``t [s]`` split at the space by a whitespace-separated header."""
    joined: list[str] = []
    for token in tokens:
        if joined and token[:1] in "[(" and not _is_number(token):
            joined[-1] = f"{joined[-1]} {token}"
        else:
            joined.append(token)
    return joined
