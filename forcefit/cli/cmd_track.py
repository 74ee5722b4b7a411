"""``forcefit track``: a video → a track file (px, s) and an overlay picture to check by eye."""

from __future__ import annotations

import argparse
import json
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .._atomic import write_atomic
from .._json import json_safe
from ..errors import InputError
from ._camera import add_tracking_options, parse_marks, tracking_keywords
from ._common import EXIT_OK, FORMATTER

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    pass

_TRACK_EXAMPLES = """\
examples:
  forcefit track swing.mp4 --out swing.csv --overlay swing.png
  forcefit track puck.mov --marker dark --region 120,40,900,660 --min-area 30
  forcefit track bob.mp4 --marker colour --colour green --out bob.csv
  forcefit track table.mkv --overlay check.png --plane-marks 102,388,530,392,488,95,140,97
then:
  forcefit fit swing.csv
"""


def _cmd_track(args: argparse.Namespace) -> int:
    from ..reading.video import is_video, track_video

    if not is_video(args.video):
        raise InputError(f"{args.video}: not a video by its ending; expected .mp4, .avi, .mov or .mkv. "
                         "Give the video file (a track file is read by fit and inspect directly).")
    out = Path(args.out) if args.out else Path(args.video).with_suffix(".csv")
    if out.resolve() == Path(args.video).resolve():
        raise InputError(f"{out}: the output would replace the video. Choose another --out.")
    tracked = track_video(args.video, **tracking_keywords(args))
    write_atomic(out, tracked.to_csv())
    if args.overlay:
        write_atomic(args.overlay, tracked.overlay_png(marks=parse_marks(args.plane_marks)))
    if args.json:
        report = {**tracked.describe(), "out": str(out), "overlay": args.overlay}
        print(json.dumps(json_safe(report), indent=2))
        return EXIT_OK
    print(tracked.to_text())
    print(f"  wrote {out}" + (f" and the overlay {args.overlay}" if args.overlay else ""))
    print(f"  next: forcefit inspect {out}   then   forcefit fit {out}")
    return EXIT_OK


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``track`` command."""
    parser = commands.add_parser(
        "track", formatter_class=FORMATTER, epilog=_TRACK_EXAMPLES,
        help="find a marked body in every frame of a video and write its track (px, s)",
        description="Find a marked body in every frame of a video; write the track file (frame, "
                    "t (s), x (px), y (px); empty cells where the marker was lost).")
    parser.add_argument("video", metavar="VIDEO")
    parser.add_argument("--out", metavar="FILE.csv", help="the track file (default: VIDEO with .csv)")
    parser.add_argument("--overlay", metavar="FILE.png", help="also draw the tracked path on the scene")
    parser.add_argument("--plane-marks", metavar="X1,Y1,...",
                        help="draw these image positions (px) on the overlay, numbered")
    parser.add_argument("--no-progress", dest="progress", action="store_false",
                        help="no progress bar")
    parser.add_argument("--json", action="store_true", help="print the tracking report as JSON")
    add_tracking_options(parser)
    parser.set_defaults(handler=_cmd_track)
