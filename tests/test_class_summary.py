"""The class as one measurement: mean, spread and standard error of the passing runs."""

import math
import statistics

import pytest

from forcefit.apps.class_summary import summarise_class


def test_the_class_mean_of_passing_runs_and_its_standard_error():
    # issue 16: a class measurement of g/L. Reference: Python's statistics module (sample standard
    # deviation, n - 1); the standard error of a mean is s / sqrt(N) (common practice).
    strengths = [4.871, 4.902, 4.938, 4.899, 4.915]
    rows = [{"passed": True, "exponent": 1.0 + 0.002 * i, "strength_at_expected": k}
            for i, k in enumerate(strengths)]
    rows += [{"passed": False, "exponent": 0.8, "strength_at_expected": 7.06},           # failed
             {"passed": True, "exponent": float("nan"), "strength_at_expected": float("nan")}]
    summary = summarise_class(rows, "s^-2")
    assert summary.n_passing == 5
    assert summary.strength_mean == pytest.approx(statistics.mean(strengths), rel=1e-12)
    assert summary.strength_spread == pytest.approx(statistics.stdev(strengths), rel=1e-12)
    assert summary.strength_stderr == pytest.approx(statistics.stdev(strengths) / math.sqrt(5), rel=1e-12)
    labels = [row.label for row in summary.rows()]
    assert labels == ["exponent n, class mean", "k, class mean"]
    assert summary.rows()[1].text.endswith("s^-2 (spread 0.024 s^-2)")


def test_one_passing_run_is_no_class_mean():
    summary = summarise_class([{"passed": True, "exponent": 1.0, "strength_at_expected": 4.9}], "s^-2")
    assert math.isnan(summary.strength_mean) and "needs two passing runs" in summary.rows()[0].text
