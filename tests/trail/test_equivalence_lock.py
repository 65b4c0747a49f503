"""Equivalence bounds and the unit of constants are part of what a lock fixes."""

from __future__ import annotations

from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_statement
from reporter.trail.deviations import canonical_contrast
from reporter.trail.lock import compiled_hypotheses

DESIGN = build_design([Factor("g", ("a", "b", "c"))], "cell-means")
CELLS = tuple(c.levels for c in DESIGN.cells)


def form(text):
    c = compile_statement(DESIGN, text, name="x")
    return canonical_contrast(c.weights, c.rhs, c.alternative, CELLS, CELLS, c.bounds, c.unit)


def test_same_claim_written_otherwise_is_no_deviation():
    assert form("-1 < a - b < 2") == form("2 > a - b > -1") == form("-2 < b - a < 1") == form("-4 < 2*b - 2*a < 2")
    assert form("-1 < a - b < 2") != form("-2 < 2*b - 2*a < 4")


def test_changed_bounds_unit_or_margin_is_a_deviation():
    assert form("-1 < a - b < 2") != form("-1 < a - b < 3")
    assert form("-0.3 sd < a - b < 0.3 sd") != form("-0.3 < a - b < 0.3")
    assert form("a - b > -0.3 sd") != form("a - b > -0.3")
    assert form("a - b > -0.3 sd") == form("b - a < 0.3 sd")


def test_lock_records_bounds_and_unit():
    c = compile_statement(DESIGN, "-0.3 sd < a - b < 0.3 sd", name="eq")
    (rec,) = compiled_hypotheses([c])
    assert rec["alternative"] == "equivalence" and rec["unit"] == "sd" and rec["bounds"] == ["-3/10", "3/10"]
    (plain,) = compiled_hypotheses([compile_statement(DESIGN, "a > b", name="d")])
    assert "unit" not in plain and "bounds" not in plain
