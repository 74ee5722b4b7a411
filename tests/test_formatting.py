"""Digits people read: values to the digits their errors support, intervals with distinct ends."""

import pytest

from forcefit.formatting import estimate, interval, matched, measurement, p_value, significance


def test_measurement_rounds_to_the_error():
    # Two significant digits of the error, the value to match (common practice; JCGM 100:2008,
    # Guide to the expression of uncertainty in measurement, 7.2.6).
    assert measurement(-2.000123, 0.00046, "") == "-2.00012 ± 0.00046"
    assert measurement(2.9591e-4, 1.2e-9, "au^3 d^-2") == "(2.959100 ± 0.000012)e-04 au^3 d^-2"
    assert measurement(4.28, 0.37, "s^-2") == "4.28 ± 0.37 s^-2"
    assert measurement(1234.5, 37.0) == "1234 ± 37"


def test_a_value_that_cannot_be_determined_shows_no_placeholder_unit():
    text = measurement(float("nan"), float("nan"), "s^-2")
    assert text == "not determined" and "nan" not in text


def test_matched_value_keeps_the_digits_of_its_error():
    assert matched(-2.000412, 0.000031) == "-2.000412"      # not "-2" as .4g gives
    assert matched(0.990481, 0.00016) == "0.99048"
    assert matched(2.95912e-4, 1.2e-9) == "2.959120e-04"


@pytest.mark.parametrize(("low", "high"), [(-2.0004003, -2.0003998), (0.999999999, 1.000000001),
                                           (2.959121e-4, 2.959122e-4), (1e6 - 0.01, 1e6 + 0.01)])
def test_interval_ends_are_always_distinct(low, high):
    text = interval(low, high)
    first, second = text.strip("[]").split(", ")
    assert first != second
    assert float(first) <= low + 0.6 * (high - low) and float(second) >= high - 0.6 * (high - low)


def test_estimate_shows_the_median_to_the_intervals_digits():
    median, bounds = estimate(-2.0004117, -2.0004431, -2.0003809)
    assert median == "-2.000412" and bounds == "[-2.000443, -2.000381]"


def test_p_values_are_never_printed_as_zero_or_one():
    assert p_value(0.0) == "< 1e-300" and p_value(1.0) == "> 0.99"
    assert p_value(2.3e-12) == "2.3e-12" and p_value(0.046) == "0.046" and p_value(0.31) == "0.31"


def test_significance_in_standard_errors():
    assert significance(-0.0095, 0.00016) == "59 standard errors"
    assert significance(0.02, 0.01) == "2.00 standard errors"
