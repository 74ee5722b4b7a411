"""From the image to the plane of motion: the homography fixed by marks of known position.

A camera that looks at a plane from an angle sees it through a projective map (a
homography): straight lines stay straight, but lengths shrink with distance, so an
ellipse about a force centre becomes another ellipse whose centre is no longer the
centre's image. Four or more marks whose positions on the plane are known fix the
map; applying its inverse on loading gives positions on the plane itself.

References
----------
Hartley, R. and Zisserman, A. (2003). Multiple View Geometry in Computer Vision,
2nd ed., Cambridge University Press. Algorithm 4.2: the normalised direct linear
transformation (DLT) for 2-D homographies.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._types import FloatArray
from ..errors import InputError
from ..units import parse_length_unit
from .lens import LensModel

MIN_MARKS = 4
"""Fewest marks that fix a homography (eight unknowns, two equations per mark)."""

_COLLINEAR = 1e-3
"""Smallest area of a triangle of marks, relative to their spread squared, not called a line."""

Points = Sequence[Sequence[float]] | FloatArray


def _as_points(points: Points, name: str) -> FloatArray:
    try:
        array = np.array(points, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected pairs of numbers (x, y), got {points!r}.") from None
    if array.ndim != 2 or array.shape[1] != 2:
        raise InputError(f"{name}: expected pairs of numbers (x, y), got an array of shape {array.shape}.")
    if not np.isfinite(array).all():
        raise InputError(f"{name}: every coordinate must be a finite number, got {points!r}.")
    return array


def _normalising(points: FloatArray) -> FloatArray:
    """Similarity that moves the centroid to 0 and the mean distance to sqrt(2) (H&Z 2003, Sec. 4.4.4)."""
    centroid = points.mean(axis=0)
    spread = float(np.mean(np.hypot(*(points - centroid).T)))
    scale = math.sqrt(2.0) / spread if spread > 0 else 1.0
    return np.array([[scale, 0.0, -scale * centroid[0]],
                     [0.0, scale, -scale * centroid[1]],
                     [0.0, 0.0, 1.0]])


def _project(matrix: FloatArray, points: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Image of ``points`` (n, 2) under ``matrix``, and the homogeneous w of each."""
    homogeneous = np.column_stack((points, np.ones(len(points)))) @ matrix.T
    return homogeneous[:, :2] / homogeneous[:, 2:], homogeneous[:, 2]


def _refuse_lines(points: FloatArray, name: str) -> None:
    """With four marks exactly, no three may lie on one line."""
    spread = float(np.mean(np.sum((points - points.mean(axis=0)) ** 2, axis=1)))
    for triple in itertools.combinations(range(len(points)), 3):
        a, b, c = points[list(triple)]
        area = 0.5 * abs((b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0]))
        if area <= _COLLINEAR * spread:
            numbers = ", ".join(str(i + 1) for i in triple)
            raise InputError(
                f"{name} {numbers} lie (nearly) on one line, so the four marks do not fix the "
                "plane's perspective. Use marks at the corners of a quadrilateral, no three in a line."
            )


def fit_homography(source: Points, target: Points) -> FloatArray:
    """The homography H that maps ``source`` points onto ``target`` points (least squares).

    Solves ``target ~ H source`` in homogeneous coordinates by the normalised direct
    linear transformation: both point sets are moved and scaled to a standard
    position, the 2n x 9 system is solved by singular value decomposition, and the
    normalisation is undone (Hartley & Zisserman 2003, Alg. 4.2). With four points the
    map is exact; with more it minimises the algebraic error.

    Parameters
    ----------
    source, target : sequence of (float, float), length n >= 4
        Corresponding points, each in its own unit (e.g. image px and plane mm).

    Returns
    -------
    ndarray, shape (3, 3)
        H scaled so that ``H[2, 2] = 1`` where that is possible (unit norm otherwise).

    Raises
    ------
    InputError
        Fewer than four pairs, unequal counts, or points that do not fix a homography
        (three of four on a line; all on a line).

    Examples
    --------
    >>> square = [(0, 0), (1, 0), (1, 1), (0, 1)]
    >>> image = [(10, 20), (30, 20), (30, 40), (10, 40)]       # scaled by 20, moved
    >>> fit_homography(image, square).round(6) + 0.0
    array([[ 0.05,  0.  , -0.5 ],
           [ 0.  ,  0.05, -1.  ],
           [ 0.  ,  0.  ,  1.  ]])
    """
    image, plane = _as_points(source, "source points"), _as_points(target, "target points")
    if len(image) != len(plane):
        raise InputError(f"{len(image)} source points but {len(plane)} target points: give one "
                         "target for each source point, in the same order.")
    if len(image) < MIN_MARKS:
        raise InputError(f"{len(image)} point pairs, at least {MIN_MARKS} are needed to fix a homography.")
    if len(image) == MIN_MARKS:
        _refuse_lines(image, "source points")
        _refuse_lines(plane, "target points")
    first, second = _normalising(image), _normalising(plane)
    a, _ = _project(first, image)
    b, _ = _project(second, plane)
    rows = []
    for (x, y), (u, v) in zip(a, b):
        rows.append([0.0, 0.0, 0.0, -x, -y, -1.0, v * x, v * y, v])
        rows.append([x, y, 1.0, 0.0, 0.0, 0.0, -u * x, -u * y, -u])
    _, singular, vectors = np.linalg.svd(np.asarray(rows))
    if singular[-2] <= 1e-10 * singular[0]:
        raise InputError("the points do not fix a homography (they lie on a line or repeat). "
                         "Use at least four marks spread over the plane, no three in a line.")
    normalised = vectors[-1].reshape(3, 3)
    matrix = np.linalg.solve(second, normalised @ first)
    if abs(np.linalg.det(matrix)) <= 1e-12 * np.linalg.norm(matrix) ** 3:
        raise InputError("the points give a singular map (the marks' order may differ from the "
                         "points' order). List the marks and their plane points in the same order.")
    scale = matrix[2, 2] if abs(matrix[2, 2]) > 1e-12 * np.linalg.norm(matrix) else np.linalg.norm(matrix)
    return np.asarray(matrix / scale, dtype=np.float64)


