"""A class's settings file: the grading rule, how to read the runs, and what differs file by file.

One command line cannot say that one student's file is in mm and the others in px, that one has
Spanish headers or another frame rate. A TOML file beside the runs (or named with --settings)
says it once for the term: a ``[rule]`` table, a ``[reading]`` table of defaults, and one
``[[file]]`` table per exception, matched by name or glob pattern. It is read with the standard
library (``tomllib``). Options given on the command line win over the file.
"""

from __future__ import annotations

import fnmatch
import math
import re
import sys
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..errors import InputError
from ..reading.coordinates import Calibration

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - Python 3.10
    import tomli as tomllib

SETTINGS_NAME = "forcefit-class.toml"
"""The settings file's name when it sits beside the runs."""

RULE_KEYS = ("expect", "tolerance", "strength", "strength_unit", "strength_tolerance", "min_turns")
READING_KEYS = ("columns", "length_unit", "time_unit", "force_units", "frame_rate", "sheet", "scale",
                "origin", "rotation", "flip_y")

STARTING_FILE = '''\
# forcefit class settings: the grading rule, how to read the runs, and the files that differ.
# Options given on the command line win over this file.

[rule]
expect = 1.0                  # the expected exponent n (1: Hooke's law, a pendulum's small swing)
tolerance = 0.05              # the largest |n - expect| that passes
# strength = 4.0875           # expected k at the expected exponent (g/L for a pendulum) ...
# strength_unit = "s^-2"      # ... in this unit (length^(1-n) time^-2)
# strength_tolerance = 0.03   # the largest relative deviation of k that passes
min_turns = 1.0               # the least number of turns about the centre a run must cover

[reading]                     # how to read every run, unless a [[file]] table below says otherwise
# length_unit = "px"          # where a header names no unit
# time_unit = "s"
# frame_rate = 30             # frames per second, for a frame column
# scale = "1.6 mm"            # length of one pixel
# origin = [958.3, 541.7]     # the pixel that becomes (0, 0), e.g. the pivot's image
# flip_y = true               # image rows grow downwards
# columns = { t = "Zeit", x = "x (px)", y = "y (px)" }

# One table per file (or glob pattern) that differs from the defaults:
# [[file]]
# match = "bruno*.csv"
# length_unit = "mm"
#
# [[file]]
# match = "carla.xlsx"
# sheet = "Messung"
# frame_rate = 25
'''
"""The commented starting file ``forcefit grade --write-settings`` writes."""


@dataclass(frozen=True)
class ClassSettings:
    """What a class settings file holds.

    Attributes
    ----------
    source : Path
        The file.
    rule : mapping
        The grading rule's values by name (those of `RULE_KEYS` the file gives).
    reading : mapping
        `load_tracks` keywords for every run.
    files : tuple of (str, mapping)
        Per-file `load_tracks` keywords, by name or glob pattern, in the file's order.
    """

    source: Path
    rule: Mapping[str, Any] = field(default_factory=dict)
    reading: Mapping[str, Any] = field(default_factory=dict)
    files: tuple[tuple[str, Mapping[str, Any]], ...] = ()


