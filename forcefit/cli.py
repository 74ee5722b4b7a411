"""The ``forcefit`` command: parse options, call the API, print. No physics here."""

from __future__ import annotations

import argparse
import json
import re
import sys
import warnings
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from . import __version__
from ._json import json_safe
from .coordinates import Calibration
from .demo import demo_datasets
from .errors import ForcefitError, ForcefitWarning, InputError
from .estimators import fit_acceleration, fit_curvature, fit_shape, force_profile
from .geometry import describe_path
from .inspection import inspect_track
from .loaders import load_tracks, save_track
from .propagate import Drag
from .simulate import simulate_orbit, simulate_pendulum
from .track import Track
from .units import format_measurement, strength_unit

EXIT_OK, EXIT_FAILED_CHECKS, EXIT_BAD_INPUT = 0, 1, 2

_MAIN_EXAMPLES = """\
examples:
  forcefit inspect runs/puck_03.csv --length-unit mm
  forcefit fit runs/puck_03.csv --length-unit mm --method curvature
  forcefit simulate --exponent -1.5 --duration 20 --rate 30 --noise 0.005 --out rosette.csv
  forcefit demo
"""

_INSPECT_EXAMPLES = """\
examples:
  forcefit inspect run_04.csv
  forcefit inspect bob.csv --length-unit px --scale "1.6 mm" --origin 958.3,541.7 --flip-y
  forcefit inspect tracker.tsv --column t=Zeit --column x=X-Pos --column y=Y-Pos --json
  forcefit inspect frames.csv --frame-rate 240
"""

_FIT_EXAMPLES = """\
examples:
  forcefit fit run_04.csv                         # shape (Binet) fit, centre found from the data
  forcefit fit run_04.csv --method curvature --profile 8
  forcefit fit comet.csv --centre 0,0 --json      # the Sun at the origin
  forcefit fit bob.csv --length-unit px --scale "1.6 mm" --origin 958.3,541.7 --flip-y
"""

_SIMULATE_EXAMPLES = """\
examples:
  forcefit simulate --exponent -1.5 --duration 20 --rate 30 --noise 0.005 --out rosette.csv
  forcefit simulate --exponent 1 --strength 4 --velocity 0,1.2 --drag linear:0.05 --seed 3
  forcefit simulate --pendulum 7.5 --gravity 9.81 --start 0.4,0 --velocity 0,0.2 \\
      --duration 60 --rate 30 --latitude 48 --noise 0.001 --out pendulum.csv
"""


def _pair(text: str) -> tuple[float, float]:
    """Parse ``"x,y"`` into two floats."""
    parts = text.split(",")
    if len(parts) != 2:
        raise argparse.ArgumentTypeError(f'expected two numbers as "x,y", got "{text}"')
    try:
        return float(parts[0]), float(parts[1])
    except ValueError:
        raise argparse.ArgumentTypeError(f'expected two numbers as "x,y", got "{text}"') from None


def _length(text: str) -> tuple[float, str]:
    """Parse a length with its unit, ``"1.6 mm"`` or ``"0.5m"``."""
    match = re.fullmatch(r"\s*([-+0-9.eE]+)\s*([A-Za-z]+)\s*", text)
    if match is None:
        raise argparse.ArgumentTypeError(f'expected a length with its unit such as "1.6 mm", got "{text}"')
    return float(match[1]), match[2]


def _column(text: str) -> tuple[str, str]:
    role, _, name = text.partition("=")
    roles = ("t", "x", "y", "z", "sigma", "frame", "id")
    if role not in roles or not name:
        raise argparse.ArgumentTypeError(
            f'expected ROLE=NAME with ROLE one of {", ".join(roles)}, got "{text}"')
    return role, name


def _drag(text: str) -> Drag:
    kind, _, value = text.partition(":")
    try:
        return Drag(kind, float(value))  # type: ignore[arg-type]
    except (ValueError, InputError):
        raise argparse.ArgumentTypeError(
            f'expected linear:C or quadratic:C with C >= 0, got "{text}"') from None


