"""``forcefit calibrate-lens``: photographs of a chessboard → the camera's lens model (TOML)."""

from __future__ import annotations

import argparse
import json
import re
from typing import TYPE_CHECKING, Any

from .._atomic import write_atomic
from .._json import json_safe
from ._common import EXIT_OK, FORMATTER

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    pass

_LENS_EXAMPLES = """\
examples:
  forcefit calibrate-lens board_*.jpg --out phone.toml
  forcefit calibrate-lens views/*.png --corners 7x5 --out lens.toml
then:
  forcefit fit swing.csv --lens phone.toml --plane-marks ... --plane-rectangle "0.8x0.6 m"
"""


def _corners(text: str) -> tuple[int, int]:
    match = re.fullmatch(r"\s*(\d+)\s*[xX×]\s*(\d+)\s*", text)
    if match is None:
        raise argparse.ArgumentTypeError(
            f'expected inner corners as COLUMNSxROWS such as "9x6", got "{text}"')
    return int(match[1]), int(match[2])


def _cmd_calibrate_lens(args: argparse.Namespace) -> int:
    from ..reading.lens import calibrate_lens

    lens = calibrate_lens(args.images, inner_corners=args.corners)
    write_atomic(args.out, lens.to_toml())
    if args.json:
        print(json.dumps(json_safe({**lens.describe(), "images": list(lens.images), "out": args.out}),
                         indent=2))
        return EXIT_OK
    (fx, fy), (cx, cy) = lens.focal_length, lens.principal_point
    skipped = [str(p) for p in args.images if str(p) not in lens.images]
    print(f"lens from {len(lens.images)} photographs of the {args.corners[0]} x {args.corners[1]} board"
          + (f" (board not found in: {', '.join(skipped)})" if skipped else ""))
    print(f"  focal length     {fx:.2f}, {fy:.2f} px")
    print(f"  principal point  {cx:.2f}, {cy:.2f} px  (image {lens.image_size[0]} x {lens.image_size[1]} px)")
    print("  distortion       " + ", ".join(f"{name} = {value:.4g}" for name, value in
                                            zip(("k1", "k2", "p1", "p2", "k3"), lens.distortion)))
    print(f"  corners fit to   {lens.reprojection_rms:.3g} px RMS"
          + ("  (more than 1 px: check that the board is flat and the photographs sharp)"
             if lens.reprojection_rms > 1.0 else ""))
    print(f"  wrote {args.out}")
    return EXIT_OK


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``calibrate-lens`` command."""
    parser = commands.add_parser(
        "calibrate-lens", formatter_class=FORMATTER, epilog=_LENS_EXAMPLES,
        help="measure a camera's lens distortion from photographs of a chessboard",
        description="Measure focal length, principal point and lens distortion from photographs of a "
                    "flat chessboard (OpenCV's camera calibration); write them as TOML for --lens.")
    parser.add_argument("images", nargs="+", metavar="IMAGE")
    parser.add_argument("--out", required=True, metavar="LENS.toml", help="where to write the lens model")
    parser.add_argument("--corners", type=_corners, default=(9, 6), metavar="COLSxROWS",
                        help="inner corners of the board, squares minus one (default 9x6)")
    parser.add_argument("--json", action="store_true", help="print the lens model as JSON")
    parser.set_defaults(handler=_cmd_calibrate_lens)
