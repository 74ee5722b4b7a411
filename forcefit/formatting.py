"""Digits people read: every printed number shows what its uncertainty supports, once.

One rule for the terminal, the report pages, figure titles and legends, and the display
columns of tables: a value with an error shows two significant digits of the error and the
value to the same decimal place; an interval shows its ends to the digits its width needs, and
always two distinct ends. Values without an error show six significant digits. Machine outputs
(JSON, the value columns of CSV tables) keep full precision and never pass through here.

The marks of a check (held, failed, a note) live here too, so that the terminal and the
report show the same ones.
"""

from __future__ import annotations

import math

CHECK_MARKS = {True: "✓", False: "✗", None: "·"}
"""The mark of a check that holds, one that fails, and a note (no verdict)."""

CHECK_WORDS = {True: "holds", False: "fails", None: "note"}
"""The same, in a word, for screen readers and plain-text logs."""

_FIXED_RANGE = (1e-3, 1e6)
"""Magnitudes shown in fixed-point notation; beyond them a shared power of ten is used."""


def _last_place(error: float) -> int:
    """The decimal exponent of the last digit shown for an ``error``: its second significant digit.

    Examples
    --------
    >>> _last_place(0.00213), _last_place(4.6), _last_place(37.0)
    (-4, -1, 0)
    """
    return math.floor(math.log10(error)) - 1


def _fixed(magnitude: float, place: int) -> bool:
    """Whether a number of this magnitude, shown to the decimal ``place``, reads well fixed-point."""
    decimals = -place
    low, high = _FIXED_RANGE
    return (decimals <= 12 and low <= magnitude < high) or (decimals <= 6 and magnitude < high)


def _number(value: float, place: int, power: int | None = None) -> str:
    """``value`` shown to the decimal ``place`` (fixed), or as a mantissa of 10**power."""
    if power is None:
        return f"{value:.{max(0, -place)}f}"
    return f"{value / 10.0**power:.{max(0, power - place)}f}"


def measurement(value: float, stderr: float | None = None, unit: str = "") -> str:
    """A value with its standard error and unit, rounded to the error's two digits.

    Parameters
    ----------
    value : float
        The estimate.
    stderr : float, optional
        Its standard error (same unit); None, nan or 0 when not known.
    unit : str
        Appended after a space when given.

    Examples
    --------
    >>> measurement(1.30843, 0.00213, "s^-2")
    '1.3084 ± 0.0021 s^-2'
    >>> measurement(0.25, None, "m")
    '0.25 m'
    >>> measurement(2.9591e-4, 1.2e-9, "au^3 d^-2")
    '(2.959100 ± 0.000012)e-04 au^3 d^-2'
    >>> measurement(float("nan"), 0.1, "s^-2")
    'not determined'
    """
    suffix = f" {unit}" if unit else ""
    shown = _to_error(value, stderr)
    if shown is None:
        return "not determined" if not math.isfinite(value) else f"{value:.6g}{suffix}"
    value_text, error_text, power = shown
    if not power:
        return f"{value_text} ± {error_text}{suffix}"
    return f"({value_text} ± {error_text}){power}{suffix}"


def matched(value: float, stderr: float | None = None) -> str:
    """The value alone, to the digits its error supports (for a legend or a title).

    Examples
    --------
    >>> matched(-2.000412, 0.000031), matched(0.990481, 0.00016), matched(4.28, None)
    ('-2.000412', '0.99048', '4.28')
    """
    shown = _to_error(value, stderr)
    if shown is None:
        return "not determined" if not math.isfinite(value) else f"{value:.6g}"
    return shown[0] + shown[2]


def _to_error(value: float, stderr: float | None) -> tuple[str, str, str] | None:
    """The value and its error to the error's two digits, and the shared power of ten as text
    (``""`` in fixed-point); None when the value is not finite or the error not known."""
    if not math.isfinite(value) or stderr is None or not math.isfinite(stderr) or stderr <= 0:
        return None
    place = _last_place(stderr)
    if _fixed(abs(value), place):
        return _number(value, place), _number(stderr, place), ""
    power = math.floor(math.log10(max(abs(value), stderr)))
    return _number(value, place, power), _number(stderr, place, power), f"e{power:+03d}"


