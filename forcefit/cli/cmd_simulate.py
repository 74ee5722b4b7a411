"""``forcefit simulate``: a synthetic track with known truth."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from ..dynamics.simulate import simulate_orbit, simulate_pendulum
from ..errors import InputError
from ..reading.loaders import save_track
from ._common import EXIT_OK, FORMATTER, drag, pair

_SIMULATE_EXAMPLES = """\
examples:
  forcefit simulate --exponent -1.5 --duration 20 --rate 30 --noise 0.005 --out rosette.csv
  forcefit simulate --exponent 1 --strength 4 --velocity 0,1.2 --drag linear:0.05 --seed 3
  forcefit simulate --pendulum 7.5 --gravity 9.81 --start 0.4,0 --velocity 0,0.2 \\
      --duration 60 --rate 30 --latitude 48 --noise 0.001 --out pendulum.csv
"""


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

