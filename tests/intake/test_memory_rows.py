"""MemoryRows, the in-memory row access, against direct numpy / scipy.stats computations.

Reference libraries: numpy (median, quantile type 7 = numpy's default "linear", mean, var) and
scipy.stats (rankdata, tiecorrect, kruskal, levene). Data are seeded simulations (invented).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from reporter.inference.assumptions import homogeneity
from reporter.inference.robust import kruskal_wallis_ranked
from reporter.intake.cells import describe_cells
from reporter.intake.memory_rows import MemoryRows

K = 5  # cell 3 is empty


def _data(n=400, seed=11, ties=True):
    rng = np.random.default_rng(seed)
    cell = rng.choice([0, 1, 2, 4], n, p=[0.1, 0.2, 0.3, 0.4])
    y = rng.normal(cell * 0.4, 1.0 + 0.2 * cell)
    if ties:
        y = np.round(y, 1)
    rows = rng.permutation(n) + 2  # row numbers as a file would give them (header on line 1)
    return y, cell, rows


def _by_cell(y, cell):
    return [y[cell == c] for c in range(K)]


@pytest.fixture
def mem():
    y, cell, rows = _data()
    return MemoryRows(y, cell, K, rows), y, cell, rows


def test_medians_match_numpy(mem):
    """Per-cell medians equal numpy.median of each cell (NaN for the empty cell)."""
    m, y, cell, _ = mem
    got = m.medians()
    for c, v in enumerate(_by_cell(y, cell)):
        if v.size:
            assert got[c] == np.median(v)
        else:
            assert np.isnan(got[c])


@pytest.mark.parametrize("centre", ["mean", "median"])
def test_deviation_stats_match_numpy(mem, centre):
    """n, mean and centred SS of |x − centre| per cell equal numpy on each cell's deviations."""
    m, y, cell, _ = mem
    groups = _by_cell(y, cell)
    ctr = np.array([(np.mean(v) if centre == "mean" else np.median(v)) if v.size else np.nan for v in groups])
    n, mean, ss = m.deviation_stats(ctr)
    for c, v in enumerate(groups):
        assert n[c] == v.size
        if v.size:
            z = np.abs(v - ctr[c])
            assert mean[c] == pytest.approx(z.mean(), rel=1e-13)
            assert ss[c] == pytest.approx(z.var() * z.size, rel=1e-11)


@pytest.mark.parametrize(("center", "method"), [("mean", "Levene"), ("median", "Brown-Forsythe")])
def test_homogeneity_through_memory_rows_matches_scipy_levene(center, method):
    """Levene and Brown–Forsythe through the row access (with an empty design cell) equal
    scipy.stats.levene(center=...) over the observed cells (reference library)."""
    y, cell, rows = _data(ties=False)
    res = homogeneity(MemoryRows(y, cell, K, rows), describe_cells(y, cell, K), center)
    ref = stats.levene(*[v for v in _by_cell(y, cell) if v.size], center=center)
    assert res.method == method
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert res.p == pytest.approx(ref.pvalue, rel=1e-8)


def test_rank_sums_match_scipy_rankdata(mem):
    """Mid-rank sums per cell equal sums of scipy.stats.rankdata(method='average'); the tie term
    gives scipy.stats.tiecorrect's factor 1 − Σ(t³ − t)/(N³ − N)."""
    m, y, cell, _ = mem
    r = m.rank_sums()
    ranks = stats.rankdata(y, method="average")
    np.testing.assert_allclose(r.rank_sum, [ranks[cell == c].sum() for c in range(K)], rtol=1e-14)
    assert r.n == y.size
    assert 1.0 - r.tie_term / (y.size**3 - y.size) == pytest.approx(stats.tiecorrect(ranks), rel=1e-14)


def test_kruskal_from_rank_sums_matches_scipy(mem):
    """H and p from the rank sums equal scipy.stats.kruskal over the observed cells."""
    m, y, cell, _ = mem
    res = kruskal_wallis_ranked(m.rank_sums(), np.bincount(cell, minlength=K))
    ref = stats.kruskal(*[v for v in _by_cell(y, cell) if v.size])
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert res.p == pytest.approx(ref.pvalue, rel=1e-9)
    assert res.df == 3


