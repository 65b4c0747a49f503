"""The report's words for equivalence and margin claims: the three outcomes, the bounds in raw
units and in SDs, and a non-significant difference never read as equivalence."""

from __future__ import annotations

from fractions import Fraction as Fr

import numpy as np
import pytest

from reporter.inference.analysis import fit_analysis
from reporter.intake.cells import CellStats
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_statement
from reporter.narrative import equivalence as E

DESIGN = build_design([Factor("g", ("first", "second"))], "cell-means")


def result(statement, means=(10.0, 10.2), sd=2.0, n=40, correction="holm", extra=()):
    nn = np.array([n, n])
    cells = CellStats(n=nn, offset_mean=np.array(means), ss=np.array([sd * sd * (n - 1)] * 2), pivot=0.0,
                      pivot_exact=Fr(0))
    cs = [compile_statement(DESIGN, s, name=f"h{i}") for i, s in enumerate((statement, *extra))]
    return fit_analysis(DESIGN, cells, None, cs, correction=correction).hypotheses[0]


def test_equivalent_outcome():
    """Difference 0.2 with SE 0.45, bounds ±1.5: the 90% interval lies inside."""
    h = result("-1.5 < second - first < 1.5")
    assert E.claim_decision(h, 0.05) == ("equivalent", False)
    text = E.decision_reading(h, 0.05, "Holm-adjusted", False)
    assert text.startswith("Reading: equivalent.") and "does not show a difference of exactly zero" in text
    assert E.result_claim(h, 0.05).startswith("equivalent within the bounds between −1.50 and 1.50")


def test_not_equivalent_outcome():
    """Difference 3 with bounds ±1: the interval lies above the upper bound."""
    h = result("-1 < second - first < 1", means=(10.0, 13.0))
    assert E.claim_decision(h, 0.05)[0] == "not equivalent"
    assert "lies above the upper bound" in E.decision_reading(h, 0.05, "Holm-adjusted", False)
    assert E.result_claim(h, 0.05).startswith("not equivalent: the difference lies beyond the bounds")


def test_inconclusive_outcome_and_a_nonsignificant_difference_is_not_equivalence():
    """Difference 0.2, bounds ±0.5: the test of difference is far from significant, yet the claim
    is inconclusive, never 'equivalent'."""
    h = result("-0.5 < second - first < 0.5")
    plain = result("second = first")
    assert plain.test.p > 0.5
    assert E.claim_decision(h, 0.05) == ("inconclusive", False)
    text = E.decision_reading(h, 0.05, "Holm-adjusted", False)
    assert text.startswith("Reading: inconclusive.") and "would not show equivalence either" in text
    assert "equivalent" not in E.result_claim(h, 0.05).split(":")[0].replace("inconclusive", "")


def test_equivalent_before_but_not_after_adjustment_is_inconclusive():
    """A TOST p just under α with four hypotheses in the Holm family: inconclusive, and said why."""
    h = result("-1 < second - first < 1", extra=("second > first", "first > second", "second = first"))
    assert h.test.decision == "equivalent" and h.p_adjusted >= 0.05
    assert E.claim_decision(h, 0.05) == ("inconclusive", True)
    assert "after the multiplicity adjustment" in E.decision_reading(h, 0.05, "Holm-adjusted", False)


def test_bounds_in_raw_units_and_in_sd():
    """An sd claim states the bounds in the outcome's units, in SDs, and that they are estimated."""
    h = result("-0.5 sd < second - first < 0.5 sd")
    words = E.words(h, "recall")
    assert "between −1.00 and 1.00" in words and "±0.5 residual SD" in words
    assert "estimated from these data" in words and "Schuirmann, 1987" in words
    table = E.equivalence_table([(1, h)], 0.05, "recall")
    assert ["".join(x.text for x in cell) for cell in table.rows[0][:3]] == ["1. h0", "[−1.00, 1.00]", "[−0.5, 0.5]"]
    assert any("Lakens" in "".join(x.text for x in n) for n in table.notes)


def test_margin_claims_are_named():
    """A one-sided statement against a nonzero h is a minimum-effect or non-inferiority claim."""
    assert "minimum-effect claim" in E.margin_words(result("second - first > 2"))
    ni = E.margin_words(result("second - first > -0.3 sd"))
    assert "non-inferiority claim" in ni and "−0.60" in ni and "(−0.3 residual SD" in ni and "estimated from these data" in ni
    assert E.margin_words(result("second > first")) is None
