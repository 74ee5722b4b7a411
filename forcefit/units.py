"""Length and time units: parsing, conversion factors and the unit of the strength k.

Units come from pint's registry, with one exception: image pixels (``px``) are a
length of their own that converts to nothing until a calibration gives the scale.
(pint's own ``px`` is the CSS pixel, 1/96 inch, which is never what a camera means.)
"""

from __future__ import annotations

import math
import re
from functools import lru_cache
from typing import TYPE_CHECKING

from .errors import InputError

if TYPE_CHECKING:  # pint loads on the first unit it must look up (building its registry takes a while)
    import pint

PIXEL = "px"
_PIXEL_NAMES = frozenset({"px", "pixel", "pixels", "pix", "pxl"})

SKY_ANGLES: dict[str, str] = {
    "rad": "radian", "deg": "degree", "arcmin": "arcminute", "arcsec": "arcsecond",
    "mas": "milliarcsecond", "uas": "microarcsecond",
}
"""Angles on the sky that serve as the length unit of projected positions (offsets from a
reference star): symbol and pint's name. They convert among themselves; to a length only
through a distance (the parallax)."""
_SKY_NAMES = {**{name: symbol for symbol, name in SKY_ANGLES.items()}, **{s: s for s in SKY_ANGLES},
              "arcseconds": "arcsec", "as": "arcsec", "\"": "arcsec", "″": "arcsec", "milliarcseconds": "mas",
              "µas": "uas", "μas": "uas", "degrees": "deg", "arcminutes": "arcmin"}


METRES_IN: dict[str, float] = {"m": 1.0, "mm": 1e-3, "cm": 1e-2, "km": 1e3, "au": 149597870700.0}
"""Each common length symbol in metres, exactly (the au by IAU 2012 Resolution B2)."""
SECONDS_IN: dict[str, float] = {"s": 1.0, "ms": 1e-3, "min": 60.0, "h": 3600.0, "d": 86400.0,
                                "yr": 31557600.0}
"""Each common time symbol in seconds, exactly (``yr`` is the Julian year of 365.25 d, as in pint)."""
COMMON_LENGTHS = frozenset(METRES_IN)
COMMON_TIMES = frozenset(SECONDS_IN)
"""Symbols that are already canonical: taken as they are, and converted among themselves by the
exact numbers above, without building pint's registry (tests/test_units.py checks both against
pint)."""


@lru_cache(maxsize=1)
def registry() -> pint.UnitRegistry:
    """The shared pint registry forcefit uses for every unit."""
    import pint

    return pint.UnitRegistry()


def _lookup(name: str, dimension: str) -> pint.Unit | None:
    """Return the pint unit named ``name`` if it has ``dimension``, else None."""
    ureg = registry()
    for candidate in (name, name.lower()):
        try:
            unit = ureg.Unit(candidate)
        except Exception:  # pint raises many types (even AssertionError, TokenError) on odd text
            continue
        if unit.dimensionality == ureg.get_dimensionality(dimension):
            return unit
    return None


def parse_length_unit(name: str) -> str:
    """Canonical symbol of a length unit, or raise `InputError` naming the fix.

    Parameters
    ----------
    name : str
        A unit as written by a user or in a column header: ``"m"``, ``"mm"``,
        ``"metres"``, ``"AU"``, ``"px"``, ``"pixels"``, ``"inch"``.

    Returns
    -------
    str
        The short symbol forcefit uses (``"m"``, ``"mm"``, ``"au"``, ``"px"``, ...).

    Examples
    --------
    >>> parse_length_unit("Pixels"), parse_length_unit("AU"), parse_length_unit("millimetre")
    ('px', 'au', 'mm')
    """
    if not isinstance(name, str):
        raise InputError(f"length unit {name!r} must be text such as m, mm, au or px.")
    text = name.strip()
    if text.lower() in _PIXEL_NAMES:
        return PIXEL
    if text in COMMON_LENGTHS:
        return text
    if text in _SKY_NAMES or text.lower() in _SKY_NAMES:
        return _SKY_NAMES.get(text, _SKY_NAMES.get(text.lower(), text))
    unit = _lookup(text, "[length]")
    if unit is None:
        raise InputError(
            f'unknown length unit "{name}": expected a length such as m, mm, cm, km, au, '
            "inch or px. Write the unit by its usual symbol."
        )
    return f"{unit:~}".replace(" ", "")


def parse_time_unit(name: str) -> str:
    """Canonical symbol of a time unit, or raise `InputError` naming the fix.

    Examples
    --------
    >>> parse_time_unit("seconds"), parse_time_unit("ms"), parse_time_unit("days")
    ('s', 'ms', 'd')
    """
    if not isinstance(name, str):
        raise InputError(f"time unit {name!r} must be text such as s, ms or d.")
    text = name.strip()
    if text in COMMON_TIMES:
        return text
    unit = _lookup(text, "[time]")
    if unit is None:
        raise InputError(
            f'unknown time unit "{name}": expected a time such as s, ms, min, h, d or yr. '
            "Write the unit by its usual symbol."
        )
    symbol = f"{unit:~}".replace(" ", "")
    return "yr" if symbol == "a" else symbol


