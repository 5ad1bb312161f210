"""Numbers for people: significant figures, percentages, intervals, counts.

A report rounds each number to the digits a reader can use: three significant figures for an
estimate in a sentence; in a table, estimates and standard errors share the decimals that show
the smallest standard error to two significant figures (common practice), so a column never
mixes ``-0.684`` with ``0.08703``; shares of variance, of a gap or of studies as percentages with
at most one decimal (``34.8%``, ``5.5%``, ``14%``). An interval's ends take the decimals of its
estimate, and nothing prints ``nan``: a missing number reads ``n/a``. Text uses the ASCII minus
so that a number can be copied back into a program.

Examples
--------
>>> significant(-1.23456), significant(12345.6), significant(0.000123456)
('-1.23', '12,300', '0.000123')
>>> percent(0.1234), percent(0.01234), percent(0.0046), percent(1.0)
('12.3%', '1.2%', '0.46%', '100%')
>>> interval(-1.4567, -0.9876, like=-1.2234)
'-1.46 to -0.99'
>>> quantity(2.0, "m3/month"), count(6000)
('2 m3/month', '6,000')

A table of estimates with their standard errors:

>>> places = shared_decimals([0.08703, 0.1062, 0.0643])
>>> [fixed(x, places) for x in (-0.68402, -0.30452, -2.13911)], fixed(0.6, shared_decimals([0.6]))
(['-0.684', '-0.305', '-2.139'], '0.60')
"""

from __future__ import annotations

import math
from typing import Any

__all__ = [
    "MISSING",
    "count",
    "decimals_for",
    "fixed",
    "interval",
    "is_number",
    "p_value",
    "percent",
    "quantity",
    "shared_decimals",
    "shown_decimals",
    "significant",
]

MISSING = "n/a"


def is_number(value: Any) -> bool:
    """True for a finite int or float (not a bool, not None, not NaN).

    >>> is_number(1.5), is_number(float("nan")), is_number(None), is_number(True)
    (True, False, False, False)
    """
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        try:
            import numpy as np
        except ImportError:  # pragma: no cover - numpy is a dependency
            return False
        if not isinstance(value, (np.integer, np.floating)):
            return False
    return math.isfinite(float(value))


def decimals_for(value: float, digits: int = 3) -> int:
    """Decimals that show ``value`` to ``digits`` significant figures (never negative).

    decimals = digits − 1 − floor(log10 |value|), clipped to [0, 12].

    >>> decimals_for(-1.2345), decimals_for(0.0123), decimals_for(345.6), decimals_for(0)
    (2, 4, 0, 0)
    """
    if not is_number(value) or value == 0:
        return 0
    magnitude = math.floor(math.log10(abs(float(value))))
    return max(0, min(12, digits - 1 - magnitude))


def _round_significant(value: float, digits: int) -> float:
    # round half away from zero is not needed; Python's round-half-even on the scaled value is
    # the usual convention and keeps formatting and parsing consistent
    if value == 0:
        return 0.0
    magnitude = math.floor(math.log10(abs(value)))
    try:
        return round(value, digits - 1 - magnitude)
    except OverflowError:       # rounding up past the largest double: keep the value
        return value


def fixed(value: Any, decimals: int, *, sign: bool = False) -> str:
    """``value`` with exactly ``decimals`` decimals and thousands separators; ``n/a`` if missing.

    A value that rounds to zero prints as ``0`` (never ``-0``).

    >>> fixed(-0.0004, 2), fixed(12345.678, 1), fixed(0.5, 2, sign=True)
    ('0.00', '12,345.7', '+0.50')
    """
    if not is_number(value):
        return MISSING
    number = round(float(value), decimals)
    if number == 0:
        number = 0.0
    text = f"{number:,.{decimals}f}"
    if sign and number > 0:
        text = "+" + text
    return text


def significant(value: Any, digits: int = 3, *, sign: bool = False) -> str:
    """``value`` to ``digits`` significant figures, trailing zeros dropped; ``n/a`` if missing.

    Numbers of 1,000 or more get thousands separators; numbers below 0.0001 use scientific
    notation (``1.2e-05``) so that they are not shown as zero.

    >>> significant(2.0), significant(-0.10049), significant(1999.6), significant(1.5e-6, 2)
    ('2', '-0.1', '2,000', '1.5e-06')
    >>> significant(3.25, 2, sign=True), significant(None)
    ('+3.2', 'n/a')
    """
    if not is_number(value):
        return MISSING
    number = float(value)
    if number == 0:
        return "0"
    if abs(number) < 1e-4 or abs(number) >= 1e15:
        # scientific notation also for huge numbers: no 300-digit strings, and rounding near
        # the largest double cannot overflow
        text = f"{number:.{digits - 1}e}"
        mantissa, exponent = text.split("e")
        if "." in mantissa:
            mantissa = mantissa.rstrip("0").rstrip(".")
        text = f"{mantissa}e{exponent}"
    else:
        rounded = _round_significant(number, digits)
        decimals = decimals_for(rounded, digits)
        text = f"{rounded:.{decimals}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
        if abs(rounded) >= 1000:
            whole, _, fraction = text.partition(".")
            sign_text = "-" if whole.startswith("-") else ""
            whole = f"{int(whole.lstrip('-')):,d}"
            text = sign_text + whole + ("." + fraction if fraction else "")
    if sign and number > 0:
        text = "+" + text
    return text


