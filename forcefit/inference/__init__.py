"""Inference on fitted laws: posterior sampling, planning by Fisher information, law comparison."""

from .comparison import LawComparison, compare_laws
from .planning import Forecast, forecast_precision, required_duration, required_rate
from .posterior import Posterior, run_ensemble, sample_posterior

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
