"""Estimators of the force law; each returns a typed `LawFit`. `fit` picks one by name (or
by the track: orbit with timestamps, shape without); beside them, `force_profile`."""

from .acceleration import fit_acceleration
from .curvature import fit_curvature
from .orbit import fit_orbit
from .profile import ForceProfile, force_profile
from .registry import ESTIMATORS, Estimator, choose_method, fit
from .result import (
    AccelerationFit,
    CurvatureFit,
    CurvaturePoints,
    Diagnostic,
    LawFit,
    OrbitFit,
    ShapeFit,
)
from .shape import fit_shape

__all__ = [
    "ESTIMATORS",
    "AccelerationFit",
    "CurvatureFit",
    "CurvaturePoints",
    "Diagnostic",
    "Estimator",
    "ForceProfile",
    "LawFit",
    "OrbitFit",
    "ShapeFit",
    "choose_method",
    "fit",
    "fit_acceleration",
    "fit_curvature",
    "fit_orbit",
    "fit_shape",
    "force_profile",
]