def percent(share: Any, digits: int | None = None) -> str:
    """A share (0.123) as a percentage: ``"12.3%"``.

    By default at most one decimal from 1% up (``"34.8%"``, ``"5.5%"``, ``"14%"``, a trailing
    ``.0`` dropped) and two significant figures below 1% (``"0.46%"``), so that every share in
    a report reads the same way (common practice). With ``digits``, that many significant
    figures instead.

    >>> percent(0.0004567), percent(-0.25), percent(0.13996), percent(None)
    ('0.046%', '-25%', '14%', 'n/a')
    >>> percent(0.0763, 3), percent(0.99996)
    ('7.63%', '100%')
    """
    if not is_number(share):
        return MISSING
    value = 100.0 * float(share)
    if digits is not None:
        return significant(value, digits) + "%"
    if abs(value) >= 1:
        return fixed(value, 1).removesuffix(".0") + "%"
    return significant(value, 2) + "%"


def quantity(value: Any, unit: str | None = None, digits: int = 3, *,
             sign: bool = False) -> str:
    """A number with its unit: ``"-1.23 m3/month"``; the bare number when there is no unit.

    >>> quantity(-1.2345, "points"), quantity(4, None)
    ('-1.23 points', '4')
    """
    text = significant(value, digits, sign=sign)
    if unit and text != MISSING:
        return f"{text} {unit}"
    return text


def interval(low: Any, high: Any, *, like: Any = None, digits: int = 3,
             decimals: int | None = None) -> str:
    """An interval ``"low to high"``, both ends at the decimals of ``like`` (its estimate).

    Without ``like`` each end gets the decimals of the narrower end's significant figures;
    ``decimals`` fixes them (the decimals of the table the interval sits in).

    >>> interval(0.7731, 3.1269, like=1.95), interval(-2.2651, -2.0129, decimals=3)
    ('0.77 to 3.13', '-2.265 to -2.013')
    >>> interval(None, 2.0)
    'n/a'
    """
    if not (is_number(low) and is_number(high)):
        return MISSING
    if decimals is not None:
        return f"{fixed(low, decimals)} to {fixed(high, decimals)}"
    if is_number(like) and like != 0:
        decimals = decimals_for(_round_significant(float(like), digits), digits)
    else:
        width = abs(float(high) - float(low))
        decimals = decimals_for(width, 2) if width > 0 else decimals_for(float(high), digits)
    return f"{fixed(low, decimals)} to {fixed(high, decimals)}"


def shared_decimals(std_errors: Any, *, digits: int = 2, default: int | None = None
                    ) -> int | None:
    """Decimals for a table of estimates: the smallest standard error to ``digits`` figures.

    Estimates, standard errors and interval ends in one table all take these decimals, so the
    digits shown stop where the uncertainty starts (common practice: a standard error to two
    significant figures, the estimate to the same decimal place). ``default`` when no standard
    error is a positive finite number.

    decimals = digits − 1 − floor(log10 min SE), clipped to [0, 12].

    >>> shared_decimals([0.0643, 0.0870, None]), shared_decimals([0.6]), shared_decimals([12.3])
    (3, 2, 0)
    >>> shared_decimals([float("nan")]) is None
    True
    """
    values = [float(v) for v in (std_errors or []) if is_number(v) and float(v) > 0]
    if not values:
        return default
    return decimals_for(_round_significant(min(values), digits), digits)


def shown_decimals(value: Any, digits: int = 3) -> int | None:
    """Decimals :func:`significant` shows for ``value`` (trailing zeros dropped); ``None`` for a
    missing number or one in scientific notation.

    >>> shown_decimals(0.5), shown_decimals(1.95), shown_decimals(0.09731), shown_decimals(1234.5)
    (1, 2, 4, 0)
    """
    text = significant(value, digits)
    if text == MISSING or "e" in text:
        return None
    return len(text.partition(".")[2])


def count(value: Any) -> str:
    """A whole number with thousands separators: ``"6,000"``.

    >>> count(1500), count(12.0), count(None)
    ('1,500', '12', 'n/a')
    """
    if not is_number(value):
        return MISSING
    return f"{round(float(value)):,d}"


def p_value(value: Any) -> str:
    """A p-value as a reader expects it: ``"p = 0.032"``, ``"p < 0.001"``.

    >>> p_value(0.03212), p_value(0.00001), p_value(0.5)
    ('p = 0.032', 'p < 0.001', 'p = 0.5')
    """
    if not is_number(value):
        return f"p {MISSING}"
    number = float(value)
    if number < 0.001:
        return "p < 0.001"
    return f"p = {significant(number, 2)}"
