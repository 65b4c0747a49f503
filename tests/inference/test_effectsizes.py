"""Tests of reporter.inference.effectsizes against published values, scipy and statsmodels."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
import statsmodels.stats.anova as sm_stats
from scipy import optimize, stats

from reporter.errors import FitError, PlanError
from reporter.inference.effectsizes import (
    PARTIAL_ETA_SQUARED_MAPPING,
    describe_anova_effect_sizes,
    f_noncentrality_ci,
    hedges_correction,
    noncentral_f_cdf,
    noncentral_f_sf,
    noncentral_t_cdf,
    partial_eta_squared_ci,
    standardized_contrast,
    t_noncentrality_ci,
)

DATA = Path(__file__).parent.parent / "data"


# ---------------------------------------------------------------------------------------------
# Helpers: sums of squares by textbook formulas, and an independent interval inversion
# ---------------------------------------------------------------------------------------------


def _one_way_ss(y: np.ndarray, groups: np.ndarray) -> tuple[float, float, float]:
    """(SS_between, SS_within, SS_total) of a one-way layout, from centred sums."""
    ss_total = float(np.sum((y - y.mean()) ** 2))
    ss_within = float(sum(np.sum((y[groups == g] - y[groups == g].mean()) ** 2) for g in np.unique(groups)))
    return ss_total - ss_within, ss_within, ss_total


def _toothgrowth_table() -> dict[str, tuple[float, float]]:
    """Balanced 2 x 3 ANOVA of ToothGrowth by the equal-n formulas: source -> (SS, df)."""
    data = pd.read_csv(DATA / "ToothGrowth.csv")
    y = data["len"].to_numpy(float)
    grand = y.mean()
    supp_means = data.groupby("supp")["len"].mean().to_numpy()
    dose_means = data.groupby("dose")["len"].mean().to_numpy()
    cells = data.groupby(["supp", "dose"])["len"]
    cell_means = cells.mean().to_numpy()
    n = 10  # every cell of ToothGrowth holds 10 guinea pigs
    ss_supp = 3 * n * float(np.sum((supp_means - grand) ** 2))
    ss_dose = 2 * n * float(np.sum((dose_means - grand) ** 2))
    ss_cells = n * float(np.sum((cell_means - grand) ** 2))
    ss_error = float(cells.apply(lambda s: np.sum((s - s.mean()) ** 2)).sum())
    return {
        "supp": (ss_supp, 1.0),
        "dose": (ss_dose, 2.0),
        "supp:dose": (ss_cells - ss_supp - ss_dose, 2.0),
        "error": (ss_error, 54.0),
        "total": (float(np.sum((y - grand) ** 2)), 59.0),
    }


def _independent_pes_ci(F: float, df1: float, df2: float, level: float) -> tuple[float, float]:
    """Partial eta squared interval by bisection on scipy.stats.ncf.sf over a fixed bracket.

    Deliberately unlike the library: survival function instead of cdf, bisection instead of Brent,
    a fixed bracket [1e-9, 1e4] instead of an expanding one. Only used where both bounds exceed 0.
    """
    a = (1.0 - level) / 2.0

    def root(target: float) -> float:
        func = lambda lam: stats.ncf.sf(F, df1, df2, lam) - target  # noqa: E731
        assert func(1e-9) < 0 < func(1e4)
        return optimize.bisect(func, 1e-9, 1e4, xtol=1e-13, rtol=1e-15, maxiter=500)

    lam_low, lam_high = root(a), root(1.0 - a)
    return lam_low / (lam_low + df1 + df2 + 1), lam_high / (lam_high + df1 + df2 + 1)


# ---------------------------------------------------------------------------------------------
# ANOVA effect sizes: published values and identities
# ---------------------------------------------------------------------------------------------


def test_plantgrowth_eta_and_omega_squared_match_published_values():
    """PlantGrowth (Dobson 1983): eta² and omega² against statsmodels' sums of squares; rounded,
    .264 and .204 (values from memory of published analyses)."""
    data = pd.read_csv(DATA / "PlantGrowth.csv")
    ss_b, ss_w, ss_t = _one_way_ss(data["weight"].to_numpy(float), data["group"].to_numpy())
    result = describe_anova_effect_sizes(ss_b, 2, ss_w, 27, ss_t, n_total=30)
    # The definitions (Lakens 2013) evaluated on statsmodels' anova_lm sums of squares
    # (reference library); then the three-decimal values of published analyses (from memory).
    table = sm_stats.anova_lm(smf.ols("weight ~ C(group)", data=data).fit())
    ss_g, ss_e = table.sum_sq.iloc[0], table.sum_sq.iloc[1]
    assert result.eta_squared.value == pytest.approx(ss_g / (ss_g + ss_e), rel=1e-12)
    assert result.omega_squared.value == pytest.approx(
        (ss_g - 2 * table.mean_sq.iloc[1]) / (ss_g + ss_e + table.mean_sq.iloc[1]), rel=1e-12)
    assert round(result.eta_squared.value, 3) == 0.264
    assert round(result.omega_squared.value, 3) == 0.204
    # F(2, 27) = 4.846 for PlantGrowth (Dobson 1983), recomputed here by scipy.stats.f_oneway.
    groups = [data.loc[data["group"] == g, "weight"].to_numpy() for g in ("ctrl", "trt1", "trt2")]
    assert result.F == pytest.approx(stats.f_oneway(*groups).statistic, rel=1e-12)


def test_partial_omega_squared_equals_olejnik_algina_f_form():
    """Partial omega² from SS equals df(F-1)/(df(F-1)+N) (Olejnik & Algina 2003)."""
    tg = _toothgrowth_table()
    ss_e, df_e = tg["error"]
    for source in ("supp", "dose", "supp:dose"):
        ss, df = tg[source]
        result = describe_anova_effect_sizes(ss, df, ss_e, df_e, tg["total"][0], n_total=60)
        expected = df * (result.F - 1) / (df * (result.F - 1) + 60)
        assert result.partial_omega_squared.value == pytest.approx(expected, rel=1e-12)


def test_one_way_omega_squared_equals_partial_and_f_form():
    """In a one-way design omega² = partial omega² = (F-1)/(F+(df_err+1)/df_eff) (Lakens 2013)."""
    data = pd.read_csv(DATA / "PlantGrowth.csv")
    ss_b, ss_w, ss_t = _one_way_ss(data["weight"].to_numpy(float), data["group"].to_numpy())
    result = describe_anova_effect_sizes(ss_b, 2, ss_w, 27, ss_t, n_total=30)
    assert result.omega_squared.value == pytest.approx(result.partial_omega_squared.value, rel=1e-12)
    assert result.omega_squared.value == pytest.approx(
        (result.F - 1) / (result.F + (27 + 1) / 2), rel=1e-12
    )
    assert result.eta_squared.value == pytest.approx(result.partial_eta_squared.value, rel=1e-12)


def test_cohens_f_and_its_interval_follow_partial_eta_squared():
    """Cohen's f = sqrt(pes/(1-pes)) (Cohen 1988), and its bounds are the mapped pes bounds."""
    tg = _toothgrowth_table()
    ss, df = tg["supp:dose"]
    result = describe_anova_effect_sizes(ss, df, *tg["error"], tg["total"][0], n_total=60)
    pes = result.partial_eta_squared
    assert result.cohens_f.value == pytest.approx(math.sqrt(pes.value / (1 - pes.value)), rel=1e-12)
    for f_bound, pes_bound in zip(result.cohens_f.ci, pes.ci):
        assert f_bound == pytest.approx(math.sqrt(pes_bound / (1 - pes_bound)), rel=1e-10)
    assert result.noncentrality_mapping == PARTIAL_ETA_SQUARED_MAPPING
    assert result.ci_level == pytest.approx(0.90)


