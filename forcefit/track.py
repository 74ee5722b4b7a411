"""`Track`: the positions (and, when known, times) of one body along its path."""

from __future__ import annotations

import pathlib
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from types import MappingProxyType
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from ._types import FloatArray
from .errors import InputError
from .units import length_factor, parse_length_unit, parse_time_unit, time_factor

MIN_POINTS = 3
"""Fewest samples a track may hold: curvature needs three points."""

ABSURD = 1e20
"""Largest magnitude accepted for a coordinate or time; beyond it squares overflow."""


def _as_vector(values: Any, name: str, where: str) -> FloatArray:
    """Copy ``values`` into a read-only 1-D float64 array or raise `InputError`."""
    try:
        array = np.array(values, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{where}: {name} must be numbers ({exc}).") from None
    if array.ndim != 1:
        raise InputError(f"{where}: {name} must be one-dimensional, got shape {array.shape}.")
    array.setflags(write=False)
    return array


def _check_values(array: FloatArray, name: str, where: str) -> None:
    """Refuse non-finite or absurdly large entries, naming the first one."""
    bad = ~np.isfinite(array) | (np.abs(array) > ABSURD)
    if bad.any():
        index = int(np.argmax(bad))
        raise InputError(
            f"{where}: {name}[{index}] is {float(array[index])!r}, expected a finite number below "
            f"{ABSURD:g} in magnitude. Remove the sample or correct it."
        )


@dataclass(frozen=True, eq=False, kw_only=True)
class Track:
    """Positions of one body in a plane, with times when they are known.

    Parameters
    ----------
    x, y : array_like, shape (n_points,)
        Positions in ``length_unit``.
    t : array_like, shape (n_points,), optional
        Strictly increasing times in ``time_unit``; None for a shape-only path
        (a traced orbit, a long-exposure photograph).
    sigma : float or array_like, shape (n_points,), optional
        Standard error of each position coordinate, in ``length_unit``.
    length_unit, time_unit : str
        Units of the positions and times (``"px"``, ``"mm"``, ``"au"``; ``"s"``, ``"d"``).
    name : str
        A label for tables and reports, usually the file name.
    metadata : mapping
        Anything else worth keeping: source file, detected columns, dropped rows,
        calibration, plane of a 3-D track, truth of a simulation.
    source_rows : array_like of int, shape (n_points,), optional
        The row of the source file each sample came from, as the loader counts them (1-based,
        as a spreadsheet or an editor shows them); None when the track was not read from a file.

    Examples
    --------
    >>> t = np.linspace(0.0, 6.0, 61)
    >>> track = Track(t=t, x=np.cos(t), y=np.sin(t), length_unit="m", time_unit="s")
    >>> track.n_points, track.duration, track.has_times
    (61, 6.0, True)
    """

    x: FloatArray
    y: FloatArray
    t: FloatArray | None = None
    sigma: FloatArray | None = None
    length_unit: str = "m"
    time_unit: str = "s"
    name: str = "track"
    metadata: Mapping[str, Any] = field(default_factory=dict)
    source_rows: NDArray[np.int64] | None = None

    def __post_init__(self) -> None:
        where = f"track {self.name!r}"
        x = _as_vector(self.x, "x", where)
        y = _as_vector(self.y, "y", where)
        if x.size != y.size:
            raise InputError(f"{where}: x has {x.size} values but y has {y.size}.")
        if x.size < MIN_POINTS:
            raise InputError(
                f"{where}: {x.size} points, at least {MIN_POINTS} are needed. "
                "Record more of the path."
            )
        for array, name in ((x, "x"), (y, "y")):
            _check_values(array, name, where)
        if np.ptp(x) == 0.0 and np.ptp(y) == 0.0:
            raise InputError(
                f"{where}: all {x.size} points are the same position; the body never moved. "
                "Check that the tracker followed the body."
            )
        object.__setattr__(self, "x", x)
        object.__setattr__(self, "y", y)
        object.__setattr__(self, "t", self._checked_times(where))
        object.__setattr__(self, "sigma", self._checked_sigma(where))
        object.__setattr__(self, "length_unit", parse_length_unit(self.length_unit))
        object.__setattr__(self, "time_unit", parse_time_unit(self.time_unit))
        object.__setattr__(self, "metadata", MappingProxyType(dict(self.metadata)))
        object.__setattr__(self, "source_rows", self._checked_rows(where))

    def _checked_rows(self, where: str) -> NDArray[np.int64] | None:
        if self.source_rows is None:
            return None
        rows = np.array(self.source_rows, dtype=np.int64)
        if rows.shape != self.x.shape:
            raise InputError(f"{where}: source_rows has {rows.size} values but x has {self.x.size}.")
        rows.setflags(write=False)
        return rows

    def sample_label(self, index: int) -> str:
        """How a message names one sample: its row in the source file and its time.

        Examples
        --------
        >>> track = Track(t=[0.0, 0.5, 1.0], x=[0, 1, 2], y=[0, 1, 0], source_rows=[4, 5, 7])
        >>> track.sample_label(2), Track(x=[0, 1, 2], y=[0, 1, 0]).sample_label(1)
        ('row 7 (t = 1 s)', 'sample 2 of 3')
        """
        where = (f"row {int(self.source_rows[index])}" if self.source_rows is not None
                 else f"sample {index + 1} of {self.n_points}")
        if self.t is None:
            return where
        return f"{where} (t = {float(self.t[index]):.12g} {self.time_unit})"

    def _checked_times(self, where: str) -> FloatArray | None:
        if self.t is None:
            return None
        t = _as_vector(self.t, "t", where)
        if t.size != self.x.size:
            raise InputError(f"{where}: t has {t.size} values but x has {self.x.size}.")
        _check_values(t, "t", where)
        steps = np.diff(t)
        if (steps <= 0).any():
            index = int(np.argmax(steps <= 0)) + 1
            kind = "repeats" if steps[index - 1] == 0 else "goes back to"
            raise InputError(
                f"{where}: time {kind} {float(t[index])!r} at sample {index} "
                f"(after {float(t[index - 1])!r}); "
                "times must increase. Sort the samples or remove the duplicate."
            )
        return t

    def _checked_sigma(self, where: str) -> FloatArray | None:
        if self.sigma is None:
            return None
        given = np.asarray(self.sigma, dtype=np.float64)
        if given.ndim > 1 or given.size not in (1, self.x.size):
            raise InputError(f"{where}: sigma has {given.size} values but x has {self.x.size}; "
                             "give one sigma per point, or a single value for all.")
        sigma = _as_vector(np.broadcast_to(given, self.x.shape), "sigma", where)
        _check_values(sigma, "sigma", where)
        if (sigma <= 0).any():
            index = int(np.argmax(sigma <= 0))
            raise InputError(
                f"{where}: sigma[{index}] is {float(sigma[index])!r}, expected a positive standard "
                "error. Leave sigma out if it is not known."
            )
        return sigma

    @property
    def label(self) -> str:
        """How messages name the track: its source file (and id) when read from one."""
        source = self.metadata.get("source")
        if source and source != "<DataFrame>":
            suffix = self.name[len(pathlib.Path(source).stem):] if self.name.startswith(
                pathlib.Path(source).stem) else f" ({self.name})"
            return f"{source}{suffix}"
        return f"track {self.name!r}"

    @property
    def n_points(self) -> int:
        """Number of samples."""
        return int(self.x.size)

    @property
    def has_times(self) -> bool:
        """True when the samples carry timestamps."""
        return self.t is not None

    @property
    def duration(self) -> float:
        """Time from the first to the last sample in ``time_unit``; nan when shape-only."""
        if self.t is None:
            return float("nan")
        return float(self.t[-1] - self.t[0])

    @property
    def sampling_interval(self) -> float:
        """Median time between samples in ``time_unit``; nan when shape-only."""
        if self.t is None:
            return float("nan")
        return float(np.median(np.diff(self.t)))

    @property
    def positions(self) -> FloatArray:
        """Positions as an array of shape (n_points, 2), in ``length_unit``."""
        return np.column_stack((self.x, self.y))

    def select(self, index: Any) -> Track:
        """A new track holding the samples picked by a slice, mask or index array."""
        picked = {
            "x": self.x[index],
            "y": self.y[index],
            "t": None if self.t is None else self.t[index],
            "sigma": None if self.sigma is None else self.sigma[index],
            "source_rows": None if self.source_rows is None else self.source_rows[index],
        }
        return replace(self, **picked)

    def shape_only(self) -> Track:
        """The same path with its timestamps dropped."""
        return replace(self, t=None)

    def with_metadata(self, **items: Any) -> Track:
        """A copy whose metadata has ``items`` added or replaced."""
        return replace(self, metadata={**self.metadata, **items})

    def in_units(self, *, length_unit: str | None = None, time_unit: str | None = None) -> Track:
        """The same track with positions (and sigma) in ``length_unit`` and times in ``time_unit``.

        Examples
        --------
        >>> track = Track(t=[0.0, 0.5, 1.0], x=[0.0, 0.1, 0.2], y=[0.0, 0.1, 0.0])
        >>> converted = track.in_units(length_unit="mm", time_unit="ms")
        >>> converted.x.tolist(), converted.t.tolist(), converted.length_unit
        ([0.0, 100.0, 200.0], [0.0, 500.0, 1000.0], 'mm')
        """
        length = self.length_unit if length_unit is None else parse_length_unit(length_unit)
        time = self.time_unit if time_unit is None else parse_time_unit(time_unit)
        scale, pace = length_factor(self.length_unit, length), time_factor(self.time_unit, time)
        return replace(self, x=self.x * scale, y=self.y * scale,
                       sigma=None if self.sigma is None else self.sigma * scale,
                       t=None if self.t is None else self.t * pace, length_unit=length, time_unit=time)

    def to_frame(self) -> pd.DataFrame:
        """The samples as a DataFrame whose column names carry the units.

        Examples
        --------
        >>> list(Track(x=[0.0, 1.0, 2.0], y=[0.0, 1.0, 0.0], length_unit="mm").to_frame())
        ['x [mm]', 'y [mm]']
        """
        columns: dict[str, FloatArray] = {}
        if self.t is not None:
            columns[f"t [{self.time_unit}]"] = self.t
        columns[f"x [{self.length_unit}]"] = self.x
        columns[f"y [{self.length_unit}]"] = self.y
        if self.sigma is not None:
            columns[f"sigma [{self.length_unit}]"] = self.sigma
        return pd.DataFrame(columns)