def _interval_place(centre: float, low: float, high: float) -> int:
    """The decimal place that shows two digits of the narrower side and keeps the ends apart."""
    sides = [side for side in (centre - low, high - centre, high - low) if side > 0]
    if not sides:
        return _last_place(abs(centre)) if centre else 0
    place = _last_place(min(sides))
    while round(low, -place) == round(high, -place) and place > -17:
        place -= 1
    return place


def estimate(centre: float, low: float, high: float, unit: str = "") -> tuple[str, str]:
    """A median (or best value) and its interval, to the same digits, ends always distinct.

    The last digit shown is the second significant digit of the interval's narrower side.

    Returns
    -------
    (str, str)
        The centre and ``"[low, high]"``, the unit appended to the interval when given.

    Examples
    --------
    >>> estimate(-2.000412, -2.000443, -2.000381)
    ('-2.000412', '[-2.000443, -2.000381]')
    >>> estimate(4.0875, 4.051, 4.124, "s^-2")
    ('4.088', '[4.051, 4.124] s^-2')
    >>> estimate(2.95912e-4, 2.95910e-4, 2.95914e-4)
    ('2.959120e-04', '[2.959100e-04, 2.959140e-04]')
    """
    suffix = f" {unit}" if unit else ""
    if not all(math.isfinite(v) for v in (centre, low, high)):
        return "not determined", "not determined"
    place = _interval_place(centre, low, high)
    magnitude = max(abs(centre), abs(low), abs(high))
    if _fixed(magnitude, place):
        show = [_number(v, place) for v in (centre, low, high)]
    else:
        power = math.floor(math.log10(magnitude))
        show = [f"{_number(v, place, power)}e{power:+03d}" for v in (centre, low, high)]
    return show[0], f"[{show[1]}, {show[2]}]{suffix}"


def interval(low: float, high: float, unit: str = "") -> str:
    """``"[low, high]"`` to the digits the width needs, ends always distinct.

    Examples
    --------
    >>> interval(0.95, 1.05), interval(-2.0004002, -2.0003998)
    ('[0.950, 1.050]', '[-2.00040020, -2.00039980]')
    """
    return estimate(0.5 * (low + high), low, high, unit)[1]


def p_value(p: float) -> str:
    """A p-value in two significant digits; tiny ones as a bound, never as 0 or 1.

    Examples
    --------
    >>> p_value(0.4321), p_value(0.0032), p_value(3.1e-9), p_value(0.0), p_value(1.0)
    ('0.43', '0.0032', '3.1e-09', '< 1e-300', '> 0.99')
    """
    if not math.isfinite(p):
        return "—"
    if p <= 1e-300:
        return "< 1e-300"
    if p > 0.99:
        return "> 0.99"
    if p >= 1e-3:
        return f"{p:.2g}" if p < 0.1 else f"{p:.2f}"
    return f"{p:.1e}"


def p_phrase(p: float) -> str:
    """A p-value for a sentence: ``"p = 0.43"``, ``"p < 1e-300"``.

    Examples
    --------
    >>> p_phrase(0.43), p_phrase(0.0)
    ('p = 0.43', 'p < 1e-300')
    """
    text = p_value(p)
    return f"p {text}" if text[0] in "<>" else f"p = {text}"


def significance(deviation: float, stderr: float) -> str:
    """How many standard errors a deviation is, in words fit for a sentence.

    Examples
    --------
    >>> significance(-0.0095, 0.00016), significance(0.01, 0.02), significance(0.1, float("nan"))
    ('59 standard errors', '0.50 standard errors', 'of unknown significance')
    """
    if not (math.isfinite(deviation) and math.isfinite(stderr) and stderr > 0):
        return "of unknown significance"
    z = abs(deviation) / stderr
    return f"{z:.2g} standard errors" if z >= 10 else f"{z:.2f} standard errors"


def plain(value: float, digits: int = 6) -> str:
    """A number without a known error: ``digits`` significant digits, nan as "not determined".

    Examples
    --------
    >>> plain(4.905), plain(float("nan")), plain(123456789.0, 4)
    ('4.905', 'not determined', '1.235e+08')
    """
    return f"{value:.{digits}g}" if math.isfinite(value) else "not determined"
