"""Analyses beside the fits: apsides and precession, the duality check."""

from .apsides import Apse, Apsides, measure_apsides
from .duality_check import DualityCheck, check_duality

__all__ = ["Apse", "Apsides", "DualityCheck", "check_duality", "measure_apsides"]
