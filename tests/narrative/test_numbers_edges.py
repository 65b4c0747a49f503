"""Edges of the number-style rules that a mutation run found unguarded: the ``decimals`` and
``missing`` arguments passed through every statistic, degrees of freedom above 1,000, decimal
infinities as open interval limits, very large numbers at many decimals, and the argument checks.

Expected texts follow APA 7 (section 6.36 decimals, 6.38 commas, chapter 6 statistics) and the
project decisions stated in reporter/narrative/numbers.py; each is written out by hand.
"""

from __future__ import annotations

import math
from decimal import Context, Decimal, localcontext

import pytest

from reporter.narrative.numbers import (
    MINUS, format_df, format_number, format_p_cell, p_comparison, stat_ci, stat_count, stat_f,
    stat_p, stat_t, stat_value,
)

M = MINUS


@pytest.mark.parametrize("stat, expected", [
    (lambda: stat_t(2.12345, 27, 3), "t(27) = 2.123"),
    (lambda: stat_f(5.17891, 2, 17.1262, 3), "F(2, 17.13) = 5.179"),
    (lambda: stat_value("W", 0.90325, 3, leading_zero=False), "W = .903"),  # Shapiro–Wilk W
    (lambda: stat_value("SE", 0.12345, 3), "SE = 0.123"),
    (lambda: stat_ci(0.12345, 0.56789, decimals=3), "95% CI [0.123, 0.568]"),
    (lambda: stat_ci(0.12345, 0.56789, 0.9, decimals=3, leading_zero=False), "90% CI [.123, .568]"),
], ids=["t", "F", "W", "SE", "ci", "ci-bounded"])
def test_decimals_reach_every_number(stat, expected):
    """A statistic printed with three decimals keeps all three, in every part of the text."""
    assert stat().plain() == expected


@pytest.mark.parametrize("stat, expected", [
    (lambda: stat_t(None, None, missing="n/a"), "t(n/a) = n/a"),
    (lambda: stat_f(math.nan, None, math.nan, missing="n/a"), "F(n/a, n/a) = n/a"),
    (lambda: stat_p(None, missing="n/a"), "p = n/a"),
    (lambda: stat_value("d", None, missing="n/a"), "d = n/a"),
    (lambda: stat_value("η²", None, leading_zero=False, missing="n/a"), "η² = n/a"),
    (lambda: stat_count(None, missing="n/a"), "n = n/a"),
    (lambda: stat_ci(None, math.nan, missing="n/a"), "95% CI [n/a, n/a]"),
    (lambda: stat_ci(None, None, leading_zero=False, missing="n/a"), "95% CI [n/a, n/a]"),
], ids=["t", "F", "p", "value", "bounded-value", "count", "ci", "ci-bounded"])
def test_missing_marker_reaches_every_number(stat, expected):
    """The caller's marker for a missing value replaces each missing number (module docstring)."""
    assert stat().plain() == expected


def test_missing_marker_in_a_p_cell():
    assert format_p_cell(None, missing="n/a") == "n/a"
    assert p_comparison(math.nan, missing="n/a") == ("=", "n/a")


@pytest.mark.parametrize("df, expected", [
    (1234.5, "1234.50"),  # a fractional (Welch) df: two decimals, no comma (APA 7, 6.38)
    (0, "0"),
    (0.0, "0"),
])
def test_df_edges(df, expected):
    assert format_df(df) == expected


def test_decimal_infinities_are_open_limits():
    """Decimal('±Infinity') marks the open side like float infinities; a finite Decimal prints."""
    assert stat_ci(Decimal("-Infinity"), Decimal("1.5")).plain() == f"95% CI [{M}∞, 1.50]"
    assert stat_ci(Decimal("0.2"), Decimal("Infinity")).plain() == "95% CI [0.20, ∞]"
    assert stat_ci(Decimal("-0.25"), Decimal("1.5")).plain() == f"95% CI [{M}0.25, 1.50]"
    with pytest.raises(ValueError, match="lower"):
        stat_ci(Decimal("Infinity"), Decimal("1.5"))
    with pytest.raises(ValueError, match="upper"):
        stat_ci(Decimal("1.5"), Decimal("-Infinity"))


def test_an_interval_of_zero_width_prints():
    """low == high is an interval (a constant contrast), not an error."""
    assert stat_ci(1.0, 1.0).plain() == "95% CI [1.00, 1.00]"


def test_large_numbers_keep_every_decimal():
    """Up to 28 significant digits every requested decimal prints (the float read through its
    shortest repr, -1.2345678901234568e+20)."""
    assert format_number(1e20, 6) == "100,000,000,000,000,000,000.000000"
    assert format_number(-123456789012345678901.5, 4) == f"{M}123,456,789,012,345,680,000.0000"


@pytest.mark.parametrize("value, decimals, expected", [
    (1.5e26, 2, "150,000,000,000,000,000,000,000,000.00"),
    (1e25, 6, "10,000,000,000,000,000,000,000,000.000000"),
    (1.2345e27, 2, "1,234,500,000,000,000,000,000,000,000.00"),
])
def test_numbers_beyond_28_digits_keep_their_decimals(value, decimals, expected):
    """APA 7 (6.36): the stated number of decimals, whatever the size of the number and whatever
    decimal context the caller left behind (here Python's default, 28 digits)."""
    with localcontext(Context()):
        assert format_number(value, decimals) == expected


def test_p_overshoot_at_the_slack_limit():
    """A p of exactly 1 + 1e-9 is floating-point noise above 1 and prints '> .999'."""
    assert p_comparison(1 + 1e-9) == (">", ".999")


@pytest.mark.parametrize("decimals", [True, 1.5, -1])
def test_decimals_must_be_a_whole_number(decimals):
    with pytest.raises(ValueError, match="decimals"):
        format_number(1.0, decimals)
