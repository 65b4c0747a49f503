"""Tests of reporter/narrative/numbers.py, the report's number style.

Source of the expected texts: Publication Manual of the American Psychological Association,
7th ed. (2020), section 6.36 (decimal places, leading zero, p < .001), section 6.38 (commas in
numbers, none in degrees of freedom; number from memory), and the chapter 6 sections on
statistics in text and statistical symbols (df in parentheses, CI limits in brackets with the
level stated, Latin symbols italic, Greek upright). The expected strings below were written by
hand by applying those rules to each input; cases marked "project decision" test a choice the
manual leaves open (documented in the module docstring; common practice, no source).
Rounding is also checked against an independent exact-rational computation (fractions.Fraction).
"""

from __future__ import annotations

import math
from decimal import Decimal
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from reporter.narrative.numbers import (
    HYPHEN_MINUS,
    MINUS,
    MISSING,
    Run,
    Stat,
    format_bounded,
    format_confidence_level,
    format_count,
    format_df,
    format_number,
    format_p_cell,
    join_stats,
    p_comparison,
    round_half_away,
    stat_ci,
    stat_count,
    stat_f,
    stat_p,
    stat_t,
    stat_value,
    symbol,
    text,
)

M = MINUS  # shorthand in expected strings


# --- rounding ---------------------------------------------------------------------------------

ROUNDING_CASES = [
    # (value, decimals, expected); project decision: half away from zero on the repr
    (2.675, 2, "2.68"),  # float 2.67499999...; binary rounding would give 2.67
    (-2.675, 2, f"{M}2.68"),
    (1.005, 2, "1.01"),  # float 1.00499999...
    (0.125, 2, "0.13"),  # exact half; round-half-even would give 0.12
    (0.135, 2, "0.14"),
    (2.5, 0, "3"),  # Python's round(2.5) gives 2
    (-2.5, 0, f"{M}3"),
    (0.5, 0, "1"),
    (2.345, 2, "2.35"),
    (2.344999, 2, "2.34"),
    (4.85, 2, "4.85"),
    (7, 2, "7.00"),
    (0.0, 2, "0.00"),
    (-0.0, 2, "0.00"),  # no signed zero
    (-0.004, 2, "0.00"),  # rounds to zero: printed without sign
    (-0.005, 2, f"{M}0.01"),
    (1e-20, 2, "0.00"),
    (1234.5678, 2, "1,234.57"),  # APA 7 section 6.38: commas from 1,000
    (-1234567.891, 1, f"{M}1,234,567.9"),
    (999.995, 2, "1,000.00"),
    (1e30, 0, "1,000,000,000,000,000,000,000,000,000,000"),
    (Decimal("2.345"), 2, "2.35"),
    (np.float64(2.675), 2, "2.68"),
    (np.int64(12), 1, "12.0"),
]


@pytest.mark.parametrize(
    ("value", "decimals", "expected"),
    ROUNDING_CASES,
    ids=[f"{c[0]!r}-to-{c[1]}" for c in ROUNDING_CASES],
)
def test_format_number_rounds_half_away_from_zero(value, decimals, expected):
    """format_number rounds half away from zero at the shown digit, with no float artefacts."""
    assert format_number(value, decimals) == expected


def test_round_half_away_returns_exact_decimal():
    """round_half_away gives the exact Decimal a person would write down."""
    assert round_half_away(2.675, 2) == Decimal("2.68")
    assert round_half_away(-0.0004, 3) == Decimal("0.000")
    assert not round_half_away(-0.0004, 3).is_signed()


@pytest.mark.parametrize("value", [math.nan, math.inf, None], ids=["nan", "inf", "none"])
def test_round_half_away_refuses_missing(value):
    """Rounding something that is not a finite number is a caller's mistake."""
    with pytest.raises(ValueError, match="finite"):
        round_half_away(value, 2)


def _reference_round(value: float, decimals: int) -> Fraction:
    """Half-away rounding of the repr's exact rational value, by integer arithmetic."""
    exact = Fraction(repr(float(value)))
    scaled = abs(exact) * 10**decimals
    magnitude = math.floor(scaled + Fraction(1, 2))
    return Fraction(magnitude if exact >= 0 else -magnitude, 10**decimals)


