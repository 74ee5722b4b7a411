"""Turn results into JSON-safe values."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np


def json_safe(value: Any) -> Any:
    """Non-finite floats become None and numpy scalars Python ones, recursively.

    Examples
    --------
    >>> json_safe({"n": np.float64(1.5), "k": float("nan"), "c": (np.int64(2), 3.0)})
    {'n': 1.5, 'k': None, 'c': [2, 3.0]}
    """
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, Mapping):
        return {str(key): json_safe(item) for key, item in value.items()}
    if isinstance(value, (list, tuple, np.ndarray)):
        return [json_safe(item) for item in value]
    return value
