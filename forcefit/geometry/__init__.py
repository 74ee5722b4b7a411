"""Geometry of a path: smoothing, derivatives, curvature, polar quantities, the force centre."""

from .centre import CentreEstimate, find_centre
from .path import PathGeometry, describe_path
from .pspline import SmoothedCurve, smooth_curve
from .smoothing import Smoothing, smooth_track

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