def read_settings(path: str | Path) -> ClassSettings:
    """Read a class settings file.

    Raises
    ------
    InputError
        Naming the file, the table and the key, for TOML errors, unknown keys and bad values.

    Examples
    --------
    >>> import tempfile
    >>> path = Path(tempfile.mkdtemp()) / SETTINGS_NAME
    >>> _ = path.write_text('[rule]\\nexpect = 1\\ntolerance = 0.05\\n[reading]\\nlength_unit = "px"\\n'
    ...                     '[[file]]\\nmatch = "bruno*"\\nlength_unit = "mm"\\n')
    >>> settings = read_settings(path)
    >>> dict(settings.rule), options_for(settings, "runs/bruno.csv")
    ({'expect': 1.0, 'tolerance': 0.05}, {'length_unit': 'mm'})
    """
    source = Path(path)
    try:
        data = tomllib.loads(source.read_text(encoding="utf-8"))
    except OSError as exc:
        raise InputError(f"{source}: cannot read the class settings ({exc.strerror}).") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{source}: not valid TOML ({exc}). Compare it with the starting file "
                         "of forcefit grade --write-settings.") from None
    unknown = set(data) - {"rule", "reading", "file"}
    if unknown:
        raise InputError(f"{source}: unknown table [{sorted(unknown)[0]}]; the tables are [rule], "
                         "[reading] and [[file]].")
    rule = _table(source, "rule", data.get("rule", {}), RULE_KEYS)
    rule = {key: (value if key == "strength_unit" else _number(source, "rule", key, value))
            for key, value in rule.items()}
    reading = _reading(source, "reading", _table(source, "reading", data.get("reading", {}), READING_KEYS))
    files = []
    for index, entry in enumerate(data.get("file", []), start=1):
        where = f"file #{index}"
        if not isinstance(entry, dict) or not isinstance(entry.get("match"), str):
            raise InputError(f'{source}: [[file]] #{index} needs match = "NAME or PATTERN".')
        options = {key: value for key, value in entry.items() if key != "match"}
        files.append((entry["match"], _reading(source, where, _table(source, where, options, READING_KEYS))))
    return ClassSettings(source=source, rule=rule, reading=reading, files=tuple(files))


def options_for(settings: ClassSettings, path: str | Path) -> dict[str, Any]:
    """The `load_tracks` keywords for one run: the defaults, then every matching [[file]] table."""
    return merged_options(settings.reading, settings.files, path)


def merged_options(defaults: Mapping[str, Any], files: tuple[tuple[str, Mapping[str, Any]], ...],
                   path: str | Path, given: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """``defaults``, then the options of every (pattern, options) in ``files`` whose pattern matches
    the file's name (in order), then ``given`` (the command line's) on top."""
    name = Path(path).name
    options = dict(defaults)
    for pattern, extra in files:
        if fnmatch.fnmatch(name, pattern) or name == pattern:
            options.update(extra)
    options.update(given or {})
    return options


def _table(source: Path, where: str, table: Any, allowed: tuple[str, ...]) -> dict[str, Any]:
    if not isinstance(table, dict):
        raise InputError(f"{source}: [{where}] must be a table of key = value lines.")
    for key in table:
        if key not in allowed:
            raise InputError(f'{source}, [{where}]: unknown key "{key}"; the keys are {", ".join(allowed)}.')
    return dict(table)


def _number(source: Path, where: str, key: str, value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InputError(f"{source}, [{where}]: {key} = {value!r} must be a number, e.g. {key} = 0.05.")
    return float(value)


def _reading(source: Path, where: str, table: dict[str, Any]) -> dict[str, Any]:
    """A reading table as `load_tracks` keywords (columns spread into roles, a Calibration)."""
    options: dict[str, Any] = {}
    columns = table.pop("columns", {})
    if not isinstance(columns, dict):
        raise InputError(f'{source}, [{where}]: columns must be a table, e.g. columns = {{ t = "Zeit" }}.')
    options.update({str(role): str(name) for role, name in columns.items()})
    if "frame_rate" in table:
        options["frame_rate"] = _number(source, where, "frame_rate", table.pop("frame_rate"))
    calibration: dict[str, Any] = {key: table.pop(key) for key in ("scale", "origin", "rotation", "flip_y")
                                   if key in table}
    if calibration:
        options["calibration"] = _calibration(source, where, calibration)
    options.update(table)
    return options


def _calibration(source: Path, where: str, values: dict[str, Any]) -> Calibration:
    match = re.fullmatch(r"\s*([-+0-9.eE]+)\s*([A-Za-zµμ]+)\s*", str(values.get("scale", "")))
    if match is None:
        raise InputError(f'{source}, [{where}]: a calibration needs scale = "LENGTH UNIT" per pixel, e.g. '
                         'scale = "1.6 mm".')
    origin = values.get("origin", [0.0, 0.0])
    return Calibration(scale=float(match[1]), unit=match[2], origin=(float(origin[0]), float(origin[1])),
                       rotation=float(values.get("rotation", 0.0)), flip_y=bool(values.get("flip_y", False)))
