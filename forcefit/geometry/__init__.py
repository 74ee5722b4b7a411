"""Geometry of a path: smoothing, derivatives, curvature, polar quantities, the force centre."""

from __future__ import annotations

from typing import TYPE_CHECKING

from .._lazy import lazy_exports

if TYPE_CHECKING:
    from .centre import CentreEstimate, find_centre
    from .path import PathGeometry, describe_path
    from .pspline import SmoothedCurve, smooth_curve
    from .smoothing import Smoothing, smooth_track

__getattr__, __dir__ = lazy_exports(__name__, {
    "CentreEstimate": ".centre",
    "find_centre": ".centre",
    "PathGeometry": ".path",
    "describe_path": ".path",
    "SmoothedCurve": ".pspline",
    "smooth_curve": ".pspline",
    "Smoothing": ".smoothing",
    "smooth_track": ".smoothing",
})

__all__ = [
    "CentreEstimate",
    "PathGeometry",
    "SmoothedCurve",
    "Smoothing",
    "describe_path",
    "find_centre",
    "smooth_curve",
    "smooth_track",
]
