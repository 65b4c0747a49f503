"""Tests of reporter.inference.robust against scipy.stats, statsmodels and published PlantGrowth
values."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import pandas as pd
import statsmodels.api as sm
import statsmodels.stats.oneway as oneway
from scipy import stats

from reporter.errors import FitError
from reporter.inference.robust import (
    _average_ranks,
    games_howell,
    hc3_wald,
    kruskal_wallis,
    welch_anova,
    welch_contrast,
)

from conftest import plant_growth_codes


DATA = Path(__file__).parents[1] / "data"


def _stats(y, codes, k):
    """n, mean and centred SS per cell computed directly with numpy."""
    n = np.array([np.sum(codes == c) for c in range(k)])
    mean = np.array([y[codes == c].mean() if n[c] else 0.0 for c in range(k)])
    ss = np.array([((y[codes == c] - mean[c]) ** 2).sum() for c in range(k)])
    return n, mean, ss


def _random_unbalanced():
    """Five cells, unequal sizes and unequal spreads."""
    rng = np.random.default_rng(8675309)
    sizes = [6, 14, 9, 4, 20]
    codes = np.repeat(np.arange(5), sizes)
    y = rng.normal(np.repeat([0.0, 0.5, 1.0, 0.3, 0.8], sizes), np.repeat([0.5, 1, 2, 0.7, 1.5], sizes))
    return y, codes, 5


def _random_2x3():
    """A 2 x 3 design (cells in A-major order), unbalanced, heteroscedastic."""
    rng = np.random.default_rng(4242)
    sizes = [5, 9, 7, 12, 4, 8]
    codes = np.repeat(np.arange(6), sizes)
    mu = np.repeat([1.0, 1.5, 2.5, 1.2, 2.4, 2.0], sizes)
    sd = np.repeat([0.5, 1.0, 1.5, 0.8, 2.0, 1.2], sizes)
    return rng.normal(mu, sd), codes, 6


DATASETS = {"PlantGrowth": plant_growth_codes, "random-unbalanced": _random_unbalanced}


@pytest.mark.parametrize("name", list(DATASETS), ids=list(DATASETS))
def test_welch_anova_matches_statsmodels(name):
    """F, df1, df2 and p equal statsmodels anova_oneway(use_var='unequal') (reference library)."""
    y, codes, k = DATASETS[name]()
    res = welch_anova(*_stats(y, codes, k))
    ref = oneway.anova_oneway(y, codes, use_var="unequal", welch_correction=True)
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert res.df1 == pytest.approx(ref.df[0], rel=1e-12)
    assert res.df2 == pytest.approx(ref.df[1], rel=1e-10)
    assert res.p == pytest.approx(ref.pvalue, rel=1e-8)


def test_welch_anova_plant_growth_published():
    """PlantGrowth: Welch F(2, 17.13) = 5.18, p = .017 (R's oneway.test output for these data,
    values from memory). The binding check is statsmodels anova_oneway(use_var="unequal")
    (reference library), here and in test_welch_anova_matches_statsmodels."""
    res = welch_anova(*_stats(*plant_growth_codes()))
    assert res.statistic == pytest.approx(5.18, abs=5e-3)
    assert res.df2 == pytest.approx(17.13, abs=5e-3)
    assert res.p == pytest.approx(0.017, abs=5e-4)


def test_welch_anova_ignores_empty_cells():
    """An empty cell changes nothing (identity)."""
    y, codes, k = _random_unbalanced()
    n, mean, ss = _stats(y, codes, k)
    a = welch_anova(n, mean, ss)
    b = welch_anova(np.append(n, 0), np.append(mean, 0.0), np.append(ss, 0.0))
    assert a == b


@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"], ids=str)
def test_welch_contrast_two_cells_matches_scipy_ttest(alternative):
    """A two-cell contrast equals scipy.stats.ttest_ind(equal_var=False): t, df, p, interval
    (reference library)."""
    y, codes, k = _random_unbalanced()
    n, mean, ss = _stats(y, codes, k)
    c = np.zeros(k)
    c[2], c[4] = 1.0, -1.0
    res = welch_contrast(c, n, mean, ss, alternative=alternative, alpha=0.1)
    ref = stats.ttest_ind(y[codes == 2], y[codes == 4], equal_var=False, alternative=alternative)
    ci = ref.confidence_interval(0.9)
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert res.df == pytest.approx(ref.df, rel=1e-10)
    assert res.p == pytest.approx(ref.pvalue, rel=1e-8)
    assert res.ci_low == pytest.approx(ci.low, rel=1e-8)
    assert res.ci_high == pytest.approx(ci.high, rel=1e-8)


def test_welch_contrast_three_cells_matches_hand_formula():
    """A 3-cell contrast with h != 0 matches Satterthwaite's formula written out with numpy
    (Satterthwaite 1946, Biometrics Bulletin 2, 110-114)."""
    y, codes, k = _random_unbalanced()
    n, mean, ss = _stats(y, codes, k)
    c = np.array([1.0, -0.5, -0.5, 0.0, 0.0])
    groups = [y[codes == i] for i in range(3)]
    a = [c[i] ** 2 * g.var(ddof=1) / g.size for i, g in enumerate(groups)]
    se = np.sqrt(sum(a))
    df = sum(a) ** 2 / sum(ai**2 / (g.size - 1) for ai, g in zip(a, groups))
    est = sum(c[i] * g.mean() for i, g in enumerate(groups))
    t = (est - 0.2) / se
    res = welch_contrast(c, n, mean, ss, h=0.2)
    assert res.se == pytest.approx(se, rel=1e-12)
    assert res.df == pytest.approx(df, rel=1e-12)
    assert res.statistic == pytest.approx(t, rel=1e-12)
    assert res.p == pytest.approx(2 * stats.t.sf(abs(t), df), rel=1e-10)
    q = stats.t.ppf(0.975, df)
    assert (res.ci_low, res.ci_high) == pytest.approx((est - q * se, est + q * se), rel=1e-10)


def test_welch_contrast_rejects_single_row_cell():
    """A used cell with one row has no variance: FitError names the cell."""
    with pytest.raises(FitError, match="cell 1 has one row"):
        welch_contrast([1, -1, 0], [4, 1, 5], [1.0, 2.0, 3.0], [2.0, 0.0, 3.0])
    with pytest.raises(FitError, match="cell dose=high has one row"):
        welch_contrast([1, -1, 0], [4, 1, 5], [1.0, 2.0, 3.0], [2.0, 0.0, 3.0],
                       labels=["dose=low", "dose=high", "dose=mid"])


@pytest.mark.parametrize("name", list(DATASETS), ids=list(DATASETS))
def test_games_howell_matches_scipy(name):
    """Differences, p and 95% intervals equal scipy.stats.tukey_hsd(equal_var=False), scipy's
    Games-Howell (reference library)."""
    y, codes, k = DATASETS[name]()
    ref = stats.tukey_hsd(*[y[codes == c] for c in range(k)], equal_var=False)
    ci = ref.confidence_interval(0.95)
    fam = games_howell(*_stats(y, codes, k))
    assert fam.method == "Games-Howell" and len(fam.comparisons) == k * (k - 1) // 2
    for comp in fam.comparisons:
        i, j = comp.first, comp.second
        assert comp.difference == pytest.approx(ref.statistic[i, j], rel=1e-12)
        assert comp.p_adjusted == pytest.approx(ref.pvalue[i, j], rel=1e-6, abs=1e-10)
        assert comp.ci_low == pytest.approx(ci.low[i, j], rel=1e-8)
        assert comp.ci_high == pytest.approx(ci.high[i, j], rel=1e-8)


def _tied_data():
    rng = np.random.default_rng(99)
    sizes = [8, 11, 6, 13]
    codes = np.repeat(np.arange(4), sizes)
    y = np.round(rng.normal(np.repeat([0, 0.4, 0.9, 0.2], sizes), 1.0), 1)
    return y, codes, 4


KW_CASES = {"PlantGrowth": plant_growth_codes, "random-unbalanced": _random_unbalanced, "ties": _tied_data}


@pytest.mark.parametrize("name", list(KW_CASES), ids=list(KW_CASES))
def test_kruskal_wallis_matches_scipy(name):
    """H (tie-corrected) and p equal scipy.stats.kruskal (reference library)."""
    y, codes, k = KW_CASES[name]()
    res = kruskal_wallis(y, codes, k)
    ref = stats.kruskal(*[y[codes == c] for c in range(k)])
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert res.p == pytest.approx(ref.pvalue, rel=1e-8)
    assert res.df == k - 1


RANK_CASES = {
    "distinct": np.random.default_rng(11).normal(size=37),
    "ties": np.round(np.random.default_rng(12).normal(size=200), 1),
    "all-equal": np.full(9, 2.5),
    "one-value": np.array([4.0]),
    "signed-zero-and-runs": np.array([0.0, -0.0, 3.0, 3.0, 3.0, -1.0, 3.0, -1.0]),
}


@pytest.mark.parametrize("name", list(RANK_CASES), ids=list(RANK_CASES))
def test_average_ranks_match_scipy_rankdata(name):
    """Mid-ranks equal scipy.stats.rankdata(method='average') exactly (reference library)."""
    y = RANK_CASES[name]
    np.testing.assert_array_equal(_average_ranks(y), stats.rankdata(y, method="average"))


def test_kruskal_wallis_ties_change_the_correction():
    """With ties the correction factor is below 1; without ties it is exactly 1 (Kruskal & Wallis
    1952)."""
    assert kruskal_wallis(*_tied_data()).tie_correction < 1.0
    assert kruskal_wallis(*_random_unbalanced()).tie_correction == 1.0


def _hc3_reference(y, codes, k, C):
    fit = sm.OLS(y, np.eye(k)[codes]).fit(cov_type="HC3")
    return fit.f_test(C)


HC3_CONTRASTS = {
    "interaction": np.kron(np.array([[1.0, -1.0]]), np.array([[1.0, -1.0, 0.0], [0.0, 1.0, -1.0]])),
    "main-A": np.kron(np.array([[1.0, -1.0]]), np.full((1, 3), 1 / 3)),
    "main-B": np.kron(np.full((1, 2), 0.5), np.array([[1.0, -1.0, 0.0], [0.0, 1.0, -1.0]])),
    "one-row": np.array([[1.0, 0.0, -1.0, 0.0, 0.0, 0.0]]),
}


@pytest.mark.parametrize("name", list(HC3_CONTRASTS), ids=list(HC3_CONTRASTS))
def test_hc3_wald_matches_statsmodels(name):
    """F, df and p equal statsmodels OLS(cov_type='HC3').f_test(C) on the cell-means model of a
    random unbalanced 2 x 3 design (reference library)."""
    y, codes, k = _random_2x3()
    C = HC3_CONTRASTS[name]
    res = hc3_wald(C, *_stats(y, codes, k))
    ref = _hc3_reference(y, codes, k, C)
    assert res.statistic == pytest.approx(float(np.squeeze(ref.fvalue)), rel=1e-10)
    assert res.df1 == int(ref.df_num) and res.df2 == int(ref.df_denom)
    assert res.p == pytest.approx(float(ref.pvalue), rel=1e-8)


def test_hc3_wald_with_null_value_matches_statsmodels():
    """A non-zero h equals statsmodels f_test((C, h)) (reference library)."""
    y, codes, k = _random_2x3()
    C = HC3_CONTRASTS["main-B"]
    h = np.array([0.3, -0.2])
    res = hc3_wald(C, *_stats(y, codes, k), h=h)
    ref = _hc3_reference(y, codes, k, (C, h))
    assert res.statistic == pytest.approx(float(np.squeeze(ref.fvalue)), rel=1e-10)


def test_hc3_wald_invariant_to_equivalent_stacks():
    """Redundant and recombined rows give the same F (invariance of the Wald statistic)."""
    y, codes, k = _random_2x3()
    s = _stats(y, codes, k)
    C = HC3_CONTRASTS["interaction"]
    stacked = np.vstack([C, C[0] + 2 * C[1], 3 * C[1]])
    a, b = hc3_wald(C, *s), hc3_wald(stacked, *s)
    assert b.df1 == a.df1 == 2
    assert b.statistic == pytest.approx(a.statistic, rel=1e-10)


def test_hc3_wald_rejects_leverage_one_cell():
    """A contrast using a one-row cell raises FitError (HC3 undefined at leverage 1); a contrast
    avoiding it is fine."""
    n = np.array([1, 5, 6])
    mean = np.array([1.0, 2.0, 2.5])
    ss = np.array([0.0, 3.0, 4.0])
    with pytest.raises(FitError, match="cell 0 has one row"):
        hc3_wald([[1.0, -1.0, 0.0]], n, mean, ss)
    assert hc3_wald([[0.0, 1.0, -1.0]], n, mean, ss).df2 == 12 - 3


def test_robust_tests_invariant_to_affine_change_and_row_order():
    """Scaling and shifting the outcome and reordering rows change no robust test statistic
    (invariance)."""
    y, codes, k = _random_2x3()
    perm = np.random.default_rng(3).permutation(y.size)
    y2, codes2 = 2.5 * y[perm] + 10.0, codes[perm]
    s1, s2 = _stats(y, codes, k), _stats(y2, codes2, k)
    assert welch_anova(*s2).statistic == pytest.approx(welch_anova(*s1).statistic, rel=1e-9)
    assert kruskal_wallis(y2, codes2, k).statistic == pytest.approx(
        kruskal_wallis(y, codes, k).statistic, rel=1e-12
    )
    C = HC3_CONTRASTS["interaction"]
    assert hc3_wald(C, *s2).statistic == pytest.approx(hc3_wald(C, *s1).statistic, rel=1e-9)
    for a, b in zip(games_howell(*s1).comparisons, games_howell(*s2).comparisons):
        assert b.statistic == pytest.approx(a.statistic, rel=1e-9)
        assert b.p_adjusted == pytest.approx(a.p_adjusted, rel=1e-7)
