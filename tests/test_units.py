import pytest

from forcefit.errors import InputError
from forcefit.units import (
    length_factor,
    parse_length_unit,
    parse_time_unit,
    strength_unit,
    time_factor,
    velocity_scale,
)


def test_astronomical_unit_in_metres():
    # Source: IAU 2012 Resolution B2: 1 au = 149 597 870 700 m exactly.
    assert length_factor("au", "m") == 149_597_870_700.0
    assert length_factor("AU", "km") == pytest.approx(149_597_870.7, rel=1e-15)


def test_inch_in_millimetres():
    # Source: 1959 international yard and pound agreement: 1 inch = 25.4 mm exactly.
    assert length_factor("inch", "mm") == pytest.approx(25.4, rel=1e-15)


def test_day_and_julian_year():
    # Source: IAU 1976 system: day = 86 400 s; Julian year = 365.25 d.
    assert time_factor("d", "s") == 86_400.0
    assert time_factor("yr", "d") == pytest.approx(365.25, rel=1e-15)


def test_times_beyond_the_common_symbols_convert_through_pint_both_ways():
    # A week is 7 days (common practice); the Julian year 365.25 d (IAU 1976), so 365.25/7 weeks.
    # The week is not among the common symbols, so each goes through the unit registry, the
    # year on one side and on the other.
    assert time_factor("week", "d") == pytest.approx(7.0, rel=1e-15)
    assert time_factor("yr", "week") == pytest.approx(365.25 / 7.0, rel=1e-15)
    assert time_factor("week", "yr") == pytest.approx(7.0 / 365.25, rel=1e-15)


def test_pixels_are_their_own_length():
    assert parse_length_unit("pixels") == "px"
    with pytest.raises(InputError, match="calibration"):
        length_factor("px", "mm")
    # a unit converts to itself, or to another name of itself, by 1 (definition; common practice)
    assert length_factor("px", "pixels") == 1.0 and length_factor("metre", "m") == 1.0
    assert time_factor("s", "second") == 1.0 and time_factor("yr", "yr") == 1.0


@pytest.mark.parametrize("name", ["parsec-ish", "kg", "s"])
def test_unknown_or_wrong_length_unit_names_the_fix(name):
    with pytest.raises(InputError, match="expected a length"):
        parse_length_unit(name)


def test_time_unit_aliases():
    assert [parse_time_unit(n) for n in ("seconds", "sec", "ms", "days", "min", "h", "year")] == [
        "s", "s", "ms", "d", "min", "h", "yr"]
    with pytest.raises(InputError, match="expected a time"):
        parse_time_unit("m")


@pytest.mark.parametrize(
    ("exponent", "expected"),
    [(1.0, "s^-2"), (-2.0, "m^3 s^-2"), (0.0, "m s^-2"), (2.0, "m^-1 s^-2"), (-1.5, "m^2.5 s^-2")],
)
def test_strength_unit_is_length_to_one_minus_n_over_time_squared(exponent, expected):
    # Dimensional analysis of F = k r^n (common practice).
    assert strength_unit("m", "s", exponent) == expected


def test_the_common_symbols_taken_without_pint_are_pints_own():
    # The shortcut for common symbols must answer as the registry lookup does.
    from forcefit.units import COMMON_LENGTHS, COMMON_TIMES, _lookup

    for symbol in COMMON_LENGTHS:
        assert parse_length_unit(symbol) == symbol == f"{_lookup(symbol, '[length]'):~}".replace(" ", "")
    for symbol in COMMON_TIMES:
        pint_symbol = f"{_lookup(symbol, '[time]'):~}".replace(" ", "")
        assert parse_time_unit(symbol) == symbol == ("yr" if pint_symbol == "a" else pint_symbol)


def test_the_common_units_convert_as_pints_registry_does_without_loading_it():
    # pint's registry (its unit definitions) is the reference; the exact numbers may differ from
    # pint's chained products in the last bit (au to km: 149597870.7 here, ...70000002 there).
    import subprocess
    import sys

    from forcefit.units import COMMON_LENGTHS, COMMON_TIMES, registry

    ureg = registry()
    for symbols, convert in ((COMMON_LENGTHS, length_factor), (COMMON_TIMES, time_factor)):
        for source in symbols:
            for target in symbols:
                names = ["year" if unit == "yr" else unit for unit in (source, target)]
                expected = ureg.Quantity(1.0, names[0]).to(names[1]).magnitude
                assert convert(source, target) == pytest.approx(expected, rel=3e-16, abs=0.0)
    code = ("import sys\nfrom forcefit.units import length_factor, time_factor\n"
            "print(length_factor('au', 'km'), time_factor('s', 'yr'), 'pint' in sys.modules)")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert done.stdout.split() == ["149597870.7", repr(1 / 31557600.0), "False"]


@pytest.mark.parametrize("power, expected", [
    (1e-9, "m^0.000000001"), (-1e-9, "m^-0.000000001"), (1.5e-9, "m^0.0000000015"),
    (2.0 + 5e-10, "m^2"), (-3.0 - 5e-10, "m^-3"), (2.5, "m^2.5"), (5e-10, ""), (-5e-10, "")])
def test_a_power_is_printed_whole_only_within_rounding_of_a_whole_number(power, expected):
    # A power within 1e-9 of a whole number is that number (the rounding of 1 - n and the like);
    # from 1e-9 on it is printed as it is, to 3 significant digits and never in e-notation.
    from forcefit.units import _power

    assert _power("m", power) == expected


@pytest.mark.parametrize(("length", "time", "velocity", "expected"), [
    ("m", "s", "km/s", 1e-3),
    ("km", "s", "m/s", 1e3),
    ("mm", "ms", "m/s", 1.0),
    ("au", "d", "km/s", 149_597_870.7 / 86_400),            # IAU 2012 B2 au; 1 d = 86 400 s (SI)
    ("au", "yr", "km/s", 149_597_870.7 / (365.25 * 86_400)),  # Julian year (IAU 1976, from memory)
    ("mas", "yr", "km/s", 149_597_870.7 / (365.25 * 86_400)),  # an angle on the sky: 1 au per unit
])
def test_one_length_per_time_in_a_velocity_unit(length, time, velocity, expected):
    assert velocity_scale(length, time, velocity) == pytest.approx(expected, rel=1e-12)
