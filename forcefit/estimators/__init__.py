"""Estimators of the force law; each returns a typed `LawFit`. `fit` picks one by name (or
by the track: orbit with timestamps, shape without); beside them, `force_profile`."""

from __future__ import annotations

from typing import TYPE_CHECKING

from .._lazy import lazy_exports

if TYPE_CHECKING:
    from .acceleration import fit_acceleration
    from .curvature import fit_curvature
    from .orbit import fit_orbit
    from .profile import ForceProfile, force_profile
    from .projected import fit_projected
    from .registry import ESTIMATORS, Estimator, choose_method, fit
    from .result import (
        AccelerationFit,
        CurvatureFit,
        CurvaturePoints,
        Diagnostic,
        LawFit,
        OrbitFit,
        ProjectedFit,
        ShapeFit,
    )
    from .shape import fit_shape

__getattr__, __dir__ = lazy_exports(__name__, {
    "fit_acceleration": ".acceleration",
    "fit_curvature": ".curvature",
    "fit_orbit": ".orbit",
    "ForceProfile": ".profile",
    "force_profile": ".profile",
    "fit_projected": ".projected",
    "ESTIMATORS": ".registry",
    "Estimator": ".registry",
    "choose_method": ".registry",
    "fit": ".registry",
    "AccelerationFit": ".result",
    "CurvatureFit": ".result",
    "CurvaturePoints": ".result",
    "Diagnostic": ".result",
    "LawFit": ".result",
    "OrbitFit": ".result",
    "ProjectedFit": ".result",
    "ShapeFit": ".result",
    "fit_shape": ".shape",
})

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
    "ProjectedFit",
    "ShapeFit",
    "choose_method",
    "fit",
    "fit_acceleration",
    "fit_curvature",
    "fit_orbit",
    "fit_projected",
    "fit_shape",
    "force_profile",
]
