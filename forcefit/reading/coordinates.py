"""Coordinate transforms applied on loading: pixel calibration and 3-D → orbital plane."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .._types import FloatArray
from ..errors import InputError
from ..units import parse_length_unit


@dataclass(frozen=True, kw_only=True)
class Calibration:
    """Turn image coordinates (or any raw positions) into lengths.

    The raw point p is mapped to ``scale * R(rotation) * F(p - origin)``, where F
    flips the y axis when ``flip_y`` is set (image rows grow downwards) and R turns
    counter-clockwise by ``rotation`` degrees.

    Parameters
    ----------
    scale : float
        Length per raw unit, in ``unit`` per raw unit (e.g. 1.5 mm per px).
    unit : str
        The length unit the calibrated positions are in.
    origin : (float, float)
        A raw point that becomes (0, 0), e.g. the pivot's image, in raw units.
    rotation : float
        Counter-clockwise turn applied after the shift, in degrees.
    flip_y : bool
        Reverse the y axis (for pixel rows counted downwards).

    Examples
    --------
    >>> cal = Calibration.from_marks((100.0, 200.0), (400.0, 600.0), distance=1.0, unit="m")
    >>> cal.scale, cal.unit
    (0.002, 'm')
    """

    scale: float
    unit: str
    origin: tuple[float, float] = (0.0, 0.0)
    rotation: float = 0.0
    flip_y: bool = False

    def __post_init__(self) -> None:
        if not (math.isfinite(self.scale) and self.scale > 0):
            raise InputError(
                f"calibration scale {self.scale!r} must be a positive length per pixel."
            )
        unit = parse_length_unit(self.unit)
        if unit == "px":
            raise InputError("a calibration turns pixels into a length: give its unit as m, mm, "
                             "cm or another length, not px.")
        origin = tuple(self.origin)
        if len(origin) != 2 or not all(math.isfinite(float(v)) for v in origin):
            raise InputError(f"calibration origin {self.origin!r} must be two finite numbers (x, y).")
        if not math.isfinite(self.rotation):
            raise InputError(f"calibration rotation {self.rotation!r} must be a finite angle in degrees.")
        object.__setattr__(self, "unit", unit)
        object.__setattr__(self, "origin", (float(origin[0]), float(origin[1])))

    @classmethod
    def from_marks(
        cls,
        first: Sequence[float],
        second: Sequence[float],
        *,
        distance: float,
        unit: str,
        origin: Sequence[float] = (0.0, 0.0),
        rotation: float = 0.0,
        flip_y: bool = False,
    ) -> Calibration:
        """Scale from two reference marks a known ``distance`` (in ``unit``) apart.

        Parameters
        ----------
        first, second : (float, float)
            Raw coordinates of the two marks (e.g. pixels of a metre stick's ends).
        distance : float
            Their true separation in ``unit``.
        """
        separation = math.dist(first, second)
        if separation == 0.0:
            raise InputError(
                "calibration marks are at the same raw position; mark two distinct points."
            )
        return cls(
            scale=distance / separation,
            unit=unit,
            origin=(float(origin[0]), float(origin[1])),
            rotation=rotation,
            flip_y=flip_y,
        )

    def apply(self, x: FloatArray, y: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Calibrated positions (in ``unit``) of raw positions ``x``, ``y``."""
        dx = x - self.origin[0]
        dy = y - self.origin[1]
        if self.flip_y:
            dy = -dy
        cos, sin = math.cos(math.radians(self.rotation)), math.sin(math.radians(self.rotation))
        return self.scale * (cos * dx - sin * dy), self.scale * (sin * dx + cos * dy)

    def describe(self) -> dict[str, object]:
        """The calibration as plain values, for metadata and JSON."""
        return {
            "scale": self.scale,
            "unit": self.unit,
            "origin": list(self.origin),
            "rotation_deg": self.rotation,
            "flip_y": self.flip_y,
        }


@dataclass(frozen=True)
class PlaneProjection:
    """The best-fit plane of 3-D positions and the in-plane coordinates.

    In-plane coordinates are ``(p · e1, p · e2)``, so the 3-D origin (the Sun, for
    heliocentric data) projects onto (0, 0). The normal points along the mean
    angular momentum, so the motion runs counter-clockwise in the plane.
    """

    u: FloatArray
    v: FloatArray
    normal: FloatArray
    first_axis: FloatArray
    second_axis: FloatArray
    centroid: FloatArray
    out_of_plane_rms: float
    in_plane_extent: float


def project_to_plane(x: FloatArray, y: FloatArray, z: FloatArray) -> PlaneProjection:
    """Project 3-D positions onto their best-fit plane (least squares, by SVD).

    Parameters
    ----------
    x, y, z : ndarray, shape (n_points,)
        Positions in one length unit, in time order.

    Returns
    -------
    PlaneProjection
        In-plane coordinates, unit normal, in-plane axes, and the RMS distance of
        the points from the plane (same length unit).

    Examples
    --------
    >>> s = np.linspace(0.0, 6.0, 50)
    >>> p = project_to_plane(np.cos(s), np.sin(s), np.zeros(50))
    >>> p.normal.round(12) + 0.0, round(p.out_of_plane_rms, 12)
    (array([0., 0., 1.]), 0.0)
    """
    points = np.column_stack((x, y, z))
    centroid = points.mean(axis=0)
    _, singular_values, rows = np.linalg.svd(points - centroid, full_matrices=False)
    if singular_values[1] <= 1e-12 * max(singular_values[0], 1e-300):
        raise InputError(
            "the 3-D points lie on a line, so they define no orbital plane. "
            "Check the z column or give 2-D positions."
        )
    normal = rows[2]
    sweep = np.cross(points[:-1], points[1:]).sum(axis=0)
    if float(sweep @ normal) < 0:
        normal = -normal
    first_axis = _first_axis(normal)
    second_axis = np.cross(normal, first_axis)
    distance = (points - centroid) @ normal
    u, v = points @ first_axis, points @ second_axis
    extent = float(max(np.ptp(u), np.ptp(v)))
    return PlaneProjection(
        u=u,
        v=v,
        normal=normal,
        first_axis=first_axis,
        second_axis=second_axis,
        centroid=centroid,
        out_of_plane_rms=float(np.sqrt(np.mean(distance**2))),
        in_plane_extent=extent,
    )


def _first_axis(normal: FloatArray) -> FloatArray:
    """The x axis projected into the plane (the y axis when x is nearly normal to it)."""
    axis = np.array([1.0, 0.0, 0.0]) if abs(normal[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    in_plane = axis - (axis @ normal) * normal
    return in_plane / np.linalg.norm(in_plane)
