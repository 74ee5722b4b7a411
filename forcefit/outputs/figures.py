"""Figures people would rather look at than read: path and orbit, residuals, the
force-curvature relation, apsides, the posterior's corner and trace plots, a class histogram.

Pure plotting: each function draws what a result holds (it computes nothing of its own) and
returns a matplotlib `Figure`, made directly rather than through pyplot, so that importing
forcefit never chooses or changes anyone's matplotlib backend; `save_figure` writes one whole
or not at all. The palette is colour-blind safe (Okabe & Ito 2008, "Color universal design").
"""

from __future__ import annotations

import io
import os
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.patches import Ellipse
from matplotlib.ticker import MaxNLocator

from .._atomic import write_atomic
from .._types import FloatArray
from ..analysis.apsides import Apsides
from ..estimators.result import LawFit, OrbitFit
from ..formatting import estimate, measurement
from ..reading.inspection import GAP_FACTOR
from ..track import Track

if TYPE_CHECKING:                      # the posterior's module loads emcee and scipy.stats
    from ..inference.posterior import Posterior

PALETTE = {"ink": "#1b2631", "data": "#0072B2", "model": "#D55E00", "accent": "#009E73",
           "muted": "#999999", "band": "#E69F00"}
"""forcefit's colours: Okabe-Ito hues, dark ink for text."""

LABELS = {"exponent": "n", "strength": "k", "log_force": "ln F(r_ref)", "centre_x": "centre x",
          "centre_y": "centre y", "noise_scale": "noise scale", "drag": "drag",
          "rotation_rate": "rotation rate"}


def _label(posterior: Posterior, name: str) -> str:
    unit = posterior.units.get(name, "")
    text = LABELS.get(name, name)
    return f"{text} [{unit}]" if unit else text


def _summary(posterior: Posterior, name: str) -> str:
    """A parameter's name, median and 68% interval with its unit, to the digits the interval needs."""
    median, bounds = estimate(float(np.median(posterior.samples[name])), *posterior.interval(name, 0.68),
                              posterior.units.get(name, ""))
    return f"{LABELS.get(name, name)} = {median}\n68%: {bounds}"


def corner_figure(posterior: Posterior, names: list[str] | None = None) -> Figure:
    """Pairwise marginals of the posterior (``corner`` package), law parameters first.

    Each diagonal panel is titled with the parameter, its median and its 68% interval (with
    units, to the digits the interval needs) and shades that interval.

    Parameters
    ----------
    posterior : Posterior
    names : list of str, optional
        Columns to show; default the exponent, the strength and the centre.
    """
    import corner

    names = names or [name for name in ("exponent", "strength", "centre_x", "centre_y", "drag",
                                        "rotation_rate", "noise_scale") if name in posterior.samples]
    values = posterior.samples[names].to_numpy()
    side = 1.0 + 2.2 * len(names) + 0.1 * (len(names) - 1) + 0.4      # corner's own panel layout
    figure = corner.corner(values, fig=Figure(figsize=(side, side)),
                           labels=[_label(posterior, n) for n in names], show_titles=False,
                           color=PALETTE["data"],
                           hist_kwargs={"color": PALETTE["data"], "histtype": "stepfilled", "alpha": 0.35},
                           label_kwargs={"fontsize": 9, "color": PALETTE["ink"]}, plot_datapoints=False,
                           fill_contours=True, levels=(0.393, 0.865),
                           contour_kwargs={"colors": PALETTE["ink"], "linewidths": 0.6})
    diagonal = [figure.axes[i * (len(names) + 1)] for i in range(len(names))]
    for axis, name in zip(diagonal, names):
        low, high = posterior.interval(name, 0.68)
        axis.axvspan(low, high, color=PALETTE["band"], alpha=0.3, linewidth=0)
        axis.axvline(float(np.median(posterior.samples[name])), color=PALETTE["model"], linewidth=1.2)
        axis.set_title(_summary(posterior, name), fontsize=8, loc="left", color=PALETTE["ink"])
    figure.suptitle("posterior: median (line) and 68% interval (band) of each parameter; "
                    "contours hold 39% and 86%", color=PALETTE["ink"], fontsize=10, y=1.04)
    return figure


