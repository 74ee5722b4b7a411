"""The files of a class: which are runs, which are not (and why), and what a run's grade depends on.

A class folder holds more than runs: a teacher's notes, last week's results table, a photo of
the set-up. Only files whose extension and content look like a track are runs; the others are
listed as skipped with the reason and never counted. A finished grade is keyed by a fingerprint
of the file's bytes and of the rule and reading options, so that a resumed grading regrades a
run when any of them changed. Text cells written to a results table are guarded against being
read as formulas by a spreadsheet (OWASP, "CSV Injection").
"""

from __future__ import annotations

import glob
import hashlib
import json
import os
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..errors import InputError
from .class_settings import SETTINGS_NAME

RUN_SUFFIXES = (".csv", ".tsv", ".txt", ".dat", ".json", ".xlsx", ".parquet")
"""Extensions of the files that may hold a run."""

TEXT_SUFFIXES = (".csv", ".tsv", ".txt", ".dat")
"""Of those, the plain-text ones whose first lines are looked at."""

RESULTS_HEADER = "run,file,passed,"
"""How a results table written by forcefit's grading begins."""

FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
"""First characters that make a spreadsheet read a cell as a formula (OWASP, "CSV Injection")."""

_NUMBER = re.compile(r"[-+]?(?:\d+[.,]?\d*|[.,]\d+)(?:[eE][-+]?\d+)?")


@dataclass(frozen=True)
class RunFiles:
    """The files of a class: the runs, and the files skipped with the reason for each."""

    runs: tuple[Path, ...]
    skipped: tuple[tuple[Path, str], ...] = ()


def sort_runs(source: str | os.PathLike[str] | Sequence[str | os.PathLike[str]]) -> RunFiles:
    """The run files of a folder, a glob pattern, or a list of paths, sorted by name, and the
    files that are not runs with the reason.

    Examples
    --------
    >>> import tempfile
    >>> folder = Path(tempfile.mkdtemp())
    >>> _ = (folder / "anna.csv").write_text("t,x,y\\n0,1,0\\n1,0,1\\n2,-1,0\\n")
    >>> _ = (folder / "notes.txt").write_text("Week 3: bring the long pendulum.\\n")
    >>> found = sort_runs(folder)
    >>> [p.name for p in found.runs], [(p.name, why[:16]) for p, why in found.skipped]
    (['anna.csv'], [('notes.txt', 'not a table of n')])
    """
    if isinstance(source, (list, tuple)):
        candidates = sorted(Path(p) for p in source)
    else:
        text = os.fspath(source)  # type: ignore[arg-type]
        if Path(text).is_dir():
            candidates = sorted(p for p in Path(text).iterdir() if p.is_file() and not p.name.startswith("."))
        else:
            candidates = sorted(Path(p) for p in glob.glob(text))
            if not candidates:
                raise InputError(f"{text}: no such folder, and no file matches it as a pattern.")
    runs, skipped = [], []
    for path in candidates:
        reason = _not_a_run(path)
        if reason:
            skipped.append((path, reason))
        else:
            runs.append(path)
    return RunFiles(runs=tuple(runs), skipped=tuple(skipped))


def _not_a_run(path: Path) -> str:
    """Why ``path`` is not a run ("" when it may be one)."""
    if path.name == SETTINGS_NAME:
        return "the class settings"
    if path.suffix.lower() not in RUN_SUFFIXES:
        kind = path.suffix or "file without extension"
        return f"not a data file (a {kind}; runs are {', '.join(RUN_SUFFIXES)})"
    if path.suffix.lower() not in TEXT_SUFFIXES:
        return ""
    try:
        with path.open("r", encoding="utf-8", errors="replace") as stream:
            head = [stream.readline() for _ in range(40)]
    except OSError as exc:
        return f"cannot be read ({exc.strerror})"
    if head[0].lstrip("\ufeff").startswith(RESULTS_HEADER):
        return "the results table of an earlier grading"
    numeric = sum(1 for line in head if len(_NUMBER.findall(line)) >= 2)
    if numeric < 3:
        return "not a table of numbers (fewer than three lines with two numbers each)"
    return ""


def student_of(name: str) -> str:
    """The student's ID in a run's name: the name up to its first underscore, hyphen or space.

    Examples
    --------
    >>> student_of("s1042_week3"), student_of("anna-run2"), student_of("bruno")
    ('s1042', 'anna', 'bruno')
    """
    return re.split(r"[_\- ]", name, maxsplit=1)[0] or name


def fingerprint(path: str | os.PathLike[str], settings: Any) -> str:
    """A digest of a run file's bytes and of the settings it is graded with (the rule, the reading
    options): equal digests mean the same grade.

    Examples
    --------
    >>> import tempfile
    >>> run = Path(tempfile.mkdtemp()) / "run.csv"
    >>> _ = run.write_text("t,x,y\\n0,1,0\\n")
    >>> fingerprint(run, {"tolerance": 0.05}) == fingerprint(run, {"tolerance": 0.005})
    False
    """
    digest = hashlib.sha256(Path(path).read_bytes())
    digest.update(json.dumps(settings, sort_keys=True, default=repr).encode("utf-8"))
    return digest.hexdigest()[:32]


def guard_cell(text: str) -> str:
    """A text cell safe to open in a spreadsheet: one that begins with a formula character gets a
    leading apostrophe (OWASP, "CSV Injection").

    Examples
    --------
    >>> guard_cell('=HYPERLINK("http://example.invalid")'), guard_cell("+1+1"), guard_cell("anna")
    ('\\'=HYPERLINK("http://example.invalid")', "'+1+1", 'anna')
    """
    return f"'{text}" if text.startswith(FORMULA_STARTS) else text


def unguard_cell(text: str) -> str:
    """The cell as it was before `guard_cell`.

    Examples
    --------
    >>> unguard_cell(guard_cell("=1+1")), unguard_cell("it's")
    ('=1+1', "it's")
    """
    return text[1:] if text.startswith("'") and text[1:].startswith(FORMULA_STARTS) else text
