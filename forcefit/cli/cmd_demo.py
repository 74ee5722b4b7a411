"""``forcefit demo``: the main job on the bundled, invented demo data."""

from __future__ import annotations

import argparse
import warnings
from typing import Any

from ..demo import demo_datasets
from ..errors import ForcefitError, ForcefitWarning
from ..estimators import fit_curvature, fit_orbit, fit_shape
from ..geometry import describe_path
from ..inspection import inspect_track
from ..posterior import sample_posterior
from ..result import LawFit
from ..track import Track
from ..units import format_measurement, strength_unit
from ._common import EXIT_OK


def _cmd_demo(args: argparse.Namespace) -> int:
    datasets = demo_datasets(args.data)
    sampled = False
    for dataset in datasets:
        print(f"\n== {dataset.title}")
        expected = dataset.expected
        print(f"   true law: n = {expected['exponent']:g}, k = {expected['strength']:.6g} "
              f"{expected['strength_unit']}")
        if dataset.is_class_set:
            print(f"   {'run':<8} {'points':>6} {'duration':>9}  {'exponent n':<22} "
                  f"{'k at the nearest whole n':<26} checks")
        for path in dataset.paths:
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore", ForcefitWarning)
                    for track in dataset.load(path):
                        if dataset.is_class_set:
                            fit = _class_line(track)
                            if not sampled:
                                sampled = True
                                pending = fit
                        else:
                            _demo_track(track, dataset.fit_options)
            except ForcefitError as exc:
                print(f"   {path.name}: refused — {exc}")
    if sampled:
        print(f"\n== posterior of {pending.track_name} (emcee, run until converged)")
        print(sample_posterior(pending, seed=1, progress=True).summary())
    return EXIT_OK


def _failed(fit: LawFit) -> str:
    failed = [name for name, check in fit.diagnostics.items() if check.passed is False]
    return "failed: " + ", ".join(failed) if failed else "passed"


def _class_line(track: Track) -> LawFit:
    """One line per student run: the orbit fit, and k at the nearest whole exponent."""
    fit = fit_orbit(track)
    nominal = round(fit.exponent)
    value, error = fit.strength_at_exponent(nominal)
    unit = strength_unit(track.length_unit, track.time_unit, nominal)
    print(f"   {track.name:<8} {track.n_points:6d} {track.duration:7.2f} {track.time_unit}  "
          f"{format_measurement(fit.exponent, fit.exponent_stderr):<22} "
          f"{format_measurement(value, error, unit):<26} {_failed(fit)}")
    return fit


def _demo_track(track: Track, options: dict[str, Any]) -> None:
    """The inspection table, the orbit fit in full, and the time-free estimators in a line each."""
    centre = tuple(options["centre"]) if "centre" in options else None
    print(inspect_track(track).to_text())
    fit = fit_orbit(track, centre=centre, drag=options.get("drag"),
                    rotation_rate=options.get("rotation_rate"))
    print(fit.summary())
    for name in ("drag", "rotation_rate"):
        if name in fit.details:
            print(f"  fitted {name.replace('_', ' ')}: {fit.details[name]:.4g} ± "
                  f"{fit.details[name + '_stderr']:.2g} per {track.time_unit}")
    path = describe_path(track, centre=centre)
    print("  time-free estimators, for comparison:")
    for method, estimator in (("shape", fit_shape), ("curvature", fit_curvature)):
        other = estimator(track, centre=centre, path=path)
        print(f"    {method:<10} n = {format_measurement(other.exponent, other.exponent_stderr):<24}"
              f" {_failed(other)}")


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``demo`` command."""
    demo = commands.add_parser(
        "demo", help="run forcefit on the bundled demo data",
        description="Run the main job on the bundled, invented demo data.")
    demo.add_argument("--data", metavar="DIR", help="demo folder (default: datasets_demo)")
    demo.set_defaults(handler=_cmd_demo)
