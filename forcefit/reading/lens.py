"""Lens distortion: measured from photographs of a chessboard, kept in a small TOML file.

A wide phone lens bends straight lines near the edges of the picture (barrel
distortion); a homography cannot undo that, so it is corrected first. The model is
OpenCV's: radial terms k1, k2, k3 and tangential terms p1, p2 about the principal
point (Brown 1966), measured from several views of a flat chessboard by OpenCV's
camera calibration (Zhang 2000).

References
----------
Brown, D. C. (1966). Decentering distortion of lenses. Photogrammetric Engineering 32(3), 444-462.
Zhang, Z. (2000). A flexible new technique for camera calibration. IEEE Transactions on
Pattern Analysis and Machine Intelligence 22(11), 1330-1334.
"""

from __future__ import annotations

import math
import os
import sys
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .._types import FloatArray
from ..errors import InputError
from ._decode import cv2_module

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - Python 3.10
    import tomli as tomllib

MIN_VIEWS = 3
"""Fewest chessboard views that fix the focal length, principal point and distortion."""


@dataclass(frozen=True, kw_only=True)
class LensModel:
    """A camera's focal length, principal point and lens distortion (OpenCV's model).

    Parameters
    ----------
    focal_length : (float, float)
        fx, fy in px.
    principal_point : (float, float)
        cx, cy in px (x to the right, y downwards from the top-left pixel's centre).
    distortion : tuple of float
        k1, k2, p1, p2, k3 (dimensionless), OpenCV's order.
    image_size : (int, int)
        Width and height of the images it was measured on, in px.
    reprojection_rms : float
        RMS distance between the detected and the modelled chessboard corners, px.
    images : tuple of str
        The photographs used.
    """

    focal_length: tuple[float, float]
    principal_point: tuple[float, float]
    distortion: tuple[float, ...]
    image_size: tuple[int, int]
    reprojection_rms: float = math.nan
    images: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        numbers = (*self.focal_length, *self.principal_point, *self.distortion)
        if len(self.focal_length) != 2 or len(self.principal_point) != 2 or len(self.distortion) < 4:
            raise InputError("a lens model needs two focal lengths, a principal point (two numbers) "
                             "and at least four distortion coefficients (k1, k2, p1, p2).")
        if not all(math.isfinite(float(v)) for v in numbers) or min(self.focal_length) <= 0:
            raise InputError(f"a lens model needs finite numbers and positive focal lengths, got "
                             f"{self.focal_length!r} and {self.distortion!r}.")

    @property
    def camera_matrix(self) -> FloatArray:
        """K = [[fx, 0, cx], [0, fy, cy], [0, 0, 1]] in px."""
        (fx, fy), (cx, cy) = self.focal_length, self.principal_point
        return np.array([[fx, 0.0, cx], [0.0, fy, cy], [0.0, 0.0, 1.0]])

    def undistort(self, x: FloatArray, y: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Where the pixels ``(x, y)`` would be seen through a distortion-free lens of the same K (px)."""
        cv2 = cv2_module()
        points = np.column_stack((x, y)).astype(np.float64).reshape(-1, 1, 2)
        if points.size == 0:
            return np.asarray(x, dtype=np.float64), np.asarray(y, dtype=np.float64)
        criteria = (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 50, 1e-10)
        matrix, coefficients = self.camera_matrix, np.array(self.distortion)
        if hasattr(cv2, "undistortPointsIter"):      # OpenCV 4 names the iterated version apart
            ideal = cv2.undistortPointsIter(points, matrix, coefficients, None, matrix, criteria)
        else:
            ideal = cv2.undistortPoints(points, matrix, coefficients, None, None, matrix, criteria)
        ideal = ideal.reshape(-1, 2)
        return np.asarray(ideal[:, 0], dtype=np.float64), np.asarray(ideal[:, 1], dtype=np.float64)

    def describe(self) -> dict[str, Any]:
        """The model as plain values."""
        return {
            "focal_length_px": list(self.focal_length),
            "principal_point_px": list(self.principal_point),
            "distortion": list(self.distortion),
            "image_size_px": list(self.image_size),
            "reprojection_rms_px": self.reprojection_rms,
        }

    def to_toml(self) -> str:
        """The model as a TOML document (read back by `LensModel.from_toml`)."""
        def numbers(values: Sequence[float]) -> str:
            return "[" + ", ".join(repr(float(v)) for v in values) + "]"

        images = ", ".join('"' + name.replace("\\", "\\\\").replace('"', '\\"') + '"' for name in self.images)
        return "\n".join([
            "# forcefit lens model: focal length, principal point and distortion of one camera,",
            "# measured from photographs of a chessboard (OpenCV's camera calibration).",
            "[lens]",
            f"image_size = [{self.image_size[0]}, {self.image_size[1]}]  # width, height in px",
            f"focal_length = {numbers(self.focal_length)}  # fx, fy in px",
            f"principal_point = {numbers(self.principal_point)}  # cx, cy in px",
            f"distortion = {numbers(self.distortion)}  # k1, k2, p1, p2, k3 (OpenCV's order)",
            f"reprojection_rms = {self.reprojection_rms!r}  # px",
            f"images = [{images}]",
            "",
        ])

    @classmethod
    def from_toml(cls, text: str, *, source: str = "lens model") -> LensModel:
        """Read a model written by `to_toml` (``source`` names the file in errors)."""
        try:
            lens = tomllib.loads(text)["lens"]
            return cls(
                focal_length=(float(lens["focal_length"][0]), float(lens["focal_length"][1])),
                principal_point=(float(lens["principal_point"][0]), float(lens["principal_point"][1])),
                distortion=tuple(float(v) for v in lens["distortion"]),
                image_size=(int(lens["image_size"][0]), int(lens["image_size"][1])),
                reprojection_rms=float(lens.get("reprojection_rms", math.nan)),
                images=tuple(str(v) for v in lens.get("images", ())),
            )
        except tomllib.TOMLDecodeError:
            problem = "is not valid TOML"
        except (KeyError, IndexError, TypeError, ValueError):
            problem = ("lacks a [lens] table with image_size, focal_length, principal_point and "
                       "distortion")
        raise InputError(f"{source}: {problem}. Write it again with forcefit calibrate-lens.")


def load_lens(path: str | os.PathLike[str]) -> LensModel:
    """Read a lens model from a TOML file written by ``forcefit calibrate-lens``."""
    file = Path(path)
    try:
        text = file.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError(f"{file}: file not found. Check the path of the lens model.") from None
    except (OSError, UnicodeDecodeError):
        raise InputError(f"{file}: cannot be read as a text file. Give the .toml file that "
                         "forcefit calibrate-lens wrote.") from None
    return LensModel.from_toml(text, source=str(file))


def _corners(cv2: Any, image: np.ndarray, inner_corners: tuple[int, int]) -> FloatArray | None:
    """Sub-pixel chessboard corners of one image, or None where the board is not found."""
    flags = cv2.CALIB_CB_ADAPTIVE_THRESH | cv2.CALIB_CB_NORMALIZE_IMAGE
    found, corners = cv2.findChessboardCorners(image, inner_corners, None, flags)
    if not found:
        return None
    spacing = float(np.min(np.hypot(*np.diff(corners.reshape(-1, 2), axis=0).T)))
    half = int(max(2, min(7, spacing // 3)))
    criteria = (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 100, 1e-4)
    refined = cv2.cornerSubPix(image, corners, (half, half), (-1, -1), criteria)
    return np.asarray(refined, dtype=np.float32)


def _read_image(cv2: Any, path: str | os.PathLike[str]) -> np.ndarray:
    if not Path(path).is_file():
        raise InputError(f"{path}: file not found. Check the path of the chessboard photograph.")
    image = cv2.imread(str(path), cv2.IMREAD_GRAYSCALE)
    if image is None:
        raise InputError(f"{path}: cannot be read as an image; expected a PNG or JPEG photograph "
                         "of the chessboard. Export it again as PNG or JPEG.")
    return np.asarray(image)


def calibrate_lens(
    images: Sequence[str | os.PathLike[str]], *, inner_corners: tuple[int, int] = (9, 6)
) -> LensModel:
    """Measure a camera's lens from photographs of a flat chessboard.

    Parameters
    ----------
    images : sequence of path-like
        Photographs (PNG, JPEG) of one chessboard from several angles, all the same size
        and taken at the zoom and focus the video uses.
    inner_corners : (int, int)
        Inner corners along each side of the board (squares minus one), e.g. (9, 6)
        for a board of 10 x 7 squares.

    Returns
    -------
    LensModel
        With the views it used and the RMS reprojection error in px.

    Raises
    ------
    InputError
        An unreadable image, images of different sizes, or fewer than three views
        where the whole board was found.
    """
    cv2 = cv2_module()
    columns, rows = inner_corners
    if columns < 2 or rows < 2:
        raise InputError(f"a chessboard has at least 2 x 2 inner corners, got {columns} x {rows}.")
    board = np.zeros((columns * rows, 3), np.float32)
    board[:, :2] = np.mgrid[0:columns, 0:rows].T.reshape(-1, 2)
    found: list[FloatArray] = []
    used: list[str] = []
    missed: list[str] = []
    size: tuple[int, int] | None = None
    for path in images:
        image = _read_image(cv2, path)
        shape = (image.shape[1], image.shape[0])
        if size is not None and shape != size:
            raise InputError(f"{path}: {shape[0]} x {shape[1]} px, but the first photograph is "
                             f"{size[0]} x {size[1]} px. Use photographs of one size, from one "
                             "camera setting.")
        size = shape
        corners = _corners(cv2, image, inner_corners)
        (missed if corners is None else used).append(str(path))
        if corners is not None:
            found.append(corners)
    if len(found) < MIN_VIEWS or size is None:
        where = f" (not found in: {', '.join(missed)})" if missed else ""
        raise InputError(
            f"the {columns} x {rows} inner corners of the chessboard were found in {len(found)} "
            f"photograph(s){where}; at least {MIN_VIEWS} are needed. Photograph the whole board, "
            "flat and sharp, from several angles, and check the corner count (squares minus one)."
        )
    rms, matrix, distortion, _, _ = cv2.calibrateCamera([board] * len(found), found, size, None, None)
    coefficients = np.asarray(distortion, dtype=np.float64).ravel()[:5]
    return LensModel(
        focal_length=(float(matrix[0, 0]), float(matrix[1, 1])),
        principal_point=(float(matrix[0, 2]), float(matrix[1, 2])),
        distortion=tuple(float(v) for v in coefficients),
        image_size=(int(size[0]), int(size[1])),
        reprojection_rms=float(rms),
        images=tuple(used),
    )
