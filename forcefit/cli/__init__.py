"""The ``forcefit`` command: parse options, call the API, print. No physics here."""

from __future__ import annotations

import argparse
import os
import sys
import warnings
from collections.abc import Callable, Sequence
from typing import Any

from .._version import __version__
from ..errors import ForcefitError
from . import (
    cmd_apsides,
    cmd_calibrate_lens,
    cmd_demo,
    cmd_dual,
    cmd_fit,
    cmd_grade,
    cmd_inspect,
    cmd_plan,
    cmd_sample,
    cmd_simulate,
    cmd_track,
)
from ._common import EXIT_BAD_INPUT, EXIT_OK, FORMATTER, loading_options

_MAIN_EXAMPLES = """\
examples:
  forcefit inspect runs/puck_03.csv --length-unit mm
  forcefit fit runs/puck_03.csv --length-unit mm --drag linear
  forcefit sample runs/puck_03.csv --length-unit mm --drag linear --save chain.h5
  forcefit simulate --exponent -1.5 --duration 20 --rate 30 --noise 0.005 --out rosette.csv
  forcefit track swing.mp4 --out swing.csv --overlay swing.png
  forcefit demo
"""


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``forcefit`` command."""
    parser = argparse.ArgumentParser(
        prog="forcefit", formatter_class=FORMATTER, epilog=_MAIN_EXAMPLES,
        description="Infer the central force law F(r) = -k r^n r_hat behind a planar trajectory.",
    )
    parser.add_argument("--version", action="version", version=f"forcefit {__version__}")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    loading = loading_options()
    for module in (cmd_inspect, cmd_fit, cmd_sample, cmd_apsides, cmd_dual, cmd_plan, cmd_grade,
                   cmd_simulate, cmd_demo, cmd_track, cmd_calibrate_lens):
        module.register(commands, loading)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``forcefit`` command; returns the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    handler: Callable[[argparse.Namespace], int] = args.handler
    previous, warnings.formatwarning = warnings.formatwarning, _one_line_warning
    try:
        return handler(args)
    except ForcefitError as exc:
        print(f"forcefit: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("forcefit: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:                    # the reader (head, less) stopped listening
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return EXIT_OK
    finally:
        warnings.formatwarning = previous


def _one_line_warning(message: Any, category: Any, *_: Any, **__: Any) -> str:
    return f"forcefit: warning: {message}\n"