def _loading_options() -> argparse.ArgumentParser:
    parent = argparse.ArgumentParser(add_help=False)
    group = parent.add_argument_group("reading the file")
    group.add_argument("--column", type=_column, action="append", default=[], metavar="ROLE=NAME",
                       help="use column NAME for ROLE (t, x, y, z, sigma, frame, id); repeatable")
    group.add_argument("--length-unit", help="unit of the raw positions (px, mm, m, au, ...)")
    group.add_argument("--time-unit", help="unit of the times (s, ms, d, ...)")
    group.add_argument("--frame-rate", type=float,
                       help="frames per second, to turn a frame column into times")
    group.add_argument("--track-id", help="with an id column: the one track to use")
    group.add_argument("--sheet", default=0, help="Excel sheet name or 0-based number")
    calibration = parent.add_argument_group("calibrating pixels")
    calibration.add_argument("--scale", type=_length, metavar="LENGTH",
                             help='length of one raw unit, e.g. "1.6 mm" per pixel')
    calibration.add_argument("--marks", metavar="X1,Y1,X2,Y2",
                             help="raw positions of two reference marks (use with --mark-distance)")
    calibration.add_argument("--mark-distance", type=_length, metavar="LENGTH",
                             help='true distance between the marks, e.g. "0.5 m"')
    calibration.add_argument("--origin", type=_pair, default=(0.0, 0.0), metavar="X,Y",
                             help="raw position that becomes (0, 0), e.g. the pivot's image")
    calibration.add_argument("--rotation", type=float, default=0.0, metavar="DEG",
                             help="turn the calibrated axes counter-clockwise by DEG degrees")
    calibration.add_argument("--flip-y", action="store_true",
                             help="image rows grow downwards: reverse the y axis")
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


def read_tracks(path: str, args: argparse.Namespace) -> list[Track]:
    """Load the tracks of one file with the reading and calibration options."""
    sheet = int(args.sheet) if str(args.sheet).isdigit() else args.sheet
    return load_tracks(
        path, **dict(args.column), length_unit=args.length_unit, time_unit=args.time_unit,
        frame_rate=args.frame_rate, calibration=_calibration(args), sheet=sheet,
        track_id=args.track_id,
    )


def _cmd_inspect(args: argparse.Namespace) -> int:
    status, reports = EXIT_OK, []
    for path in args.files:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", ForcefitWarning)  # shown in the summary
                summaries = [inspect_track(track) for track in read_tracks(path, args)]
        except ForcefitError as exc:
            print(f"forcefit: {exc}", file=sys.stderr)
            status = EXIT_BAD_INPUT
            continue
        reports += summaries
        if not args.json:
            for summary in summaries:
                print(summary.to_text())
    if args.json:
        print(json.dumps([summary.to_dict() for summary in reports], indent=2))
    return status


ESTIMATORS = {"shape": fit_shape, "curvature": fit_curvature, "acceleration": fit_acceleration}


def _cmd_fit(args: argparse.Namespace) -> int:
    status, reports = EXIT_OK, []
    for track in read_tracks(args.file, args):
        path = describe_path(track, centre=args.centre, smoothing=args.smoothing)
        fit = ESTIMATORS[args.method](track, centre=args.centre, path=path)
        profile = force_profile(track, bins=args.profile, path=path) if args.profile else None
        if not fit.passed:
            status = EXIT_FAILED_CHECKS
        if args.json:
            report = fit.to_dict()
            if profile is not None:
                report["profile"] = json_safe(profile.table.to_dict("list"))
            reports.append(report)
            continue
        print(fit.summary())
        if profile is not None:
            print(f"\nforce profile ({'F/h^2, no timestamps' if profile.force_is_per_h2 else 'F'}):")
            print(profile.to_text())
    if args.json:
        print(json.dumps(reports, indent=2))
    return status