def trace_figure(posterior: Posterior, names: list[str] | None = None, walkers: int = 12) -> Figure:
    """The chains of a few walkers against step number, burn-in shaded; each panel titled with
    the parameter's median and 68% interval."""
    names = names or [name for name in ("exponent", "log_force", "centre_x", "centre_y")
                      if name in posterior.autocorr_time]
    chain = posterior.sampler.get_chain()
    columns = list(posterior.autocorr_time)
    figure = Figure(figsize=(7.5, 2.0 * len(names) + 0.6))
    axes = figure.subplots(len(names), 1, sharex=True, squeeze=False)
    steps = np.arange(chain.shape[0])
    for axis, name in zip(axes[:, 0], names):
        index = columns.index(name)
        axis.plot(steps, chain[:, :walkers, index], color=PALETTE["data"], alpha=0.35, linewidth=0.6)
        axis.axvspan(0, posterior.burn_in, color=PALETTE["muted"], alpha=0.2, linewidth=0)
        axis.set_ylabel(_label(posterior, name), fontsize=8)
        axis.set_title(_summary(posterior, name).replace("\n", "   "), fontsize=8, loc="left",
                       color=PALETTE["ink"])
        axis.tick_params(labelsize=7)
    axes[-1, 0].set_xlabel("step (grey: burn-in, discarded)")
    verdict = "converged" if posterior.converged else "not converged"
    figure.suptitle(f"chains of {min(walkers, chain.shape[1])} walkers: {verdict}", fontsize=10)
    figure.tight_layout()
    return figure


def save_figure(figure: Figure, path: str | os.PathLike[str], *, dpi: int = 120) -> Path:
    """Write a figure as PNG, whole or not at all."""
    return write_atomic(Path(path), figure_png(figure, dpi=dpi))


def _style(axis: Axes) -> None:
    axis.tick_params(labelsize=8, colors=PALETTE["ink"])
    for side in ("top", "right"):
        axis.spines[side].set_visible(False)
    axis.grid(True, color="#e5e8e8", linewidth=0.6)
    axis.set_axisbelow(True)


def path_figure(track: Track, fit: LawFit) -> Figure:
    """The measured path, the fitted orbit over it (orbit fits) and the centre with its error."""
    figure = Figure(figsize=(6.0, 5.2))
    axis = figure.subplots()
    axis.plot(track.x, track.y, ".", color=PALETTE["data"], markersize=2.5, alpha=0.6,
              label="measured")
    if isinstance(fit, OrbitFit) and np.all(np.isfinite(fit.fitted_positions)):
        predicted = _broken_at_gaps(fit.fitted_positions, track)
        axis.plot(predicted[:, 0], predicted[:, 1], "-", color=PALETTE["model"], linewidth=1.0,
                  label=f"fitted orbit, n = {measurement(fit.exponent, fit.exponent_stderr)}")
    cx, cy = fit.centre
    axis.plot([cx], [cy], "+", color=PALETTE["ink"], markersize=12, markeredgewidth=2, label="centre")
    sx, sy = fit.centre_stderr
    if np.isfinite(sx) and np.isfinite(sy) and sx > 0:
        axis.add_patch(Ellipse((cx, cy), 6 * sx, 6 * sy, fill=False, color=PALETTE["ink"], linestyle=":",
                               label="centre ± 3 sd"))
    axis.set_aspect("equal", adjustable="datalim")
    axis.set_xlabel(f"x [{track.length_unit}]", fontsize=9)
    axis.set_ylabel(f"y [{track.length_unit}]", fontsize=9)
    axis.legend(fontsize=8, loc="upper center", bbox_to_anchor=(0.5, -0.12), ncol=4, frameon=False)
    _style(axis)
    axis.set_title(f"{track.name}: path and fitted orbit", fontsize=10, color=PALETTE["ink"])
    return figure