# ---------------------------------------------------------------------------------------------
# Partial eta squared intervals
# ---------------------------------------------------------------------------------------------


def test_toothgrowth_sums_of_squares_agree_with_statsmodels():
    """The equal-n SS of ToothGrowth used below match statsmodels' anova_lm (reference library)."""
    data = pd.read_csv(DATA / "ToothGrowth.csv")
    fit = smf.ols("len ~ C(supp) * C(dose)", data=data).fit()
    table = sm_stats.anova_lm(fit, typ=2)
    tg = _toothgrowth_table()
    assert tg["supp"][0] == pytest.approx(table.loc["C(supp)", "sum_sq"], rel=1e-10)
    assert tg["dose"][0] == pytest.approx(table.loc["C(dose)", "sum_sq"], rel=1e-10)
    assert tg["supp:dose"][0] == pytest.approx(table.loc["C(supp):C(dose)", "sum_sq"], rel=1e-10)
    assert tg["error"][0] == pytest.approx(table.loc["Residual", "sum_sq"], rel=1e-10)


@pytest.mark.parametrize("source", ["supp", "dose", "supp:dose"], ids=["supp", "dose", "interaction"])
def test_toothgrowth_partial_eta_squared_ci_matches_independent_inversion(source):
    """ToothGrowth 90% pes intervals equal an independent ncf.sf bisection (scipy) to 1e-6."""
    tg = _toothgrowth_table()
    ss, df = tg[source]
    ss_e, df_e = tg["error"]
    result = describe_anova_effect_sizes(ss, df, ss_e, df_e, tg["total"][0], n_total=60, alpha=0.05)
    expected = _independent_pes_ci(result.F, df, df_e, 0.90)
    assert result.partial_eta_squared.ci == pytest.approx(expected, abs=1e-6)
    assert result.partial_eta_squared.ci == pytest.approx(
        partial_eta_squared_ci(result.F, df, df_e, 0.90), abs=1e-15
    )
    low, high = result.partial_eta_squared.ci
    assert low < result.partial_eta_squared.value < high


