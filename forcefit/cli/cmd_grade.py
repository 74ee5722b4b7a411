"""``forcefit grade``: a class's runs against the expected law, with a report per run."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..apps.class_settings import SETTINGS_NAME
from ..errors import InputError
from ._common import EXIT_FAILED_CHECKS, EXIT_OK, FORMATTER, loading_keywords

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    from ..apps.class_settings import ClassSettings

_EXAMPLES = """\
examples:
  forcefit grade runs/ --expect 1 --tolerance 0.05 --length-unit px
  forcefit grade "runs/*.csv" --expect 1 --tolerance 0.05 --expect-strength 4.0875 \\
      --strength-tolerance 0.03 --out week3 --workers 2
  forcefit grade runs/ --expect -2 --tolerance 0.01 --scheduler tcp://10.0.0.5:8786
  forcefit grade runs/ --expect 1 --tolerance 0.05 --out week3 --resume   # regrades what changed
  forcefit grade --write-settings runs/forcefit-class.toml    # a commented settings file to edit
  forcefit grade runs/ --out week3            # rule and reading options from runs/forcefit-class.toml
"""


def _settings(args: argparse.Namespace) -> ClassSettings | None:
    """The class settings named with --settings, else the file beside the runs, if any."""
    from ..apps.class_settings import read_settings

    if args.settings is not None:
        return read_settings(args.settings)
    beside = Path(args.source) / SETTINGS_NAME
    return read_settings(beside) if beside.is_file() else None


def _given(args: argparse.Namespace) -> tuple[dict[str, Any], dict[str, Any]]:
    """The rule values and the reading options set on the command line (those left at their
    defaults are not given, so that a settings file's hold)."""
    rule = {key: value for key, value in (
        ("expect", args.expect), ("tolerance", args.tolerance), ("strength", args.expect_strength),
        ("strength_tolerance", args.strength_tolerance), ("min_turns", args.min_turns),
        ("strength_unit", args.strength_unit)) if value is not None}
    defaults = {"sheet": args.parser.get_default("sheet")}
    options = {key: value for key, value in loading_keywords(args).items()
               if value not in (None, False, {}) and value != defaults.get(key, ...)}
    return rule, options


def _write_settings(target: str) -> int:
    from ..apps.class_settings import STARTING_FILE

    path = Path(target)
    if path.exists():
        raise InputError(f"{path}: exists already; forcefit does not overwrite it. Name another file.")
    path.write_text(STARTING_FILE, encoding="utf-8")
    print(f"wrote {path}: edit the rule and reading options, then run "
          f"forcefit grade FOLDER --settings {path} (or save it as FOLDER/{SETTINGS_NAME})")
    return EXIT_OK


def _cmd_grade(args: argparse.Namespace) -> int:
    from ..apps.class_summary import summarise_class
    from ..apps.grading import grade_runs, rule_with_settings
    from ..apps.run_files import sort_runs
    from ..formatting import CHECK_MARKS

    if args.write_settings is not None:
        return _write_settings(args.write_settings)
    if args.source is None:
        raise InputError("give the folder (or a pattern) of the runs to grade.")
    rule_values, options = _given(args)
    rule = rule_with_settings(_settings(args), rule=rule_values, options=options)
    frame = grade_runs(args.source, rule, args.out, workers=args.workers, scheduler=args.scheduler,
                       resume=args.resume, progress=not args.quiet, title=args.title or Path(args.out).name)
    passed = int(frame["passed"].sum()) if len(frame) else 0
    if not args.quiet:
        for row in frame.to_dict("records"):
            print(f"  {CHECK_MARKS[bool(row['passed'])]} {row['run']:<24} {row['reason']}")
            if row.get("advice"):
                print(f"    likely cause: {row['advice']}")
        for path, reason in sort_runs(args.source).skipped:
            print(f"  skipped {path.name}: {reason}")
    if len(frame):
        for row in summarise_class(frame.to_dict("records"), rule.unit).rows():
            print(f"  {row.label}: {row.text}")
    print(f"{passed} of {len(frame)} runs meet the rule; report: {Path(args.out) / 'index.html'}, "
          f"table: {Path(args.out) / 'results.csv'}")
    return EXIT_OK if passed == len(frame) else EXIT_FAILED_CHECKS


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``grade`` command."""
    parser = commands.add_parser(
        "grade", parents=[loading], formatter_class=FORMATTER, epilog=_EXAMPLES,
        help="grade many runs against an expected law; results table and a report per run",
        description="Grade every run in DIR (or matching GLOB) against the expected law.")
    parser.add_argument("source", metavar="DIR|GLOB", nargs="?")
    settings = parser.add_argument_group("the class settings file (TOML)")
    settings.add_argument("--settings", metavar="FILE",
                          help=f"the rule, reading defaults and per-file options (default: {SETTINGS_NAME} "
                               "beside the runs, if there is one); options given here win over it")
    settings.add_argument("--write-settings", metavar="FILE",
                          help="write a commented starting settings file and stop")
    rule = parser.add_argument_group("the grading rule")
    rule.add_argument("--expect", type=float, metavar="N", help="expected exponent")
    rule.add_argument("--tolerance", type=float, metavar="T", help="largest |n - N| that passes")
    rule.add_argument("--expect-strength", type=float, metavar="K",
                      help="expected strength at the expected exponent (e.g. g/L in s^-2 for n = 1)")
    rule.add_argument("--strength-unit", metavar="UNIT",
                      help='unit of --expect-strength and of the table, e.g. "s^-2" or "au^3/d^2" '
                           "(default: metres and seconds); each run is converted into it")
    rule.add_argument("--strength-tolerance", type=float, metavar="R",
                      help="largest relative strength deviation that passes (default 0.05)")
    rule.add_argument("--min-turns", type=float, help="least turns a run must cover (default 1)")
    run = parser.add_argument_group("running")
    run.add_argument("--out", default="forcefit-grade", metavar="DIR",
                     help="output folder (default forcefit-grade)")
    run.add_argument("--title", help="title of the class page (default: the output folder's name)")
    run.add_argument("--workers", type=int, help="local worker processes (default: all cores)")
    run.add_argument("--scheduler", metavar="ADDRESS", help="run on this dask.distributed scheduler instead")
    run.add_argument("--resume", action="store_true", help="keep finished runs in --out and skip them")
    run.add_argument("--quiet", action="store_true", help="no progress bar and no per-run lines")
    parser.set_defaults(handler=_cmd_grade, parser=parser)
