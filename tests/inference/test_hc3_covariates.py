"""HC3 tests of adjusted cell means with covariates against statsmodels OLS(cov_type="HC3")."""

from __future__ import annotations

import numpy as np
import pytest

from reporter.errors import FitError
from reporter.inference.robust import hc3_adjusted_covariance, hc3_contrast_adjusted, hc3_wald_adjusted

from ancova_cases import adjusting_rows, batches, design_matrix, model_for, simulate, statsmodels_fit

CASES = {
    "one-way, 1 covariate, common": ([7, 12, 9, 15], 1, "common"),
    "2x3, 2 covariates, common": ([6, 11, 8, 14, 9, 10], 2, "common"),
    "one-way, 1 covariate, per-cell": ([9, 12, 10], 1, "per-cell"),
    "2x2, 2 covariates, per-cell": ([9, 12, 10, 14], 2, "per-cell"),
    "2x2, 2 covariates, mixed": ([9, 12, 10, 14], 2, ("per-cell", "common")),
}


def _setup(name, reference=None, batch=5):
    sizes, p, mode = CASES[name]
    k = len(sizes)
    cell, y, x = simulate(sizes, p=p, seed=sum(sizes))
    cells, model, fit, ref = model_for(cell, y, x, k, mode, reference)
    hc = hc3_adjusted_covariance(model, cells.offset_mean, batches(cell, y, x, batch), int(fit.df_resid))
    ref_fit = statsmodels_fit(cell, y, x, k, mode, cov_type="HC3")
    a_raw = adjusting_rows(k, p, mode, ref)
    return k, hc, ref_fit, a_raw


@pytest.mark.parametrize("name", list(CASES), ids=list(CASES))
def test_hc3_covariance_of_adjusted_means_matches_statsmodels(name):
    """A·cov_HC3(beta)·A' from statsmodels OLS(cov_type="HC3") (reference library) equals the
    covariance built from row batches of 5 rows, to 1e-9 relative."""
    k, hc, ref_fit, a_raw = _setup(name)
    expected = a_raw @ np.asarray(ref_fit.cov_params()) @ a_raw.T
    np.testing.assert_allclose(hc.cov, expected, rtol=1e-9, atol=1e-12 * np.abs(expected).max())


@pytest.mark.parametrize("name", list(CASES), ids=list(CASES))
def test_hc3_wald_f_matches_statsmodels_f_test(name):
    """The HC3 Wald F of all adjusted-mean differences equals statsmodels' f_test of L = C·A on
    the HC3 fit (reference library) to 1e-9 relative, with the same df; at a reference value other
    than the covariate means as well."""
    for reference in (None, [55.0, 40.0][: CASES[name][1]]):
        k, hc, ref_fit, a_raw = _setup(name, reference)
        C = np.hstack([np.eye(k - 1), -np.ones((k - 1, 1))])
        d = C @ a_raw @ np.asarray(ref_fit.params)
        res = hc3_wald_adjusted(C, d, hc)
        ref = ref_fit.f_test(C @ a_raw)
        assert res.statistic == pytest.approx(float(ref.fvalue), rel=1e-9)
        assert (res.df1, res.df2) == (int(ref.df_num), int(ref.df_denom))
        assert res.p == pytest.approx(float(ref.pvalue), rel=1e-8)


def test_hc3_t_matches_statsmodels_t_test():
    """One contrast with h ≠ 0: t, SE and p equal statsmodels' t_test on the HC3 fit (reference
    library); the interval is estimate ± t quantile · SE."""
    k, hc, ref_fit, a_raw = _setup("2x3, 2 covariates, common")
    c = np.array([1.0, -1.0, 0.0, 0.5, -0.5, 0.0])
    h = 0.25
    d = float(c @ a_raw @ np.asarray(ref_fit.params)) - h
    res = hc3_contrast_adjusted(c, d, h, hc, alpha=0.05)
    ref = ref_fit.t_test((c @ a_raw, h))
    assert res.statistic == pytest.approx(np.asarray(ref.tvalue).item(), rel=1e-9)
    assert res.se == pytest.approx(np.asarray(ref.sd).item(), rel=1e-9)
    assert res.p == pytest.approx(np.asarray(ref.pvalue).item(), rel=1e-8)
    low, high = np.asarray(ref.conf_int(alpha=0.05)).ravel()
    assert (res.ci_low, res.ci_high) == (pytest.approx(low, rel=1e-9), pytest.approx(high, rel=1e-9))


def test_batch_size_does_not_change_the_covariance():
    """Identity: the sums do not depend on how the rows are cut into batches."""
    _, hc1, _, _ = _setup("2x3, 2 covariates, common", batch=1)
    _, hc2, _, _ = _setup("2x3, 2 covariates, common", batch=10_000)
    np.testing.assert_allclose(hc1.cov, hc2.cov, rtol=1e-12)


def test_leverage_one_cell_is_refused_only_when_used():
    """A cell of one row (leverage 1) has no HC3 variance: a contrast using it is refused with
    the cell named; one that leaves it out is computed and matches statsmodels (reference)."""
    cell, y, x = simulate([8, 9, 1, 10], p=1, seed=5)
    k = 4
    cells, model, fit, ref = model_for(cell, y, x, k, "common")
    hc = hc3_adjusted_covariance(model, cells.offset_mean, batches(cell, y, x, 7), int(fit.df_resid))
    with pytest.raises(FitError, match="cell c.*leverage 1"):
        hc3_wald_adjusted(np.array([[0, 1.0, -1, 0]]), np.array([0.1]), hc, labels=["a", "b", "c", "d"])
    C = np.array([[1.0, -1, 0, 0], [1.0, 0, 0, -1]])
    a_raw = adjusting_rows(k, 1, "common", ref)
    beta = np.asarray(fit.params)
    res = hc3_wald_adjusted(C, C @ a_raw @ beta, hc)
    ref_fit = statsmodels_fit(cell, y, x, k, "common", cov_type="HC3")
    with np.errstate(all="ignore"):
        cov = np.asarray(ref_fit.cov_params())
    L = C @ a_raw
    dd = L @ beta
    expected = float(dd @ np.linalg.solve(L @ cov @ L.T, dd)) / 2
    assert res.statistic == pytest.approx(expected, rel=1e-9)
