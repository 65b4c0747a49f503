"""Tests of reporter.inference.posthoc against scipy.stats (tukey_hsd, dunnett), statsmodels OLS and
published PlantGrowth values."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import pandas as pd
import statsmodels.api as sm
from scipy import stats

from reporter.errors import FitError
from reporter.inference.posthoc import (
    dunnett, dunnett_critical, dunnett_exceedance, scheffe_contrast, scheffe_pairs, tukey_kramer,
)

from conftest import plant_growth_codes


DATA = Path(__file__).parents[1] / "data"


def _groups(y, codes, k):
    """Per-group samples, and n, means, MSE and df_error computed directly with numpy."""
    samples = [y[codes == c] for c in range(k)]
    n = np.array([s.size for s in samples])
    means = np.array([s.mean() for s in samples])
    sse = sum(float(((s - s.mean()) ** 2).sum()) for s in samples)
    df = y.size - k
    return samples, n, means, sse / df, df


def _random_unbalanced():
    rng = np.random.default_rng(20240611)
    sizes = [7, 12, 5, 9, 15]
    codes = np.repeat(np.arange(5), sizes)
    y = rng.normal(loc=np.repeat([0.0, 0.4, 1.1, 0.2, 0.9], sizes), scale=1.0)
    return y, codes, 5


DATASETS = {"PlantGrowth": plant_growth_codes, "random-unbalanced": _random_unbalanced}


@pytest.mark.parametrize("name", list(DATASETS), ids=list(DATASETS))
def test_tukey_kramer_matches_scipy_tukey_hsd(name):
    """Differences, adjusted p and 95% intervals equal scipy.stats.tukey_hsd (reference library)."""
    y, codes, k = DATASETS[name]()
    samples, n, means, mse, df = _groups(y, codes, k)
    ref = stats.tukey_hsd(*samples)
    ci = ref.confidence_interval(0.95)
    fam = tukey_kramer(means, n, mse, df, alpha=0.05)
    assert len(fam.comparisons) == k * (k - 1) // 2
    for comp in fam.comparisons:
        i, j = comp.first, comp.second
        assert comp.difference == pytest.approx(ref.statistic[i, j], rel=1e-12)
        assert comp.p_adjusted == pytest.approx(ref.pvalue[i, j], rel=1e-6, abs=1e-10)
        assert comp.ci_low == pytest.approx(ci.low[i, j], rel=1e-8)
        assert comp.ci_high == pytest.approx(ci.high[i, j], rel=1e-8)


def test_tukey_kramer_plant_growth_published_values():
    """trt2 - trt1: difference 0.865, 95% CI [0.174, 1.556], p = .012 (R's TukeyHSD output for
    PlantGrowth, values from memory). The binding check is against scipy.stats.tukey_hsd, here and
    in test_tukey_kramer_matches_scipy_tukey_hsd (reference library)."""
    y, codes, k = plant_growth_codes()
    _, n, means, mse, df = _groups(y, codes, k)
    comp = tukey_kramer(means, n, mse, df).comparison(1, 2)  # trt1 - trt2
    assert -comp.difference == pytest.approx(0.865, abs=5e-4)
    assert -comp.ci_high == pytest.approx(0.174, abs=5e-4)
    assert -comp.ci_low == pytest.approx(1.556, abs=5e-4)
    assert comp.p_adjusted == pytest.approx(0.012, abs=5e-4)


def _toothgrowth_unbalanced():
    """ToothGrowth (supp x dose, 2 x 3) with rows dropped to unbalance it; cells in supp-major order."""
    frame = pd.read_csv(DATA / "ToothGrowth.csv")
    supp = frame["supp"].map({"OJ": 0, "VC": 1}).to_numpy()
    dose = frame["dose"].map({0.5: 0, 1.0: 1, 2.0: 2}).to_numpy()
    codes = supp * 3 + dose
    keep = np.ones(len(frame), bool)
    keep[[0, 1, 2, 11, 25, 40, 41, 55]] = False
    return frame["len"].to_numpy(float)[keep], codes[keep], 6


def test_tukey_kramer_marginal_means_se_matches_statsmodels():
    """SE of a difference of dose marginal means (weights W) equals statsmodels OLS t_test on the
    cell-means model (reference library); p is the studentized range tail at that SE."""
    y, codes, k = _toothgrowth_unbalanced()
    _, n, means, mse, df = _groups(y, codes, k)
    w = np.zeros((3, 6))
    for d in range(3):
        w[d, [d, 3 + d]] = 0.5
    fam = tukey_kramer(w @ means, n, mse, df, weights=w)
    fit = sm.OLS(y, np.eye(k)[codes]).fit()
    for comp in fam.comparisons:
        test = fit.t_test(w[comp.first] - w[comp.second])
        assert comp.difference == pytest.approx(float(test.effect[0]), rel=1e-10)
        assert comp.se == pytest.approx(float(test.sd[0, 0]), rel=1e-10)
        expected_p = stats.studentized_range.sf(abs(float(test.tvalue[0, 0])) * np.sqrt(2), 3, df)
        assert comp.p_adjusted == pytest.approx(expected_p, rel=1e-8)


def test_tukey_kramer_weights_identity_equals_cells():
    """With W = I the weighted form is the cell form (identity)."""
    y, codes, k = _random_unbalanced()
    _, n, means, mse, df = _groups(y, codes, k)
    a = tukey_kramer(means, n, mse, df)
    b = tukey_kramer(means, n, mse, df, weights=np.eye(k))
    assert a == b


@pytest.mark.parametrize("name", list(DATASETS), ids=list(DATASETS))
@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"], ids=str)
def test_dunnett_matches_scipy_dunnett(name, alternative):
    """p values and intervals equal scipy.stats.dunnett (reference library; scipy integrates by
    randomized quasi-Monte Carlo with 1000 points per dimension and a noisy root search for the
    interval, so the comparison is at its accuracy: 5e-4 on p, 0.2% of the half-width on limits)."""
    y, codes, k = DATASETS[name]()
    samples, n, means, mse, df = _groups(y, codes, k)
    ref = stats.dunnett(*samples[1:], control=samples[0], alternative=alternative, rng=12345)
    ref_ci = ref.confidence_interval(0.95)
    fam = dunnett(means, n, mse, df, control=0, alternative=alternative)
    for pos, comp in enumerate(fam.comparisons):
        assert comp.first == pos + 1 and comp.second == 0
        assert comp.statistic == pytest.approx(ref.statistic[pos], rel=1e-10)
        assert comp.p_adjusted == pytest.approx(ref.pvalue[pos], abs=5e-4)
        half = comp.critical_value * comp.se
        for ours, theirs in ((comp.ci_low, ref_ci.low[pos]), (comp.ci_high, ref_ci.high[pos])):
            if np.isinf(ours):
                assert np.isinf(theirs) and np.sign(ours) == np.sign(theirs)
            else:
                assert ours == pytest.approx(theirs, abs=2e-3 * half)


# Dunnett's critical values at alpha = .05 for m comparisons with a control, equal n, from memory
# of the published tables: one-sided from Dunnett (1955), JASA 50, Table 1a; two-sided from
# Dunnett (1964), Biometrics 20, 482-491, Table II. Two decimals, as printed.
DUNNETT_TABLE = [
    ("greater", 10, 2, 2.15), ("greater", 10, 3, 2.34), ("greater", 10, 4, 2.47), ("greater", 10, 5, 2.56),
    ("greater", 1e9, 2, 1.92), ("greater", 1e9, 3, 2.06), ("greater", 1e9, 5, 2.23), ("greater", 1e9, 9, 2.42),
    ("two-sided", 10, 2, 2.57), ("two-sided", 10, 3, 2.76), ("two-sided", 10, 4, 2.89), ("two-sided", 10, 5, 2.99),
    ("two-sided", 20, 2, 2.38), ("two-sided", 20, 5, 2.73),
    ("two-sided", 1e9, 2, 2.21), ("two-sided", 1e9, 3, 2.35), ("two-sided", 1e9, 5, 2.51), ("two-sided", 1e9, 9, 2.69),
]


@pytest.mark.parametrize("alternative, df, m, printed", DUNNETT_TABLE)
def test_dunnett_critical_values_match_published_tables(alternative, df, m, printed):
    """Critical values round to the published two-decimal table entries (Dunnett 1955, 1964;
    from memory of the tables)."""
    lam = np.full(m, np.sqrt(0.5))  # equal n: corr = 1/2
    assert dunnett_critical(lam, df, 0.05, alternative) == pytest.approx(printed, abs=0.005 + 1e-9)


def test_dunnett_exceedance_independent_case_is_sidak_exact():
    """With lam = 0 and (practically) infinite df the comparisons are independent normals:
    P(max |Z_i| >= c) = 1 - (1 - 2 Phi(-c))^m exactly (scipy.stats.norm as reference)."""
    for m, c in ((2, 1.5), (4, 2.4), (7, 3.1)):
        exact = 1 - (1 - 2 * stats.norm.sf(c)) ** m
        assert dunnett_exceedance(np.zeros(m), 1e12, c, True) == pytest.approx(exact, abs=1e-9)
        exact_one = 1 - (1 - stats.norm.sf(c)) ** m
        assert dunnett_exceedance(np.zeros(m), 1e12, c, False) == pytest.approx(exact_one, abs=1e-9)


def test_dunnett_exceedance_bivariate_normal():
    """Two comparisons with corr 1/2 and df -> infinity: a bivariate normal rectangle probability,
    from scipy.stats.multivariate_normal (Genz's deterministic bivariate algorithm; reference)."""
    mvn = stats.multivariate_normal(mean=[0, 0], cov=[[1, 0.5], [0.5, 1]])
    for c in (1.0, 2.0, 2.8):
        inside = mvn.cdf([c, c], lower_limit=[-c, -c])
        assert dunnett_exceedance(np.full(2, np.sqrt(0.5)), 1e12, c, True) == pytest.approx(1 - inside, abs=1e-7)
        assert dunnett_exceedance(np.full(2, np.sqrt(0.5)), 1e12, c, False) == pytest.approx(
            1 - mvn.cdf([c, c]), abs=1e-7)


@pytest.mark.parametrize("m, df, lam2", [(3, 5, 0.5), (4, 24, 0.3), (6, 87, 0.62)])
def test_dunnett_exceedance_matches_multivariate_t_with_many_points(m, df, lam2):
    """Against scipy.stats.multivariate_t.cdf with 200,000 quasi-Monte Carlo points per
    dimension (reference library; stochastic, so compared at 2e-5, well above its error)."""
    lam = np.full(m, np.sqrt(lam2))
    corr = np.full((m, m), lam2)
    np.fill_diagonal(corr, 1.0)
    ref_dist = stats.multivariate_t(shape=corr, df=df)
    for c in (1.8, 2.6):
        inside = ref_dist.cdf(np.full(m, c), lower_limit=np.full(m, -c), maxpts=200_000 * m,
                              random_state=np.random.default_rng(1))
        assert dunnett_exceedance(lam, df, c, True) == pytest.approx(1 - inside, abs=2e-5)


def test_dunnett_is_deterministic_and_consistent_with_p():
    """The same input gives the same family; a comparison's |t| exceeds the critical value exactly
    when its adjusted p is below alpha; the critical value lies between the single-test and
    Bonferroni t quantiles (scipy.stats.t; Bonferroni inequality); at the critical value the
    exceedance is alpha to 1e-9."""
    y, codes, k = _random_unbalanced()
    _, n, means, mse, df = _groups(y, codes, k)
    fam = dunnett(means, n, mse, df, control=0)
    assert fam == dunnett(means, n, mse, df, control=0)
    crit = fam.comparisons[0].critical_value
    assert stats.t.isf(0.025, df) < crit < stats.t.isf(0.025 / (k - 1), df)
    for comp in fam.comparisons:
        assert (abs(comp.statistic) > crit) == (comp.p_adjusted < 0.05)
    lam = np.sqrt(n[1:] / (n[1:] + n[0]))  # Dunnett (1955): corr = lam_i lam_j for cells
    assert dunnett_exceedance(lam, df, crit, True) == pytest.approx(0.05, abs=1e-9)


def test_dunnett_two_groups_is_the_t_test():
    """With one comparison Dunnett's test is the two-sided pooled t test (scipy.stats.t)."""
    y, codes, k = plant_growth_codes()
    _, n, means, mse, df = _groups(y, codes, k)
    w = np.array([[1.0, 0, 0], [0, 0.5, 0.5]])
    comp = dunnett(w @ means, n, mse, df, weights=w).comparisons[0]
    se = np.sqrt(mse * (1 / 10 + 0.25 / 10 + 0.25 / 10))
    assert comp.se == pytest.approx(se, rel=1e-12)
    assert comp.p_adjusted == pytest.approx(2 * stats.t.sf(abs(comp.difference) / se, df), rel=1e-10)


def test_dunnett_marginal_correlation_matches_statsmodels():
    """With marginal means, SE of each difference from the control equals statsmodels OLS t_test on
    the cell-means model (reference library)."""
    y, codes, k = _toothgrowth_unbalanced()
    _, n, means, mse, df = _groups(y, codes, k)
    w = np.zeros((3, 6))
    for d in range(3):
        w[d, [d, 3 + d]] = 0.5
    fam = dunnett(w @ means, n, mse, df, weights=w, control=0)
    fit = sm.OLS(y, np.eye(k)[codes]).fit()
    for comp in fam.comparisons:
        test = fit.t_test(w[comp.first] - w[0])
        assert comp.se == pytest.approx(float(test.sd[0, 0]), rel=1e-10)


@pytest.mark.parametrize("name", list(DATASETS), ids=list(DATASETS))
def test_scheffe_pairs_match_statsmodels_f(name):
    """Scheffe p = P(F_(g-1, df) >= F_1/(g-1)) with F_1 the one-row F of the pair from statsmodels
    OLS f_test (reference library); critical value sqrt((g-1) F_(.95; g-1, df)) (Scheffe 1953)."""
    y, codes, k = DATASETS[name]()
    _, n, means, mse, df = _groups(y, codes, k)
    fam = scheffe_pairs(means, n, mse, df)
    fit = sm.OLS(y, np.eye(k)[codes]).fit()
    crit = np.sqrt((k - 1) * stats.f.ppf(0.95, k - 1, df))
    for comp in fam.comparisons:
        row = np.zeros(k)
        row[comp.first], row[comp.second] = 1.0, -1.0
        f1 = float(np.squeeze(fit.f_test(row).fvalue))
        assert comp.p_adjusted == pytest.approx(stats.f.sf(f1 / (k - 1), k - 1, df), rel=1e-8)
        assert comp.critical_value == pytest.approx(crit, rel=1e-10)
        assert comp.ci_high - comp.ci_low == pytest.approx(2 * crit * comp.se, rel=1e-12)


def test_scheffe_wider_than_tukey_for_pairs():
    """For pairwise differences Scheffe's intervals are wider than Tukey-Kramer's (Scheffe 1959,
    The Analysis of Variance, sec. 3.7, from memory)."""
    y, codes, k = _random_unbalanced()
    _, n, means, mse, df = _groups(y, codes, k)
    s = scheffe_pairs(means, n, mse, df)
    t = tukey_kramer(means, n, mse, df)
    for a, b in zip(s.comparisons, t.comparisons):
        assert a.ci_high - a.ci_low > b.ci_high - b.ci_low
        assert a.p_adjusted > b.p_adjusted


def test_scheffe_contrast_agrees_with_pairs_and_statsmodels():
    """A pair written as a contrast reproduces scheffe_pairs; a 3-group contrast's SE equals
    statsmodels OLS t_test (reference library)."""
    y, codes, k = _random_unbalanced()
    _, n, means, mse, df = _groups(y, codes, k)
    pair = scheffe_pairs(means, n, mse, df).comparison(0, 3)
    single = scheffe_contrast([1, 0, 0, -1, 0], means, n, mse, df)
    assert single.estimate == pytest.approx(pair.difference, rel=1e-14)
    assert single.p_adjusted == pytest.approx(pair.p_adjusted, rel=1e-12)
    assert single.ci_low == pytest.approx(pair.ci_low, rel=1e-12)
    a = np.array([1.0, 1.0, -2.0, 0.0, 0.0]) / 2
    res = scheffe_contrast(a, means, n, mse, df)
    test = sm.OLS(y, np.eye(k)[codes]).fit().t_test(a)
    assert res.se == pytest.approx(float(test.sd[0, 0]), rel=1e-10)
    assert res.family_df == k - 1


def test_scheffe_contrast_rejects_non_contrast():
    """Coefficients that do not sum to zero raise FitError naming the sum."""
    y, codes, k = _random_unbalanced()
    _, n, means, mse, df = _groups(y, codes, k)
    with pytest.raises(FitError, match="sum to 0"):
        scheffe_contrast([1, 0, 0, 0, 0], means, n, mse, df)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"alpha": 5}, "'alpha' must be between 0 and 1 \\(got 5\\)"),
        ({"mse": 0.0}, "'mse' must be a positive"),
        ({"n": [3, 0, 4]}, "empty cells \\[1\\]"),
        ({"df_error": 0}, "'df_error' must be positive"),
    ],
    ids=["alpha", "mse", "empty-cell", "df"],
)
def test_tukey_kramer_bad_input_messages(kwargs, message):
    """Bad inputs raise FitError with a message naming the argument and the value."""
    args = {"estimates": [1.0, 2.0, 3.0], "n": [3, 4, 4], "mse": 1.0, "df_error": 8, "alpha": 0.05}
    args.update(kwargs)
    with pytest.raises(FitError, match=message):
        tukey_kramer(args.pop("estimates"), args.pop("n"), args.pop("mse"), args.pop("df_error"), **args)
