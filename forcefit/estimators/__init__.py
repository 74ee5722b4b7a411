"""Estimators of the force law; each returns a `LawFit`. Beside them, `force_profile`."""

from .acceleration import fit_acceleration
from .curvature import fit_curvature
from .profile import ForceProfile, force_profile
from .shape import fit_shape

__all__ = ["ForceProfile", "fit_acceleration", "fit_curvature", "fit_shape", "force_profile"]