def _cmd_simulate(args: argparse.Namespace) -> int:
    common = {"noise": args.noise, "dropped": args.dropped, "outliers": args.outliers,
              "rng": args.seed, "name": Path(args.out).stem if args.out != "-" else "simulated"}
    if args.pendulum is not None:
        if args.start is None or args.velocity is None or args.duration is None or args.rate is None:
            raise InputError("--pendulum needs --start, --velocity, --duration and --rate.")
        track = simulate_pendulum(length=args.pendulum, gravity=args.gravity, start=args.start,
                                  velocity=args.velocity, duration=args.duration, rate=args.rate,
                                  latitude=args.latitude, **common)
    else:
        if args.exponent is None:
            raise InputError("give --exponent N (or --pendulum L for a spherical pendulum).")
        track = simulate_orbit(
            exponent=args.exponent, strength=args.strength, start=args.start or (1.0, 0.0),
            velocity=args.velocity, duration=args.duration, rate=args.rate, drag=args.drag,
            centre=args.centre, shape_only=args.shape_only, length_unit=args.length_unit,
            time_unit=args.time_unit, outlier_size=args.outlier_size, **common,
        )
    if args.shape_only:
        track = track.shape_only()
    if args.out == "-":
        sys.stdout.write(track.to_frame().to_csv(index=False, float_format="%.10g"))
    else:
        save_track(track, args.out)
        print(f"wrote {track.n_points} samples to {args.out}")
    return EXIT_OK


def _cmd_demo(args: argparse.Namespace) -> int:
    datasets = demo_datasets(args.data)
    for dataset in datasets:
        print(f"\n== {dataset.title}")
        expected = dataset.expected
        print(f"   true law: n = {expected['exponent']:g}, k = {expected['strength']:.6g} "
              f"{expected['strength_unit']}")
        if dataset.is_class_set:
            print(f"   {'run':<8} {'points':>6} {'duration':>9}  {'exponent n (shape)':<22} "
                  "k for the nearest whole n, from F at the typical radius")
        for path in dataset.paths:
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore", ForcefitWarning)
                    tracks = dataset.load(path)
                    for track in tracks:
                        _demo_track(track, dataset.fit_options, compact=dataset.is_class_set)
            except ForcefitError as exc:
                print(f"   {path.name}: refused — {exc}")
    return EXIT_OK


