"""``forcefit dual``: the track mapped to its Kasner-Arnold dual, written as CSV."""

from __future__ import annotations

import argparse
import math
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ._common import EXIT_OK, FORMATTER, add_centre_option, read_tracks

if TYPE_CHECKING:  # the command's libraries load when it runs, not for --help
    pass

_EXAMPLES = """\
examples:
  forcefit dual hooke_run.csv --out kepler_image.csv      # law and centre from a fit
  forcefit dual path.csv --exponent 1 --centre 0,0 --out mapped.csv
"""


def _cmd_dual(args: argparse.Namespace) -> int:
    from ..analysis.duality_check import predicted_dual_strength_with_error
    from ..dynamics.duality import dual_exponent, dual_track
    from ..estimators import registry
    from ..reading.loaders import save_track
    from ..units import strength_unit

    tracks = read_tracks(args.file, args)
    for track in tracks:
        exponent, centre = args.exponent, args.centre
        strength = strength_stderr = math.nan
        if exponent is None or centre is None:
            method = registry.choose_method(track)
            held = {"exponent": exponent} if method == "orbit" else {}     # only the orbit fit holds n
            fit = registry.fit(track, method, centre=centre, **held)
            exponent = fit.exponent if exponent is None else exponent
            centre = fit.centre if centre is None else centre
            strength, strength_stderr = predicted_dual_strength_with_error(fit)
        dual = dual_track(track, exponent, centre)
        print(f"{track.name}: n = {exponent:.6g} about ({centre[0]:.6g}, {centre[1]:.6g}) "
              f"{track.length_unit}; mapped by w = z^{(exponent + 3) / 2:.6g}")
        law = dual_exponent(exponent)
        unit = strength_unit(track.length_unit, track.time_unit or "T", law)
        print(f"  predicted dual law: n' = {law:.6g}"
              + (f", k' = {strength:.6g} ± {strength_stderr:.2g} {unit}" if math.isfinite(strength) else ""))
        if args.out:
            out = Path(args.out)
            if len(tracks) > 1:
                out = out.with_name(f"{out.stem}_{track.name}{out.suffix}")
            save_track(dual, out)
            print(f"  wrote {dual.n_points} samples to {out} ({dual.metadata['units_note']})")
    return EXIT_OK


def register(commands: Any, loading: argparse.ArgumentParser) -> None:
    """Add the ``dual`` command."""
    parser = commands.add_parser(
        "dual", parents=[loading], formatter_class=FORMATTER, epilog=_EXAMPLES,
        help="map a track to its dual law (w = z^((n+3)/2)) and write it",
        description="Map a track by the Kasner-Arnold duality, re-timed, and write the image.")
    parser.add_argument("file", metavar="FILE")
    parser.add_argument("--exponent", type=float, metavar="N", help="the track's exponent (default: fit)")
    add_centre_option(parser, help="the force centre (default: fit)")
    parser.add_argument("--out", metavar="FILE", help="CSV to write the dual track to")
    parser.set_defaults(handler=_cmd_dual)
