"""``forcefit sample``: the posterior of the orbit fit, with a progress bar."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..errors import InputError
from ._common import (
    EXIT_FAILED_CHECKS,
    EXIT_OK,
    FORMATTER,
    Reports,
    add_centre_option,
    add_orbit_options,
    orbit_options,
    read_tracks,
)

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    pass

_SAMPLE_EXAMPLES = """\
examples:
  forcefit sample run_04.csv                       # converged posterior, summary with units
  forcefit sample run_04.csv --save chain.h5       # keep the chain as it grows
  forcefit sample run_04.csv --resume chain.h5     # continue an interrupted run
  forcefit sample puck.tsv --drag linear --prior exponent=normal:1:0.1 --figures plots/
"""


def _prior(text: str) -> tuple[str, tuple[str, float, float]]:
    name, _, spec = text.partition("=")
    parts = spec.split(":")
    try:
        if len(parts) != 3 or parts[0] not in ("uniform", "normal"):
            raise ValueError
        return name, (parts[0], float(parts[1]), float(parts[2]))
    except ValueError:
        raise argparse.ArgumentTypeError(
            f'expected NAME=uniform:LOW:HIGH or NAME=normal:MEAN:SD, got "{text}"') from None


def _cmd_sample(args: argparse.Namespace) -> int:
    from ..estimators import fit_orbit
    from ..formatting import measurement
    from ..inference.posterior import sample_posterior
    from ..outputs.figures import corner_figure, save_figure, trace_figure
    from ..outputs.report import write_report

    if args.save and args.resume:
        raise InputError("give --save FILE for a new chain or --resume FILE to continue one, not both.")
    status, reports = EXIT_OK, Reports(args.json)
    tracks = read_tracks(args.file, args)
    for track in tracks:
        fit = fit_orbit(track, **orbit_options(args, track))
        chain = args.resume or args.save
        if chain and len(tracks) > 1:
            chain = Path(chain).with_name(f"{Path(chain).stem}_{track.name}{Path(chain).suffix}")
        posterior = sample_posterior(
            fit, walkers=args.walkers, max_steps=args.max_steps, priors=dict(args.prior),
            noise=args.noise, correlated=not args.independent, progress=not args.json, rng=args.seed,
            save=chain, resume=bool(args.resume))
        if not posterior.converged:
            status = EXIT_FAILED_CHECKS
        if args.figures:
            folder = Path(args.figures)
            folder.mkdir(parents=True, exist_ok=True)
            save_figure(corner_figure(posterior), folder / f"{track.name}_corner.png")
            save_figure(trace_figure(posterior), folder / f"{track.name}_trace.png")
        page = write_report(fit, args.report, track=track, posterior=posterior) if args.report else None
        lines = [f"{track.name} — orbit fit: n = {measurement(fit.exponent, fit.exponent_stderr)}",
                 posterior.to_text()]
        if page is not None:
            lines.append(f"report: {page}")
        if args.figures:
            lines.append(f"figures: {Path(args.figures) / (track.name + '_corner.png')}, "
                         f"{Path(args.figures) / (track.name + '_trace.png')}")
        reports.add({"track": track.name, "fit": fit.to_dict(), "posterior": posterior.to_dict(),
                     "report": str(page) if page else None}, "\n".join(lines))
    reports.close()
    return status


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``sample`` command."""
    parser = commands.add_parser(
        "sample", parents=[loading], formatter_class=FORMATTER, epilog=_SAMPLE_EXAMPLES,
        help="sample the posterior of the orbit fit (emcee): intervals you can trust",
        description="Fit the orbit, then sample the posterior of its parameters until converged.")
    parser.add_argument("file", metavar="FILE")
    add_centre_option(parser)
    add_orbit_options(parser)
    sampling = parser.add_argument_group("sampling")
    sampling.add_argument("--walkers", type=int, help="ensemble size (default 32 or 2 x parameters + 2)")
    sampling.add_argument("--max-steps", type=int, default=20_000, help="longest run (default 20000)")
    sampling.add_argument("--seed", type=int, help="random seed, for a repeatable chain")
    sampling.add_argument("--noise", choices=("known", "fit"),
                          help="sigma as given, or sample a noise scale (default: by the data)")
    sampling.add_argument("--prior", type=_prior, action="append", default=[], metavar="NAME=KIND:A:B",
                          help="prior for a parameter: uniform:LOW:HIGH or normal:MEAN:SD; repeatable")
    sampling.add_argument("--independent", action="store_true",
                          help="take the residuals as independent (default: the fit's correlated-noise "
                               "model widens the likelihood by the residuals' correlation time)")
    sampling.add_argument("--save", metavar="FILE", help="keep the chain in this HDF5 file")
    sampling.add_argument("--resume", metavar="FILE", help="continue the chain in this HDF5 file")
    sampling.add_argument("--figures", metavar="DIR", help="write corner and trace plots (PNG) here")
    sampling.add_argument("--report", metavar="DIR", help="write an HTML report with the posterior into DIR")
    sampling.add_argument("--json", action="store_true", help="print JSON instead of a table")
    parser.set_defaults(handler=_cmd_sample)
