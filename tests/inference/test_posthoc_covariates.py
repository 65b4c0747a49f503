"""Post-hoc families and standardized contrasts on covariate-adjusted means, against statsmodels
OLS (reference library) for the adjusted differences and their SEs, scipy.stats for the
studentized range and F, and scipy.stats.multivariate_t for Dunnett's probability."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from reporter.errors import FitError
from reporter.inference.effectsizes import standardized_contrast
from reporter.inference.posthoc import dunnett, scheffe_pairs, tukey_kramer

from ancova_cases import adjusting_rows, simulate, statsmodels_fit


def _adjusted(sizes, p=1, seed=11, mode="common"):
    """Adjusted means, U = A (X'X)^-1 A', MSE and df from statsmodels OLS (reference library)."""
    k = len(sizes)
    cell, y, x = simulate(sizes, p=p, seed=seed)
    fit = statsmodels_fit(cell, y, x, k, mode)
    a = adjusting_rows(k, p, mode, x.mean(axis=0))
    return (a @ np.asarray(fit.params), a @ np.asarray(fit.normalized_cov_params) @ a.T, float(fit.mse_resid),
            float(fit.df_resid), fit, a, np.bincount(cell, minlength=k))


def test_tukey_kramer_on_adjusted_means():
    """Each pair's difference and SE equal statsmodels' t_test of (e_i − e_j)'A·beta (reference
    library) to 1e-9; the adjusted p is scipy.stats.studentized_range.sf(√2|t|, g, df) (reference)."""
    est, U, mse, df, fit, a, n = _adjusted([8, 12, 9, 14], p=2)
    fam = tukey_kramer(est, n, mse, df, cov=U)
    for c in fam.comparisons:
        L = (np.eye(4)[c.first] - np.eye(4)[c.second]) @ a
        ref = fit.t_test(L)
        assert c.difference == pytest.approx(np.asarray(ref.effect).item(), rel=1e-9)
        assert c.se == pytest.approx(np.asarray(ref.sd).item(), rel=1e-9)
        assert c.p_adjusted == pytest.approx(stats.studentized_range.sf(np.sqrt(2) * abs(c.statistic), 4, df),
                                             abs=1e-8)


def test_scheffe_on_adjusted_means():
    """Scheffé p = P(F(g − 1, df) ≥ t²/(g − 1)) with t from statsmodels' adjusted difference
    (reference libraries scipy.stats.f and statsmodels)."""
    est, U, mse, df, fit, a, n = _adjusted([7, 10, 12], p=1, seed=4)
    fam = scheffe_pairs(est, n, mse, df, cov=U)
    for c in fam.comparisons:
        t = np.asarray(fit.t_test((np.eye(3)[c.first] - np.eye(3)[c.second]) @ a).tvalue).item()
        assert c.statistic == pytest.approx(t, rel=1e-9)
        assert c.p_adjusted == pytest.approx(stats.f.sf(t * t / 2, 2, df), rel=1e-9)


@pytest.mark.parametrize("sizes", [[9, 11, 10], [8, 12, 9, 14]], ids=["2 comparisons", "3 comparisons"])
def test_dunnett_on_adjusted_means(sizes):
    """Two or three comparisons with the control have an exact one-factor correlation
    (lam_i^2 = r_ij r_ik / r_jk) whatever U: p equals 1 − P(max |T_i| < |t|) from
    scipy.stats.multivariate_t with the correlation of the adjusted differences (reference
    library, randomized quasi-Monte Carlo, so to 5e-4)."""
    g = len(sizes)
    est, U, mse, df, fit, a, n = _adjusted(sizes, p=2, seed=21)
    fam = dunnett(est, n, mse, df, control=0, cov=U)
    D = np.hstack([-np.ones((g - 1, 1)), np.eye(g - 1)])
    V = D @ U @ D.T
    corr = V / np.sqrt(np.outer(np.diag(V), np.diag(V)))
    mvt = stats.multivariate_t(loc=np.zeros(g - 1), shape=corr, df=df, seed=1)
    for c in fam.comparisons:
        t = abs(c.statistic)
        inside = mvt.cdf(np.full(g - 1, t), lower_limit=np.full(g - 1, -t))
        assert c.p_adjusted == pytest.approx(1 - inside, abs=5e-4)


def test_dunnett_refuses_general_covariance_with_reason():
    """Four or more comparisons whose adjusted differences lack the one-factor correlation are
    refused, and the message says why and what to use instead."""
    est, U, mse, df, fit, a, n = _adjusted([8, 12, 9, 14, 10], p=2, seed=5)
    with pytest.raises(FitError, match="estimated covariate slopes.*Tukey–Kramer"):
        dunnett(est, n, mse, df, control=0, cov=U)


def test_standardized_contrast_on_adjusted_means():
    """d = (c'mu_adj − h)/sqrt(MSE_adj) and t = d/sqrt(c'Uc) equal the statsmodels t of the
    adjusted contrast (reference library); the method names the adjusted model's residual SD."""
    est, U, mse, df, fit, a, n = _adjusted([8, 12, 9], p=1, seed=8)
    c = np.array([1.0, -0.5, -0.5])
    es = standardized_contrast(c, 0.0, float(c @ est), n, mse, df, cov=U)
    ref_t = np.asarray(fit.t_test(c @ a).tvalue).item()
    assert es.t == pytest.approx(ref_t, rel=1e-9)
    assert es.d.value == pytest.approx(float(c @ est) / np.sqrt(mse), rel=1e-12)
    assert "covariate-adjusted model" in es.d.method


def test_dunnett_with_per_cell_slopes_any_number_of_groups():
    """With a slope per cell the adjusted means are uncorrelated, so five groups (four
    comparisons) keep the one-factor structure; p matches scipy.stats.multivariate_t (reference
    library, randomized quasi-Monte Carlo, so to 5e-4)."""
    sizes = [8, 12, 9, 14, 10]
    est, U, mse, df, fit, a, n = _adjusted(sizes, p=1, seed=6, mode="per-cell")
    assert np.allclose(U, np.diag(np.diag(U)), atol=1e-12)
    fam = dunnett(est, n, mse, df, control=0, cov=U)
    D = np.hstack([-np.ones((4, 1)), np.eye(4)])
    V = D @ U @ D.T
    corr = V / np.sqrt(np.outer(np.diag(V), np.diag(V)))
    mvt = stats.multivariate_t(loc=np.zeros(4), shape=corr, df=df, seed=2)
    for c in fam.comparisons:
        t = abs(c.statistic)
        assert c.p_adjusted == pytest.approx(1 - mvt.cdf(np.full(4, t), lower_limit=np.full(4, -t)), abs=5e-4)
