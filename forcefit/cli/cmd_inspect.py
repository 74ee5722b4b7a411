"""``forcefit inspect``: what a file holds, before any fit."""

from __future__ import annotations

import argparse
import sys
import warnings
from typing import Any

from ..errors import ForcefitError, ForcefitWarning
from ..reading.inspection import inspect_track
from ._common import EXIT_BAD_INPUT, EXIT_OK, FORMATTER, Reports, read_tracks

_INSPECT_EXAMPLES = """\
examples:
  forcefit inspect run_04.csv
  forcefit inspect bob.csv --length-unit px --scale "1.6 mm" --origin 958.3,541.7 --flip-y
  forcefit inspect tracker.tsv --column t=Zeit --column x=X-Pos --column y=Y-Pos --json
  forcefit inspect frames.csv --frame-rate 240
"""


def _cmd_inspect(args: argparse.Namespace) -> int:
    status, reports = EXIT_OK, Reports(args.json)
    for path in args.files:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", ForcefitWarning)  # shown in the summary
                summaries = [inspect_track(track) for track in read_tracks(path, args)]
        except ForcefitError as exc:
            print(f"forcefit: {exc}", file=sys.stderr)
            status = EXIT_BAD_INPUT
            continue
        for summary in summaries:
            reports.add(summary.to_dict(), summary.to_text())
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
