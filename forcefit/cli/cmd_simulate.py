"""``forcefit simulate``: a synthetic track with known truth."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..errors import InputError
from ._common import EXIT_OK, FORMATTER, drag, pair

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    pass

_SIMULATE_EXAMPLES = """\
examples:
  forcefit simulate --exponent -1.5 --duration 20 --rate 30 --noise 0.005 --out rosette.csv
  forcefit simulate --exponent 1 --strength 4 --velocity 0,1.2 --drag linear:0.05 --seed 3
  forcefit simulate --projected --exponent -2 --inclination 60 --node 30 --count 40 \
      --noise 0.003 --seed 1 --out binary.csv          # positions on the sky, epochs in years
  forcefit simulate --pendulum 7.5 --gravity 9.81 --start 0.4,0 --velocity 0,0.2 \\
      --duration 60 --rate 30 --latitude 48 --noise 0.001 --out pendulum.csv
"""


PLANAR_ONLY = ("rate", "drag", "dropped", "outliers", "shape_only", "pendulum")
"""Options ``simulate --projected`` refuses."""


def _cmd_simulate_projected(args: argparse.Namespace) -> int:
    from ..dynamics.simulate import simulate_projected
    from ..reading.astrometry import save_astrometry

    given = [f"--{name.replace('_', '-')}" for name in PLANAR_ONLY if getattr(args, name)]
    if given:
        raise InputError(f"{', '.join(given)} does not apply to --projected (use --count for the number "
                         "of epochs).")
    if args.exponent is None:
        raise InputError("give --exponent N for the projected orbit.")
    if (args.time_unit or "yr") not in ("yr", "year", "a"):
        raise InputError("--projected writes epochs in Julian years: leave --time-unit out (or give yr).")
    if args.out == "-":
        raise InputError("--projected writes a file: give --out FILE.csv.")
    data = simulate_projected(
        exponent=args.exponent, strength=args.strength, start=args.start or (1.0, 0.0),
        velocity=args.velocity,
        inclination=60.0 if args.inclination is None else args.inclination,
        node=30.0 if args.node is None else args.node, duration=args.duration,
        count=80 if args.count is None else args.count,
        noise=args.noise, separation_error=args.separation_error, angle_error=args.angle_error,
        centre=args.centre, length_unit=args.length_unit or "arcsec", time_unit="yr",
        name=Path(args.out).stem if args.out != "-" else "simulated", rng=args.seed)
    save_astrometry(data, args.out)
    print(f"wrote {data.track.n_points} epochs to {args.out}")
    return EXIT_OK


def _cmd_simulate(args: argparse.Namespace) -> int:
    from ..dynamics.simulate import simulate_orbit, simulate_pendulum
    from ..reading.loaders import save_track

    if args.projected:
        return _cmd_simulate_projected(args)
    sky = [f"--{name.replace('_', '-')}" for name in ("inclination", "node", "count", "separation_error",
                                                         "angle_error") if getattr(args, name) is not None]
    if sky:
        raise InputError(f"{', '.join(sky)} applies to --projected only.")
    args.length_unit, args.time_unit = args.length_unit or "m", args.time_unit or "s"
    common = {"noise": args.noise, "dropped": args.dropped, "outliers": args.outliers,
              "rng": args.seed, "name": Path(args.out).stem if args.out != "-" else "simulated"}
    if args.pendulum is not None:
        if args.start is None or args.velocity is None or args.duration is None or args.rate is None:
            raise InputError("--pendulum needs --start, --velocity, --duration and --rate.")
        track = simulate_pendulum(length=args.pendulum, gravity=args.gravity, start=args.start,
                                  velocity=args.velocity, duration=args.duration, rate=args.rate,
                                  latitude=args.latitude, **common)
        track = track.in_units(length_unit=args.length_unit, time_unit=args.time_unit)
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



def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``simulate`` command."""
    simulate = commands.add_parser(
        "simulate", formatter_class=FORMATTER, epilog=_SIMULATE_EXAMPLES,
        help="write a synthetic track with known truth (CSV)",
        description="Simulate a body in F = -k r^n r_hat (or a spherical pendulum) and write CSV.")
    law = simulate.add_argument_group("the force law and launch")
    law.add_argument("--exponent", type=float, help="n, dimensionless")
    law.add_argument("--strength", type=float, default=1.0, help="k, length^(1-n) time^-2 (default 1)")
    law.add_argument("--start", type=pair, metavar="X,Y", help="start relative to the centre (default 1,0)")
    law.add_argument("--velocity", type=pair, metavar="VX,VY",
                     help="start velocity (default: 0.8 x circular speed, counter-clockwise)")
    law.add_argument("--centre", type=pair, default=(0.0, 0.0), metavar="X,Y", help="force centre")
    law.add_argument("--drag", type=drag, metavar="KIND:C",
                     help="linear:C (1/time) or quadratic:C (1/length)")
    pendulum = simulate.add_argument_group(
        "a spherical pendulum instead (give these in m, s and m/s; the file is written in "
        "--length-unit and --time-unit)")
    pendulum.add_argument("--pendulum", type=float, metavar="L", help="pendulum length, m")
    pendulum.add_argument("--gravity", type=float, default=9.81, help="local g, m/s^2 (default 9.81)")
    pendulum.add_argument("--latitude", type=float, metavar="DEG",
                          help="include the Earth's rotation for a camera fixed in the lab")
    sky = simulate.add_argument_group("an orbit seen on the sky instead (positions in arcsec by default, "
                                      "epochs in Julian years from 2000.0)")
    sky.add_argument("--projected", action="store_true",
                     help="write separations and position angles of the orbit turned in space")
    sky.add_argument("--inclination", type=float, metavar="DEG",
                     help="i, 0 to 180 deg (below 90: position angle increasing; default 60)")
    sky.add_argument("--node", type=float, metavar="DEG",
                     help="position angle of the ascending node, deg from north through east (default 30)")
    sky.add_argument("--count", type=int, metavar="N", help="number of epochs, unevenly spread (default 80)")
    sky.add_argument("--separation-error", type=float, metavar="L",
                     help="error of each separation (instead of --noise), length")
    sky.add_argument("--angle-error", type=float, metavar="DEG", help="error of each position angle, deg")
    sampling = simulate.add_argument_group("sampling and noise")
    sampling.add_argument("--duration", type=float, help="time span (default: 3 circular periods)")
    sampling.add_argument("--rate", type=float, help="samples per time unit (default: 200 per period)")
    sampling.add_argument("--noise", type=float, default=0.0,
                          help="position noise per coordinate (m for a pendulum, else --length-unit)")
    sampling.add_argument("--dropped", type=float, default=0.0, help="fraction of dropped frames")
    sampling.add_argument("--outliers", type=float, default=0.0, help="fraction of gross glitches")
    sampling.add_argument("--outlier-size", type=float, default=40.0, help="glitch size in noise units")
    sampling.add_argument("--shape-only", action="store_true", help="write no times")
    sampling.add_argument("--seed", type=int, help="random seed, for a repeatable track")
    sampling.add_argument("--length-unit", help="unit of the positions (default m; arcsec with --projected)")
    sampling.add_argument("--time-unit", help="unit of the times (default s)")
    sampling.add_argument("--out", default="-", metavar="FILE", help="CSV to write (default: stdout)")
    simulate.set_defaults(handler=_cmd_simulate)