def apply_homography(matrix: FloatArray, x: FloatArray, y: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Map points ``(x, y)`` by the homography ``matrix`` (inhomogeneous coordinates in and out).

    Examples
    --------
    >>> matrix = np.array([[2.0, 0.0, 1.0], [0.0, 2.0, 0.0], [0.0, 0.0, 1.0]])
    >>> apply_homography(matrix, np.array([1.0]), np.array([3.0]))
    (array([3.]), array([6.]))
    """
    mapped, _ = _project(np.asarray(matrix, dtype=np.float64), np.column_stack((x, y)))
    return mapped[:, 0], mapped[:, 1]


@dataclass(frozen=True, kw_only=True)
class PlaneMapping:
    """Image positions → positions on the plane of motion, by a homography fixed by marks.

    Build it with `PlaneMapping.from_marks` or `PlaneMapping.from_rectangle`. Image
    positions are pixels (x to the right, y downwards); when a `LensModel` is given,
    they are first corrected for lens distortion, then mapped.

    Parameters
    ----------
    matrix : tuple of 3 tuples of 3 floats
        The homography from (undistorted) image px to the plane, in ``unit``.
    unit : str
        Length unit of the plane positions (m, mm, ...).
    marks : tuple of (float, float)
        Image positions of the marks as given, in px.
    points : tuple of (float, float)
        Their positions on the plane, in ``unit``.
    lens : LensModel, optional
        Lens distortion corrected before the homography.
    mark_rms : float
        RMS distance (``unit``) between the mapped marks and their plane points:
        0 for four marks, a check on the marks' placement for more.

    Examples
    --------
    >>> marks = [(100.0, 300.0), (500.0, 300.0), (500.0, 100.0), (100.0, 100.0)]
    >>> mapping = PlaneMapping.from_rectangle(marks, width=0.8, height=0.4, unit="m")
    >>> [round(float(v[0]), 6) for v in mapping.apply(np.array([300.0]), np.array([200.0]))]
    [0.4, 0.2]
    """

    matrix: tuple[tuple[float, float, float], ...]
    unit: str
    marks: tuple[tuple[float, float], ...]
    points: tuple[tuple[float, float], ...]
    lens: LensModel | None = None
    mark_rms: float = 0.0

    @classmethod
    def from_marks(
        cls, marks: Points, points: Points, *, unit: str, lens: LensModel | None = None
    ) -> PlaneMapping:
        """The mapping fixed by image ``marks`` (px) whose plane positions ``points`` (``unit``) are known.

        Parameters
        ----------
        marks : sequence of (float, float), length >= 4
            Image positions of the marks, in px, as measured on a frame of the video.
        points : sequence of (float, float)
            The same marks' positions on the plane of motion, in ``unit``, in the same order.
        unit : str
            Length unit of ``points``.
        lens : LensModel, optional
            The camera's lens distortion, corrected before the homography.
        """
        unit = parse_length_unit(unit)
        image, plane = _as_points(marks, "plane marks"), _as_points(points, "plane points")
        if len(image) != len(plane):
            raise InputError(f"{len(image)} plane marks but {len(plane)} plane points: give the "
                             "plane position of each mark, in the same order.")
        ideal = np.column_stack(lens.undistort(image[:, 0], image[:, 1])) if lens is not None else image
        try:
            matrix = fit_homography(ideal, plane)
        except InputError as exc:
            raise InputError(str(exc).replace("source points", "plane marks")
                             .replace("target points", "plane points")) from None
        mapped, w = _project(matrix, ideal)
        if not ((w > 0).all() or (w < 0).all()):
            raise InputError(
                "the plane marks and the plane points are listed in different orders (the map "
                "would fold the plane). List both in the same order around the marks."
            )
        rms = float(np.sqrt(np.mean(np.sum((mapped - plane) ** 2, axis=1))))
        return cls(
            matrix=tuple(tuple(float(v) for v in row) for row in matrix),  # type: ignore[misc]
            unit=unit,
            marks=tuple((float(a), float(b)) for a, b in image),
            points=tuple((float(a), float(b)) for a, b in plane),
            lens=lens,
            mark_rms=rms if len(image) > MIN_MARKS else 0.0,
        )

    @classmethod
    def from_rectangle(
        cls, marks: Points, *, width: float, height: float, unit: str, lens: LensModel | None = None
    ) -> PlaneMapping:
        """The mapping fixed by the four corners of a rectangle of known size.

        The corners are listed counter-clockwise as the picture shows them, starting at
        the one that becomes the origin: for a rectangle seen upright, bottom-left,
        bottom-right, top-right, top-left. The first side is the plane's x axis.

        Parameters
        ----------
        marks : four (float, float)
            Image positions of the corners, in px.
        width, height : float
            Lengths of the first side (along x) and of the second (along y), in ``unit``.
        """
        if len(marks) != MIN_MARKS:
            raise InputError(f"a rectangle has four corners; {len(marks)} plane marks were given.")
        if not (math.isfinite(width) and math.isfinite(height) and width > 0 and height > 0):
            raise InputError(f"the rectangle's size must be two positive lengths, got {width!r} x "
                             f"{height!r}.")
        points = [(0.0, 0.0), (width, 0.0), (width, height), (0.0, height)]
        return cls.from_marks(marks, points, unit=unit, lens=lens)

    @property
    def homography(self) -> FloatArray:
        """The 3 x 3 matrix as an array (image px → plane ``unit``)."""
        return np.array(self.matrix, dtype=np.float64)

    def apply(
        self, x: FloatArray, y: FloatArray, *, source: str = "the track"
    ) -> tuple[FloatArray, FloatArray]:
        """Plane positions (``unit``) of image positions ``x``, ``y`` (px).

        Raises
        ------
        InputError
            A position beyond the plane's horizon (it cannot be a point of the plane).
        """
        x, y = np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64)
        if self.lens is not None:
            x, y = self.lens.undistort(x, y)
        matrix = self.homography
        _, w_marks = _project(matrix, self._ideal_marks())
        mapped, w = _project(matrix, np.column_stack((x, y)))
        beyond = w * np.sign(w_marks[0]) <= 0
        if beyond.any():
            index = int(np.argmax(beyond))
            raise InputError(
                f"{source}: position {index + 1} ({x[index]:.6g}, {y[index]:.6g}) px lies beyond the "
                "horizon of the plane the marks define, so it cannot be on that plane. Check the "
                "plane marks (image positions of the same marks, in px)."
            )
        return mapped[:, 0], mapped[:, 1]

    def local_scale(self, x: FloatArray, y: FloatArray) -> FloatArray:
        """Plane length per image pixel at ``(x, y)``: sqrt of the map's area ratio (``unit``/px)."""
        step = 0.5
        x, y = np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64)
        x0, y0 = self.apply(x, y)
        x1, y1 = self.apply(x + step, y)
        x2, y2 = self.apply(x, y + step)
        area = np.abs((x1 - x0) * (y2 - y0) - (y1 - y0) * (x2 - x0)) / step**2
        return np.asarray(np.sqrt(area), dtype=np.float64)

    def _ideal_marks(self) -> FloatArray:
        marks = np.array(self.marks, dtype=np.float64)
        if self.lens is None:
            return marks
        return np.column_stack(self.lens.undistort(marks[:, 0], marks[:, 1]))

    def check_image_size(self, size: tuple[int, int], source: str) -> None:
        """Refuse a video whose frame size differs from the lens calibration's."""
        if self.lens is not None and tuple(size) != tuple(self.lens.image_size):
            raise InputError(
                f"{source}: frames are {size[0]} x {size[1]} px but the lens model was measured on "
                f"{self.lens.image_size[0]} x {self.lens.image_size[1]} px images. Calibrate the lens "
                "with photographs at the video's size, or leave the lens model out."
            )

    def describe(self) -> dict[str, Any]:
        """The mapping as plain values, for metadata, reports and JSON."""
        marks = np.array(self.marks)
        scale = self.local_scale(marks[:, 0], marks[:, 1])
        return {
            "kind": "homography",
            "method": "normalised DLT (Hartley & Zisserman 2003, Alg. 4.2)",
            "matrix": [list(row) for row in self.matrix],
            "unit": self.unit,
            "marks_px": [list(p) for p in self.marks],
            "points": [list(p) for p in self.points],
            "mark_rms": self.mark_rms,
            "scale_per_px_at_marks": [float(scale.min()), float(scale.max())],
            "lens": None if self.lens is None else self.lens.describe(),
        }

    def to_text(self) -> str:
        """One line for the terminal: how many marks, the unit, how much the scale varies."""
        low, high = self.describe()["scale_per_px_at_marks"]
        text = (f"homography from {len(self.marks)} plane marks to {self.unit}; "
                f"{low:.4g} to {high:.4g} {self.unit} per px across the marks")
        if len(self.marks) > MIN_MARKS:
            text += f"; marks fit to {self.mark_rms:.3g} {self.unit} RMS"
        if self.lens is not None:
            text += "; lens distortion corrected first"
        return text
