"""Equivalence claims (LOW < expr < HIGH) and constants in residual SDs (0.3 sd): parsing, printing,
compiling and the class of statements refused, each with a caret."""

from __future__ import annotations

from fractions import Fraction as Fr

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from reporter.errors import HypothesisError
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_statement, in_outcome_units, parse, unparse

MEDIUM = Factor("medium", ("peat", "coir", "bark", "soil"))
ONEWAY = build_design([MEDIUM], "cell-means")
TWOWAY = build_design([Factor("dose", ("low", "high")), Factor("sex", ("f", "m"))], "effects")


def test_equivalence_chain_compiles_to_one_row_with_bounds():
    """LOW < expr < HIGH: one row of C (the expression), h = 0, the bounds exact and in raw units."""
    c = compile_statement(ONEWAY, "-2 < coir - bark < 2.5")
    assert (c.test, c.alternative, c.is_equivalence) == ("t", "equivalence", True)
    assert c.weights == ((0, 1, -1, 0),) and c.rhs == (0,)
    assert c.bounds == (Fr(-2), Fr(5, 2)) and c.unit == "raw"
    assert c.null_text() == "coir - bark ≤ -2 or coir - bark ≥ 2.5"
    assert c.alternative_text() == "-2 < coir - bark < 2.5"


def test_reversed_chain_is_the_same_claim():
    """HIGH > expr > LOW states the same claim as LOW < expr < HIGH."""
    a = compile_statement(ONEWAY, "-2 < coir - bark < 2")
    b = compile_statement(ONEWAY, "2 > coir - bark > -2")
    assert (a.weights, a.bounds, a.rhs) == (b.weights, b.bounds, b.rhs)


def test_constant_in_the_middle_moves_to_the_bounds():
    """-1 < coir - bark + 1 < 2 is -2 < coir - bark < 1."""
    c = compile_statement(ONEWAY, "-1 < coir - bark + 1 < 2")
    assert c.bounds == (Fr(-2), Fr(1)) and c.weights == ((0, 1, -1, 0),)


def test_sd_bounds_and_conversion():
    """0.3 sd is in residual SDs; the fit converts it with the residual SD, exactly."""
    c = compile_statement(TWOWAY, "-0.3 sd < mean(dose=high) - mean(dose=low) < 0.3sd")
    assert c.unit == "sd" and c.bounds == (Fr(-3, 10), Fr(3, 10))
    raw = in_outcome_units(c, 2.5)
    assert raw.unit == "raw" and raw.bounds == (Fr(-3, 4), Fr(3, 4))
    assert raw.from_sd.residual_sd == 2.5 and raw.from_sd.bounds == (Fr(-3, 10), Fr(3, 10))
    assert in_outcome_units(compile_statement(ONEWAY, "coir > bark"), 2.5).from_sd is None


@pytest.mark.parametrize("text, alternative, h", [
    ("coir - bark > -0.3 sd", "greater", Fr(-3, 10)),      # non-inferiority by a margin in SDs
    ("coir > bark + 2", "greater", Fr(2)),                 # superiority by a margin (minimum effect)
    ("coir - bark < 0.5 sd / 2", "less", Fr(1, 4)),
    ("coir = bark + 2 * 0.1 sd", "two-sided", Fr(1, 5)),
])
def test_one_sided_margins(text, alternative, h):
    """Minimum-effect and non-inferiority claims are the one-sided forms with a nonzero h."""
    c = compile_statement(ONEWAY, text)
    assert c.alternative == alternative and c.rhs == (h,)
    assert c.unit == ("sd" if "sd" in text else "raw")
    if c.unit == "sd":
        assert in_outcome_units(c, 2.0).rhs == (2 * h,)


@pytest.mark.parametrize("text, message, caret", [
    ("-2 < coir - bark < soil", "needs constants at both ends", "soil"),
    ("coir < coir - bark < 2", "needs constants at both ends", "coir"),
    ("2 < coir - bark < 1", "is not below the upper bound", "2"),
    ("1 < coir - bark < 1", "is not below the upper bound", "1"),
    ("0.3 sd < coir - bark < -0.3 sd", "is not below the upper bound", "0.3 sd"),
    ("-2 < coir - bark > 2", "mixes the directions", ">"),
    ("2 > coir - bark < 3", "mixes the directions", "<"),
    ("peat = coir = bark + 0.3 sd", "chain of equalities, which is tested by F", "0.3 sd"),
    ("peat + 0.1 sd = coir = bark", "chain of equalities, which is tested by F", "0.1 sd"),
    ("coir sd > 1", "'sd' follows a number only", "sd"),
    ("(coir - bark) sd > 0", "'sd' follows a number only", "sd"),
    ("0.3 sd * coir > 1", "multiplies a mean by a constant in sd units", "*"),
    ("coir / 0.3 sd > 1", "divides by a constant in sd units", "/"),
    ("0.3 sd * 0.3 sd < coir", "multiplies two constants in sd units", "*"),
    ("-2 < coir - bark < 0.3 sd", "mixes constants in the outcome's units with constants in sd units", None),
    ("coir - bark > 1 + 0.3 sd", "mixes constants in the outcome's units", None),
    ("-0.3 sd < coir - bark + 1 < 0.3 sd", "mixes constants in the outcome's units", None),
    ("coir > sd", "a number followed by sd", "sd"),
    ("peat > coir > bark", "chains more than one > or <", ">"),
    ("0 < coir < bark < 2", "chains more than one > or <", "<"),
])
def test_refused_with_a_caret(text, message, caret):
    """Every member of the class is refused with its rule and a caret under the offending part."""
    with pytest.raises(HypothesisError) as err:
        compile_statement(ONEWAY, text, context="plan.toml, hypotheses[0].means")
    msg = str(err.value)
    assert message in msg and msg.startswith("plan.toml, hypotheses[0].means: ")
    echoed, marks = msg.splitlines()[-2:]
    assert echoed.strip() == text
    start = marks.index("^")
    width = marks.count("^")
    if caret is None:
        assert width == len(text)
    else:
        assert echoed[start:start + width] == caret


BOUND = st.decimals(min_value=0, max_value=9, places=2).map(lambda d: Fr(d))


@given(BOUND, BOUND, st.booleans(), st.booleans(), st.sampled_from(["coir - bark", "(peat + coir)/2 - soil", "-bark"]))
@settings(max_examples=100, deadline=None)
def test_equivalence_print_roundtrip(a, b, sd, reverse, expr):
    """A claim printed canonically parses back to the same compiled claim (the bounds exact)."""
    if a == b:
        return
    low, high = -a - Fr(1, 100), b + Fr(1, 100)
    unit = " sd" if sd else ""
    text = (f"{float(high)}{unit} > {expr} > {float(low)}{unit}" if reverse
            else f"{float(low)}{unit} < {expr} < {float(high)}{unit}")
    c = compile_statement(ONEWAY, text)
    printed = unparse(parse(text))
    again = compile_statement(ONEWAY, printed)
    assert (again.weights, again.bounds, again.unit) == (c.weights, c.bounds, c.unit)
    assert c.bounds == (low, high) and unparse(parse(printed)) == printed


def test_printer_writes_sd_canonically():
    """'0.3sd' is printed '0.3 sd'; a constant in SDs that is not a decimal prints as p sd / q."""
    assert unparse(parse("-0.3sd<coir-bark<0.3sd")) == "-0.3 sd < coir - bark < 0.3 sd"
    assert unparse(parse("coir - bark > 1 sd / 3")) == "coir - bark > 1 sd / 3"