@pytest.mark.parametrize(
    ("F", "df1", "df2", "level"),
    [(2.5, 3, 40, 0.80), (7.0, 1, 12, 0.95), (40.0, 4, 200, 0.99), (1.9, 6, 30, 0.50)],
    ids=["F2.5-3-40-80", "F7-1-12-95", "F40-4-200-99", "F1.9-6-30-50"],
)
def test_partial_eta_squared_ci_other_levels_match_independent_inversion(F, df1, df2, level):
    """Intervals at several levels and dfs equal the independent ncf.sf bisection (scipy)."""
    assert partial_eta_squared_ci(F, df1, df2, level) == pytest.approx(
        _independent_pes_ci(F, df1, df2, level), abs=1e-6
    )


def test_lower_bound_is_zero_and_upper_bound_found_when_f_is_small():
    """F(2, 20) = 0.3: the lower bound is 0 and the upper bound solves ncf.sf = .95 (scipy)."""
    lam_low, lam_high = f_noncentrality_ci(0.3, 2, 20, 0.90)
    assert lam_low == 0.0
    assert lam_high > 0
    assert stats.ncf.sf(0.3, 2, 20, lam_high) == pytest.approx(0.95, abs=1e-9)
    low, high = partial_eta_squared_ci(0.3, 2, 20, 0.90)
    assert low == 0.0
    assert high == pytest.approx(lam_high / (lam_high + 23), rel=1e-12)


def test_both_bounds_zero_when_f_is_below_the_lower_tail():
    """F(2, 20) = 0.02 lies below the central F's 5% point (scipy), so the interval is [0, 0]."""
    assert stats.f.cdf(0.02, 2, 20) < 0.05
    assert partial_eta_squared_ci(0.02, 2, 20, 0.90) == (0.0, 0.0)