def length_factor(from_unit: str, to_unit: str) -> float:
    """Multiply a length in ``from_unit`` by this to express it in ``to_unit``.

    Pixels convert only to pixels; anything else needs a calibration.

    Examples
    --------
    >>> length_factor("au", "m")   # IAU 2012 Resolution B2
    149597870700.0
    """
    source, target = parse_length_unit(from_unit), parse_length_unit(to_unit)
    if source == target:
        return 1.0
    if source in METRES_IN and target in METRES_IN:
        return METRES_IN[source] / METRES_IN[target]
    if PIXEL in (source, target):
        raise InputError(
            f"cannot convert {source} to {target}: pixels need a calibration "
            "(a scale in length per pixel, or two marks a known distance apart)."
        )
    ureg = registry()
    if is_sky_angle(source) or is_sky_angle(target):
        if not (is_sky_angle(source) and is_sky_angle(target)):
            raise InputError(f"cannot convert {source} to {target}: an angle on the sky becomes a "
                             "length only through the distance (give radial velocities to fit it).")
        source, target = SKY_ANGLES[source], SKY_ANGLES[target]
    return float(ureg.Quantity(1.0, source).to(target).magnitude)


def is_sky_angle(unit: str) -> bool:
    """Whether a (parsed) length unit is an angle on the sky (`SKY_ANGLES`).

    Examples
    --------
    >>> is_sky_angle(parse_length_unit("milliarcsecond")), is_sky_angle("au")
    (True, False)
    """
    return unit in SKY_ANGLES


def velocity_scale(length_unit: str, time_unit: str, velocity_unit: str) -> float:
    """A velocity of one length unit per time unit, in ``velocity_unit``; for an angle on the sky
    the length is one au (the parallax, in that angle, then divides).

    Examples
    --------
    >>> round(velocity_scale("mas", "yr", "km/s"), 6)   # 1 au per Julian year
    4.74047
    """
    time = "year" if parse_time_unit(time_unit) == "yr" else parse_time_unit(time_unit)
    length = "au" if is_sky_angle(length_unit) else parse_length_unit(length_unit)
    if length == PIXEL:
        raise InputError("velocities need positions in a length or an angle on the sky, not pixels.")
    try:
        return float(registry().Quantity(1.0, f"{length} / {time}").to(velocity_unit).magnitude)
    except Exception:  # pint raises several kinds for a unit that is no velocity
        raise InputError(f'"{velocity_unit}" is not a velocity unit (expected e.g. km/s or m/s).') from None


def time_factor(from_unit: str, to_unit: str) -> float:
    """Multiply a time in ``from_unit`` by this to express it in ``to_unit``.

    Examples
    --------
    >>> time_factor("d", "s")
    86400.0
    """
    source, target = parse_time_unit(from_unit), parse_time_unit(to_unit)
    if source == target:
        return 1.0
    if source in SECONDS_IN and target in SECONDS_IN:
        return SECONDS_IN[source] / SECONDS_IN[target]
    ureg = registry()
    source, target = ("year" if u == "yr" else u for u in (source, target))
    return float(ureg.Quantity(1.0, source).to(target).magnitude)


def _power(symbol: str, exponent: float) -> str:
    """``symbol`` raised to ``exponent`` as text, or "" for a zero power."""
    if abs(exponent) < 1e-9:      # as close to zero as a whole power must be to print as one
        return ""
    if abs(exponent - 1.0) < 1e-12:
        return symbol
    rounded = round(exponent)
    if abs(exponent - rounded) < 1e-9:
        return f"{symbol}^{rounded}"
    # three significant digits, never in e-notation (m^-0.0000256, not m^-2.56e-05)
    decimals = max(0, 2 - math.floor(math.log10(abs(exponent))))
    text = f"{exponent:.{decimals}f}".rstrip("0").rstrip(".")
    return f"{symbol}^{text}"


def strength_unit(length_unit: str, time_unit: str, exponent: float) -> str:
    """Unit of the strength k in F = -k r**n, namely length**(1 - n) time**-2.

    Parameters
    ----------
    length_unit, time_unit : str
        The track's units.
    exponent : float
        The force exponent n (dimensionless).

    Examples
    --------
    >>> strength_unit("m", "s", 1.0), strength_unit("au", "d", -2.0)
    ('s^-2', 'au^3 d^-2')
    >>> strength_unit("m", "s", 1.0000256), strength_unit("px", "s", -1.2345)
    ('m^-0.0000256 s^-2', 'px^2.23 s^-2')
    """
    if not math.isfinite(exponent):
        return f"{length_unit}^(1-n) {time_unit}^-2"
    parts = [_power(length_unit, 1.0 - exponent), _power(time_unit, -2.0)]
    return " ".join(part for part in parts if part)


