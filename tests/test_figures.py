"""Figures draw what the results hold, and importing them leaves matplotlib's backend alone."""

import subprocess
import sys

import numpy as np
import pytest
from matplotlib.figure import Figure

from forcefit.analysis.apsides import measure_apsides
from forcefit.dynamics.simulate import simulate_orbit
from forcefit.estimators import fit_curvature, fit_orbit
from forcefit.formatting import estimate, measurement
from forcefit.outputs.figures import (
    apsides_figure,
    corner_figure,
    figure_png,
    grade_histogram,
    path_figure,
    relation_figure,
    residual_figure,
    trace_figure,
)
from forcefit.track import Track


@pytest.fixture(scope="module")
def track():
    return simulate_orbit(exponent=-1.5, noise=2e-3, rng=4, name="rosette")


@pytest.fixture(scope="module")
def orbit(track):
    return fit_orbit(track)


def test_importing_the_outputs_leaves_the_backend_alone():
    code = ("import sys, matplotlib; before = matplotlib.rcParams._get_backend_or_none(); "
            "import forcefit.outputs; "
            "print('matplotlib.pyplot' in sys.modules, matplotlib.rcParams._get_backend_or_none() == before)")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert result.stdout.split() == ["False", "True"]


def test_path_figure_draws_the_samples_and_the_fitted_orbit(track, orbit):
    figure = path_figure(track, orbit)
    assert isinstance(figure, Figure)
    samples, fitted = figure.axes[0].lines[:2]
    np.testing.assert_array_equal(samples.get_xdata(), track.x)
    np.testing.assert_array_equal(fitted.get_ydata(), orbit.fitted_positions[:, 1])
    assert "n = " in fitted.get_label()


def test_relation_figure_draws_the_results_points(track):
    for fit in (fit_curvature(track),):
        figure = relation_figure(fit)
        points = figure.axes[0].lines[0]
        np.testing.assert_array_equal(points.get_xdata(), fit.relation.log_radius)
        np.testing.assert_array_equal(points.get_ydata(), fit.relation.log_force)
        line = figure.axes[0].lines[1]
        slope = np.polyfit(line.get_xdata(), line.get_ydata(), 1)[0]
        assert slope == pytest.approx(fit.exponent, rel=1e-9)        # the fitted law's line


def test_an_orbit_fit_has_no_relation_to_draw(orbit):
    assert orbit.relation.log_radius.size == 0
    with pytest.raises(ValueError, match="no force-curvature points"):
        relation_figure(orbit)


def test_residual_figure_plots_each_coordinate_against_time(track, orbit):
    figure = residual_figure(track, orbit)
    x, y = figure.axes[0].lines[:2]
    np.testing.assert_array_equal(x.get_xdata(), track.t)
    np.testing.assert_array_equal(y.get_ydata(), orbit.residuals.reshape(-1, 2)[:, 1])


def test_apsides_figure_shows_every_apse():
    apsides = measure_apsides(simulate_orbit(exponent=-1.5, duration=40.0, rate=50.0))
    figure = apsides_figure(apsides)
    drawn = sum(len(container.lines[0].get_xdata()) for container in figure.axes[0].containers)
    assert drawn == len(apsides.apses)


def test_histogram_counts_every_finite_exponent_and_png_bytes():
    figure = grade_histogram([1.01, 0.99, 1.2, float("nan")], 1.0, 0.05)
    bars = figure.axes[0].containers[0]
    assert sum(bar.get_height() for bar in bars) == 3
    # A PNG file starts with its eight-byte signature (W3C 2003, PNG specification, §5.2).
    assert figure_png(figure).startswith(b"\x89PNG\r\n\x1a\n")


def _texts(figure):
    legends = [axis.get_legend() for axis in figure.axes if axis.get_legend() is not None]
    return [axis.get_title(loc="left") for axis in figure.axes] + [
        text.get_text() for legend in legends for text in legend.get_texts()]


def test_corner_and_trace_titles_show_the_median_and_interval_to_their_digits(sharp_posterior):
    # issue 15: corner titles printed n = -2 and kept the plotting library's default look
    median, bounds = estimate(float(np.median(sharp_posterior.samples["exponent"])),
                              *sharp_posterior.interval("exponent", 0.68))
    for figure in (corner_figure(sharp_posterior), trace_figure(sharp_posterior)):
        titles = [title for title in _texts(figure) if title.startswith("n = ")]
        assert titles and median in titles[0] and bounds in titles[0]
        assert not any("^{+" in title for title in _texts(figure))     # no default title markup


def test_legends_show_the_exponent_to_its_error(track, orbit):
    # issue 15: figure legends printed n = -2 for n = -2.0004 (four significant digits)
    label = path_figure(track, orbit).axes[0].lines[1].get_label()
    assert measurement(orbit.exponent, orbit.exponent_stderr) in label


def test_the_fitted_path_is_broken_at_a_gap_and_julian_times_start_from_the_first(orbit):
    keep = np.r_[0:300, 400:orbit.n_points]
    track = simulate_orbit(exponent=-1.5, noise=2e-3, rng=4).select(keep)
    gapped = Track(t=track.t + 2460000.5, x=track.x, y=track.y, sigma=track.sigma, time_unit="d")
    fit = fit_orbit(gapped)
    line = path_figure(gapped, fit).axes[0].lines[1]
    assert np.isnan(line.get_xdata()[300]) and np.isfinite(line.get_xdata()).sum() == gapped.n_points
    axis = residual_figure(gapped, fit).axes[0]
    assert axis.get_xlabel() == "t - t0 [d], t0 = 2460000.5 d (the first sample)"
    assert axis.lines[0].get_xdata()[0] == 0.0


def test_the_class_histogram_counts_whole_runs():
    # issue 15: the class histogram's axis showed fractions of runs
    figure = grade_histogram([1.01, 0.99, 1.2], 1.0, 0.05)
    axis = figure.axes[0]
    figure_png(figure)                                             # lay the ticks out
    ticks = [tick for tick in axis.get_yticks() if axis.get_ylim()[0] <= tick <= axis.get_ylim()[1]]
    assert ticks and all(float(tick).is_integer() for tick in ticks)