@pytest.mark.parametrize(("df1", "df2"), [(1, 10), (2, 27), (5, 100)], ids=["1-10", "2-27", "5-100"])
def test_interval_at_level_one_minus_two_alpha_agrees_with_f_test(df1, df2):
    """The 90% lower bound leaves 0 exactly at the central F's 5% critical value (scipy)."""
    crit = stats.f.isf(0.05, df1, df2)
    assert partial_eta_squared_ci(crit * (1 - 1e-6), df1, df2, 0.90)[0] == 0.0
    assert partial_eta_squared_ci(crit * (1 + 1e-6), df1, df2, 0.90)[0] > 0.0


@pytest.mark.parametrize("x", [0.05, 0.7, 1.0, 3.2, 25.0], ids=["x0.05", "x0.7", "x1", "x3.2", "x25"])
def test_noncentral_helpers_at_zero_noncentrality_equal_central_distributions(x):
    """At lambda = 0 the helpers equal scipy.stats.f / t, where ncf.sf fails (scipy issue 26188)."""
    assert noncentral_f_cdf(x, 3, 17, 0.0) == pytest.approx(stats.f.cdf(x, 3, 17), rel=1e-14)
    assert noncentral_f_sf(x, 3, 17, 0.0) == pytest.approx(stats.f.sf(x, 3, 17), rel=1e-14)
    assert 0.0 <= noncentral_f_sf(x, 3, 17, 0.0) <= 1.0
    assert noncentral_t_cdf(x, 17, 0.0) == pytest.approx(stats.t.cdf(x, 17), rel=1e-14)


def test_noncentral_helpers_agree_with_scipy_away_from_zero():
    """For lambda > 0 the helpers equal scipy.stats.ncf / nct (reference library)."""
    for lam in (1e-6, 0.5, 12.0):
        assert noncentral_f_cdf(2.0, 3, 17, lam) == pytest.approx(stats.ncf.cdf(2.0, 3, 17, lam), rel=1e-12)
        assert noncentral_f_sf(2.0, 3, 17, lam) == pytest.approx(stats.ncf.sf(2.0, 3, 17, lam), rel=1e-12)
        assert noncentral_t_cdf(1.5, 17, lam) == pytest.approx(stats.nct.cdf(1.5, 17, lam), rel=1e-12)


def test_given_f_that_contradicts_the_sums_of_squares_is_an_error():
    """An F that is not (SS_eff/df_eff)/(SS_err/df_err) raises FitError naming both values."""
    with pytest.raises(FitError, match="does not match"):
        describe_anova_effect_sizes(10.0, 2, 50.0, 20, 60.0, n_total=23, F=3.0)


def test_alpha_out_of_range_is_a_plan_error():
    """alpha = 5 is rejected with the attrs-style message."""
    with pytest.raises(PlanError, match=r"'alpha' must be between 0 and 0.5 .*\(got 5\)"):
        describe_anova_effect_sizes(10.0, 2, 50.0, 20, 60.0, n_total=23, alpha=5)


# ---------------------------------------------------------------------------------------------
# Standardized contrasts
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("df", [10, 20, 50, 100], ids=["df10", "df20", "df50", "df100"])
def test_hedges_j_is_close_to_its_approximation(df):
    """Exact J is within 1e-3 of 1 - 3/(4 df - 1) (Hedges 1981) for moderate df."""
    assert hedges_correction(df) == pytest.approx(1 - 3 / (4 * df - 1), abs=1e-3)
    assert hedges_correction(df) < 1.0


