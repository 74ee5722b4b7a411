"""Options every reading command shares for videos and cameras: tracking, plane marks, lens.

Kept apart from ``_common`` so that ``forcefit track`` can use the same tracking options.
"""

from __future__ import annotations

import argparse
import re
import sys
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

from ..errors import InputError

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    from ..reading.perspective import PlaneMapping
    from ..track import Track


def _numbers(text: str, option: str) -> list[float]:
    try:
        return [float(v) for v in text.replace(";", ",").split(",") if v.strip()]
    except ValueError:
        raise InputError(f'{option} expects numbers separated by commas, got "{text}".') from None


def _pairs(text: str, option: str) -> list[tuple[float, float]]:
    values = _numbers(text, option)
    if len(values) % 2:
        raise InputError(f'{option} expects pairs X1,Y1,X2,Y2,...; got {len(values)} numbers in "{text}".')
    return list(zip(values[::2], values[1::2]))


def region(text: str) -> tuple[int, int, int, int]:
    """Parse ``"X,Y,W,H"`` (px) into four integers."""
    try:
        values = tuple(int(round(float(v))) for v in text.split(","))
    except ValueError:
        values = ()
    if len(values) != 4:
        raise argparse.ArgumentTypeError(f'expected "X,Y,WIDTH,HEIGHT" in px, got "{text}"')
    return values[0], values[1], values[2], values[3]


def colour(text: str) -> str | tuple[float, float]:
    """A colour name, or a hue range ``"H1-H2"`` in degrees."""
    from ..reading._blobs import NAMED_HUES

    match = re.fullmatch(r"\s*(\d+(?:\.\d*)?)\s*-\s*(\d+(?:\.\d*)?)\s*", text)
    if match:
        return float(match[1]), float(match[2])
    if text.lower() in NAMED_HUES:
        return text.lower()
    raise argparse.ArgumentTypeError(
        f'expected a colour name ({", ".join(NAMED_HUES)}) or a hue range in degrees such as 90-150, '
        f'got "{text}"')


def rectangle(text: str) -> tuple[float, float, str]:
    """Parse ``"0.8x0.6 m"`` into (width, height, unit)."""
    match = re.fullmatch(r"\s*([-+0-9.eE]+)\s*[xX×]\s*([-+0-9.eE]+)\s*([A-Za-z]+)\s*", text)
    try:
        if match is not None:
            return float(match[1]), float(match[2]), match[3]
    except ValueError:
        pass
    raise argparse.ArgumentTypeError(f'expected WIDTHxHEIGHT with a unit such as "0.8x0.6 m", got "{text}"')


def add_tracking_options(parser: argparse.ArgumentParser) -> None:
    """The options that say how to find the marker in a video."""
    from ..reading._blobs import NAMED_HUES

    group = parser.add_argument_group("tracking a video (.mp4 .avi .mov .mkv)")
    group.add_argument("--marker", choices=("bright", "dark", "colour"),
                       help="the marker is brighter or darker than what lies behind it, or coloured "
                            "(default bright)")
    group.add_argument("--colour", type=colour, metavar="NAME|H1-H2",
                       help=f"with --marker colour: {', '.join(NAMED_HUES)}, or a hue range in degrees")
    group.add_argument("--region", type=region, metavar="X,Y,W,H",
                       help="search only this part of the frame (px: left, top, width, height)")
    group.add_argument("--min-area", type=int, metavar="PX",
                       help="smallest blob taken for the marker, in pixels (default 5)")
    group.add_argument("--max-area", type=int, metavar="PX", help="largest blob taken for the marker")
    group.add_argument("--threshold", type=float, metavar="LEVELS",
                       help="grey levels (0-255) a pixel must differ from the background "
                            "(default: 6 x the noise, at least 8)")
    group.add_argument("--no-background", action="store_true",
                       help="do not subtract the median frame (for a camera that moves)")
    group.add_argument("--centroid", choices=("weighted", "gaussian"),
                       help="intensity-weighted centroid (default) or a fitted 2-D Gaussian")


