"""What the forcefit commands share: value parsers, the reading options, the centre and orbit
options, printing text or JSON, exit codes."""

from __future__ import annotations

import argparse
import json
import re
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any, Literal

from ..errors import InputError
from ._camera import add_plane_options, add_tracking_options, plane_mapping, tracking_keywords

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    from ..dynamics.forces import ExtraForces
    from ..dynamics.propagate import Drag
    from ..reading.astrometry import Astrometry
    from ..reading.coordinates import Calibration
    from ..track import Track

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
    value, _, unit = measured_length(text)
    return value, unit


def measured_length(text: str) -> tuple[float, float, str]:
    """Parse a length with an optional standard error and its unit: ``"2.40 m"``,
    ``"2.400+-0.003 m"`` or ``"2.400 ± 0.003 m"``; the error is 0 when not given."""
    number = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
    match = re.fullmatch(rf"\s*({number})\s*(?:(?:\+-|±|\+/-)\s*({number}))?\s*([A-Za-z]+)\s*", text)
    if match is None:
        raise argparse.ArgumentTypeError(f'expected a length with its unit such as "1.6 mm" (or '
                                         f'"2.400+-0.003 m" with its error), got "{text}"')
    try:
        return float(match[1]), float(match[2] or 0.0), match[3]
    except ValueError:
        raise argparse.ArgumentTypeError(f'expected a length with its unit such as "1.6 mm", '
                                         f'got "{text}"') from None


def length_in_metres(text: str) -> float:
    """A length in metres from ``"2.5"`` (metres) or a length with its unit (``"250 cm"``,
    ``"6 m"``): the same spelling as ``fit --pendulum-length`` takes."""
    try:
        return float(text)
    except ValueError:
        value, _, unit = measured_length(text)
    from ..units import length_factor

    try:
        return value * length_factor(unit, "m")
    except InputError as exc:
        raise argparse.ArgumentTypeError(f'"{text}": {exc}') from None


def column(text: str) -> tuple[str, str]:
    role, _, name = text.partition("=")
    roles = ("t", "x", "y", "z", "sigma", "frame", "id")
    if role not in roles or not name:
        raise argparse.ArgumentTypeError(
            f'expected ROLE=NAME with ROLE one of {", ".join(roles)}, got "{text}"')
    return role, name


def drag(text: str) -> Drag:
    from ..dynamics.propagate import Drag

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
    group.add_argument("--length-unit",
                       help="unit of the raw positions (px, mm, m, au, ...) where the header states none")
    group.add_argument("--time-unit", help="unit of the times (s, ms, d, ...) where the header states none")
    group.add_argument("--force-units", action="store_true",
                       help="use --length-unit and --time-unit even where a header states another "
                            "unit (by default the header wins and a note says so)")
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
    from ..reading.coordinates import Calibration

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
            "video": tracking_keywords(args), "force_units": args.force_units}


def read_tracks(path: str, args: argparse.Namespace) -> list[Track]:
    """Load the tracks of one file with the reading and calibration options."""
    from ..reading.loaders import load_tracks

    return load_tracks(path, **loading_keywords(args))  # type: ignore[arg-type]


def read_sky_data(args: argparse.Namespace, defaults: Mapping[str, Any], allowed: Sequence[str],
                  takes: str) -> Astrometry:
    """The sky positions of ``args.file`` for ``--projected``, after refusing every option given
    that the projected fit does not take (``allowed`` are its options; ``takes`` says them)."""
    from ..reading.astrometry import load_astrometry

    given = sorted(name for name, default in defaults.items()
                   if name not in (*allowed, "file", "projected", "handler", "command", "parser")
                   and getattr(args, name, default) != default)
    if given:
        listed = ", ".join("--" + name.replace("_", "-") for name in given)
        raise InputError(f"{listed} does not apply to --projected; it takes {takes}.")
    sheet = int(args.sheet) if str(args.sheet).isdigit() else args.sheet
    return load_astrometry(args.file, length_unit=args.length_unit, sheet=sheet)


def recorded_options(args: argparse.Namespace) -> dict[str, Any]:
    """The options of a command that were set (differ from their defaults), for a report's record.

    The command's parser must be in ``args.parser`` (``set_defaults(parser=...)``)."""
    parser: argparse.ArgumentParser = args.parser
    skip = {"handler", "parser", "command", "json", "report", "file", "files", "source"}
    return {name: value for name, value in vars(args).items()
            if name not in skip and value != parser.get_default(name)}


def emit(as_json: bool, report: Mapping[str, Any], text: str) -> None:
    """Print one report as JSON, or its text."""
    print(json.dumps(report, indent=2) if as_json else text)


