"""``forcefit inspect``: what a file holds, before any fit."""

from __future__ import annotations

import argparse
import sys
import warnings
from typing import TYPE_CHECKING, Any

from ..errors import ForcefitError, ForcefitWarning
from ._camera import camera_lines, camera_record
from ._common import EXIT_BAD_INPUT, EXIT_OK, FORMATTER, Reports, read_tracks

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    pass

_INSPECT_EXAMPLES = """\
examples:
  forcefit inspect run_04.csv
  forcefit inspect bob.csv --length-unit px --scale "1.6 mm" --origin 958.3,541.7 --flip-y
  forcefit inspect tracker.tsv --column t=Zeit --column x=X-Pos --column y=Y-Pos --json
  forcefit inspect frames.csv --frame-rate 240
  forcefit inspect swing.csv --plane-marks 102,388,530,392,488,95,140,97 --plane-rectangle "0.8x0.6 m"
"""


def _cmd_inspect(args: argparse.Namespace) -> int:
    from ..reading.inspection import inspect_track

    status, reports = EXIT_OK, Reports(args.json)
    for path in args.files:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", ForcefitWarning)  # shown in the summary
                tracks = read_tracks(path, args)
                summaries = [inspect_track(track) for track in tracks]
        except ForcefitError as exc:
            print(f"forcefit: {exc}", file=sys.stderr)
            status = EXIT_BAD_INPUT
            continue
        for summary, track in zip(summaries, tracks):
            reports.add({**summary.to_dict(), **camera_record(track)},
                        "\n".join([summary.to_text(), *camera_lines(track)]))
    reports.close()
    return status



def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``inspect`` command."""
    parser = commands.add_parser(
        "inspect", parents=[loading], formatter_class=FORMATTER, epilog=_INSPECT_EXAMPLES,
        help="show what a file holds: points, timing, gaps, extent, units, warnings",
        description="Show what a file of tracked positions holds before fitting it.")
    parser.add_argument("files", nargs="+", metavar="FILE")
    parser.add_argument("--json", action="store_true", help="print JSON instead of a table")
    parser.set_defaults(handler=_cmd_inspect)