def tracking_keywords(args: argparse.Namespace) -> dict[str, Any]:
    """The `track_video` options given on the command line (only those given)."""
    chosen = {"marker": args.marker, "colour": args.colour, "region": args.region,
              "min_area": args.min_area, "max_area": args.max_area, "threshold": args.threshold,
              "centroid": args.centroid}
    keywords = {name: value for name, value in chosen.items() if value is not None}
    if args.no_background:
        keywords["background"] = False
    if getattr(args, "progress", None) is not False and sys.stderr.isatty():
        keywords["progress"] = True
    return keywords


def add_plane_options(parser: argparse.ArgumentParser) -> None:
    """The options that map a tilted camera's image onto the plane of motion."""
    group = parser.add_argument_group("a camera at an angle to the plane")
    group.add_argument("--plane-marks", metavar="X1,Y1,...,X4,Y4",
                       help="image positions (px) of four or more marks on the plane of motion")
    group.add_argument("--plane-rectangle", type=rectangle, metavar='"WxH UNIT"',
                       help='the four marks are the corners of a rectangle this size, e.g. "0.8x0.6 m", '
                            "listed counter-clockwise from the corner that becomes the origin")
    group.add_argument("--plane-points", metavar="X1,Y1,...",
                       help="the marks' positions on the plane (with --plane-unit), same order")
    group.add_argument("--plane-unit", metavar="UNIT", help="length unit of --plane-points (m, mm, ...)")
    group.add_argument("--lens", metavar="LENS.toml",
                       help="correct lens distortion first (a file from forcefit calibrate-lens)")


def plane_mapping(args: argparse.Namespace) -> PlaneMapping | None:
    """The mapping the plane options ask for, or None."""
    from ..reading.lens import load_lens
    from ..reading.perspective import PlaneMapping

    lens = load_lens(args.lens) if args.lens else None
    if args.plane_marks is None:
        if args.plane_rectangle or args.plane_points or args.plane_unit or lens is not None:
            raise InputError("--plane-rectangle, --plane-points, --plane-unit and --lens need --plane-marks "
                             "(the image positions of the marks, in px).")
        return None
    marks = _pairs(args.plane_marks, "--plane-marks")
    if (args.plane_rectangle is None) == (args.plane_points is None):
        raise InputError("--plane-marks needs where the marks are on the plane: either --plane-rectangle "
                         '"WxH UNIT" or --plane-points X1,Y1,... with --plane-unit (one of the two).')
    if args.plane_rectangle is not None:
        width, height, unit = args.plane_rectangle
        return PlaneMapping.from_rectangle(marks, width=width, height=height, unit=unit, lens=lens)
    if args.plane_unit is None:
        raise InputError('--plane-points needs --plane-unit (the unit of the plane positions, e.g. "m").')
    points = _pairs(args.plane_points, "--plane-points")
    return PlaneMapping.from_marks(marks, points, unit=args.plane_unit, lens=lens)


def camera_lines(track: Track) -> list[str]:
    """Lines that say how a track came from a video and a camera, for the terminal."""
    lines = []
    video = track.metadata.get("video")
    if video:
        lost = video["n_lost"]
        rate = "variable" if video["variable_rate"] else "constant"
        lines.append(f"  video: {video['frames']} frames, marker lost in {lost}; times from the "
                     f"{video['timestamps']}, {rate} frame rate")
    mapping = track.metadata.get("plane_mapping")
    if mapping:
        low, high = mapping["scale_per_px_at_marks"]
        lines.append(f"  plane: homography from {len(mapping['marks_px'])} plane marks to {mapping['unit']}"
                     f" ({low:.4g} to {high:.4g} {mapping['unit']} per px across the marks"
                     + ("; lens corrected" if mapping["lens"] else "") + ")")
    return lines


def camera_record(track: Track) -> dict[str, Any]:
    """The video report and the plane mapping of a track, for JSON."""
    from .._json import json_safe  # numpy: not for the command line's --help

    record = {key: track.metadata[key] for key in ("video", "plane_mapping") if track.metadata.get(key)}
    return dict(json_safe(record))


def parse_marks(text: str | None) -> Sequence[tuple[float, float]]:
    """``--plane-marks`` as pairs, for drawing them (empty when not given)."""
    return [] if text is None else _pairs(text, "--plane-marks")
