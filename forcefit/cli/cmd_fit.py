"""``forcefit fit``: the force law of the tracks in a file."""

from __future__ import annotations

import argparse
import json
import math
from collections.abc import Callable
from typing import Any, Literal

from .._json import json_safe
from ..errors import InputError
from ..estimators import (
    compare_laws,
    fit_acceleration,
    fit_curvature,
    fit_orbit,
    fit_shape,
    force_profile,
)
from ..estimators.dual_check import check_duality
from ..geometry import describe_path
from ..laws import EARTH_ROTATION_RATE
from ..report import write_report
from ..result import LawFit
from ..track import Track
from ..units import time_factor
from ._camera import camera_lines, camera_record
from ._common import EXIT_FAILED_CHECKS, EXIT_OK, FORMATTER, pair, read_tracks

_FIT_EXAMPLES = """\
examples:
  forcefit fit run_04.csv                       # full-orbit fit (timestamps), centre from the data
  forcefit fit run_04.csv --compare 1,-2        # each nominal law against the free fit
  forcefit fit puck.tsv --drag linear --robust  # with air drag, tracking glitches down-weighted
  forcefit fit bob.csv --length-unit px --scale "1.6 mm" --flip-y --latitude 52
  forcefit fit path.csv --method shape --profile 8   # time-free, with F(r) in 8 radius bins
  forcefit fit comet.csv --centre 0,0 --json    # the Sun at the origin
  forcefit fit swing.mp4 --plane-marks 102,388,530,392,488,95,140,97 --plane-rectangle "0.8x0.6 m"
"""

ESTIMATORS: dict[str, Callable[..., LawFit]] = {
    "orbit": fit_orbit, "shape": fit_shape, "curvature": fit_curvature,
    "acceleration": fit_acceleration,
}
ORBIT_ONLY = ("fix_exponent", "drag", "compare", "rotation_rate", "latitude")


def _rotation(args: argparse.Namespace, track: Track) -> float | Literal["fit"] | None:
    """The observer frame's rotation rate in rad per the track's time unit, or "fit"."""
    if args.fit_rotation:
        return "fit"
    if args.latitude is not None:
        per_second = EARTH_ROTATION_RATE * math.sin(math.radians(args.latitude))
        return per_second * time_factor(track.time_unit, "s")
    return args.rotation_rate


def fit_track(track: Track, args: argparse.Namespace) -> LawFit:
    """Fit one track with the method and options of the command line."""
    method = args.method or ("orbit" if track.has_times else "shape")
    if method != "orbit":
        given = [f"--{name.replace('_', '-')}" for name in ORBIT_ONLY if getattr(args, name)]
        if given or args.fit_rotation or args.robust:
            raise InputError(f"{', '.join(given or ['--robust'])} applies to the orbit method only; "
                             "drop it or use --method orbit.")
        path = describe_path(track, centre=args.centre, smoothing=args.smoothing)
        return ESTIMATORS[method](track, centre=args.centre, path=path)
    return fit_orbit(track, **orbit_options(args, track))


def orbit_options(args: argparse.Namespace, track: Track) -> dict[str, Any]:
    """The keyword arguments of `fit_orbit` the command line asked for."""
    return {"exponent": args.fix_exponent, "drag": args.drag, "centre": args.centre,
            "loss": "soft_l1" if args.robust else "linear", "rotation_rate": _rotation(args, track)}


