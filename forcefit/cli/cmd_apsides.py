"""``forcefit apsides``: the apses, the precession, and what finite amplitude and the Earth explain."""

from __future__ import annotations

import argparse
import json
import math
from typing import Any

from ..analysis.apsides import Apsides, measure_apsides
from ..dynamics.laws import EARTH_ROTATION_RATE, pendulum_precession_rate
from ..errors import InputError
from ..track import Track
from ..units import length_factor, time_factor
from ._common import EXIT_OK, FORMATTER, pair, read_tracks

_EXAMPLES = """\
examples:
  forcefit apsides orbit.csv                        # apsidal angle, precession, implied exponent
  forcefit apsides bob.csv --length-unit px --scale "1.6 mm" --flip-y \\
      --pendulum-length 11.0 --latitude 52          # is the precession all Airy + Earth?
"""


def expected_precession(apsides: Apsides, track: Track, length: float | None, gravity: float,
                        latitude: float | None) -> dict[str, float]:
    """Precession rates (rad/s, in the sense of the motion) that finite amplitude and the
    Earth's rotation explain, and the measured rate with the anomaly left over."""
    if not track.has_times:
        raise InputError("the expected precession needs timestamps.")
    per_second = 1.0 / time_factor(track.time_unit, "s")
    measured = apsides.precession_rate * per_second
    measured_se = apsides.precession_rate_stderr * per_second
    result = {"measured": measured, "measured_stderr": measured_se}
    expected = 0.0
    if length is not None:
        try:
            metre = length_factor(track.length_unit, "m")
        except InputError as exc:
            raise InputError(f"{exc} The pendulum's finite-amplitude precession needs lengths in "
                             "metres: calibrate the pixels (--scale or --marks).") from None
        semi_major = sum(a.radius for a in apsides.apocentres) / len(apsides.apocentres) * metre
        semi_minor = sum(a.radius for a in apsides.pericentres) / len(apsides.pericentres) * metre
        result["finite_amplitude"] = pendulum_precession_rate(semi_major, semi_minor, length, gravity)
        expected += result["finite_amplitude"]
    if latitude is not None:
        # The lab turns counter-clockwise (seen from above, north up) at Omega_E sin(latitude), so
        # the pattern turns clockwise: against a counter-clockwise motion, with a clockwise one.
        result["earth_rotation"] = -apsides.sense * EARTH_ROTATION_RATE * math.sin(math.radians(latitude))
        expected += result["earth_rotation"]
    result["expected"] = expected
    result["anomalous"] = measured - expected
    result["anomalous_stderr"] = measured_se
    return result


def _cmd_apsides(args: argparse.Namespace) -> int:
    reports = []
    for track in read_tracks(args.file, args):
        apsides = measure_apsides(track, centre=args.centre)
        rates = None
        if args.pendulum_length is not None or args.latitude is not None:
            rates = expected_precession(apsides, track, args.pendulum_length, args.gravity, args.latitude)
        if args.json:
            reports.append({"track": track.name, **apsides.to_dict(), "precession_rad_per_s": rates})
            continue
        print(f"{track.name} — apsides about ({apsides.centre[0]:.6g}, {apsides.centre[1]:.6g}) "
              f"{track.length_unit}")
        print(apsides.to_text())
        if rates is not None:
            print("  precession rates in the sense of the motion, rad/s (deg/h):")
            labels = {"measured": "measured", "finite_amplitude": "finite amplitude (Airy)",
                      "earth_rotation": "Earth's rotation", "expected": "expected in all",
                      "anomalous": "anomalous (measured - expected)"}
            for key, label in labels.items():
                if key in rates:
                    error = rates.get(f"{key}_stderr")
                    spread = f" ± {error:.2g}" if error is not None else ""
                    print(f"    {label:<32} {rates[key]:+.4e}{spread}   "
                          f"({math.degrees(rates[key]) * 3600:+.3f} deg/h)")
    if args.json:
        print(json.dumps(reports, indent=2))
    return EXIT_OK


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``apsides`` command."""
    parser = commands.add_parser(
        "apsides", parents=[loading], formatter_class=FORMATTER, epilog=_EXAMPLES,
        help="apsidal angle, precession and the exponent it implies",
        description="Locate the peri- and apocentres; measure the apsidal angle and precession.")
    parser.add_argument("file", metavar="FILE")
    parser.add_argument("--centre", type=pair, metavar="X,Y", help="the force centre, if known")
    pendulum = parser.add_argument_group("for a pendulum")
    pendulum.add_argument("--pendulum-length", type=float, metavar="L",
                          help="pendulum length in m: report the finite-amplitude (Airy) precession")
    pendulum.add_argument("--gravity", type=float, default=9.81, help="local g in m/s^2 (default 9.81)")
    pendulum.add_argument("--latitude", type=float, metavar="DEG",
                          help="camera fixed in the lab: report the Earth's rotation's share "
                               "(x east, y north, seen from above)")
    parser.add_argument("--json", action="store_true", help="print JSON instead of a table")
    parser.set_defaults(handler=_cmd_apsides)