def strength_per_h2_unit(length_unit: str, exponent: float) -> str:
    """Unit of k / h**2, the part of the law the path's shape fixes: length**(-3 - n).

    Examples
    --------
    >>> strength_per_h2_unit("m", 1.0), strength_per_h2_unit("au", -2.0)
    ('m^-4', 'au^-1')
    """
    if not math.isfinite(exponent):
        return f"{length_unit}^(-3-n)"
    return _power(length_unit, -3.0 - exponent) or "1"


_POWER = re.compile(r"^(?P<name>[A-Za-z_µμ]+)(?:(?:\^|\*\*)(?P<power>[-+]?\d+(?:\.\d+)?))?$")


def _unit_powers(text: str) -> list[tuple[str, float]]:
    """``"m^3 s^-2"``, ``"m**3/s**2"``, ``"1/s^2"`` as (symbol, power) pairs."""
    powers: list[tuple[str, float]] = []
    cleaned = re.sub(r"\s*\^\s*", "^", text.replace("·", " ").replace("**", "^"))
    cleaned = re.sub(r"\s*\*\s*", " ", cleaned)
    numerator, *denominators = cleaned.split("/")
    for sign, part in [(1.0, numerator)] + [(-1.0, d) for d in denominators]:
        for token in part.split():
            if token == "1":
                continue
            match = _POWER.match(token)
            if match is None:
                raise InputError(f'"{token}" in the unit "{text}" is not a unit with a power such as m^3 or '
                                 "s^-2.")
            powers.append((match["name"], sign * float(match["power"] or 1.0)))
    return powers


def parse_strength_unit(text: str, exponent: float) -> tuple[str | None, str]:
    """The length and time units of a strength unit written for the exponent n.

    Parameters
    ----------
    text : str
        A unit of k, length**(1 - n) time**-2: ``"s^-2"`` (n = 1), ``"m^3 s^-2"`` or
        ``"au^3/d^2"`` (n = -2), ``"1/s^2"``.
    exponent : float
        The exponent n the strength belongs to.

    Returns
    -------
    (str or None, str)
        The length unit (None when n = 1, where k has none) and the time unit.

    Examples
    --------
    >>> parse_strength_unit("s^-2", 1.0), parse_strength_unit("au^3/d^2", -2.0)
    ((None, 's'), ('au', 'd'))
    """
    length: str | None = None
    time: str | None = None
    length_power = time_power = 0.0
    for symbol, power in _unit_powers(text):
        try:
            unit, is_time = parse_time_unit(symbol), True
        except InputError:
            unit, is_time = parse_length_unit(symbol), False
        if is_time:
            if time not in (None, unit):
                raise InputError(f'the strength unit "{text}" mixes two time units; write one, such as s^-2.')
            time, time_power = unit, time_power + power
        else:
            if length not in (None, unit):
                raise InputError(f'the strength unit "{text}" mixes two length units; write one.')
            length, length_power = unit, length_power + power
    wanted = strength_unit("L", "T", exponent)
    if time is None or abs(time_power + 2.0) > 1e-9 or abs(length_power - (1.0 - exponent)) > 1e-9:
        raise InputError(f'"{text}" is not a unit of the strength k at n = {exponent:g}, which is {wanted} '
                         "(length^(1-n) time^-2). Write it in that form, e.g. "
                         f'"{strength_unit("m", "s", exponent)}".')
    return (None if abs(1.0 - exponent) < 1e-12 else length), time


def strength_factor(
    from_units: tuple[str, str], to_units: tuple[str | None, str], exponent: float
) -> float:
    """Multiply a strength k at exponent n in ``from_units`` by this to express it in ``to_units``.

    Parameters
    ----------
    from_units, to_units : (str, str)
        (length unit, time unit) of each side; the target's length may be None when n = 1.
    exponent : float
        n: k is in length**(1 - n) time**-2, so at n = 1 the length unit drops out (pixels
        included).

    Examples
    --------
    >>> strength_factor(("mm", "ms"), (None, "s"), 1.0)     # per ms^2 to per s^2
    1000000.0
    >>> round(strength_factor(("au", "d"), ("m", "s"), -2.0) / 1e23, 4)   # au^3/d^2 in m^3/s^2
    4.4849
    """
    factor = time_factor(to_units[1], from_units[1]) ** 2
    power = 1.0 - exponent
    if abs(power) > 1e-12:
        target = to_units[0]
        if target is None:
            raise InputError(f"a strength at n = {exponent:g} needs a length unit (length^(1-n) time^-2).")
        factor *= length_factor(from_units[0], target) ** power
    return factor
