"""Significant-figure formatting for reports (causalcheck/report/numbers.py)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from causalcheck.report.numbers import (
    count,
    decimals_for,
    fixed,
    interval,
    is_number,
    p_value,
    percent,
    quantity,
    shared_decimals,
    significant,
)


def parse(text: str) -> float:
    """A formatted number back to a float (thousands separators and % removed)."""
    return float(text.replace(",", "").rstrip("%"))


@pytest.mark.parametrize("value, digits, expected", [
    # rounding to significant figures by hand (common practice: round half to even on ties)
    (-1.23456, 3, "-1.23"),
    (0.000123456, 3, "0.000123"),
    (12345.6, 3, "12,300"),
    (1999.6, 3, "2,000"),
    (0.10049, 3, "0.1"),
    (2.0, 3, "2"),
    (0.0, 3, "0"),
    (-0.000001234, 2, "-1.2e-06"),
    (999.96, 4, "1,000"),
    (1234567.0, 2, "1,200,000"),
])
def test_significant(value, digits, expected):
    assert significant(value, digits) == expected


@pytest.mark.parametrize("value", [None, float("nan"), float("inf"), "1.5", True])
def test_missing_numbers_read_na(value):
    assert significant(value) == "n/a" and percent(value) == "n/a" and count(value) == "n/a"
    assert not is_number(value)


def test_negative_zero_never_printed():
    assert fixed(-0.0004, 2) == "0.00"
    assert significant(-0.0) == "0"


def test_percent_interval_quantity_count_p():
    assert percent(0.1388) == "13.9%" and percent(0.1388, 3) == "13.9%"
    assert percent(0.0763, 3) == "7.63%" and percent(1.0) == "100%"
    assert interval(0.7731, 3.1269, like=1.95) == "0.77 to 3.13"
    assert interval(-2.271, -2.008, like=-2.139) == "-2.27 to -2.01"
    assert quantity(-1.2345, "m3/month") == "-1.23 m3/month"
    assert count(5950) == "5,950"
    assert p_value(0.0004) == "p < 0.001" and p_value(0.0316) == "p = 0.032"


@pytest.mark.parametrize("share, expected", [
    # one rule for every share in a report (common practice): at most one decimal from 1% up,
    # a trailing .0 dropped; two significant figures below 1%
    (0.348, "34.8%"), (0.0552, "5.5%"), (0.1396, "14%"), (0.14, "14%"), (0.0046, "0.46%"),
    (0.000457, "0.046%"), (0.0099, "0.99%"), (0.00996, "1%"), (0.99996, "100%"),
    (0.999, "99.9%"), (-0.25, "-25%"), (0.0, "0%"), (12.5, "1,250%"),
])
def test_percent_default_rule(share, expected):
    assert percent(share) == expected


def test_shared_decimals_stop_where_the_uncertainty_starts():
    # common practice: the smallest standard error to two significant figures, every estimate
    # of the table to the same decimal place
    assert shared_decimals([0.08703, 0.1062, 0.0643]) == 3
    assert shared_decimals([0.6]) == 2 and fixed(0.6, shared_decimals([0.6])) == "0.60"
    assert shared_decimals([0.0996]) == 2        # rounds to 0.10: two figures are "0.10"
    assert shared_decimals([250.0]) == 0 and shared_decimals([0, None, -1.0]) is None
    assert shared_decimals([], default=3) == 3
    assert interval(-2.2651, -2.0129, decimals=3) == "-2.265 to -2.013"


def test_decimals_for():
    assert decimals_for(-2.139, 3) == 2
    assert decimals_for(0.0643, 3) == 4
    assert decimals_for(345.6, 3) == 0


@given(st.floats(min_value=-1e7, max_value=1e7, allow_nan=False).filter(
    lambda x: x == 0 or abs(x) >= 1e-4), st.integers(min_value=1, max_value=6))
def test_significant_is_within_half_a_unit_of_its_last_digit(value, digits):
    text = significant(value, digits)
    back = parse(text)
    if value == 0:
        assert back == 0
        return
    # the last shown digit has place value 10^(floor(log10|x|) - digits + 1)
    place = 10 ** (math.floor(math.log10(abs(value))) - digits + 1)
    assert abs(back - value) <= 0.5 * place * (1 + 1e-9) + 1e-12 * abs(value)


@given(st.floats(min_value=0, max_value=1, allow_nan=False))
def test_percent_round_trips(share):
    text = percent(share, 3)
    assert text.endswith("%")
    back = parse(text) / 100
    if share == 0:
        assert back == 0
    else:
        place = 10 ** (math.floor(math.log10(100 * share)) - 2) / 100
        assert abs(back - share) <= 0.5 * place * (1 + 1e-9) + 1e-12