@given(
    value=st.floats(allow_nan=False, allow_infinity=False, min_value=-1e12, max_value=1e12),
    decimals=st.integers(min_value=0, max_value=6),
)
def test_format_number_matches_exact_rational_rounding(value, decimals):
    """Printed digits equal half-away rounding computed with fractions.Fraction (independent)."""
    printed = format_number(value, decimals, grouping=False, minus=HYPHEN_MINUS)
    assert Fraction(printed) == _reference_round(value, decimals)
    assert not printed.startswith("-") or Fraction(printed) != 0
    if decimals:
        assert len(printed.split(".")[1]) == decimals


# --- missing values ---------------------------------------------------------------------------

MISSING_CASES = [
    (None, MISSING),
    (math.nan, MISSING),
    (math.inf, MISSING),
    (-math.inf, MISSING),
    (np.float64("nan"), MISSING),
    (Decimal("NaN"), MISSING),
]


@pytest.mark.parametrize(
    ("value", "expected"), MISSING_CASES, ids=["none", "nan", "inf", "-inf", "np-nan", "decimal-nan"]
)
def test_missing_values_print_as_em_dash(value, expected):
    """None and non-finite numbers print as an em dash, never 'nan' (project decision)."""
    assert format_number(value) == expected
    assert format_bounded(value) == expected
    assert format_df(value) == expected
    assert format_p_cell(value) == expected


def test_missing_marker_can_be_words():
    """The missing marker can be replaced, e.g. by 'not available'."""
    assert format_number(None, missing="not available") == "not available"
    assert stat_f(math.nan, 2, 27, missing="not available").plain() == "F(2, 27) = not available"


def test_missing_statistic_keeps_its_label():
    """A missing F keeps its symbol and df so the reader sees what is missing (project decision)."""
    assert stat_f(math.nan, 2, 27).plain() == f"F(2, 27) = {MISSING}"
    assert stat_p(None).plain() == f"p = {MISSING}"


@pytest.mark.parametrize("value", ["1.5", True, [1.0]], ids=["str", "bool", "list"])
def test_non_numbers_are_rejected(value):
    """Text, booleans and containers are not numbers to format."""
    with pytest.raises(TypeError, match="real number"):
        format_number(value)


# --- p values ---------------------------------------------------------------------------------

P_CASES = [
    # (p, relation, number); APA 7 section 6.36: three decimals, p < .001, no leading zero
    (0.0, "<", ".001"),
    (1e-300, "<", ".001"),
    (0.0004999, "<", ".001"),  # would round to .000
    (0.0005, "<", ".001"),  # would round up to .001 but is below .001 (project decision)
    (0.0009999, "<", ".001"),
    (0.001, "=", ".001"),  # boundary itself is exact
    (0.0010004, "=", ".001"),
    (0.0149, "=", ".015"),
    (0.016, "=", ".016"),
    (0.0165, "=", ".017"),  # half away from zero
    (0.04999, "=", ".050"),  # printed p for reading; decisions use the unrounded value
    (0.05, "=", ".050"),
    (0.5, "=", ".500"),
    (0.9994999, "=", ".999"),
    (0.9995, ">", ".999"),  # would round to 1.000 (project decision)
    (0.99999, ">", ".999"),
    (1.0, ">", ".999"),
    (1.0 + 1e-12, ">", ".999"),  # floating-point overshoot read as 1
    (Decimal("0.0125"), "=", ".013"),
]


@pytest.mark.parametrize(("p", "relation", "number"), P_CASES, ids=[repr(c[0]) for c in P_CASES])
def test_p_boundaries(p, relation, number):
    """p prints with three decimals, '< .001' below .001 and '> .999' when it would print 1.000."""
    assert p_comparison(p) == (relation, number)
    assert stat_p(p).plain() == f"p {relation} {number}"
    assert format_p_cell(p) == (number if relation == "=" else f"{relation} {number}")


@given(st.floats(min_value=0.0, max_value=1.0))
def test_p_never_prints_zero_or_one(p):
    """No p prints as .000 or 1.000, and none carries a leading zero (APA 7, section 6.36)."""
    relation, number = p_comparison(p)
    assert number not in {".000", "1.000"}
    assert number.startswith(".") and len(number) == 4
    assert relation in {"=", "<", ">"}


@pytest.mark.parametrize("p", [-0.01, 1.01, 2.0], ids=["negative", "above-one", "two"])
def test_p_outside_unit_interval_is_an_error(p):
    """A p outside [0, 1] is a caller's mistake, not something to print."""
    with pytest.raises(ValueError, match="between 0 and 1"):
        p_comparison(p)


