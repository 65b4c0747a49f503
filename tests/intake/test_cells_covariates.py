"""Per-cell covariate statistics (describe_covariates) against numpy and against exact arithmetic."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest

from reporter.intake.cells import CellStats, describe_cells, describe_covariates


def _numpy_reference(y, x, cell, k):
    """Cell means and centred cross-products by numpy (np.mean, np.cov with ddof=0 times n)."""
    p = x.shape[1]
    mean = np.full((k, p), np.nan)
    sxx = np.zeros((k, p, p))
    sxy = np.zeros((k, p))
    for c in range(k):
        rows = cell == c
        if not rows.any():
            continue
        n = rows.sum()
        mean[c] = x[rows].mean(axis=0)
        both = np.cov(np.column_stack([x[rows], y[rows]]).T, ddof=0).reshape(p + 1, p + 1) * n
        sxx[c] = both[:p, :p]
        sxy[c] = both[:p, p]
    return mean, sxx, sxy


@pytest.mark.parametrize("seed,p,k", [(1, 1, 3), (2, 2, 6), (3, 3, 4)])
def test_random_cells_match_numpy(seed, p, k):
    # reference: numpy mean and covariance (np.cov) on seeded random data, unbalanced cells
    rng = np.random.default_rng(seed)
    cell = rng.integers(0, k, size=200)
    x = rng.normal(50, 10, size=(200, p))
    y = x @ rng.normal(size=p) + rng.normal(size=200)
    st = describe_covariates(y, x, cell, k, names=tuple(f"c{j}" for j in range(p)))
    mean, sxx, sxy = _numpy_reference(y, x, cell, k)
    np.testing.assert_allclose(st.offset_mean, mean, rtol=1e-13)
    np.testing.assert_allclose(st.sxx, sxx, rtol=1e-11, atol=1e-9)
    np.testing.assert_allclose(st.sxy, sxy, rtol=1e-11, atol=1e-9)
    assert st.names == tuple(f"c{j}" for j in range(p))
    assert st.p == p
    obs = np.bincount(cell, minlength=k) > 0
    np.testing.assert_allclose(st.pooled_sxx(obs), sxx.sum(axis=0), rtol=1e-12)
    np.testing.assert_allclose(st.pooled_sxy(obs), sxy.sum(axis=0), rtol=1e-12, atol=1e-9)


def test_empty_cell_and_one_row_cell():
    # an empty cell has NaN means and empty (zero) sums; a one-row cell has zero cross-products
    # (definition of a sum over no rows / deviations from a one-value mean; numpy for the rest)
    y = np.array([1.0, 2.0, 4.0, 7.0, 3.0])
    x = np.array([[2.0], [3.0], [5.0], [1.0], [9.0]])
    cell = np.array([0, 0, 0, 2, 3])
    st = describe_covariates(y, x, cell, 4)
    assert np.isnan(st.offset_mean[1]).all()
    assert st.sxx[1, 0, 0] == 0.0 and st.sxy[1, 0] == 0.0
    assert st.sxx[2, 0, 0] == 0.0 and st.offset_mean[2, 0] == 1.0
    assert st.sxx[0, 0, 0] == pytest.approx(np.var([2.0, 3.0, 5.0]) * 3, rel=1e-15)
    assert st.sxy[0, 0] == pytest.approx(np.cov([2.0, 3.0, 5.0], [1.0, 2.0, 4.0], ddof=0)[0, 1] * 3, rel=1e-15)
    assert not st.sxx.flags.writeable and not st.offset_mean.flags.writeable


def test_cellstats_default_has_no_covariates():
    # the new last field defaults to None, so every existing construction keeps working
    cs = describe_cells(np.array([1.0, 2.0, 3.0, 5.0]), np.array([0, 0, 1, 1]), 2)
    assert cs.covariates is None
    cov = describe_covariates(np.array([1.0, 2.0, 3.0, 5.0]), np.array([1.0, 0.0, 2.0, 2.5]), np.array([0, 0, 1, 1]), 2)
    with_cov = CellStats(n=cs.n, offset_mean=cs.offset_mean, ss=cs.ss, pivot=cs.pivot, pivot_exact=cs.pivot_exact, covariates=cov)
    assert with_cov.covariates.p == 1


def _exact_cross(a, b):
    """Σ (a − ā)(b − b̄) in exact rational arithmetic (Python Fractions)."""
    n = len(a)
    ma = sum(a, Fraction(0)) / n
    mb = sum(b, Fraction(0)) / n
    return sum(((u - ma) * (v - mb) for u, v in zip(a, b)), Fraction(0))


def test_large_leading_digits_keep_accuracy():
    # NIST StRD SmLs09-style difficulty (13 constant leading digits; Simon & Lesage 1989): values
    # written as decimals 1000000000000.4, .3, .5 ...; intake subtracts the exact decimal pivot
    # 10^12, and the statistics on the offsets agree with exact rational arithmetic on the
    # written decimals to a relative 1e-14 (LRE >= 14; McCullough 1998).
    rng = np.random.default_rng(9)
    k, per = 3, 41
    digits_x = rng.integers(1, 10, size=(k * per, 2))
    digits_y = rng.integers(1, 10, size=k * per)
    xs_text = [[f"1000000000000.{d}" for d in row] for row in digits_x]
    ys_text = [f"1000000000000.{d}" for d in digits_y]
    pivot = Fraction(10**12)
    x_exact = [[Fraction(t) for t in row] for row in xs_text]
    y_exact = [Fraction(t) for t in ys_text]
    x_off = np.array([[float(v - pivot) for v in row] for row in x_exact])
    y_off = np.array([float(v - pivot) for v in y_exact])
    cell = np.repeat(np.arange(k), per)
    st = describe_covariates(y_off, x_off, cell, k, pivot=np.array([1e12, 1e12]), pivot_exact=(pivot, pivot))
    for c in range(k):
        rows = range(c * per, (c + 1) * per)
        for j in range(2):
            xj = [x_exact[i][j] for i in rows]
            assert abs(st.offset_mean[c, j] - float(sum(xj, Fraction(0)) / per - pivot)) <= 1e-15
            exact_xy = _exact_cross(xj, [y_exact[i] for i in rows])
            assert abs(st.sxy[c, j] - float(exact_xy)) <= 1e-14 * abs(float(exact_xy))
            for l in range(2):
                exact_xx = _exact_cross(xj, [x_exact[i][l] for i in rows])
                assert abs(st.sxx[c, j, l] - float(exact_xx)) <= 1e-14 * abs(float(exact_xx))
    # the mean on the original scale adds the pivot once
    assert st.mean[0, 0] == pytest.approx(1e12 + st.offset_mean[0, 0], rel=1e-16)


def test_covariate_means_follow_the_outcome_path():
    # one number, one path: a covariate column's cell means and SS are bit-for-bit those that
    # describe_cells computes for the same column as an outcome (same grouping and refinement),
    # and its Sxy with itself as outcome equals its Sxx
    rng = np.random.default_rng(4)
    cell = rng.integers(0, 5, size=300)
    x = rng.normal(3.0, 2.0, size=300) * 1e-3 + 123.456
    st = describe_covariates(x, x[:, None], cell, 5)
    ref = describe_cells(x, cell, 5)
    assert np.array_equal(st.offset_mean[:, 0], ref.offset_mean)
    assert np.array_equal(st.sxx[:, 0, 0], ref.ss)
    assert np.array_equal(st.sxy[:, 0], ref.ss)