def test_two_group_contrast_t_equals_pooled_t_test():
    """With two cells the contrast t equals scipy.stats.ttest_ind (pooled variance)."""
    data = pd.read_csv(DATA / "PlantGrowth.csv")
    a = data.loc[data["group"] == "trt1", "weight"].to_numpy(float)
    b = data.loc[data["group"] == "trt2", "weight"].to_numpy(float)
    mse = (np.sum((a - a.mean()) ** 2) + np.sum((b - b.mean()) ** 2)) / (a.size + b.size - 2)
    result = standardized_contrast([1, -1], 0.0, a.mean() - b.mean(), [a.size, b.size], mse, a.size + b.size - 2)
    assert result.t == pytest.approx(stats.ttest_ind(a, b).statistic, rel=1e-12)
    assert result.d.value == pytest.approx((a.mean() - b.mean()) / math.sqrt(mse), rel=1e-12)


def test_scaled_weights_give_the_same_d_and_interval():
    """`2a - 2b = 2` and `a - b = 1` give the same d, g and interval (scaling rule)."""
    means, n, mse, df = np.array([5.1, 4.2, 6.0]), [8, 11, 9], 0.7, 25
    one = standardized_contrast([1, -1, 0], 1.0, means[0] - means[1], n, mse, df)
    two = standardized_contrast([2, -2, 0], 2.0, 2 * (means[0] - means[1]), n, mse, df)
    assert two.scale == pytest.approx(0.5)
    assert two.d.value == pytest.approx(one.d.value, rel=1e-13)
    assert two.g.value == pytest.approx(one.g.value, rel=1e-13)
    assert two.d.ci == pytest.approx(one.d.ci, rel=1e-10)
    assert two.weights == pytest.approx(one.weights)


def test_contrast_interval_matches_independent_nct_inversion():
    """The 95% d interval equals an independent nct.sf bisection (scipy) times sqrt(sum c²/n)."""
    weights, n, mse, df = np.array([1.0, -0.5, -0.5]), np.array([7, 9, 12]), 2.3, 25
    estimate = 1.9
    result = standardized_contrast(weights, 0.0, estimate, n, mse, df, level=0.95)
    spread = math.sqrt(np.sum(weights**2 / n))
    t = estimate / math.sqrt(mse) / spread

    def root(target):
        func = lambda delta: stats.nct.sf(t, df, delta) - target  # noqa: E731
        return optimize.bisect(func, -50, 50, xtol=1e-13, maxiter=500)

    assert result.t == pytest.approx(t, rel=1e-12)
    assert result.d.ci == pytest.approx((root(0.025) * spread, root(0.975) * spread), abs=1e-8)
    assert result.g.value == pytest.approx(hedges_correction(df) * result.d.value, rel=1e-13)


def test_one_sided_bound_equals_two_sided_bound_at_twice_the_tail():
    """A one-sided 95% bound is the matching bound of the two-sided 90% interval."""
    two = t_noncentrality_ci(2.2, 18, 0.90)
    greater = t_noncentrality_ci(2.2, 18, 0.95, alternative="greater")
    less = t_noncentrality_ci(2.2, 18, 0.95, alternative="less")
    assert greater[0] == pytest.approx(two[0], abs=1e-10) and greater[1] == math.inf
    assert less[1] == pytest.approx(two[1], abs=1e-10) and less[0] == -math.inf


def test_contrast_with_nonzero_weight_on_an_empty_cell_is_an_error():
    """Weighting a cell with n = 0 raises FitError naming the cell."""
    with pytest.raises(FitError, match="cell 2 has weight"):
        standardized_contrast([1, 0, -1], 0.0, 1.0, [5, 5, 0], 1.0, 8)


# ---------------------------------------------------------------------------------------------
# Coverage simulation
# ---------------------------------------------------------------------------------------------


def _simulate_cells(rng, means, sizes, reps):
    """Cell means and pooled residual SS of `reps` normal data sets (sigma = 1), vectorized."""
    cell_means, ss_within = [], np.zeros(reps)
    for mu, n in zip(means, sizes):
        y = mu + rng.standard_normal((reps, n))
        m = y.mean(axis=1)
        cell_means.append(m)
        ss_within += np.sum((y - m[:, None]) ** 2, axis=1)
    return np.column_stack(cell_means), ss_within


