"""Tests of hypotheses: identities that must hold, one-sided intervals, degenerate data."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from reporter.errors import FitError
from reporter.inference.analysis import fit_analysis_on_rows as fit_analysis
from reporter.intake.cells import describe_cells
from reporter.fitting.linear import fit_contrast, fit_model
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_effect, compile_statement

A = Factor("A", ("a1", "a2", "a3"))
B = Factor("B", ("b1", "b2"))


def _data(seed, k, low=2, high=7):
    rng = np.random.default_rng(seed)
    n = rng.integers(low, high, size=k)
    cell = np.repeat(np.arange(k), n)
    y = rng.normal(size=k)[cell] * 3 + rng.normal(size=cell.size) + 50
    return y, cell


def _fit(param, y, cell, statements, **kw):
    d = build_design([A, B], param)
    cs = [compile_statement(d, s) if not s.startswith("effect:") else compile_effect(d, s[7:]) for s in statements]
    return fit_analysis(d, y, cell, cs, **kw)


STATEMENTS = ["a1 > a2", "mean(A=a1, B=b2) - mean(A=a3, B=b1) = 0.5", "a1 = a2 = a3", "effect:A x B", "effect:B",
              "(a1 + a2)/2 < a3"]


@given(st.integers(0, 10**6))
@settings(max_examples=25, deadline=None)
def test_same_F_under_every_parameterization(seed):
    """A hypothesis gives the same statistic and p under cell-means, effects and reference coding."""
    y, cell = _data(seed, 6)
    results = [_fit(p, y, cell, STATEMENTS) for p in ("cell-means", "effects", "reference")]
    for hs in zip(*(r.hypotheses for r in results)):
        stats_ = [h.test.statistic for h in hs]
        assert np.allclose(stats_, stats_[0], rtol=1e-10)


@given(st.integers(0, 10**6))
@settings(max_examples=25, deadline=None)
def test_F_of_one_row_is_t_squared(seed):
    """For one row, the F form equals t² and the two-sided p values agree."""
    y, cell = _data(seed, 6)
    d = build_design([A, B], "effects")
    fit = fit_model(describe_cells(y, cell, 6), d.matrix)
    c = compile_statement(d, "mean(A=a1) = mean(A=a2)")
    t = fit_contrast(fit, c.weights, c.rhs)
    F = fit_contrast(fit, c.weights, c.rhs, test="F")
    assert math.isclose(F.statistic, t.statistic ** 2, rel_tol=1e-12)
    assert math.isclose(F.p, t.p, rel_tol=1e-9)


@given(st.integers(0, 10**6))
@settings(max_examples=25, deadline=None)
def test_shuffling_rows_changes_nothing(seed):
    """Reordering the rows leaves every statistic unchanged."""
    y, cell = _data(seed, 6)
    perm = np.random.default_rng(seed + 1).permutation(y.size)
    r1 = _fit("effects", y, cell, STATEMENTS)
    r2 = _fit("effects", y[perm], cell[perm], STATEMENTS)
    for h1, h2 in zip(r1.hypotheses, r2.hypotheses):
        assert math.isclose(h1.test.statistic, h2.test.statistic, rel_tol=1e-11)
    for a, b in zip(r1.anova.rows, r2.anova.rows):
        assert math.isclose(a.F, b.F, rel_tol=1e-11)


@given(st.integers(0, 10**6), st.floats(-1e3, 1e3), st.floats(0.01, 100))
@settings(max_examples=25, deadline=None)
def test_affine_change_of_outcome(seed, a, b):
    """a + b·y leaves t, F and p unchanged for contrasts whose weights sum to zero (h mapped to b·h)."""
    y, cell = _data(seed, 6)
    d = build_design([A, B], "cell-means")
    stmts = ["a1 > a2", "a1 = a2 = a3", f"mean(A=a1, B=b2) - mean(A=a3, B=b1) = {b * 0.5!r}"]
    base = ["a1 > a2", "a1 = a2 = a3", "mean(A=a1, B=b2) - mean(A=a3, B=b1) = 0.5"]
    r1 = fit_analysis(d, y, cell, [compile_statement(d, s) for s in base])
    r2 = fit_analysis(d, a + b * y, cell, [compile_statement(d, s) for s in stmts])
    for h1, h2 in zip(r1.hypotheses, r2.hypotheses):
        assert math.isclose(h1.test.statistic, h2.test.statistic, rel_tol=1e-7, abs_tol=1e-9)
        assert math.isclose(h1.test.p, h2.test.p, rel_tol=1e-6, abs_tol=1e-12)


def test_one_sided_interval_and_p():
    """'a1 > a2' gives p = t.sf(t) and the bound [estimate − t(1−α)·SE, null]; '<' mirrors it.

    Reference: Kutner et al. (2005), eq. 17.20 (one-sided limits); computed here with scipy.stats.t.
    """
    y, cell = _data(11, 6)
    r = _fit("cell-means", y, cell, ["a1 > a2", "a1 < a2", "a1 = a2"])
    g, l, two = (h.test for h in r.hypotheses)
    df = g.df[0]
    assert g.ci[1] is None and l.ci[0] is None and g.ci_sides == 1 and two.ci_sides == 2
    assert math.isclose(g.p, stats.t.sf(g.statistic, df), rel_tol=1e-12)
    assert math.isclose(g.p + l.p, 1.0, rel_tol=1e-12)
    assert math.isclose(g.ci[0], g.estimate - stats.t.ppf(0.95, df) * g.se, rel_tol=1e-12)
    assert math.isclose(two.p, 2 * min(g.p, l.p), rel_tol=1e-12)


def test_nonzero_right_hand_side():
    """'a1 - a2 = 5' tests against 5: t = (estimate − 5)/SE."""
    y, cell = _data(5, 6)
    r = _fit("cell-means", y, cell, ["a1 - a2 = 5", "a1 - a2 = 0"])
    t5, t0 = (h.test for h in r.hypotheses)
    assert math.isclose(t5.estimate, t0.estimate, rel_tol=1e-12)
    assert math.isclose(t5.statistic, (t0.estimate - 5) / t0.se, rel_tol=1e-10)


def test_pooled_two_group_t_matches_scipy():
    """A two-cell contrast equals scipy.stats.ttest_ind (pooled variance) in a one-way design of two cells."""
    rng = np.random.default_rng(2)
    x1, x2 = rng.normal(10, 2, 13), rng.normal(11, 2, 17)
    d = build_design([Factor("g", ("x", "y"))], "cell-means")
    r = fit_analysis(d, np.r_[x1, x2], np.r_[np.zeros(13, int), np.ones(17, int)], [compile_statement(d, "x = y")])
    ref = stats.ttest_ind(x1, x2)
    assert math.isclose(r.hypotheses[0].test.statistic, ref.statistic, rel_tol=1e-12)
    assert math.isclose(r.hypotheses[0].test.p, ref.pvalue, rel_tol=1e-10)


@pytest.mark.parametrize(
    "y, cell, k, message",
    [
        (np.array([1.0, 2.0, 3.0]), np.array([0, 1, 2]), 3, "every cell has exactly one observation"),
        (np.array([1.0, 1.0, 2.0, 2.0]), np.array([0, 0, 1, 1]), 2, "zero residual variance"),
        (np.array([1.0, 2.0, 3.0]), np.array([0, 0, 0]), 2, "only 1 cell has data"),
    ],
    ids=["one-per-cell", "zero-variance", "single-cell"],
)
def test_degenerate_data(y, cell, k, message):
    """Degenerate data are FitErrors (exit code 2) with a specific message."""
    d = build_design([Factor("g", tuple(f"l{i}" for i in range(k)))], "cell-means")
    with pytest.raises(FitError, match=message):
        fit_model(describe_cells(y, cell, k), d.matrix)


def test_cell_statistics_are_centred_and_exact():
    """Cell means and SS of values with 13 constant digits match exact decimal arithmetic."""
    from decimal import Decimal, localcontext

    vals = ["1000000000000.4", "1000000000000.3", "1000000000000.5", "1000000000000.6"]
    with localcontext() as context:  # 50 digits here only: the global context stays as it was
        context.prec = 50
        pivot = Decimal(vals[0])
        y = np.array([float(Decimal(v) - pivot) for v in vals])
        exact = [Decimal(v) for v in vals]
        mean = sum(exact) / 4
        ss = sum((v - mean) ** 2 for v in exact)
    cs = describe_cells(y, np.zeros(4, int), 1, float(pivot))
    assert math.isclose(cs.offset_mean[0], float(mean - pivot), rel_tol=1e-15)
    assert math.isclose(cs.ss[0], float(ss), rel_tol=1e-14)
