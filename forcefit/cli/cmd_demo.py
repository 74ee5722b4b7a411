"""``forcefit demo``: the main job on the bundled, invented demo data."""

from __future__ import annotations

import argparse
import math
import warnings
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..errors import ForcefitError, ForcefitWarning
from ._camera import camera_lines
from ._common import EXIT_OK

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    from ..apps.demo import DemoDataset
    from ..estimators.result import LawFit
    from ..track import Track


def _cmd_demo(args: argparse.Namespace) -> int:
    from ..apps.demo import demo_datasets
    from ..reading.video import is_video

    datasets = demo_datasets(args.data)
    for dataset in datasets:
        print(f"\n== {dataset.title}")
        expected = dataset.expected
        print(f"   true law: n = {expected['exponent']:g}, k = {expected['strength']:.6g} "
              f"{expected['strength_unit']}")
        if dataset.is_class_set:
            _grade_class(dataset, args.out)
            continue
        for path in dataset.paths:
            if is_video(path):
                print(f"   tracking the marker in {path.name}, then fitting on the plane the marks define")
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore", ForcefitWarning)
                    for track in dataset.load(path):
                        _demo_track(track, dataset.fit_options)
            except ForcefitError as exc:
                print(f"   {path.name}: refused — {exc}")
    return EXIT_OK


def _failed(fit: LawFit) -> str:
    failed = [name for name, check in fit.diagnostics.items() if check.passed is False]
    return "failed: " + ", ".join(failed) if failed else "passed"


def _grade_class(dataset: DemoDataset, out: str) -> None:
    """Grade the class set against its expected law and write the class report."""
    from ..apps.grading import GradingRule, grade_runs
    from ..estimators import fit_orbit
    from ..formatting import CHECK_MARKS, measurement
    from ..inference.posterior import sample_posterior

    expected = dataset.expected
    rule = GradingRule(expect=expected["exponent"], tolerance=expected["exponent_tolerance"],
                       strength=expected["strength"], strength_tolerance=expected["strength_tolerance"],
                       load_options=dict(dataset.load_options))
    print(f"   grading {len(dataset.paths)} runs: |n - {rule.expect:g}| <= {rule.tolerance:g} and k within "
          f"{100 * (rule.strength_tolerance or 0):g}% of {rule.strength:.5g} {expected['strength_unit']}")
    frame = grade_runs(list(dataset.paths), rule, out, title="pendulum lab (demo class set)")
    for row in frame.to_dict("records"):
        exponent = (measurement(row["exponent"], row["exponent_stderr"])
                    if math.isfinite(row["exponent"]) else "—")
        print(f"   {CHECK_MARKS[bool(row['passed'])]} {row['run']:<8} n = {exponent:<20} {row['reason']}")
    print(f"   class report: {Path(out) / 'index.html'}  (results table {Path(out) / 'results.csv'})")
    first = dataset.paths[0]
    track = dataset.load(first)[0]
    print(f"\n== posterior of {track.name} (emcee, run until converged)")
    print(sample_posterior(fit_orbit(track), rng=1, progress=True).to_text())


def _demo_track(track: Track, options: dict[str, Any]) -> None:
    """The inspection table, the orbit fit in full, and the time-free estimators in a line each."""
    from ..estimators import fit_curvature, fit_orbit, fit_shape
    from ..formatting import measurement
    from ..geometry.path import describe_path
    from ..reading.inspection import inspect_track

    centre = tuple(options["centre"]) if "centre" in options else None
    print("\n".join([inspect_track(track).to_text(), *camera_lines(track)]))
    fit = fit_orbit(track, centre=centre, drag=options.get("drag"),
                    rotation_rate=options.get("rotation_rate"))
    print(fit.to_text())
    for name, value, error in (("drag", fit.drag, fit.drag_stderr),
                               ("rotation_rate", fit.rotation_rate, fit.rotation_rate_stderr)):
        if math.isfinite(value):
            print(f"  fitted {name.replace('_', ' ')}: {measurement(value, error)} per {track.time_unit}")
    path = describe_path(track, centre=centre)
    print("  time-free estimators, for comparison:")
    for method, estimator in (("shape", fit_shape), ("curvature", fit_curvature)):
        other = estimator(track, centre=centre, path=path)
        print(f"    {method:<10} n = {measurement(other.exponent, other.exponent_stderr):<24}"
              f" {_failed(other)}")


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``demo`` command."""
    demo = commands.add_parser(
        "demo", help="run forcefit on the bundled demo data",
        description="Run the main job on the bundled, invented demo data.")
    demo.add_argument("--data", metavar="DIR", help="demo folder (default: datasets_demo)")
    demo.add_argument("--out", default="forcefit-report", metavar="DIR",
                      help="where the class report goes (default forcefit-report)")
    demo.set_defaults(handler=_cmd_demo)