class Reports:
    """What a command prints for each track: its text as soon as the track is done, or with
    ``--json`` one JSON list of the reports at the end."""

    def __init__(self, as_json: bool) -> None:
        self.as_json = as_json
        self.reports: list[Mapping[str, Any]] = []

    def add(self, report: Mapping[str, Any], text: str) -> None:
        """One track's report (JSON-safe) and its text."""
        if self.as_json:
            self.reports.append(report)
        else:
            print(text)

    def close(self) -> None:
        """Print the JSON list, when that is what was asked for."""
        if self.as_json:
            print(json.dumps(self.reports, indent=2))


def add_centre_option(parser: argparse.ArgumentParser,
                      help: str = "the force centre, if known (default: found from the data)") -> None:
    """``--centre X,Y``."""
    parser.add_argument("--centre", "--center", dest="centre", type=pair, metavar="X,Y", help=help)


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
    orbit.add_argument(
        "--extra", action="append", default=[], metavar="FORCE",
        help='a known force to add to the power law (repeatable): "relativity" (the central mass\'s '
             'first post-Newtonian term; "relativity:gm=GM" in the track\'s units, GM of the Sun by '
             'default for au and days), "yukawa:range=L" (a Yukawa term of range L; its strength is '
             'fitted), "body:file=PATH,gm=GM" (a perturbing body\'s timed positions in the same '
             'coordinates and units)')


def rotation_option(args: argparse.Namespace, track: Track) -> float | Literal["fit"] | None:
    """The observer frame's rotation rate in rad per the track's time unit, or "fit"."""
    from ..dynamics.laws import lab_rotation_rate

    if args.fit_rotation:
        return "fit"
    if args.latitude is not None:
        return lab_rotation_rate(args.latitude, track.time_unit)
    return args.rotation_rate


def orbit_options(args: argparse.Namespace, track: Track) -> dict[str, Any]:
    """The keyword arguments of `fit_orbit` the command line asked for."""
    return {"exponent": args.fix_exponent, "drag": args.drag, "centre": args.centre,
            "loss": "soft_l1" if args.robust else "linear", "rotation_rate": rotation_option(args, track),
            "extra": extra_forces(getattr(args, "extra", []), track)}


SPEED_OF_LIGHT = 299_792_458.0
"""m/s, exact by the definition of the metre (17th CGPM, 1983)."""

SUN_GM_AU_DAY = 2.959122082855911e-4
"""au**3/d**2: k_G**2, Gauss's constant squared (IAU 1976 system)."""


def _spec(text: str) -> tuple[str, dict[str, str]]:
    kind, _, rest = text.partition(":")
    fields: dict[str, str] = {}
    for part in filter(None, (piece.strip() for piece in rest.split(","))):
        key, equals, value = part.partition("=")
        if not equals:
            raise InputError(f'--extra "{text}": "{part}" is not key=value; write e.g. '
                             '"yukawa:range=1.5" or "body:file=jupiter.csv,gm=2.8e-7".')
        fields[key.strip().lower()] = value.strip()
    return kind.strip().lower(), fields


def _number(text: str, fields: dict[str, str], key: str) -> float:
    if key not in fields:
        raise InputError(f'--extra "{text}" needs {key}=...; e.g. "yukawa:range=1.5" or '
                         '"body:file=jupiter.csv,gm=2.8e-7".')
    try:
        return float(fields[key])
    except ValueError:
        raise InputError(f'--extra "{text}": {key}={fields[key]} is not a number.') from None


def extra_forces(specs: Sequence[str], track: Track) -> ExtraForces | None:
    """The known forces ``--extra`` names, in the track's units; None when there are none."""
    from ..dynamics.forces import ExtraForces, Perturber, Relativity, Yukawa
    from ..reading.loaders import load_tracks
    from ..units import length_factor, time_factor

    relativity = yukawa = perturber = None
    for text in specs:
        kind, fields = _spec(text)
        if kind == "relativity":
            if "gm" in fields:
                gm = _number(text, fields, "gm")
            elif (track.length_unit, track.time_unit) == ("au", "d"):
                gm = SUN_GM_AU_DAY
            else:
                raise InputError(f'--extra "{text}": give the central body\'s GM in '
                                 f"{track.length_unit}^3/{track.time_unit}^2, e.g. relativity:gm=...")
            speed = SPEED_OF_LIGHT * length_factor("m", track.length_unit) / time_factor("s", track.time_unit)
            relativity = Relativity(gm=gm, speed_of_light=speed)
        elif kind == "yukawa":
            yukawa = Yukawa(length=_number(text, fields, "range"))
        elif kind == "body":
            if "file" not in fields:
                raise InputError(f'--extra "{text}" needs file=PATH, the perturbing body\'s positions.')
            (body, *_) = load_tracks(fields["file"], length_unit=track.length_unit, time_unit=track.time_unit)
            perturber = Perturber.from_track(body, gm=_number(text, fields, "gm"))
        else:
            raise InputError(f'--extra "{text}": unknown force "{kind}"; use relativity, yukawa or body.')
    extra = ExtraForces(relativity=relativity, yukawa=yukawa, perturber=perturber)
    return None if extra.empty else extra
