"""Reports people can read at a glance and file: one HTML page per run, one per class.

Each page is self-contained (figures embedded as PNG data), rendered by jinja2 with
autoescaping on, so text that came from a file (a run's name, a column header) is shown as
text, never run as markup. The figures are written beside it as PNG files. Everything is
written whole or not at all.
"""

from __future__ import annotations

import base64
import datetime as _dt
import math
import os
import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from jinja2 import Environment, PackageLoader, select_autoescape
from matplotlib.figure import Figure

from .._atomic import write_atomic
from .._types import Row
from .._version import __version__
from ..analysis.apsides import Apsides
from ..estimators.result import LawFit, OrbitFit
from ..formatting import CHECK_MARKS, CHECK_WORDS, measurement
from ..track import Track
from .figures import (
    apsides_figure,
    corner_figure,
    figure_png,
    grade_histogram,
    path_figure,
    relation_figure,
    residual_figure,
    trace_figure,
)

if TYPE_CHECKING:                      # the posterior's module loads emcee and scipy.stats
    from ..inference.posterior import Posterior


def safe_name(name: str) -> str:
    """A run's name as a file name: letters, digits, dot, dash, underscore; never a path.

    Examples
    --------
    >>> safe_name("../../x"), safe_name("run<img src=x onerror=alert(1)>.csv")
    ('x', 'run_img_src_x_onerror_alert_1_.csv')
    """
    cleaned = re.sub(r"[^A-Za-z0-9._-]+", "_", name).strip("._")
    cleaned = re.sub(r"\.{2,}", ".", cleaned)
    return cleaned[:120] or "run"


def _environment() -> Environment:
    return Environment(loader=PackageLoader("forcefit.outputs", "templates"),
                       autoescape=select_autoescape(["html", "j2"], default_for_string=True))


@dataclass(frozen=True)
class Verdict:
    """A pass/fail (or note) with the reasons, as shown at the top of a report."""

    label: str
    passed: bool | None
    reasons: tuple[str, ...] = ()


def _diagnostics(fit: LawFit) -> list[dict[str, str]]:
    classes = {True: "pass", False: "fail", None: "note"}
    return [{"symbol": CHECK_MARKS[check.passed], "word": CHECK_WORDS[check.passed],
             "mark": classes[check.passed], "name": name, "message": check.message}
            for name, check in fit.diagnostics.items()]


def _record(track: Track | None, options: Mapping[str, Any] | None) -> list[tuple[str, str]]:
    """How the run was read and fitted: its source, columns, units and where they came from, the
    calibration or plane mapping, the rows left out, the notes, and every option used."""
    record: list[tuple[str, str]] = []
    if track is not None:
        meta = track.metadata
        units_from = meta.get("units_from", {})
        record += [("source", str(meta.get("source", "arrays"))),
                   ("columns", ", ".join(f"{role}: {header}" for role, header in
                                         meta.get("columns", {}).items()) or "given as arrays"),
                   ("units", f"length {track.length_unit} ({units_from.get('length', 'as given')})"
                             + (f", time {track.time_unit} ({units_from.get('time', 'as given')})"
                                if track.has_times else ", no times"))]
        for key, label in (("calibration", "calibration"), ("plane_mapping", "plane mapping"),
                           ("plane", "plane of a 3-D track")):
            if meta.get(key):
                record.append((label, _describe(meta[key])))
        if meta.get("dropped_rows"):
            record.append(("rows left out", f"{meta['dropped_rows']} (empty cells): rows "
                                            + ", ".join(map(str, meta.get("dropped_row_numbers", [])))))
        record += [("note", str(note)) for note in meta.get("warnings", ())]
    for name, value in (options or {}).items():
        if value not in (None, False, (), [], {}):
            record.append((f"option {name}", _describe(value)))
    return record


def _describe(value: Any) -> str:
    """A recorded value as one line of text."""
    if isinstance(value, Mapping):
        return ", ".join(f"{key} {_describe(item)}" for key, item in value.items())
    if isinstance(value, (list, tuple)):
        return "(" + ", ".join(_describe(item) for item in value) + ")"
    if isinstance(value, float):
        return f"{value:.10g}"
    return str(value)


def _track_of(fit: LawFit, track: Track | None) -> Track | None:
    if track is not None:
        return track
    return fit.model.tracks[0] if isinstance(fit, OrbitFit) else None


