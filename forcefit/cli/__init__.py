"""The ``forcefit`` command: parse options, call the API, print. No physics here."""

from __future__ import annotations

import argparse
import importlib
import os
import re
import sys
import warnings
from collections.abc import Callable, Sequence
from typing import Any, NoReturn

from .._version import __version__
from ..errors import ForcefitError

EXIT_OK, EXIT_BAD_INPUT = 0, 2          # as in ._common, which is imported only with a command
FORMATTER = argparse.RawDescriptionHelpFormatter

COMMANDS: dict[str, tuple[str, str]] = {
    "inspect": ("cmd_inspect", "show what a file holds: points, timing, gaps, extent, units, warnings"),
    "fit": ("cmd_fit", "fit F = -k r^n to a track: exponent, strength, centre, errors, checks"),
    "sample": ("cmd_sample", "sample the posterior of the orbit fit (emcee): intervals you can trust"),
    "apsides": ("cmd_apsides", "apsidal angle, precession and the exponent it implies"),
    "dual": ("cmd_dual", "map a track to its dual law (w = z^((n+3)/2)) and write it"),
    "plan": ("cmd_plan", "forecast the precision of a planned run (Fisher information of the orbit fit)"),
    "grade": ("cmd_grade", "grade many runs against an expected law; results table and a report per run"),
    "simulate": ("cmd_simulate", "write a synthetic track with known truth (CSV)"),
    "demo": ("cmd_demo", "run forcefit on the bundled demo data"),
    "track": ("cmd_track", "find a marked body in every frame of a video and write its track (px, s)"),
    "calibrate-lens": ("cmd_calibrate_lens",
                       "measure a camera's lens distortion from photographs of a chessboard"),
}
"""Each command's module and one-line help. ``forcefit --help`` lists them without importing
any; a command's module (and the libraries it needs) is imported only when it is used."""

_MAIN_EXAMPLES = """\
examples:
  forcefit inspect runs/puck_03.csv --length-unit mm
  forcefit fit runs/puck_03.csv --length-unit mm --drag linear
  forcefit sample runs/puck_03.csv --length-unit mm --drag linear --save chain.h5
  forcefit simulate --exponent -1.5 --duration 20 --rate 30 --noise 0.005 --out rosette.csv
  forcefit track swing.mp4 --out swing.csv --overlay swing.png
  forcefit demo
"""


_PHRASES = (
    (re.compile(r"^the following arguments are required: (.*)$"), r"missing \1"),
    (re.compile(r"^unrecognized arguments: (.*)$"), r"not an option of this command: \1"),
    (re.compile(r"^argument (\S+): invalid (?:float|int) value: '(.*)'$"), r"\1 takes a number, not '\2'"),
    (re.compile(r"^argument (\S+): invalid choice: '(.*)' \(choose from (.*)\)$"),
     r"\1 takes one of \3, not '\2'"),
    (re.compile(r"^argument (\S+): expected one argument$"), r"\1 needs a value"),
    (re.compile(r"^argument (\S+): (.*)$"), r"\1: \2"),
)


class _Parser(argparse.ArgumentParser):
    """argparse, with forcefit's own words for a command line it cannot use."""

    def error(self, message: str) -> NoReturn:
        for pattern, replacement in _PHRASES:
            if pattern.match(message):
                message = pattern.sub(replacement, message)
                break
        self.exit(EXIT_BAD_INPUT, f"{self.prog}: {message}. '{self.prog} --help' lists what it takes.\n")


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The argument parser of the ``forcefit`` command.

    Parameters
    ----------
    only : str, optional
        Build this command's options only (the others are listed by name and help); default:
        every command's options.
    """
    parser = _Parser(
        prog="forcefit", formatter_class=FORMATTER, epilog=_MAIN_EXAMPLES,
        description="Infer the central force law F(r) = -k r^n r_hat behind a planar trajectory.",
    )
    parser.add_argument("--version", action="version", version=f"forcefit {__version__}")
    commands = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    loading = None
    for name, (module_name, help_text) in COMMANDS.items():
        if only is not None and name != only:
            commands.add_parser(name, help=help_text)
            continue
        if loading is None:
            from ._common import loading_options

            loading = loading_options()
        importlib.import_module(f"{__name__}.{module_name}").register(commands, loading)
    return parser


def _command_in(argv: Sequence[str]) -> str | None:
    """The command named on the command line, if any (the first word not an option)."""
    word = next((word for word in argv if not word.startswith("-")), None)
    return word if word in COMMANDS else None


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``forcefit`` command; returns the exit status."""
    words = sys.argv[1:] if argv is None else list(argv)
    command = _command_in(words)
    parser = build_parser(only=command) if command else build_parser(only="")
    args = parser.parse_args(words)
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
