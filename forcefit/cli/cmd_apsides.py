"""``forcefit apsides``: the apses, the precession, and what finite amplitude and the Earth explain."""

from __future__ import annotations

import argparse
import math
from typing import TYPE_CHECKING, Any

from ._common import (
    EXIT_FAILED_CHECKS,
    EXIT_OK,
    FORMATTER,
    Reports,
    add_centre_option,
    length_in_metres,
    read_tracks,
)

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    pass

_EXAMPLES = """\
examples:
  forcefit apsides orbit.csv                        # apsidal angle, precession, implied exponent
  forcefit apsides bob.csv --length-unit px --scale "1.6 mm" --flip-y \\
      --pendulum-length "11.0 m" --latitude 52      # is it all finite swing + Earth?
"""


_BUDGET = {"measured": "measured", "finite_amplitude": "finite amplitude",
           "earth_rotation": "Earth's rotation", "expected": "expected in all",
           "anomalous": "anomalous (measured - expected)"}


def _budget_lines(rates: dict[str, float]) -> list[str]:
    from ..formatting import measurement

    lines = ["  precession rates in the sense of the motion, rad/s (deg/h):"]
    for key, label in _BUDGET.items():
        if key in rates:
            error = rates.get(f"{key}_stderr")
            per_hour = math.degrees(3600.0)
            lines.append(f"    {label:<32} {measurement(rates[key], error)}   "
                         f"({measurement(rates[key] * per_hour, None if error is None else error * per_hour)}"
                         " deg/h)")
    return lines


def _cmd_apsides(args: argparse.Namespace) -> int:
    from ..analysis.apsides import measure_apsides, precession_budget

    reports, status = Reports(args.json), EXIT_OK
    for track in read_tracks(args.file, args):
        apsides = measure_apsides(track, centre=args.centre)
        if not apsides.passed:
            status = EXIT_FAILED_CHECKS
        rates = None
        if args.pendulum_length is not None or args.latitude is not None:
            rates = precession_budget(apsides, pendulum_length=args.pendulum_length, gravity=args.gravity,
                                      latitude=args.latitude)
        lines = [f"{track.name} — apsides about ({apsides.centre[0]:.6g}, {apsides.centre[1]:.6g}) "
                 f"{track.length_unit}", apsides.to_text()]
        reports.add({"track": track.name, **apsides.to_dict(), "precession_rad_per_s": rates},
                    "\n".join(lines + (_budget_lines(rates) if rates is not None else [])))
    reports.close()
    return status


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``apsides`` command."""
    parser = commands.add_parser(
        "apsides", parents=[loading], formatter_class=FORMATTER, epilog=_EXAMPLES,
        help="apsidal angle, precession and the exponent it implies",
        description="Locate the peri- and apocentres; measure the apsidal angle and precession.")
    parser.add_argument("file", metavar="FILE")
    add_centre_option(parser)
    pendulum = parser.add_argument_group("for a pendulum")
    pendulum.add_argument("--pendulum-length", type=length_in_metres, metavar="LENGTH",
                          help='pendulum length, e.g. "11.0 m" (a bare number is in m): report the '
                               "precession of an ideal pendulum of that swing (finite amplitude)")
    pendulum.add_argument("--gravity", type=float, default=9.81, help="local g in m/s^2 (default 9.81)")
    pendulum.add_argument("--latitude", type=float, metavar="DEG",
                          help="camera fixed in the lab: report the Earth's rotation's share "
                               "(x east, y north, seen from above)")
    parser.add_argument("--json", action="store_true", help="print JSON instead of a table")
    parser.set_defaults(handler=_cmd_apsides)