def write_report(
    fit: LawFit,
    out_dir: str | os.PathLike[str],
    *,
    track: Track | None = None,
    posterior: Posterior | None = None,
    apsides: Apsides | None = None,
    verdict: Verdict | None = None,
    options: Mapping[str, Any] | None = None,
    extras: Sequence[tuple[str, Sequence[Row]]] = (),
) -> Path:
    """Write one run's report: an HTML page with every number and figure, and the PNGs.

    Parameters
    ----------
    fit : LawFit
        The fit to report.
    out_dir : path
        Folder for the page and figures (created if missing).
    track : Track, optional
        The data fitted (taken from an orbit fit when not given); needed for the figures.
    posterior, apsides : optional
        Shown when given.
    verdict : Verdict, optional
        A grade to show at the top; default the fit's own checks.
    options : mapping, optional
        The options the run was read and fitted with (units, calibration, latitude, ...); the
        page records every one that was set, beside what the track itself records.
    extras : sequence of (title, rows)
        Further results to show beside the fit (the nominal law, a correction), each a section.

    Returns
    -------
    Path
        The HTML page.
    """
    folder = Path(out_dir)
    folder.mkdir(parents=True, exist_ok=True)
    slug = safe_name(fit.track_name)
    track = _track_of(fit, track)
    makers: list[tuple[str, str, Callable[[], Figure]]] = []
    if track is not None:
        makers += [("path", "path with the fitted orbit and the centre", lambda: path_figure(track, fit)),
                   ("residuals", "normalised residuals", lambda: residual_figure(track, fit))]
        if fit.relation.log_radius.size:
            makers.append(("relation", "force-curvature relation, log-log", lambda: relation_figure(fit)))
    if posterior is not None:
        makers += [("corner", "posterior: pairwise marginals", lambda: corner_figure(posterior)),
                   ("trace", "posterior: chains of a few walkers", lambda: trace_figure(posterior))]
    if apsides is not None:
        makers.append(("apsides", "turn of each apse against time", lambda: apsides_figure(apsides)))
    figures = []
    for key, caption, make in makers:
        try:
            data = figure_png(make())
        except Exception as exc:  # a figure that cannot be drawn must not lose the report
            figures.append({"data": "", "caption": f"{caption}: not drawn ({exc})", "file": "-"})
            continue
        file_name = f"{slug}_{key}.png"
        write_atomic(folder / file_name, data)
        figures.append({"data": base64.b64encode(data).decode("ascii"), "caption": caption,
                        "file": file_name})
    verdict = verdict or Verdict("CHECKS PASSED" if fit.passed else "CHECKS FAILED", fit.passed,
                                 tuple(f"{name}: {check.message}" for name, check in fit.diagnostics.items()
                                       if check.passed is False))
    html = _environment().get_template("run.html.j2").render(
        name=fit.track_name, method=fit.method, n_points=fit.n_points,
        source=track.metadata.get("source", "") if track is not None else "",
        verdict=verdict.label, verdict_class={True: "pass", False: "fail", None: "note"}[verdict.passed],
        reasons=verdict.reasons, quantities=fit.rows(), diagnostics=_diagnostics(fit),
        posterior=posterior, apsides=apsides.rows() if apsides is not None else None, figures=figures,
        record=_record(track, options), extras=[(title, list(rows)) for title, rows in extras],
        version=__version__, written=_dt.datetime.now().strftime("%Y-%m-%d %H:%M"),
    )
    return write_atomic(folder / f"{slug}.html", html)


def write_class_report(
    rows: Sequence[dict[str, Any]],
    out_dir: str | os.PathLike[str],
    *,
    expect: float,
    tolerance: float,
    strength: float | None = None,
    strength_tolerance: float | None = None,
    strength_unit: str = "",
    csv_name: str = "results.csv",
    title: str = "class report",
    skipped: Sequence[tuple[str, str]] = (),
    summary: Sequence[Row] = (),
) -> Path:
    """Write the class's index page: every run with its grade, reason and likely mistake, the
    files skipped as not runs, and the histogram.

    ``rows`` are the grading rows (see `forcefit.apps.grading`); a row's ``report`` is the
    run's page relative to ``out_dir``; ``skipped`` holds (file name, reason) pairs; ``summary``
    the class's means over its passing runs.
    """
    folder = Path(out_dir)
    folder.mkdir(parents=True, exist_ok=True)
    exponents = [row.get("exponent", math.nan) for row in rows]
    histogram = figure_png(grade_histogram([float(v) for v in exponents if v is not None],
                                           expect, tolerance))
    write_atomic(folder / "exponents.png", histogram)
    strengths = None
    if strength is not None and strength_tolerance:
        values = [_number(row.get("strength_at_expected")) for row in rows]
        strengths = figure_png(grade_histogram(
            values, strength, strength * strength_tolerance,
            quantity=f"k at n = {expect:g} [{strength_unit}]",
            title="strengths of the class against the tolerance band"))
        write_atomic(folder / "strengths.png", strengths)
    runs = []
    for row in rows:
        exponent = _number(row.get("exponent"))
        error = _number(row.get("exponent_stderr"))
        k = _number(row.get("strength_at_expected"))
        k_error = _number(row.get("strength_at_expected_stderr"))
        runs.append({
            "name": row["run"], "report": row.get("report") or "",
            "grade": "meets the rule" if row["passed"] else "does not meet it",
            "symbol": CHECK_MARKS[bool(row["passed"])], "mark": "pass" if row["passed"] else "fail",
            "exponent": measurement(exponent, error) if math.isfinite(exponent) else "—",
            "strength": measurement(k, k_error, strength_unit) if math.isfinite(k) else "—",
            "reason": row.get("reason", ""), "advice": row.get("advice") or "",
            "student": row.get("student") or "",
        })
    html = _environment().get_template("class.html.j2").render(
        title=title, runs=runs, expect=f"{expect:g}", tolerance=f"{tolerance:g}",
        strength=f"{strength:.6g}" if strength is not None else None,
        strength_tolerance=f"{100 * strength_tolerance:g}%" if strength_tolerance else None,
        strength_unit=strength_unit, passed=sum(1 for row in rows if row["passed"]),
        failed=sum(1 for row in rows if not row["passed"]),
        histogram=base64.b64encode(histogram).decode("ascii"), histogram_file="exponents.png",
        strengths=None if strengths is None else base64.b64encode(strengths).decode("ascii"),
        csv=csv_name, skipped=list(skipped), summary=list(summary), version=__version__,
        written=_dt.datetime.now().strftime("%Y-%m-%d %H:%M"),
    )
    return write_atomic(folder / "index.html", html)


def _number(value: Any) -> float:
    """A table cell as a float; nan for an empty or non-numeric cell."""
    try:
        return float(value)
    except (TypeError, ValueError):
        return math.nan
