"""Freedman-Lane permutation F with covariates: against a direct numpy implementation of the same
scheme with the same seed, the observed F against statsmodels, and its behaviour under the null."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import null_space

from reporter.errors import FitError
from reporter.inference.permutation import permutation_f_test

from ancova_cases import adjusting_rows, design_matrix, fitted_model, simulate, statsmodels_fit


def _rss(X, y):
    beta, *_ = np.linalg.lstsq(X, y, rcond=None)
    r = y - X @ beta
    return float(r @ r), X @ beta


def _direct(cell, y, x, k, C, mode, reference, m, seed):
    """Freedman & Lane (1983) written out with explicit design matrices and least squares: the
    reduced model is the covariance model restricted by C·mu_adj = 0 (its design X·N, N a basis of
    the null space of L = C·A); its residuals, in rows sorted by cell, are shuffled by the same
    SFC64 stream one permutation at a time; F is (RSS_reduced - RSS_full)/q over RSS_full/df."""
    X = design_matrix(cell, x, k, mode)
    L = C @ adjusting_rows(k, x.shape[1], mode, reference)
    Xr = X @ null_space(L)
    q = np.linalg.matrix_rank(L)
    df = cell.size - np.linalg.matrix_rank(X)

    def F(yy):
        full, _ = _rss(X, yy)
        red, _ = _rss(Xr, yy)
        return ((red - full) / q) / (full / df)

    observed = F(y)
    _, fitted0 = _rss(Xr, y)
    order = np.argsort(cell, kind="stable")
    e0 = (y - fitted0)[order]
    X, Xr, fitted0 = X[order], Xr[order], fitted0[order]
    rng = np.random.Generator(np.random.SFC64(seed))
    cut = observed - abs(observed) * 100.0 * np.finfo(float).eps
    extreme = 0
    for _ in range(m):
        row = e0.copy()[None, :]
        rng.permuted(row, axis=1, out=row)
        extreme += F(fitted0 + row[0]) >= cut
    return observed, extreme


CASES = {
    "one-way, 1 covariate, common": ([8, 11, 7, 10], 1, "common", None),
    "2x2 interaction, 2 covariates, common": ([7, 9, 8, 10], 2, "common", [[1.0, -1.0, -1.0, 1.0]]),
    "one-way, 1 covariate, per-cell, at 55": ([9, 10, 12], 1, "per-cell", None),
    "2x2 main effect, 2 covariates, mixed": ([9, 10, 12, 11], 2, ("common", "per-cell"), [[1.0, 1.0, -1.0, -1.0]]),
}


@pytest.mark.parametrize("name", list(CASES), ids=list(CASES))
def test_freedman_lane_with_covariates_matches_direct_implementation(name):
    """Same seed, same scheme: the count of permuted F at or above the observed one and hence p
    equal those of the direct implementation (explicit designs, numpy lstsq) exactly; the observed
    F equals it to 1e-9."""
    sizes, p, mode, C = CASES[name]
    k = len(sizes)
    cell, y, x = simulate(sizes, p=p, seed=7 + k, effects=[0.0, 0.4, 0.8, 0.2][:k])
    C = np.hstack([np.eye(k - 1), -np.ones((k - 1, 1))]) if C is None else np.asarray(C)
    reference = np.array([55.0]) if "at 55" in name else x.mean(axis=0)
    m = 199
    model, means = fitted_model(cell, y, x, k, mode, reference)
    res = permutation_f_test(y, cell, k, C, n_permutations=m, seed=31, x=x, covariate_model=model, cell_means=means)
    observed, extreme = _direct(cell, y, x, k, C, mode, reference, m, 31)
    assert res.statistic == pytest.approx(observed, rel=1e-9)
    assert res.n_extreme == extreme
    assert res.p == (extreme + 1) / (m + 1)
    assert "covariates kept" in res.method


def test_observed_f_matches_statsmodels_f_test():
    """The observed F of an adjusted-mean contrast equals statsmodels OLS f_test of L = C·A
    (reference library) to 1e-9 relative."""
    cell, y, x = simulate([6, 9, 8, 12, 7, 10], p=2, seed=99)
    k = 6
    C = np.array([[1.0, 1, 1, -1, -1, -1]]) / 3
    model, means = fitted_model(cell, y, x, k, "common")
    res = permutation_f_test(y, cell, k, C, n_permutations=10, seed=1, x=x, covariate_model=model, cell_means=means)
    ref = statsmodels_fit(cell, y, x, k, "common").f_test(C @ adjusting_rows(k, 2, "common", x.mean(axis=0)))
    assert res.statistic == pytest.approx(float(ref.fvalue), rel=1e-9)
    assert (res.df1, res.df2) == (int(ref.df_num), int(ref.df_denom))


def test_sequential_stopping_and_seed_reproduce():
    """The same seed gives the same p; sequential stopping (Besag & Clifford 1991) stops at the
    h-th exceedance with p = h / l for a null effect."""
    cell, y, x = simulate([10, 10, 10], p=1, seed=3, effects=[0.0, 0.0, 0.0])
    C = np.array([[1.0, -1, 0], [0, 1, -1]])
    model, means = fitted_model(cell, y, x, 3, "common")
    kw = dict(n_permutations=2000, seed=5, x=x, stop_after=20, covariate_model=model, cell_means=means)
    a = permutation_f_test(y, cell, 3, C, **kw)
    b = permutation_f_test(y, cell, 3, C, **kw)
    assert a == b
    if a.stopped_early:
        assert a.p == 20 / a.n_permutations


def test_null_rejection_rate_is_near_alpha():
    """Under the null (no adjusted-mean differences, a strong covariate, unequal cell sizes) the
    permutation p falls at or below .10 in a share of 400 simulated data sets within the 99.9%
    binomial band around .10 (simulated data; the exactness of the scheme is the claim of
    Anderson & Robinson 2001)."""
    hits = 0
    runs = 400
    for s in range(runs):
        cell, y, x = simulate([5, 8, 6], p=1, seed=1000 + s, effects=[0.0, 0.0, 0.0], slopes=[0.8], hetero=False)
        model, means = fitted_model(cell, y, x, 3, "common")
        res = permutation_f_test(y, cell, 3, None, n_permutations=99, seed=s, x=x, covariate_model=model,
                                 cell_means=means)
        hits += res.p <= 0.10
    band = 3.29 * np.sqrt(0.1 * 0.9 / runs)
    assert abs(hits / runs - 0.10) < band


def test_bad_covariate_array_refused():
    """Covariates of the wrong length are refused with a message naming 'x'."""
    cell, y, x = simulate([5, 5], p=1, seed=1)
    model, means = fitted_model(cell, y, x, 2, "common")
    with pytest.raises(FitError, match="'x' must be"):
        permutation_f_test(y, cell, 2, None, n_permutations=9, seed=1, x=x[:-1], covariate_model=model,
                           cell_means=means)
