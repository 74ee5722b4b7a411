"""Estimators of the force law; each returns a `LawFit`. Beside them, `force_profile`."""

from .acceleration import fit_acceleration
from .curvature import fit_curvature
from .orbit import fit_orbit
from .profile import ForceProfile, force_profile
from .result import Diagnostic, LawFit
from .shape import fit_shape

__all__ = [
    "Diagnostic",
    "ForceProfile",
    "LawFit",
    "fit_acceleration",
    "fit_curvature",
    "fit_orbit",
    "fit_shape",
    "force_profile",
]