def test_adjusted_p_symbol_can_be_named():
    """stat_p accepts another symbol name, italicized by the same rule."""
    assert stat_p(0.2, "q").runs == (Run("q", True), Run(" = .200", False))


# --- negative values and the minus sign -------------------------------------------------------

NEGATIVE_CASES = [
    (lambda: format_number(-2.1), f"{M}2.10"),
    (lambda: format_number(-2.1, minus=HYPHEN_MINUS), "-2.10"),
    (lambda: format_bounded(-0.3), f"{M}.30"),
    (lambda: format_bounded(-0.3, minus=HYPHEN_MINUS), "-.30"),
    (lambda: stat_t(-2.104, 27).plain(), f"t(27) = {M}2.10"),
    (lambda: stat_t(-2.104, 27).plain(minus=HYPHEN_MINUS), "t(27) = -2.10"),
    (lambda: stat_value("d", -0.41).plain(), f"d = {M}0.41"),
    (lambda: stat_ci(-1.5, -0.25).plain(), f"95% CI [{M}1.50, {M}0.25]"),
]


@pytest.mark.parametrize(
    ("printed", "expected"),
    NEGATIVE_CASES,
    ids=["number", "number-ascii", "bounded", "bounded-ascii", "t", "t-ascii", "d", "ci"],
)
def test_negative_values_use_true_minus_by_default(printed, expected):
    """Negatives carry U+2212 unless ASCII is asked for (project decision, module docstring)."""
    assert printed() == expected


def test_with_minus_keeps_styling():
    """Stat.with_minus swaps the minus sign and leaves the italics as they were."""
    ascii_t = stat_t(-2.0, 10).with_minus(HYPHEN_MINUS)
    assert ascii_t.runs == (Run("t", True), Run("(10) = -2.00", False))


# --- degrees of freedom and test statistics ---------------------------------------------------

DF_CASES = [
    (27, "27"),
    (27.0, "27"),
    (np.float64(27.0), "27"),
    (17.1262, "17.13"),
    (17.125, "17.13"),  # half away from zero
    (26.999, "27.00"),  # fractional df keeps its decimals (project decision)
    (0.5, "0.50"),
    (1234, "1234"),  # no commas in df (APA 7, section 6.38)
    (Decimal("3"), "3"),
]


@pytest.mark.parametrize(("df", "expected"), DF_CASES, ids=[repr(c[0]) for c in DF_CASES])
def test_format_df(df, expected):
    """Whole df print without decimals, fractional (Welch) df with two, never with commas."""
    assert format_df(df) == expected


def test_negative_df_is_an_error():
    """Degrees of freedom below zero are a caller's mistake."""
    with pytest.raises(ValueError, match="negative"):
        format_df(-1)


STAT_CASES = [
    (lambda: stat_f(4.8512, 2, 27), "F(2, 27) = 4.85"),
    (lambda: stat_f(5.1789, 2, 17.1262), "F(2, 17.13) = 5.18"),
    (lambda: stat_f(1234.567, 1, 1500), "F(1, 1500) = 1,234.57"),
    (lambda: stat_f(0.004, 3, 110), "F(3, 110) = 0.00"),
    (lambda: stat_t(2.1, 27), "t(27) = 2.10"),
    (lambda: stat_t(2.1, 15.6249), "t(15.62) = 2.10"),
    (lambda: stat_value("M", 0.52), "M = 0.52"),
    (lambda: stat_value("SD", 1.3), "SD = 1.30"),
    (lambda: stat_value("SE", 0.1234, 3), "SE = 0.123"),
    (lambda: stat_value("η²", 0.1249, leading_zero=False), "η² = .12"),
    (lambda: stat_value("R²", 0.456, leading_zero=False), "R² = .46"),
    (lambda: stat_count(28), "n = 28"),
    (lambda: stat_count(1250, "N"), "N = 1,250"),
]


@pytest.mark.parametrize(
    ("stat", "expected"),
    STAT_CASES,
    ids=["F", "F-welch", "F-large", "F-small", "t", "t-welch", "M", "SD", "SE", "eta2", "R2", "n", "N"],
)
def test_statistic_texts(stat, expected):
    """Statistics read in APA form: symbol, df in parentheses, value to two decimals."""
    assert stat().plain() == expected


# --- confidence intervals and levels ----------------------------------------------------------

