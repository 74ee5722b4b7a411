"""``forcefit grade``: a class's runs against the expected law, with a report per run."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from ..apps.grading import GradingRule, grade_runs
from ..apps.run_files import sort_runs
from ..formatting import CHECK_MARKS
from ._common import EXIT_FAILED_CHECKS, EXIT_OK, FORMATTER, loading_keywords

_EXAMPLES = """\
examples:
  forcefit grade runs/ --expect 1 --tolerance 0.05 --length-unit px
  forcefit grade "runs/*.csv" --expect 1 --tolerance 0.05 --expect-strength 4.0875 \\
      --strength-tolerance 0.03 --out week3 --workers 2
  forcefit grade runs/ --expect -2 --tolerance 0.01 --scheduler tcp://10.0.0.5:8786
  forcefit grade runs/ --expect 1 --tolerance 0.05 --out week3 --resume   # after an interruption
"""


def _cmd_grade(args: argparse.Namespace) -> int:
    rule = GradingRule(expect=args.expect, tolerance=args.tolerance, strength=args.expect_strength,
                       strength_tolerance=args.strength_tolerance, min_turns=args.min_turns,
                       load_options=loading_keywords(args), strength_unit=args.strength_unit)
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
    print(f"{passed} of {len(frame)} runs meet the rule; report: {Path(args.out) / 'index.html'}, "
          f"table: {Path(args.out) / 'results.csv'}")
    return EXIT_OK if passed == len(frame) else EXIT_FAILED_CHECKS


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``grade`` command."""
    parser = commands.add_parser(
        "grade", parents=[loading], formatter_class=FORMATTER, epilog=_EXAMPLES,
        help="grade many runs against an expected law; results table and a report per run",
        description="Grade every run in DIR (or matching GLOB) against the expected law.")
    parser.add_argument("source", metavar="DIR|GLOB")
    rule = parser.add_argument_group("the grading rule")
    rule.add_argument("--expect", type=float, required=True, metavar="N", help="expected exponent")
    rule.add_argument("--tolerance", type=float, required=True, metavar="T",
                      help="largest |n - N| that passes")
    rule.add_argument("--expect-strength", type=float, metavar="K",
                      help="expected strength at the expected exponent (e.g. g/L in s^-2 for n = 1)")
    rule.add_argument("--strength-unit", metavar="UNIT",
                      help='unit of --expect-strength and of the table, e.g. "s^-2" or "au^3/d^2" '
                           "(default: metres and seconds); each run is converted into it")
    rule.add_argument("--strength-tolerance", type=float, default=0.05, metavar="R",
                      help="largest relative strength deviation that passes (default 0.05)")
    rule.add_argument("--min-turns", type=float, default=1.0, help="least turns a run must cover (default 1)")
    run = parser.add_argument_group("running")
    run.add_argument("--out", default="forcefit-grade", metavar="DIR",
                     help="output folder (default forcefit-grade)")
    run.add_argument("--title", help="title of the class page (default: the output folder's name)")
    run.add_argument("--workers", type=int, help="local worker processes (default: all cores)")
    run.add_argument("--scheduler", metavar="ADDRESS", help="run on this dask.distributed scheduler instead")
    run.add_argument("--resume", action="store_true", help="keep finished runs in --out and skip them")
    run.add_argument("--quiet", action="store_true", help="no progress bar and no per-run lines")
    parser.set_defaults(handler=_cmd_grade)