def test_residual_quantiles_match_numpy_quantile(mem):
    """Type 7 quantiles of (x − mean_c)/scale_c over rows of cells with a usable scale equal
    numpy.quantile (default method "linear" = Hyndman & Fan type 7)."""
    m, y, cell, _ = mem
    means = np.array([v.mean() if v.size else np.nan for v in _by_cell(y, cell)])
    scale = np.array([1.5, 0.0, 2.0, np.nan, 0.5])  # cell 1: zero scale, left out
    probs = [0.0, 0.01, 0.25, 0.5, 0.9, 1.0]
    keep = np.isin(cell, [0, 2, 4])
    ref = np.quantile((y[keep] - means[cell[keep]]) / scale[cell[keep]], probs)
    np.testing.assert_allclose(m.residual_quantiles(means, scale, probs), ref, rtol=1e-14)


def test_cell_points_every_value_or_quantiles():
    """A cell at or below max_points gives every value; a larger one max_points evenly spaced type 7
    quantiles (numpy.quantile), flagged as summarized; both are deterministic."""
    y, cell, rows = _data(n=700)
    m = MemoryRows(y, cell, K, rows)
    pts = m.cell_points(100)
    for c, v in enumerate(_by_cell(y, cell)):
        p = pts[c]
        assert p.n == v.size
        if v.size <= 100:
            assert not p.summarized and sorted(p.values) == sorted(v.tolist())
        else:
            assert p.summarized and len(p.values) == 100
            np.testing.assert_allclose(p.values, np.quantile(v, np.linspace(0, 1, 100)), rtol=1e-14)
    assert MemoryRows(y, cell, K, rows).cell_points(100) == pts


def test_flagged_rows_counts_sums_and_cap(mem):
    """Rows beyond the bound: total, per-cell count and sums of d and d² equal numpy on the mask;
    the listed rows are the largest |d| first, capped, with their row numbers and values."""
    m, y, cell, rows = mem
    centre = np.array([v.mean() if v.size else np.nan for v in _by_cell(y, cell)])
    bound = np.array([0.8, 1.0, np.inf, 0.0, 1.2])  # cell 2: infinite bound, never flagged
    d = y - centre[cell]
    mask = np.isfinite(bound[cell]) & (np.abs(d) > bound[cell])
    f = m.flagged(centre, bound, limit=7)
    assert f.total == mask.sum() > 7
    np.testing.assert_array_equal(f.count, np.bincount(cell[mask], minlength=K))
    np.testing.assert_allclose(f.sum_dev, np.bincount(cell[mask], weights=d[mask], minlength=K), rtol=1e-12)
    np.testing.assert_allclose(f.sum_dev2, np.bincount(cell[mask], weights=d[mask] ** 2, minlength=K), rtol=1e-12)
    assert len(f.rows) == 7
    top = np.flatnonzero(mask)[np.argsort(-np.abs(d[mask]), kind="stable")[:7]]
    assert f.rows == tuple((int(rows[i]), int(cell[i]), float(y[i])) for i in top)


def test_sample_all_rows_or_a_seeded_subset(mem):
    """n ≤ size: every row; otherwise ``size`` distinct rows, the same for the same seed, different
    for another; each sampled value comes with its own cell."""
    m, y, cell, _ = mem
    vals, cells = m.sample(10_000, 1)
    np.testing.assert_array_equal(vals, y)
    np.testing.assert_array_equal(cells, cell)
    a = m.sample(50, 3)
    b = m.sample(50, 3)
    c = m.sample(50, 4)
    np.testing.assert_array_equal(a[0], b[0])
    assert not np.array_equal(a[0], c[0])
    pairs = set(zip(y.tolist(), cell.tolist()))
    assert len(a[0]) == 50 and all((v, k) in pairs for v, k in zip(a[0].tolist(), a[1].tolist()))


def test_arrays_are_the_rows(mem):
    m, y, cell, _ = mem
    got_y, got_cell = m.arrays()
    np.testing.assert_array_equal(got_y, y)
    np.testing.assert_array_equal(got_cell, cell)
    assert m.kind == "memory" and m.n == y.size and m.k == K