def _f_of_contrast_rows(C, means_hat, sizes, mse):
    """F of C mu = 0 for each data set: (C ybar)' [C diag(1/n) C']^-1 (C ybar) / (q MSE)."""
    middle = np.linalg.inv(C @ np.diag(1.0 / sizes) @ C.T)
    est = means_hat @ C.T
    return np.einsum("ri,ij,rj->r", est, middle, est) / (C.shape[0] * mse)


COVERAGE_DESIGNS = {
    # one-way, three unequal cells; the effect is equality of the three means
    "one-way": (
        np.array([0.0, 0.5, 1.1]),
        np.array([8, 10, 12]),
        np.array([[1.0, -1.0, 0.0], [0.0, 1.0, -1.0]]),
        np.array([1.0, -0.5, -0.5]),
    ),
    # unbalanced 2 x 2 (cells a1b1, a1b2, a2b1, a2b2); the effect is the interaction
    "2x2-interaction": (
        np.array([0.0, 0.3, 0.5, 2.3]),
        np.array([12, 15, 14, 16]),
        np.array([[1.0, -1.0, -1.0, 1.0]]),
        np.array([1.0, -1.0, -1.0, 1.0]),
    ),
}


@pytest.mark.parametrize("design", list(COVERAGE_DESIGNS), ids=list(COVERAGE_DESIGNS))
def test_interval_coverage_in_simulated_designs(design):
    """2,000 seeded data sets: 90% pes and 95% d intervals cover the truth within 2.5 points.

    Each tail of the pes interval (truth below the lower bound, above the upper bound) is also
    checked against its nominal 5%, within 2.5 points.

    Population partial eta squared is defined through the noncentrality the design actually has,
    lambda = (C mu)' [C diag(1/n) C']^-1 (C mu) / sigma² (for the one-way effect this is
    sum n_c (mu_c - weighted mean)² / sigma²), mapped like the estimate: lambda / (lambda + df1 +
    df2 + 1). In the one-way case that is sigma²_between / (sigma²_between + sigma²) with
    sigma²_between = sum n_c (mu_c - weighted mean)² / N. The contrast truth is
    delta = s c'mu / sigma with the same weight scaling s as the estimate. Nominal levels are exact
    under normal errors (Steiger 2004; Steiger & Fouladi 1997).
    """
    mu, sizes, C, c = COVERAGE_DESIGNS[design]
    reps = 2000
    rng = np.random.default_rng(20240611)
    df1, df2 = C.shape[0], int(sizes.sum()) - sizes.size
    lam_true = float((C @ mu) @ np.linalg.inv(C @ np.diag(1.0 / sizes) @ C.T) @ (C @ mu))
    pes_true = lam_true / (lam_true + df1 + df2 + 1)
    scale = 1.0 / c[c > 0].sum()
    delta_true = scale * float(c @ mu)

    means_hat, ss_within = _simulate_cells(rng, mu, sizes, reps)
    mse = ss_within / df2
    F = _f_of_contrast_rows(C, means_hat, sizes, mse)
    estimates = means_hat @ c

    pes_below = pes_above = covered_d = 0
    for r in range(reps):
        low, high = partial_eta_squared_ci(F[r], df1, df2, 0.90)
        pes_below += pes_true < low
        pes_above += pes_true > high
        d_low, d_high = standardized_contrast(c, 0.0, estimates[r], sizes, mse[r], df2, 0.95).d.ci
        covered_d += d_low <= delta_true <= d_high
    assert abs(1 - (pes_below + pes_above) / reps - 0.90) <= 0.025
    assert abs(pes_below / reps - 0.05) <= 0.025 and abs(pes_above / reps - 0.05) <= 0.025
    assert abs(covered_d / reps - 0.95) <= 0.025
