"""Type aliases and the small types every result shares."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

FloatArray = NDArray[np.float64]
"""A float64 array; shapes are given in each docstring."""


@dataclass(frozen=True)
class Row:
    """One line of a result's table, as text: what it is, the value (with its error), the unit.

    Each result formats its numbers once, into rows; its text, its report page and the
    command line show those rows. ``brief`` rows make the short text table; the report
    page shows them all.

    Examples
    --------
    >>> Row("exponent n", "1.000 ± 0.003").text, Row("centre x", "0.05 ± 0.02", "mm").text
    ('1.000 ± 0.003', '0.05 ± 0.02 mm')
    """

    label: str
    value: str
    unit: str = ""
    brief: bool = True

    @property
    def text(self) -> str:
        """The value followed by its unit."""
        return f"{self.value} {self.unit}" if self.unit else self.value


def frozen_array(values: object) -> FloatArray:
    """A read-only float64 copy of ``values``, for a field of a frozen result.

    Examples
    --------
    >>> array = frozen_array([1, 2])
    >>> array.dtype.name, array.flags.writeable
    ('float64', False)
    """
    array = np.array(values, dtype=np.float64)
    array.setflags(write=False)
    return array