CI_CASES = [
    (lambda: stat_ci(0.1749, 1.5551), "95% CI [0.17, 1.56]"),
    (lambda: stat_ci(0.17, math.inf), "95% CI [0.17, ∞]"),  # one-sided, project decision
    (lambda: stat_ci(-math.inf, 1.56), f"95% CI [{M}∞, 1.56]"),
    (lambda: stat_ci(0.05, 0.41, 0.90, leading_zero=False), "90% CI [.05, .41]"),
    (lambda: stat_ci(0.17, 1.56, 0.995), "99.5% CI [0.17, 1.56]"),
    (lambda: stat_ci(1200.0, 3400.5), "95% CI [1,200.00, 3,400.50]"),
    (lambda: stat_ci(None, 1.56), f"95% CI [{MISSING}, 1.56]"),
    (lambda: stat_ci(math.nan, math.nan), f"95% CI [{MISSING}, {MISSING}]"),
]


@pytest.mark.parametrize(
    ("stat", "expected"),
    CI_CASES,
    ids=["two-sided", "open-above", "open-below", "bounded", "level-99.5", "large", "missing", "nan"],
)
def test_ci_formats(stat, expected):
    """A CI states its level and puts its limits in brackets; an open side prints as ∞."""
    assert stat().plain() == expected


def test_ci_label_is_upright():
    """'CI' is an abbreviation, not a variable, so no part of a CI is italic (APA 7 ch. 6)."""
    assert stat_ci(0.17, 1.56).runs == (Run("95% CI [0.17, 1.56]", False),)


@pytest.mark.parametrize(
    ("low", "high"),
    [(math.inf, 2.0), (0.0, -math.inf), (2.0, 1.0)],
    ids=["plus-inf-below", "minus-inf-above", "reversed"],
)
def test_impossible_ci_is_an_error(low, high):
    """An infinity on the wrong side or a lower limit above the upper one is refused."""
    with pytest.raises(ValueError, match="confidence"):
        stat_ci(low, high)


LEVEL_CASES = [
    (0.95, "95%"),
    (0.90, "90%"),
    (0.9, "90%"),
    (0.99, "99%"),
    (0.995, "99.5%"),
    (0.999, "99.9%"),
    (0.5, "50%"),
    (Decimal("0.950"), "95%"),
]


@pytest.mark.parametrize(("level", "expected"), LEVEL_CASES, ids=[repr(c[0]) for c in LEVEL_CASES])
def test_confidence_level_percentages(level, expected):
    """Confidence levels print as percentages without trailing zeros."""
    assert format_confidence_level(level) == expected


@pytest.mark.parametrize("level", [95, 0, 1, -0.5, None], ids=["95", "0", "1", "negative", "none"])
def test_confidence_level_must_be_a_proportion(level):
    """A level outside (0, 1), such as 95, is refused with a hint."""
    with pytest.raises(ValueError, match="0.95"):
        format_confidence_level(level)


# --- leading zeros ----------------------------------------------------------------------------

LEADING_ZERO_CASES = [
    # APA 7 section 6.36: no leading zero for quantities that cannot exceed 1
    (lambda: format_bounded(0.12), ".12"),
    (lambda: format_bounded(0.1249), ".12"),
    (lambda: format_bounded(0.005), ".01"),
    (lambda: format_bounded(0.0), ".00"),
    (lambda: format_bounded(-0.004), ".00"),
    (lambda: format_bounded(0.999), "1.00"),
    (lambda: format_bounded(1.0), "1.00"),
    (lambda: format_bounded(-1.0), f"{M}1.00"),
    (lambda: format_bounded(0.71, 3), ".710"),
    # ... and a leading zero for quantities that can
    (lambda: format_number(0.52), "0.52"),
    (lambda: format_number(0.004), "0.00"),
    (lambda: format_number(0.52, leading_zero=False), ".52"),
    (lambda: stat_value("M", 0.52).plain(), "M = 0.52"),
    (lambda: stat_value("d", 0.11).plain(), "d = 0.11"),
    (lambda: stat_value("r", 0.71, leading_zero=False).plain(), "r = .71"),
    (lambda: stat_value("ω²", 0.083, leading_zero=False).plain(), "ω² = .08"),
]


@pytest.mark.parametrize(
    ("printed", "expected"),
    LEADING_ZERO_CASES,
    ids=[
        "bounded", "bounded-round-down", "bounded-round-up", "bounded-zero", "bounded-neg-zero",
        "bounded-to-one", "bounded-one", "bounded-minus-one", "bounded-3dp",
        "M-like", "small", "forced-off", "M", "d", "r", "omega2",
    ],
)
def test_leading_zero_rules(printed, expected):
    """The leading zero is dropped only for quantities that cannot exceed 1."""
    assert printed() == expected