def residual_figure(track: Track, fit: LawFit) -> Figure:
    """Normalised residuals against time (or sample number), with the ±3 band."""
    residuals = np.asarray(fit.residuals)
    figure = Figure(figsize=(7.0, 2.8))
    axis = figure.subplots()
    if fit.method == "orbit" and residuals.size == 2 * track.n_points and track.t is not None:
        pairs = residuals.reshape(-1, 2)
        times, label = time_axis(track.t, track.time_unit, track.metadata.get("time_origin"))
        axis.plot(times, pairs[:, 0], ".", markersize=2, color=PALETTE["data"], label="x")
        axis.plot(times, pairs[:, 1], ".", markersize=2, color=PALETTE["band"], label="y")
        axis.set_xlabel(label, fontsize=9)
        axis.legend(fontsize=8, frameon=False, markerscale=4)
    else:
        axis.plot(np.arange(residuals.size), residuals, ".", markersize=2, color=PALETTE["data"])
        axis.set_xlabel("point", fontsize=9)
    for level in (-3, 3):
        axis.axhline(level, color=PALETTE["muted"], linestyle="--", linewidth=0.8)
    axis.axhline(0, color=PALETTE["ink"], linewidth=0.6)
    axis.set_ylabel("residual / sigma", fontsize=9)
    _style(axis)
    axis.set_title("residuals (a power law that fits leaves noise without pattern)", fontsize=10)
    return figure


def relation_figure(fit: LawFit) -> Figure:
    """The force-curvature relation about the fitted centre in log-log, with the fitted law's line."""
    points = fit.relation
    if points.log_radius.size == 0:
        raise ValueError(f"the {fit.method} fit has no force-curvature points to draw")
    length = fit.length_unit
    label = "ln(F / h^2)" if points.per_h2 else f"ln F [F in {length} {fit.time_unit}^-2]"
    figure = Figure(figsize=(6.0, 4.0))
    axis = figure.subplots()
    axis.plot(points.log_radius, points.log_force, ".", markersize=2.5, color=PALETTE["data"], alpha=0.6,
              label="from the curvature of the path")
    x = np.linspace(points.log_radius.min(), points.log_radius.max(), 50)
    if not points.per_h2 and np.isfinite(fit.force_at_reference):
        line = np.log(fit.force_at_reference) + fit.exponent * (x - np.log(fit.reference_radius))
    else:
        line = np.log(fit.strength_per_h2) + fit.exponent * x
    axis.plot(x, line, "-", color=PALETTE["model"],
              label=f"{fit.method} fit: slope n = {measurement(fit.exponent, fit.exponent_stderr)}")
    axis.set_xlabel(f"ln r [r in {length}]", fontsize=9)
    axis.set_ylabel(label, fontsize=9)
    axis.legend(fontsize=8, frameon=False)
    _style(axis)
    axis.set_title("force-curvature relation F = h^2 kappa / (r^2 cos^3 gamma)", fontsize=10)
    return figure


