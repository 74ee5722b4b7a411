"""What every forcefit command shares: value parsers, the reading options, exit codes."""

from __future__ import annotations

import argparse
import re

from ..coordinates import Calibration
from ..errors import InputError
from ..loaders import load_tracks
from ..propagate import Drag
from ..track import Track
from ._camera import add_plane_options, add_tracking_options, plane_mapping, tracking_keywords

EXIT_OK, EXIT_FAILED_CHECKS, EXIT_BAD_INPUT = 0, 1, 2
FORMATTER = argparse.RawDescriptionHelpFormatter


def pair(text: str) -> tuple[float, float]:
    """Parse ``"x,y"`` into two floats."""
    parts = text.split(",")
    if len(parts) != 2:
        raise argparse.ArgumentTypeError(f'expected two numbers as "x,y", got "{text}"')
    try:
        return float(parts[0]), float(parts[1])
    except ValueError:
        raise argparse.ArgumentTypeError(f'expected two numbers as "x,y", got "{text}"') from None


def length(text: str) -> tuple[float, str]:
    """Parse a length with its unit, ``"1.6 mm"`` or ``"0.5m"``."""
    match = re.fullmatch(r"\s*([-+0-9.eE]+)\s*([A-Za-z]+)\s*", text)
    if match is None:
        raise argparse.ArgumentTypeError(f'expected a length with its unit such as "1.6 mm", got "{text}"')
    return float(match[1]), match[2]


def column(text: str) -> tuple[str, str]:
    role, _, name = text.partition("=")
    roles = ("t", "x", "y", "z", "sigma", "frame", "id")
    if role not in roles or not name:
        raise argparse.ArgumentTypeError(
            f'expected ROLE=NAME with ROLE one of {", ".join(roles)}, got "{text}"')
    return role, name


def drag(text: str) -> Drag:
    kind, _, value = text.partition(":")
    try:
        return Drag(kind, float(value))  # type: ignore[arg-type]
    except (ValueError, InputError):
        raise argparse.ArgumentTypeError(
            f'expected linear:C or quadratic:C with C >= 0, got "{text}"') from None


def loading_options() -> argparse.ArgumentParser:
    parent = argparse.ArgumentParser(add_help=False)
    group = parent.add_argument_group("reading the file")
    group.add_argument("--column", type=column, action="append", default=[], metavar="ROLE=NAME",
                       help="use column NAME for ROLE (t, x, y, z, sigma, frame, id); repeatable")
    group.add_argument("--length-unit", help="unit of the raw positions (px, mm, m, au, ...)")
    group.add_argument("--time-unit", help="unit of the times (s, ms, d, ...)")
    group.add_argument("--frame-rate", type=float,
                       help="frames per second, to turn a frame column into times")
    group.add_argument("--track-id", help="with an id column: the one track to use")
    group.add_argument("--sheet", default=0, help="Excel sheet name or 0-based number")
    calibration = parent.add_argument_group("calibrating pixels")
    calibration.add_argument("--scale", type=length, metavar="LENGTH",
                             help='length of one raw unit, e.g. "1.6 mm" per pixel')
    calibration.add_argument("--marks", metavar="X1,Y1,X2,Y2",
                             help="raw positions of two reference marks (use with --mark-distance)")
    calibration.add_argument("--mark-distance", type=length, metavar="LENGTH",
                             help='true distance between the marks, e.g. "0.5 m"')
    calibration.add_argument("--origin", type=pair, default=(0.0, 0.0), metavar="X,Y",
                             help="raw position that becomes (0, 0), e.g. the pivot's image")
    calibration.add_argument("--rotation", type=float, default=0.0, metavar="DEG",
                             help="turn the calibrated axes counter-clockwise by DEG degrees")
    calibration.add_argument("--flip-y", action="store_true",
                             help="image rows grow downwards: reverse the y axis")
    add_plane_options(parent)
    add_tracking_options(parent)
    return parent


def _calibration(args: argparse.Namespace) -> Calibration | None:
    if args.marks is not None:
        if args.mark_distance is None:
            raise InputError("--marks needs --mark-distance (e.g. --mark-distance \"0.5 m\").")
        try:
            x1, y1, x2, y2 = (float(v) for v in args.marks.split(","))
        except ValueError:
            raise InputError(f'--marks expects four numbers "X1,Y1,X2,Y2", got "{args.marks}".') from None
        distance, unit = args.mark_distance
        return Calibration.from_marks((x1, y1), (x2, y2), distance=distance, unit=unit,
                                      origin=args.origin, rotation=args.rotation, flip_y=args.flip_y)
    if args.scale is not None:
        scale, unit = args.scale
        return Calibration(scale=scale, unit=unit, origin=args.origin, rotation=args.rotation,
                           flip_y=args.flip_y)
    if args.flip_y or args.rotation or args.origin != (0.0, 0.0):
        raise InputError("--origin, --rotation and --flip-y need --scale or --marks.")
    return None


def loading_keywords(args: argparse.Namespace) -> dict[str, object]:
    """The keyword arguments of `load_tracks` the reading options ask for."""
    sheet = int(args.sheet) if str(args.sheet).isdigit() else args.sheet
    return {**dict(args.column), "length_unit": args.length_unit, "time_unit": args.time_unit,
            "frame_rate": args.frame_rate, "calibration": _calibration(args), "sheet": sheet,
            "track_id": args.track_id, "plane_mapping": plane_mapping(args),
            "video": tracking_keywords(args)}


def read_tracks(path: str, args: argparse.Namespace) -> list[Track]:
    """Load the tracks of one file with the reading and calibration options."""
    return load_tracks(path, **loading_keywords(args))  # type: ignore[arg-type]