def _cmd_fit(args: argparse.Namespace) -> int:
    status, reports = EXIT_OK, []
    tracks = read_tracks(args.file, args)
    if args.joint:
        if len(tracks) < 2 or (args.method or "orbit") != "orbit":
            raise InputError("--joint fits several runs of one file (an id column) with the orbit "
                             f"method together; {args.file} holds {len(tracks)} track(s).")
        options = orbit_options(args, tracks[0])
        fit = fit_orbit(tracks, shared_centre=not args.separate_centres, **options)
        print(json.dumps([fit.to_dict()], indent=2) if args.json else fit.summary())
        return EXIT_OK if fit.passed else EXIT_FAILED_CHECKS
    for track in tracks:
        fit = fit_track(track, args)
        profile = force_profile(track, bins=args.profile, centre=fit.centre) if args.profile else None
        comparison = None
        if args.compare:
            comparison = compare_laws(track, args.compare, drag=args.drag, centre=args.centre,
                                      rotation_rate=_rotation(args, track))
        duality = None
        if args.check_duality:
            method = args.method or ("orbit" if track.has_times else "shape")
            duality = check_duality(track, fit, ESTIMATORS[method])
        if not fit.passed or (duality is not None and not duality.passed):
            status = EXIT_FAILED_CHECKS
        page = write_report(fit, args.report, track=track) if args.report else None
        if args.json:
            report = {**fit.to_dict(), **camera_record(track)}
            if duality is not None:
                report["duality"] = duality.to_dict()
            if page is not None:
                report["report"] = str(page)
            if profile is not None:
                report["profile"] = json_safe(profile.table.to_dict("list"))
            if comparison is not None:
                report["comparison"] = json_safe(comparison.reset_index().to_dict("records"))
            reports.append(report)
            continue
        print(fit.summary())
        for line in camera_lines(track):
            print(line)
        if duality is not None:
            print("  " + duality.to_text())
        for name in ("drag", "rotation_rate"):
            if name in fit.details:
                per = fit.time_unit if name != "drag" or args.drag == "linear" else fit.length_unit
                unit = f"rad/{per}" if name == "rotation_rate" else f"1/{per}"
                print(f"  {name.replace('_', ' ')}: {fit.details[name]:.6g} ± "
                      f"{fit.details[name + '_stderr']:.2g} {unit}")
        if profile is not None:
            print(f"\nforce profile ({'F/h^2, no timestamps' if profile.force_is_per_h2 else 'F'}):")
            print(profile.to_text())
        if page is not None:
            print(f"  report: {page}")
        if comparison is not None:
            print("\nlaws compared (a small p-value rejects the fixed law):")
            columns = ["exponent", "chi2", "reduced_chi2", "aic", "bic", "delta_bic", "p_value"]
            print(comparison[columns].to_string(float_format=lambda v: f"{v:.5g}"))
    if args.json:
        print(json.dumps(reports, indent=2))
    return status


def _exponents(text: str) -> tuple[float, ...]:
    try:
        return tuple(float(value) for value in text.split(","))
    except ValueError:
        raise argparse.ArgumentTypeError(f'expected exponents such as "1,-2", got "{text}"') from None


def add_orbit_options(parser: argparse.ArgumentParser) -> None:
    """The options of the orbit method, shared by ``fit`` and ``sample``."""
    orbit = parser.add_argument_group("the orbit method")
    orbit.add_argument("--fix-exponent", type=float, metavar="N", help="hold n at N")
    orbit.add_argument("--drag", choices=("linear", "quadratic"), help="fit a drag force too")
    orbit.add_argument("--robust", action="store_true",
                       help="robust loss: tracking glitches pull the fit less")
    orbit.add_argument("--rotation-rate", type=float, metavar="RATE",
                       help="the camera frame turns counter-clockwise at RATE rad per time unit")
    orbit.add_argument("--latitude", type=float, metavar="DEG",
                       help="camera fixed in a lab at this latitude: the Earth's rotation "
                            "(x east, y north, seen from above)")
    orbit.add_argument("--fit-rotation", action="store_true", help="fit the frame's rotation rate")


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``fit`` command."""
    fit = commands.add_parser(
        "fit", parents=[loading], formatter_class=FORMATTER, epilog=_FIT_EXAMPLES,
        help="fit F = -k r^n to a track: exponent, strength, centre, errors, checks",
        description="Fit the central force law F = -k r^n r_hat to the tracks in FILE.")
    fit.add_argument("file", metavar="FILE")
    fit.add_argument("--method", choices=sorted(ESTIMATORS),
                     help="estimator (default: orbit with timestamps, shape without)")
    fit.add_argument("--centre", type=pair, metavar="X,Y",
                     help="the force centre, if known (default: found from the data)")
    fit.add_argument("--json", action="store_true", help="print JSON instead of a table")
    fit.add_argument("--report", metavar="DIR", help="write an HTML report with figures into DIR")
    add_orbit_options(fit)
    fit.add_argument("--compare", type=_exponents, metavar="N1,N2",
                     help="compare fixed laws with the free fit (e.g. 1,-2)")
    fit.add_argument("--joint", action="store_true",
                     help="fit the runs of the file (an id column) together, sharing n and k")
    fit.add_argument("--separate-centres", action="store_true",
                     help="with --joint: each run has its own centre")
    fit.add_argument("--check-duality", action="store_true",
                     help="map the track by w = z^((n+3)/2), refit, compare with the dual exponent")
    timefree = fit.add_argument_group("the time-free methods")
    timefree.add_argument("--smoothing", choices=("spline", "savgol"), default="spline",
                          help="how to smooth before differentiating (default spline, GCV level)")
    timefree.add_argument("--profile", type=int, nargs="?", const=8, default=0, metavar="BINS",
                          help="also print F(r) in BINS radius bins with the local exponent")
    fit.set_defaults(handler=_cmd_fit)
