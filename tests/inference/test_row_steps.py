"""Row-level steps through the row access: the outlier screen by a per-cell bound, the outlier
sensitivity by updating cell statistics, bounded Q–Q data, the sequential permutation p, and the
analysis without row access.

Reference library: statsmodels (OLS on the cell-means model: external studentized residuals,
a refit without rows, t tests of contrasts). Data are seeded simulations (invented).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm

from reporter.inference import assumptions as A
from reporter.inference.analysis import fit_analysis, fit_analysis_on_rows
from reporter.numerics.distributions import norm_ppf
from reporter.inference.permutation import _null_distribution, permutation_f_test
from reporter.intake.cells import describe_cells
from reporter.intake.memory_rows import MemoryRows
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_effect, compile_statement


def _heavy(n=3000, k=4, seed=3):
    """Heavy-tailed errors (t, 2 df) so that many rows are flagged."""
    rng = np.random.default_rng(seed)
    cell = rng.integers(0, k, n)
    y = cell * 0.3 + rng.standard_t(2, n)
    return y, cell, k


def _ols(y, cell, k):
    return sm.OLS(y, np.eye(k)[cell]).fit()


def test_per_cell_bound_flags_exactly_the_rows_beyond_t3():
    """|t_i| > 3 ⇔ |e_i| > 3 sqrt(MSE (1 − 1/n_c)) sqrt(df/(df − 1 + 9)): the rows flagged by the bound
    are exactly those whose statsmodels external studentized residual exceeds 3 (reference library),
    with the same t values."""
    y, cell, k = _heavy()
    ext = _ols(y, cell, k).get_influence().resid_studentized_external
    want = np.flatnonzero(np.abs(ext) > 3)
    scan = A.find_outliers(y, cell, k, limit=10_000)
    assert scan.total == want.size > 20
    assert sorted(o.row for o in scan.outliers) == want.tolist()
    for o in scan.outliers:
        assert o.external == pytest.approx(ext[o.row], rel=1e-9)


def test_outlier_list_is_capped_largest_first():
    """The list holds at most ``limit`` rows, the largest |t| first; the total counts all."""
    y, cell, k = _heavy()
    full = A.find_outliers(y, cell, k, limit=10_000)
    capped = A.find_outliers(y, cell, k, limit=5)
    assert capped.total == full.total and len(capped.outliers) == 5
    t = [abs(o.external) for o in capped.outliers]
    assert t == sorted(t, reverse=True) and t[0] == max(abs(o.external) for o in full.outliers)


def test_cells_without_flagged_rows_equal_a_pass_over_the_rest():
    """Updated (n, mean, SS) equal the cell statistics of the remaining rows computed directly."""
    y, cell, k = _heavy()
    rows = MemoryRows(y, cell, k, np.arange(y.size))
    cells = describe_cells(y, cell, k)
    _, flagged = A.screen_outliers(rows, cells, limit=10_000)
    keep = np.ones(y.size, bool)
    keep[[r for r, _, _ in flagged.rows]] = False
    direct = describe_cells(y[keep], cell[keep], k)
    upd = A.cells_without(cells, flagged)
    np.testing.assert_array_equal(upd.n, direct.n)
    np.testing.assert_allclose(upd.offset_mean, direct.offset_mean, rtol=1e-12)
    np.testing.assert_allclose(upd.ss, direct.ss, rtol=1e-10)


def test_outlier_sensitivity_equals_refit_without_the_rows():
    """The planned tests rerun without the flagged rows (by updating the cell table) equal a
    statsmodels OLS refit of the cell-means model without those rows: estimate, SE and t."""
    rng = np.random.default_rng(9)
    n = 90
    cell = np.repeat(np.arange(3), n // 3)
    y = rng.normal(10, 1, n)
    y[[4, 17, 50]] = [16.0, 3.5, 17.0]
    d = build_design([Factor("g", ("a", "b", "c"))], "cell-means")
    hyp = [compile_statement(d, "a > b"), compile_statement(d, "(a + b)/2 = c")]
    a = fit_analysis_on_rows(d, y, cell, hyp, permutations=0)
    s = a.inference.outlier_sensitivity
    assert sorted(s.rows_removed) == [4, 17, 50] and s.n_removed == 3
    keep = np.ones(n, bool)
    keep[[4, 17, 50]] = False
    ref = _ols(y[keep], cell[keep], 3)
    for (name, test, note), C in zip(s.tests, ([1, -1, 0], [0.5, 0.5, -1])):
        r = ref.t_test(np.array([C], float))
        assert note is None
        assert test.estimate == pytest.approx(float(r.effect[0]), rel=1e-10)
        assert test.se == pytest.approx(float(r.sd[0, 0]), rel=1e-10)
        assert test.statistic == pytest.approx(float(r.tvalue[0, 0]), rel=1e-10)


def test_qq_at_most_1000_points_are_order_statistics():
    """Above 1,000 residuals the Q–Q data are 1,000 order statistics at evenly spaced ranks of the
    internally studentized residuals (statsmodels, reference library), paired with Blom positions."""
    y, cell, k = _heavy(n=4321)
    qq = A.qq_points(y, cell, k)
    assert qq.summarized and qq.n_residuals == y.size and len(qq.sample) == len(qq.theoretical) == 1000
    internal = np.sort(_ols(y, cell, k).get_influence().resid_studentized_internal)
    ranks = np.round(np.linspace(1, y.size, 1000)).astype(int)
    np.testing.assert_allclose(qq.sample, internal[ranks - 1], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(qq.theoretical, norm_ppf((ranks - 0.375) / (y.size + 0.25)), rtol=1e-14)


def test_sequential_permutation_p_stops_at_the_h_th_exceedance():
    """Besag & Clifford (1991): the sequential run uses the first l permutations of the full run,
    l being where the h-th permuted F reaches the observed one, and reports p = h / l."""
    rng = np.random.default_rng(2)
    cell = np.repeat(np.arange(3), 15)
    y = rng.normal(0, 1, 45)  # null: a large p
    full = _null_distribution(y, cell, 3, None, 5000, 8)
    cut = full.observed_by_sums - abs(full.observed_by_sums) * 100 * np.finfo(float).eps
    hits = np.flatnonzero(full.null >= cut)
    h = 20
    seq = permutation_f_test(y, cell, 3, n_permutations=5000, seed=8, stop_after=h)
    assert seq.stopped_early and seq.n_extreme == h
    assert seq.n_permutations == hits[h - 1] + 1
    assert seq.p == pytest.approx(h / (hits[h - 1] + 1), rel=1e-15)
    assert seq.max_permutations == 5000


def test_sequential_permutation_runs_to_the_end_when_p_is_small():
    """With fewer than h exceedances in all m permutations the sequential run equals the full run."""
    rng = np.random.default_rng(2)
    cell = np.repeat(np.arange(3), 15)
    y = rng.normal(0, 1, 45) + cell * 0.9
    full = permutation_f_test(y, cell, 3, n_permutations=3000, seed=8)
    seq = permutation_f_test(y, cell, 3, n_permutations=3000, seed=8, stop_after=50)
    assert full.n_extreme < 50
    assert not seq.stopped_early and seq.p == full.p and seq.n_permutations == 3000


def test_long_run_is_announced_before_it_goes_on(monkeypatch):
    """A run whose estimated time exceeds the budget is announced through ``notify`` first."""
    import reporter.inference.permutation as P

    monkeypatch.setattr(P, "TIME_BUDGET", 0.0)
    said = []
    cell = np.repeat(np.arange(3), 10)
    y = np.random.default_rng(1).normal(size=30)
    permutation_f_test(y, cell, 3, n_permutations=500, seed=1, notify=said.append, label="g")
    assert len(said) == 1 and "permutation F test of g" in said[0] and "permutations" in said[0]


def _plant():
    rng = np.random.default_rng(4)
    cell = np.repeat(np.arange(3), 20)
    y = rng.normal(cell * 0.5, 1.0)
    d = build_design([Factor("g", ("a", "b", "c"))], "cell-means")
    return d, y, cell, [compile_effect(d, "g"), compile_statement(d, "a < c")]


def test_without_row_access_every_row_step_is_skipped_with_a_reason():
    """rows=None (a summary table): the classical tests stand, every row-level step says why it is
    missing, nothing raises."""
    d, y, cell, hyps = _plant()
    cells = describe_cells(y, cell, d.k)
    a = fit_analysis(d, cells, None, hyps, permutations=1000, rows_unavailable="not available: summaries only")
    ref = fit_analysis_on_rows(d, y, cell, hyps, permutations=0)
    assert [h.test.p for h in a.hypotheses] == [h.test.p for h in ref.hypotheses]
    inf = a.inference
    assert inf.assumptions.unavailable == "not available: summaries only"
    assert inf.assumptions.brown_forsythe is None and inf.assumptions.qq is None and inf.assumptions.outliers is None
    assert inf.assumptions.shapiro.skipped and inf.assumptions.shapiro.reason == "not available: summaries only"
    assert inf.kruskal is None and inf.kruskal_note == "not available: summaries only"
    assert inf.permutation_note == "not available: summaries only"
    assert all(h.extras.permutation is None for h in a.hypotheses)
    assert inf.outlier_sensitivity is None and a.points is None


def test_permutation_skipped_above_the_row_threshold_with_how_to_force_it():
    d, y, cell, hyps = _plant()
    a = fit_analysis_on_rows(d, y, cell, hyps, permutations=1000, permutation_max_rows=50)
    assert all(h.extras.permutation is None for h in a.hypotheses)
    note = a.inference.permutation_note
    assert "60 rows" in note and "permutation_max_rows = 60" in note
    b = fit_analysis_on_rows(d, y, cell, hyps, permutations=1000, permutation_max_rows=60)
    assert b.hypotheses[0].extras.permutation is not None and b.inference.permutation_note is None
    assert math.isfinite(b.hypotheses[0].extras.permutation.p)
