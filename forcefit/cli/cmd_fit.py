"""``forcefit fit``: the force law of the tracks in a file."""

from __future__ import annotations

import argparse
import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Protocol

from .._types import Row
from ..errors import ForcefitError, InputError
from ._camera import camera_lines, camera_record
from ._common import (
    EXIT_FAILED_CHECKS,
    EXIT_OK,
    FORMATTER,
    Reports,
    add_centre_option,
    add_orbit_options,
    measured_length,
    orbit_options,
    read_sky_data,
    read_tracks,
    recorded_options,
)

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    from ..estimators import LawFit, OrbitFit
    from ..track import Track

METHODS = ("acceleration", "curvature", "orbit", "shape")
"""The registry's estimators (``forcefit.estimators.ESTIMATORS``; a test keeps the two equal),
named here so that ``fit --help`` needs no estimator loaded."""

_FIT_EXAMPLES = """\
examples:
  forcefit fit run_04.csv                       # full-orbit fit (timestamps), centre from the data
  forcefit fit run_04.csv --compare 1,-2        # each nominal law against the free fit
  forcefit fit bob.csv --pendulum-length "2.40 m"   # k at n = 1 (omega^2) and g = k L
  forcefit fit puck.tsv --drag linear --robust  # with air drag, tracking glitches down-weighted
  forcefit fit bob.csv --length-unit px --scale "1.6 mm" --flip-y --latitude 52
  forcefit fit path.csv --method shape --profile 8   # time-free, with F(r) in 8 radius bins
  forcefit fit comet.csv --centre 0,0 --json    # the Sun at the origin
  forcefit fit binary.csv --projected            # rho/theta (or ddec/dra) at epochs: orbit seen on the sky
  forcefit fit swing.mp4 --plane-marks 102,388,530,392,488,95,140,97 --plane-rectangle "0.8x0.6 m"
"""

ORBIT_ONLY = ("fix_exponent", "drag", "compare", "rotation_rate", "latitude", "extra")

SMOOTHING_METHODS = ("curvature", "acceleration")
"""The methods that smooth the path before differentiating it (the shape fit smooths nothing)."""

NEAR_HOOKE = 0.1
"""|n - 1| below which ``--pendulum-length`` also takes the finite swing off an orbit fit."""

TITLES = {"deviation": "Against the nominal law", "pendulum": "The pendulum's finite swing taken off"}
"""Section titles of the companions on the report page."""


def fit_track(track: Track, args: argparse.Namespace) -> LawFit:
    """Fit one track with the method and options of the command line."""
    from ..estimators import registry

    method = registry.choose_method(track, args.method or "auto")
    if method != "orbit":
        given = [f"--{name.replace('_', '-')}" for name in ORBIT_ONLY if getattr(args, name)]
        if given or args.fit_rotation or args.robust:
            raise InputError(f"{', '.join(given or ['--robust'])} applies to the orbit method only; "
                             "drop it or use --method orbit.")
        if method in SMOOTHING_METHODS:
            return registry.fit(track, method, centre=args.centre, smoothing=args.smoothing)
        if args.report:                   # the report draws the force-curvature relation
            from ..geometry.path import describe_path

            path = describe_path(track, centre=args.centre, smoothing=args.smoothing)
            return registry.fit(track, method, centre=args.centre, path=path)
        return registry.fit(track, method, centre=args.centre)
    return registry.fit(track, method, **orbit_options(args, track))


def _fitted_extras(fit: LawFit) -> list[str]:
    """The orbit fit's drag and frame rotation, when fitted, a line each."""
    from ..estimators import OrbitFit
    from ..formatting import measurement

    if not isinstance(fit, OrbitFit):
        return []
    lines = []
    for name, value, error in (("drag", fit.drag, fit.drag_stderr),
                               ("rotation_rate", fit.rotation_rate, fit.rotation_rate_stderr)):
        if math.isfinite(value):
            per = fit.time_unit if name != "drag" or fit.model.drag == "linear" else fit.length_unit
            unit = f"rad/{per}" if name == "rotation_rate" else f"1/{per}"
            lines.append(f"  {name.replace('_', ' ')}: {measurement(value, error, unit)}")
    return lines


def _nominal(args: argparse.Namespace, fit: LawFit) -> float:
    """The nominal exponent: as given, else the nearer of Hooke's 1 and Newton's -2."""
    if args.nominal is not None:
        return float(args.nominal)
    return 1.0 if abs(fit.exponent - 1.0) < abs(fit.exponent + 2.0) else -2.0


