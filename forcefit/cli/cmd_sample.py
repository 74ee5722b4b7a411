"""``forcefit sample``: the posterior of the orbit fit, or with --projected of an orbit seen on the
sky, with a progress bar."""

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
    read_sky_data,
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
  forcefit sample binary.csv --projected           # orbit seen on the sky: n, k, inclination, node
"""

PROJECTED_OPTIONS = ("fix_exponent", "centre", "json", "length_unit", "sheet", "walkers", "max_steps",
                     "seed", "noise", "prior", "independent", "save", "resume", "figures")
"""The options ``sample --projected`` takes; the others are refused."""


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


def _sampling(args: argparse.Namespace, chain: str | Path | None) -> dict[str, Any]:
    """The keyword arguments of `sample_posterior` the command line asked for."""
    return {"walkers": args.walkers, "max_steps": args.max_steps, "priors": dict(args.prior),
            "noise": args.noise, "correlated": not args.independent, "progress": not args.json,
            "rng": args.seed, "save": chain, "resume": bool(args.resume)}


def _figures(posterior: Any, folder: Path, name: str, corner_names: list[str] | None = None) -> str:
    """Write the corner and trace plots; return the line naming them."""
    from ..outputs.figures import corner_figure, save_figure, trace_figure

    folder.mkdir(parents=True, exist_ok=True)
    save_figure(corner_figure(posterior, corner_names), folder / f"{name}_corner.png")
    save_figure(trace_figure(posterior), folder / f"{name}_trace.png")
    return f"figures: {folder / (name + '_corner.png')}, {folder / (name + '_trace.png')}"


def _cmd_sample_projected(args: argparse.Namespace) -> int:
    """``sample FILE --projected``: the posterior of an orbit seen on the sky."""
    from ..estimators.projected import fit_projected
    from ..formatting import measurement
    from ..inference.projected_posterior import sample_projected

    data = read_sky_data(args, args.defaults, PROJECTED_OPTIONS, "--fix-exponent, --centre, "
                         "--length-unit, --sheet, --json and the sampling options but --report")
    fit = fit_projected(data, exponent=args.fix_exponent, centre=args.centre)
    posterior = sample_projected(fit, **_sampling(args, args.resume or args.save))
    name = data.track.name
    lines = [f"{name} — projected fit: n = {measurement(fit.exponent, fit.exponent_stderr)}",
             posterior.to_text()]
    if args.figures:
        shown = [column for column in ("exponent", "strength", "inclination", "node", "noise_scale")
                 if column in posterior.samples]
        lines.append(_figures(posterior, Path(args.figures), name, shown))
    reports = Reports(args.json)
    reports.add({"track": name, "fit": fit.to_dict(), "posterior": posterior.to_dict()}, "\n".join(lines))
    reports.close()
    return EXIT_OK if posterior.converged else EXIT_FAILED_CHECKS


def _cmd_sample(args: argparse.Namespace) -> int:
    from ..estimators import fit_orbit
    from ..formatting import measurement
    from ..inference.posterior import sample_posterior
    from ..outputs.report import write_report

    if args.save and args.resume:
        raise InputError("give --save FILE for a new chain or --resume FILE to continue one, not both.")
    if args.projected:
        return _cmd_sample_projected(args)
    status, reports = EXIT_OK, Reports(args.json)
    tracks = read_tracks(args.file, args)
    for track in tracks:
        fit = fit_orbit(track, **orbit_options(args, track))
        chain = args.resume or args.save
        if chain and len(tracks) > 1:
            chain = Path(chain).with_name(f"{Path(chain).stem}_{track.name}{Path(chain).suffix}")
        posterior = sample_posterior(fit, **_sampling(args, chain))
        if not posterior.converged:
            status = EXIT_FAILED_CHECKS
        figures = _figures(posterior, Path(args.figures), track.name) if args.figures else None
        page = write_report(fit, args.report, track=track, posterior=posterior) if args.report else None
        lines = [f"{track.name} — orbit fit: n = {measurement(fit.exponent, fit.exponent_stderr)}",
                 posterior.to_text()]
        if page is not None:
            lines.append(f"report: {page}")
        if figures:
            lines.append(figures)
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
    parser.add_argument("--projected", action="store_true",
                        help="positions on the sky (rho/theta or ddec/dra, at epochs): sample the law "
                             "with the orbit's inclination and node")
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
    parser.set_defaults(handler=_cmd_sample, parser=parser)
    defaults = vars(parser.parse_args(["FILE"]))
    parser.set_defaults(defaults={name: value for name, value in defaults.items() if name != "defaults"})
