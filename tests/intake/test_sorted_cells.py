"""Each cell's sorted values (reporter.intake.sorted_cells) against scipy.stats and numpy as
reference libraries, with slabs small enough that every merge crosses many of them."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.stats
from hypothesis import given, settings
from hypothesis import strategies as st

from reporter.intake import sorted_cells
from reporter.intake.cells import describe_cells
from reporter.intake.sorted_cells import SortedCells, tie_term


def _data(seed: int, n: int, k: int, decimals: int | None):
    rng = np.random.default_rng(seed)
    cell = rng.integers(0, k, n)
    y = rng.normal(0.0, 3.0, n) + cell
    if decimals is not None:
        y = np.round(y, decimals)  # ties within and across cells
    return y, cell


@pytest.fixture(params=[1, 7, 1 << 20])
def slab(request, monkeypatch):
    monkeypatch.setattr(sorted_cells, "_SLAB", request.param)
    return request.param


@pytest.mark.parametrize("decimals", [None, 1, 0])
def test_rank_sums_equal_scipy_rankdata(slab, decimals):
    y, cell = _data(3, 2000, 5, decimals)
    got = SortedCells.from_rows(y, cell, 5).rank_sums()
    ranks = scipy.stats.rankdata(y)  # mid-ranks (scipy.stats as reference library)
    np.testing.assert_array_equal(got.rank_sum, np.bincount(cell, weights=ranks, minlength=5))
    _, t = np.unique(y, return_counts=True)
    assert got.tie_term == float(np.sum(t.astype(float) ** 3 - t)) and got.n == y.size


@pytest.mark.parametrize("decimals", [None, 1])
def test_pooled_quantiles_equal_numpy(slab, decimals):
    y, cell = _data(4, 1500, 4, decimals)
    s = SortedCells.from_rows(y, cell, 4)
    means = np.array([0.5, 1.0, -2.0, 3.0])
    scale = np.array([2.0, np.nan, 0.7, 3.0])  # cell 1 left out
    keep = np.isfinite(scale[cell])
    probs = np.linspace(0.0, 1.0, 101)
    ref = np.quantile((y[keep] - means[cell[keep]]) / scale[cell[keep]], probs)  # numpy type 7
    np.testing.assert_allclose(s.pooled_quantiles(means, scale, probs), ref, rtol=1e-12, atol=0)


def test_order_answers_equal_numpy_and_describe_cells():
    y, cell = _data(5, 3000, 6, 1)
    cell[cell == 2] = 3  # an empty cell
    s = SortedCells.from_rows(y, cell, 6)
    med = np.array([np.median(y[cell == c]) if (cell == c).any() else np.nan for c in range(6)])
    np.testing.assert_allclose(s.medians(), med, rtol=1e-15, atol=0)
    n, m, ss = s.deviation_stats(np.nan_to_num(med))
    ref = describe_cells(np.abs(y - np.nan_to_num(med)[cell]), cell, 6)
    np.testing.assert_array_equal(n, ref.n)
    np.testing.assert_array_equal(m[n > 0], ref.offset_mean[n > 0])
    np.testing.assert_array_equal(ss[n > 0], ref.ss[n > 0])
    for c, p in enumerate(s.cell_points(300)):
        seg = np.sort(y[cell == c])
        assert p.n == seg.size and p.summarized == (seg.size > 300)
        want = np.quantile(seg, np.linspace(0, 1, 300)) if p.summarized else seg
        np.testing.assert_allclose(p.values, want, rtol=1e-12, atol=0)


def test_chunks_give_the_same_cells_and_bad_counts_are_refused():
    y, cell = _data(6, 999, 3, None)
    whole = SortedCells.from_rows(y, cell, 3)
    counts = np.bincount(cell, minlength=3)
    chunked = SortedCells.from_chunks(((cell[i : i + 100], y[i : i + 100]) for i in range(0, 999, 100)), counts)
    for c in range(3):
        np.testing.assert_array_equal(whole.segment(c), chunked.segment(c))
    with pytest.raises(ValueError, match="outside"):
        SortedCells.from_chunks([(cell + 1, y)], counts)
    with pytest.raises(ValueError, match="more rows"):
        SortedCells.from_chunks([(cell, y)], counts - np.array([1, 0, 0]))
    with pytest.raises(ValueError, match="fewer rows"):
        SortedCells.from_chunks([(cell[:10], y[:10])], counts)


def test_inputs_are_not_changed():
    y, cell = _data(8, 500, 3, None)
    y0, c0 = y.copy(), cell.copy()
    SortedCells.from_rows(y, cell, 3).rank_sums()
    assert np.array_equal(y, y0) and np.array_equal(cell, c0)


def test_tie_term_is_exact_beyond_int64():
    t = np.array([1, 2, 3, 1 << 22], dtype=np.int64)
    assert tie_term(t) == 6 + 24 + (1 << 66) - (1 << 22)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 3), st.sampled_from([-1.5, 0.0, 0.25, 2.0, 7.0, 1e300, -0.0])),
                min_size=1, max_size=60),
       st.integers(1, 9))
def test_random_ties_and_slabs(pairs, slab_size):
    """Heavy ties and signed zeros, any slab size: rank sums equal scipy's mid-ranks."""
    cell = np.array([c for c, _ in pairs])
    y = np.array([v for _, v in pairs])
    old = sorted_cells._SLAB
    sorted_cells._SLAB = slab_size
    try:
        got = SortedCells.from_rows(y, cell, 4).rank_sums()
    finally:
        sorted_cells._SLAB = old
    ranks = scipy.stats.rankdata(y)
    np.testing.assert_array_equal(got.rank_sum, np.bincount(cell, weights=ranks, minlength=4))


@settings(max_examples=80, deadline=None)
@given(st.lists(st.lists(st.tuples(st.sampled_from([-2.0, -0.0, 0.0, 0.5, 1.0, 3.0, 1e-300]), st.integers(1, 4)),
                         max_size=8), min_size=1, max_size=4))
def test_pooled_order_stats_of_weighted_runs(cells):
    """The order statistics of distinct values with counts, pooled over runs, without merging
    them: equal to indexing numpy's sort of the expanded multiset (reference)."""
    from reporter.intake.duck.rows import pooled_order_stats

    runs, cums, expanded = [], [], []
    for pairs in cells:
        vals = {}
        for v, m in pairs:
            vals[v] = vals.get(v, 0) + m  # one entry per distinct value (-0.0 and 0.0 are one)
        v = np.array(sorted(vals), dtype=np.float64)
        w = np.array([vals[x] for x in sorted(vals)], dtype=np.int64)
        runs.append(v)
        cums.append(np.cumsum(w))
        expanded.append(np.repeat(v, w))
    pooled = np.sort(np.concatenate(expanded))
    if pooled.size == 0:
        return
    ranks = np.arange(pooled.size)
    np.testing.assert_array_equal(pooled_order_stats(runs, cums, ranks), pooled)
