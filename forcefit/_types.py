"""Array type aliases shared by the package."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

FloatArray = NDArray[np.float64]
"""A float64 array; shapes are given in each docstring."""
