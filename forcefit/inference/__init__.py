"""Inference on fitted laws: posterior sampling, planning by Fisher information, law comparison."""

from __future__ import annotations

from typing import TYPE_CHECKING

from .._lazy import lazy_exports

if TYPE_CHECKING:
    from .comparison import LawComparison, compare_laws
    from .planning import Forecast, forecast_precision, required_duration, required_rate
    from .posterior import Posterior, run_ensemble, sample_posterior

__getattr__, __dir__ = lazy_exports(__name__, {
    "LawComparison": ".comparison",
    "compare_laws": ".comparison",
    "Forecast": ".planning",
    "forecast_precision": ".planning",
    "required_duration": ".planning",
    "required_rate": ".planning",
    "Posterior": ".posterior",
    "run_ensemble": ".posterior",
    "sample_posterior": ".posterior",
})

__all__ = [
    "Forecast",
    "LawComparison",
    "Posterior",
    "compare_laws",
    "forecast_precision",
    "required_duration",
    "required_rate",
    "run_ensemble",
    "sample_posterior",
]