def _measured_precession(track: Track, fit: OrbitFit, report: dict[str, Any]) -> list[str]:
    """The apses' own turn beside the one the fitted exponent implies."""
    from ..analysis.apsides import measure_apsides
    from ..formatting import measurement

    try:
        apsides = measure_apsides(track, centre=fit.centre)
    except ForcefitError as exc:
        return [f"  measured precession: not measured ({exc})"]
    report["apsides"] = apsides.to_dict()
    century, error = apsides.precession_per_century
    verdict = "" if apsides.passed else " (the apses cannot separate a secular turn: see apsides)"
    if math.isfinite(century):
        return [f"  {'measured precession':<28} {measurement(century, error)} arcsec per century "
                f"from {len(apsides.apses)} apses{verdict}"]
    per_orbit = measurement(math.degrees(apsides.precession_per_revolution),
                            math.degrees(apsides.precession_per_revolution_stderr))
    return [f"  {'measured precession':<28} {per_orbit} deg per orbit{verdict}"]


class Companion(Protocol):
    """A result shown beside the fit: the nominal law, and any correction to the fit (such as a
    pendulum's finite amplitude) added in `companions`."""

    def rows(self) -> list[Row]: ...

    def to_text(self) -> str: ...

    def to_dict(self) -> dict[str, Any]: ...


@dataclass(frozen=True)
class NotApplied:
    """A companion that could not be computed, and why."""

    reason: str

    def rows(self) -> list[Row]:
        return [Row("not applied", self.reason)]

    def to_text(self) -> str:
        return f"  {self.reason}"

    def to_dict(self) -> dict[str, Any]:
        return {"applied": False, "reason": self.reason}


def companions(fit: LawFit, track: Track, args: argparse.Namespace) -> list[tuple[str, Companion]]:
    """The results shown beside the fit, by their JSON key: the strength at the nominal exponent and
    the deviation from it, and with --pendulum-length an orbit fit near n = 1 with its finite
    swing taken off."""
    from ..analysis.deviation import deviation_from
    from ..estimators import OrbitFit
    from ..units import length_factor

    length = args.pendulum_length
    deviation = deviation_from(fit, _nominal(args, fit),
                               pendulum_length=None if length is None else (length[0], length[2]),
                               pendulum_length_stderr=0.0 if length is None else length[1])
    beside: list[tuple[str, Companion]] = [("deviation", deviation)]
    if length is None:
        return beside
    if not isinstance(fit, OrbitFit):
        beside.append(("pendulum", NotApplied(
            f"finite swing not taken off: the correction refits an orbit fit, and this is a "
            f"{fit.method} fit (leave out --method, or give --method orbit).")))
    elif abs(fit.exponent - 1.0) >= NEAR_HOOKE:
        beside.append(("pendulum", NotApplied(
            f"finite swing not taken off: the fitted n = {fit.exponent:.3g} is {NEAR_HOOKE:g} or more "
            "from a pendulum's n = 1, farther than the correction (made for swings of up to about a "
            "fifth of the length) reaches. A swing that wide, or a force that is not a pendulum's, "
            "is beyond it: film a smaller swing.")))
    else:
        from ..analysis.pendulum import pendulum_correction  # it refits: only when asked for

        try:
            scale = length_factor(length[2], track.length_unit)
            beside.append(("pendulum", pendulum_correction(fit, track, length=length[0] * scale,
                                                           length_stderr=length[1] * scale)))
        except ForcefitError as exc:
            beside.append(("pendulum", NotApplied(f"finite swing not taken off: {exc}")))
    return beside


def _fit_one(track: Track, args: argparse.Namespace) -> tuple[bool, dict[str, Any], str]:
    """Fit one track with everything the command line asked for: whether it passed, its JSON
    report and its text."""
    from ..analysis.deviation import Deviation
    from ..estimators import OrbitFit

    fit = fit_track(track, args)
    profile = None
    if args.profile:                                  # the profile smooths the path: only when asked
        from ..estimators import force_profile

        profile = force_profile(track, bins=args.profile, centre=fit.centre)
    comparison = None
    if args.compare:
        from ..inference.comparison import compare_laws

        options = orbit_options(args, track)
        del options["exponent"]                       # each law of the comparison holds its own
        comparison = compare_laws(track, args.compare, **options)
    duality = None
    if args.check_duality:
        from ..analysis.duality_check import check_duality

        duality = check_duality(track, fit)
    passed = fit.passed and (duality is None or duality.passed)
    beside = companions(fit, track, args)
    page = None
    if args.report:                                   # the report's libraries load only for it
        from ..outputs.report import write_report

        page = write_report(fit, args.report, track=track, options=recorded_options(args),
                            extras=[(TITLES.get(key, key), result.rows()) for key, result in beside])
    report = {**fit.to_dict(), **camera_record(track), **{key: result.to_dict() for key, result in beside}}
    lines = [fit.to_text(), *camera_lines(track)]
    if duality is not None:
        report["duality"] = duality.to_dict()
        lines.append("  " + duality.to_text())
    lines += _fitted_extras(fit) + [result.to_text() for _, result in beside]
    deviation = beside[0][1]
    if (isinstance(fit, OrbitFit) and isinstance(deviation, Deviation)
            and math.isfinite(deviation.precession_per_orbit)):
        from ..analysis.apsides import MIN_SECULAR_ORBITS  # the smoothed path: only to measure apses

        if fit.turns >= MIN_SECULAR_ORBITS:
            lines += _measured_precession(track, fit, report)
    if page is not None:
        report["report"] = str(page)
    if profile is not None:
        report["profile"] = profile.to_dict()
        lines += [f"\nforce profile ({'F/h^2, no timestamps' if profile.force_is_per_h2 else 'F'}):",
                  profile.to_text()]
    if page is not None:
        lines.append(f"  report: {page}")
    if comparison is not None:
        report["comparison"] = comparison.to_dict()
        lines += ["\nlaws compared (a small p-value rejects the fixed law):", comparison.to_text()]
    return passed, report, "\n".join(lines)