def apsides_figure(apsides: Apsides) -> Figure:
    """How far each apse has turned from a closed orbit's position, against time."""
    count, turn = apsides.apse_turns()
    drift = np.degrees(turn)
    errors = np.degrees([apse.angle_stderr for apse in apsides.apses])
    where = np.array([apse.time for apse in apsides.apses])
    use_time = bool(np.all(np.isfinite(where))) and apsides.time_unit is not None
    x, time_label = time_axis(where, apsides.time_unit or "") if use_time else (count, "apse number")
    figure = Figure(figsize=(6.5, 3.0))
    axis = figure.subplots()
    for kind, colour in (("pericentre", PALETTE["data"]), ("apocentre", PALETTE["band"])):
        chosen = np.array([apse.kind == kind for apse in apsides.apses])
        axis.errorbar(x[chosen], drift[chosen], yerr=errors[chosen], fmt="o", markersize=3,
                      color=colour, label=kind)
    axis.set_xlabel(time_label, fontsize=9)
    axis.set_ylabel("turn of the apse [deg]", fontsize=9)
    axis.legend(fontsize=8, frameon=False)
    _style(axis)
    precession = measurement(float(np.degrees(apsides.precession_per_revolution)),
                             float(np.degrees(apsides.precession_per_revolution_stderr)))
    axis.set_title(f"precession {precession} deg per revolution", fontsize=10)
    return figure


def grade_histogram(exponents: Sequence[float], expected: float, tolerance: float, *,
                    quantity: str = "fitted exponent n",
                    title: str = "exponents of the class against the tolerance band") -> Figure:
    """The class's fitted exponents (or another quantity, named by ``quantity``) against the
    tolerance band around the expected value."""
    figure = Figure(figsize=(6.5, 3.0))
    axis = figure.subplots()
    values = np.asarray([v for v in exponents if np.isfinite(v)])
    axis.axvspan(expected - tolerance, expected + tolerance, color=PALETTE["accent"], alpha=0.18,
                 label=f"pass: {expected:.6g} ± {tolerance:.2g}")
    if values.size:
        span = max(np.ptp(values), 4 * tolerance)
        bins = np.linspace(min(values.min(), expected - 2 * tolerance) - 0.05 * span,
                           max(values.max(), expected + 2 * tolerance) + 0.05 * span, 30)
        axis.hist(values, bins=bins.tolist(), color=PALETTE["data"], edgecolor="white", label="runs")
    axis.axvline(expected, color=PALETTE["ink"], linewidth=1.0)
    axis.set_xlabel(quantity, fontsize=9)
    axis.set_ylabel("runs", fontsize=9)
    axis.yaxis.set_major_locator(MaxNLocator(integer=True))
    axis.legend(fontsize=8, frameon=False)
    _style(axis)
    axis.set_title(title, fontsize=10)
    return figure


def time_axis(times: FloatArray, unit: str, origin: str | None = None) -> tuple[FloatArray, str]:
    """Times to plot and the axis label: counted from the first sample, whose time is stated,
    when the times start far from zero (a Julian date, a clock), else as they are.

    Examples
    --------
    >>> values, label = time_axis(np.array([2460000.5, 2460004.5]), "d")
    >>> values.tolist(), label
    ([0.0, 4.0], 't - t0 [d], t0 = 2460000.5 d (the first sample)')
    """
    times = np.asarray(times, dtype=float)
    first = float(times[0]) if times.size else 0.0
    if origin:
        return times, f"t [{unit}] from {origin}"
    span = float(np.ptp(times)) if times.size else 0.0
    if first == 0.0 or abs(first) < 10.0 * span:
        return times, f"t [{unit}]"
    return times - first, f"t - t0 [{unit}], t0 = {first:.12g} {unit} (the first sample)"


def _broken_at_gaps(points: FloatArray, track: Track) -> FloatArray:
    """Points of a curve along the samples with a nan row at each gap in the times (dropped frames,
    a season without observations), so that a line is broken there instead of drawn as a chord."""
    if track.t is None or track.n_points < 3 or points.shape[0] != track.n_points:
        return points
    steps = np.diff(track.t)
    gaps = np.flatnonzero(steps > GAP_FACTOR * np.median(steps)) + 1
    return np.insert(np.asarray(points, dtype=float), gaps, np.nan, axis=0)


def figure_png(figure: Figure, *, dpi: int = 110) -> bytes:
    """A figure as PNG bytes."""
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=dpi, bbox_inches="tight")
    return buffer.getvalue()
