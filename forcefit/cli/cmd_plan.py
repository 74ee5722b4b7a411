"""``forcefit plan``: how precisely a planned run will fix the exponent, and what it would take."""

from __future__ import annotations

import argparse
from typing import TYPE_CHECKING, Any

from ..errors import InputError
from ._common import EXIT_OK, FORMATTER, emit, pair

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    pass

_EXAMPLES = """\
examples:
  forcefit plan --exponent -1.5 --strength 1 --start 1,0 --velocity 0,0.8 \\
      --duration 20 --rate 30 --noise 0.005 --target 1e-4
  forcefit plan --pendulum 2.4 --semi-axes 0.2,0.1 --duration 30 --rate 30 --noise 0.001
"""


def _plan(args: argparse.Namespace) -> dict[str, Any]:
    from ..inference.planning import pendulum_law

    if args.pendulum is not None:
        if args.semi_axes is None:
            raise InputError("--pendulum needs --semi-axes A,B (m): the ellipse the bob will trace.")
        return pendulum_law(args.pendulum, args.semi_axes, args.gravity)
    missing = [name for name in ("exponent", "strength", "start", "velocity")
               if getattr(args, name) is None]
    if missing:
        raise InputError(f"give {', '.join('--' + m for m in missing)} (or --pendulum L --semi-axes A,B).")
    return {"exponent": args.exponent, "strength": args.strength, "start": args.start,
            "velocity": args.velocity}


def _cmd_plan(args: argparse.Namespace) -> int:
    from ..inference.planning import forecast_precision, required_duration, required_rate

    plan = {**_plan(args), "rate": args.rate, "noise": args.noise,
            "length_unit": args.length_unit, "time_unit": args.time_unit}
    forecast = forecast_precision(duration=args.duration, **plan)
    needs: dict[str, float] = {}
    if args.target is not None:
        needs["duration"] = required_duration(args.target, **plan)
        needs["rate"] = required_rate(args.target, duration=args.duration, **plan)
    lines = ["forecast of the full-orbit fit (Cramer-Rao bound):", forecast.to_text()]
    if needs:
        lines.append(f"  for ± {args.target:g} in n: a run of {needs['duration']:.4g} {args.time_unit} at "
                     f"{args.rate:g} per {args.time_unit}, or {needs['rate']:.4g} per {args.time_unit} "
                     f"over {args.duration:g} {args.time_unit}")
    emit(args.json, {**forecast.to_dict(), "needs": needs}, "\n".join(lines))
    return EXIT_OK


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``plan`` command."""
    parser = commands.add_parser(
        "plan", formatter_class=FORMATTER, epilog=_EXAMPLES,
        help="forecast the precision of a planned run (Fisher information of the orbit fit)",
        description="Forecast how precisely a planned run will fix the exponent and strength.")
    law = parser.add_argument_group("the expected law and launch")
    law.add_argument("--exponent", type=float, help="n")
    law.add_argument("--strength", type=float, help="k, length^(1-n) time^-2")
    law.add_argument("--start", type=pair, metavar="X,Y", help="launch position from the centre")
    law.add_argument("--velocity", type=pair, metavar="VX,VY", help="launch velocity")
    pendulum = parser.add_argument_group("or a pendulum (SI units)")
    pendulum.add_argument("--pendulum", type=float, metavar="L", help="pendulum length, m")
    pendulum.add_argument("--semi-axes", type=pair, metavar="A,B", help="the bob's ellipse, m")
    pendulum.add_argument("--gravity", type=float, default=9.81, help="local g (default 9.81)")
    run = parser.add_argument_group("the run")
    run.add_argument("--duration", type=float, required=True, help="time span of the recording")
    run.add_argument("--rate", type=float, required=True, help="samples per time unit (frame rate)")
    run.add_argument("--noise", type=float, required=True, help="position noise per coordinate")
    run.add_argument("--target", type=float, help="the standard error of n wanted")
    run.add_argument("--length-unit", default="m", help="for the printout (default m)")
    run.add_argument("--time-unit", default="s", help="for the printout (default s)")
    parser.add_argument("--json", action="store_true", help="print JSON instead of text")
    parser.set_defaults(handler=_cmd_plan)