PROJECTED_OPTIONS = ("fix_exponent", "centre", "robust", "json", "length_unit", "sheet")
"""The options ``fit --projected`` takes; the others are refused."""


def _cmd_fit_projected(args: argparse.Namespace, parser_defaults: dict[str, Any]) -> int:
    """``fit FILE --projected``: the law and the orientation of an orbit seen on the sky."""
    from ..estimators.projected import fit_projected

    data = read_sky_data(args, parser_defaults, PROJECTED_OPTIONS,
                         "--fix-exponent, --centre, --robust, --json, --length-unit and --sheet")
    fit = fit_projected(data, exponent=args.fix_exponent, centre=args.centre,
                        loss="soft_l1" if args.robust else "linear")
    reports = Reports(args.json)
    reports.add({**fit.to_dict(), "epochs": data.metadata.get("epochs")}, fit.to_text())
    reports.close()
    return EXIT_OK if fit.passed else EXIT_FAILED_CHECKS


def _cmd_fit(args: argparse.Namespace) -> int:
    if args.projected:
        return _cmd_fit_projected(args, args.defaults)
    status, reports = EXIT_OK, Reports(args.json)
    tracks = read_tracks(args.file, args)
    if args.joint:
        if len(tracks) < 2 or (args.method or "orbit") != "orbit":
            raise InputError("--joint fits several runs of one file (an id column) with the orbit "
                             f"method together; {args.file} holds {len(tracks)} track(s).")
        from ..estimators import fit_orbit

        joint = fit_orbit(tracks, shared_centre=not args.separate_centres, **orbit_options(args, tracks[0]))
        reports.add(joint.to_dict(), joint.to_text())
        reports.close()
        return EXIT_OK if joint.passed else EXIT_FAILED_CHECKS
    for track in tracks:
        passed, report, text = _fit_one(track, args)
        if not passed:
            status = EXIT_FAILED_CHECKS
        reports.add(report, text)
    reports.close()
    return status


def _exponents(text: str) -> tuple[float, ...]:
    try:
        return tuple(float(value) for value in text.split(","))
    except ValueError:
        raise argparse.ArgumentTypeError(f'expected exponents such as "1,-2", got "{text}"') from None


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``fit`` command."""
    fit = commands.add_parser(
        "fit", parents=[loading], formatter_class=FORMATTER, epilog=_FIT_EXAMPLES,
        help="fit F = -k r^n to a track: exponent, strength, centre, errors, checks",
        description="Fit the central force law F = -k r^n r_hat to the tracks in FILE.")
    fit.add_argument("file", metavar="FILE")
    fit.add_argument("--method", choices=METHODS,
                     help="estimator (default: orbit with timestamps, shape without)")
    add_centre_option(fit)
    fit.add_argument("--json", action="store_true", help="print JSON instead of a table")
    fit.add_argument("--projected", action="store_true",
                     help="positions on the sky (rho/theta or ddec/dra, at epochs): fit the law with "
                          "the orbit's inclination and node")
    fit.add_argument("--report", metavar="DIR", help="write an HTML report with figures into DIR")
    add_orbit_options(fit)
    nominal = fit.add_argument_group("the nominal law")
    nominal.add_argument("--nominal", type=float, metavar="N0",
                         help="the nominal exponent (default: the nearer of 1 and -2): prints k at N0 "
                              "(omega^2 at N0 = 1) and n - N0 with its significance; against -2 the "
                              "implied apsidal precession too")
    nominal.add_argument("--pendulum-length", type=measured_length, metavar="LENGTH",
                         help='a pendulum\'s length, e.g. "2.40 m" or "2.400+-0.003 m": also print g = k L '
                              "at n = 1 and, for an orbit fit near n = 1, the exponent and g with the "
                              "finite swing taken off")
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
    fit.set_defaults(handler=_cmd_fit, parser=fit)
    defaults = vars(fit.parse_args(["FILE"]))
    fit.set_defaults(defaults={name: value for name, value in defaults.items() if name != "defaults"})
