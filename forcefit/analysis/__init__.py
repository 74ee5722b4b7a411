"""Analyses beside the fits: apsides and precession, the duality check."""

from __future__ import annotations

from typing import TYPE_CHECKING

from .._lazy import lazy_exports

if TYPE_CHECKING:
    from .apsides import Apse, Apsides, measure_apsides
    from .duality_check import DualityCheck, check_duality

__getattr__, __dir__ = lazy_exports(__name__, {
    "Apse": ".apsides",
    "Apsides": ".apsides",
    "measure_apsides": ".apsides",
    "DualityCheck": ".duality_check",
    "check_duality": ".duality_check",
})

__all__ = ["Apse", "Apsides", "DualityCheck", "check_duality", "measure_apsides"]