@pytest.mark.parametrize("value", [1.5, -1.01, 12.0], ids=["1.5", "-1.01", "12"])
def test_bounded_refuses_values_beyond_one(value):
    """A value beyond ±1 cannot be a proportion or correlation; format_bounded refuses it."""
    with pytest.raises(ValueError, match="format_number"):
        format_bounded(value)


@given(st.floats(min_value=-1.0, max_value=1.0), st.integers(min_value=1, max_value=4))
def test_bounded_never_shows_a_leading_zero(value, decimals):
    """No bounded quantity prints with '0.' in front (APA 7, section 6.36)."""
    printed = format_bounded(value, decimals, minus=HYPHEN_MINUS)
    assert not printed.lstrip("-").startswith("0")


# --- counts -----------------------------------------------------------------------------------

@pytest.mark.parametrize(
    ("n", "expected"),
    [(28, "28"), (28.0, "28"), (1250, "1,250"), (0, "0"), (None, MISSING)],
    ids=["28", "28-float", "1250", "zero", "none"],
)
def test_format_count(n, expected):
    """Counts are whole numbers with commas from 1,000 (APA 7, section 6.38)."""
    assert format_count(n) == expected


@pytest.mark.parametrize("n", [2.5, -1], ids=["fraction", "negative"])
def test_format_count_refuses_non_counts(n):
    """A fractional or negative count is a caller's mistake."""
    with pytest.raises(ValueError, match="whole number"):
        format_count(n)


# --- italics ----------------------------------------------------------------------------------

ITALIC_SYMBOLS = ["F", "t", "p", "M", "SD", "SE", "n", "N", "d", "g", "f", "df", "SS", "MS"]
UPRIGHT_SYMBOLS = ["η²", "ω²", "β", "α", "χ²", "CI"]


@pytest.mark.parametrize("name", ITALIC_SYMBOLS, ids=ITALIC_SYMBOLS)
def test_latin_symbols_are_italic(name):
    """Latin letters used as statistical symbols are italic (APA 7 ch. 6)."""
    assert symbol(name).runs == (Run(name, True),)


@pytest.mark.parametrize("name", UPRIGHT_SYMBOLS, ids=UPRIGHT_SYMBOLS)
def test_greek_symbols_and_abbreviations_are_upright(name):
    """Greek letters and abbreviations such as CI stay upright (APA 7 ch. 6)."""
    assert symbol(name).runs == (Run(name, False),)


def test_superscript_of_latin_symbol_is_upright():
    """In R² the R is italic and the superscript 2 is not."""
    assert symbol("R²").runs == (Run("R", True), Run("²", False))


def test_statistic_runs_italicize_only_the_symbol():
    """In F(2, 27) = 4.85 only the F is italic."""
    assert stat_f(4.85, 2, 27).runs == (Run("F", True), Run("(2, 27) = 4.85", False))


def test_words_beside_a_symbol_stay_upright():
    """A name beside a symbol (Cohen's d) is upright; only the d is italic."""
    assert (text("Cohen's ") + stat_value("d", 0.41)).runs == (
        Run("Cohen's ", False),
        Run("d", True),
        Run(" = 0.41", False),
    )


def test_symbol_must_not_be_empty():
    """An empty symbol is refused."""
    with pytest.raises(ValueError, match="non-empty"):
        symbol(" ")


# --- Stat as a value --------------------------------------------------------------------------

def test_stat_merges_adjacent_runs_of_one_style():
    """Runs of the same style merge and empty runs vanish, so equal texts compare equal."""
    built = Stat((("F", True), ("", False), ("(2, ", False), ("27)", False)))
    assert built == Stat((Run("F", True), Run("(2, 27)", False)))


def test_join_stats_reads_as_one_report():
    """join_stats joins statistics with upright separators and keeps each symbol italic."""
    joined = join_stats([stat_f(4.85, 2, 27), stat_p(0.016), stat_value("η²", 0.26, leading_zero=False)])
    assert joined.plain() == "F(2, 27) = 4.85, p = .016, η² = .26"
    assert [run.text for run in joined.runs if run.italic] == ["F", "p"]


def test_stat_is_immutable():
    """A Stat cannot be changed after it is built."""
    stat = stat_p(0.5)
    with pytest.raises(AttributeError):
        stat.runs = ()