def _demo_track(track: Track, options: dict[str, Any], *, compact: bool) -> None:
    """Print what the demo shows of one track: a line (class runs) or a table and fits."""
    centre = tuple(options["centre"]) if "centre" in options else None
    path = describe_path(track, centre=centre)
    if compact:
        fit = fit_shape(track, centre=centre, path=path)
        nominal = round(fit.exponent)
        value, error = fit.strength_at_exponent(nominal)
        unit = strength_unit(track.length_unit, track.time_unit, nominal)
        print(f"   {track.name:<8} {track.n_points:6d} {track.duration:7.2f} {track.time_unit}  "
              f"{format_measurement(fit.exponent, fit.exponent_stderr):<22} "
              f"{format_measurement(value, error, unit)}")
        return
    print(inspect_track(track).to_text())
    for method, estimator in ESTIMATORS.items():
        if method == "acceleration" and not track.has_times:
            continue
        fit = estimator(track, centre=centre, path=path)
        failed = [name for name, check in fit.diagnostics.items() if check.passed is False]
        verdict = f"  [check failed: {', '.join(failed)}]" if failed else ""
        print(f"  {method:<13} n = {format_measurement(fit.exponent, fit.exponent_stderr):<24}"
              f" k = {format_measurement(fit.strength, fit.strength_stderr, fit.strength_unit)}{verdict}")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``forcefit`` command."""
    formatter = argparse.RawDescriptionHelpFormatter
    parser = argparse.ArgumentParser(
        prog="forcefit", formatter_class=formatter, epilog=_MAIN_EXAMPLES,
        description="Infer the central force law F(r) = -k r^n r_hat behind a planar trajectory.",
    )
    parser.add_argument("--version", action="version", version=f"forcefit {__version__}")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    loading = _loading_options()

    inspect = commands.add_parser(
        "inspect", parents=[loading], formatter_class=formatter, epilog=_INSPECT_EXAMPLES,
        help="show what a file holds: points, timing, gaps, extent, units, warnings",
        description="Show what a file of tracked positions holds before fitting it.")
    inspect.add_argument("files", nargs="+", metavar="FILE")
    inspect.add_argument("--json", action="store_true", help="print JSON instead of a table")
    inspect.set_defaults(handler=_cmd_inspect)

    fit = commands.add_parser(
        "fit", parents=[loading], formatter_class=formatter, epilog=_FIT_EXAMPLES,
        help="fit F = -k r^n to a track: exponent, strength, centre, errors, checks",
        description="Fit the central force law F = -k r^n r_hat to the tracks in FILE.")
    fit.add_argument("file", metavar="FILE")
    fit.add_argument("--method", choices=sorted(ESTIMATORS), default="shape",
                     help="estimator (default shape: Binet's equation fitted to the path)")
    fit.add_argument("--centre", type=_pair, metavar="X,Y",
                     help="the force centre, if known (default: found from the data)")
    fit.add_argument("--smoothing", choices=("spline", "savgol"), default="spline",
                     help="how to smooth before differentiating (default spline, GCV level)")
    fit.add_argument("--profile", type=int, nargs="?", const=8, default=0, metavar="BINS",
                     help="also print F(r) in BINS radius bins with the local exponent")
    fit.add_argument("--json", action="store_true", help="print JSON instead of a table")
    fit.set_defaults(handler=_cmd_fit)

    simulate = commands.add_parser(
        "simulate", formatter_class=formatter, epilog=_SIMULATE_EXAMPLES,
        help="write a synthetic track with known truth (CSV)",
        description="Simulate a body in F = -k r^n r_hat (or a spherical pendulum) and write CSV.")
    law = simulate.add_argument_group("the force law and launch")
    law.add_argument("--exponent", type=float, help="n, dimensionless")
    law.add_argument("--strength", type=float, default=1.0, help="k, length^(1-n) time^-2 (default 1)")
    law.add_argument("--start", type=_pair, metavar="X,Y", help="start relative to the centre (default 1,0)")
    law.add_argument("--velocity", type=_pair, metavar="VX,VY",
                     help="start velocity (default: 0.8 x circular speed, counter-clockwise)")
    law.add_argument("--centre", type=_pair, default=(0.0, 0.0), metavar="X,Y", help="force centre")
    law.add_argument("--drag", type=_drag, metavar="KIND:C",
                     help="linear:C (1/time) or quadratic:C (1/length)")
    pendulum = simulate.add_argument_group("a spherical pendulum instead (SI units)")
    pendulum.add_argument("--pendulum", type=float, metavar="L", help="pendulum length, m")
    pendulum.add_argument("--gravity", type=float, default=9.81, help="local g, m/s^2 (default 9.81)")
    pendulum.add_argument("--latitude", type=float, metavar="DEG",
                          help="include the Earth's rotation for a camera fixed in the lab")
    sampling = simulate.add_argument_group("sampling and noise")
    sampling.add_argument("--duration", type=float, help="time span (default: 3 circular periods)")
    sampling.add_argument("--rate", type=float, help="samples per time unit (default: 200 per period)")
    sampling.add_argument("--noise", type=float, default=0.0, help="position noise per coordinate, length")
    sampling.add_argument("--dropped", type=float, default=0.0, help="fraction of dropped frames")
    sampling.add_argument("--outliers", type=float, default=0.0, help="fraction of gross glitches")
    sampling.add_argument("--outlier-size", type=float, default=40.0, help="glitch size in noise units")
    sampling.add_argument("--shape-only", action="store_true", help="write no times")
    sampling.add_argument("--seed", type=int, help="random seed, for a repeatable track")
    sampling.add_argument("--length-unit", default="m", help="unit of the positions (default m)")
    sampling.add_argument("--time-unit", default="s", help="unit of the times (default s)")
    sampling.add_argument("--out", default="-", metavar="FILE", help="CSV to write (default: stdout)")
    simulate.set_defaults(handler=_cmd_simulate)

    demo = commands.add_parser(
        "demo", help="run forcefit on the bundled demo data",
        description="Run the main job on the bundled, invented demo data.")
    demo.add_argument("--data", metavar="DIR", help="demo folder (default: datasets_demo)")
    demo.set_defaults(handler=_cmd_demo)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``forcefit`` command; returns the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    handler: Callable[[argparse.Namespace], int] = args.handler
    warnings.formatwarning = _one_line_warning
    try:
        return handler(args)
    except ForcefitError as exc:
        print(f"forcefit: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("forcefit: interrupted", file=sys.stderr)
        return 130


def _one_line_warning(message: Any, category: Any, *_: Any, **__: Any) -> str:
    return f"forcefit: warning: {message}\n"


if __name__ == "__main__":
    sys.exit(main())
