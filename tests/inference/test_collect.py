"""The inference layer wired into a full analysis: effect sizes, policy, post-hoc, outliers."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.formula.api import ols
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.oneway import anova_oneway

from conftest import DATA_DIR
from reporter.inference.analysis import fit_analysis_on_rows as fit_analysis
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_effect, compile_statement

GROUPS = ("ctrl", "trt1", "trt2")


def plantgrowth(**kw):
    df = pd.read_csv(DATA_DIR / "PlantGrowth.csv")
    d = build_design([Factor("group", GROUPS)], "cell-means")
    cell = pd.Categorical(df.group, categories=GROUPS).codes.astype(int)
    hyps = [compile_effect(d, "group"), compile_statement(d, "trt2 > trt1"), compile_statement(d, "ctrl = trt1", role="exploratory")]
    return fit_analysis(d, df.weight.to_numpy(float), cell, hyps, permutations=2000, seed=1, **kw), df


def test_plantgrowth_effect_sizes_published():
    """η² and ω² of PlantGrowth against statsmodels anova_lm (reference library): η² = SS_group/SS_total,
    ω² = (SS_group − df·MSE)/(SS_total + MSE) (Lakens 2013); rounded, .264 and .204 (values from
    memory of published analyses of these data)."""
    a, df = plantgrowth()
    es = a.inference.rows[0].effect_sizes
    table = anova_lm(ols("weight ~ C(group)", df).fit())
    ss_g, ss_e = table.sum_sq.iloc[0], table.sum_sq.iloc[1]
    mse = table.mean_sq.iloc[1]
    assert math.isclose(es.eta_squared.value, ss_g / (ss_g + ss_e), rel_tol=1e-12)
    assert math.isclose(es.omega_squared.value, (ss_g - 2 * mse) / (ss_g + ss_e + mse), rel_tol=1e-12)
    assert round(es.eta_squared.value, 3) == 0.264
    assert round(es.omega_squared.value, 3) == 0.204
    assert es.partial_eta_squared.ci_level == pytest.approx(0.90)


def test_plantgrowth_welch_and_tukey_through_the_pipeline():
    """Welch's ANOVA against statsmodels anova_oneway(use_var="unequal") and Tukey trt2 − trt1
    against scipy.stats.tukey_hsd, p to 1e-6 (reference libraries); rounded, Welch F(2, 17.13) =
    5.18, p = .017 and Tukey 0.865, CI [0.174, 1.556], p = .012 (values from memory of R's
    oneway.test and TukeyHSD output for these data)."""
    a, df = plantgrowth(posthoc=("all-pairs",))
    w = a.inference.welch_oneway
    ref_w = anova_oneway(df.weight, df.group, use_var="unequal", welch_correction=True)  # reference library
    assert math.isclose(w.statistic, ref_w.statistic, rel_tol=1e-10)
    assert math.isclose(w.df2, ref_w.df[1], rel_tol=1e-10)
    assert math.isclose(w.p, ref_w.pvalue, rel_tol=1e-8)
    assert round(w.df2, 2) == 17.13 and round(w.statistic, 2) == 5.18 and round(w.p, 3) == 0.017
    fam, on, res, labels = a.inference.posthoc[0]
    c = res.comparison(1, 2)
    assert labels[c.first] == "trt1" and labels[c.second] == "trt2"
    ref = stats.tukey_hsd(*(df.weight[df.group == g] for g in GROUPS))  # reference library
    ci = ref.confidence_interval(0.95)
    assert math.isclose(c.difference, ref.statistic[1, 2], rel_tol=1e-12)
    assert math.isclose(c.p_adjusted, ref.pvalue[1, 2], rel_tol=1e-6)
    assert math.isclose(c.ci_low, ci.low[1, 2], rel_tol=1e-8)
    assert math.isclose(c.ci_high, ci.high[1, 2], rel_tol=1e-8)
    assert round(-c.difference, 3) == 0.865 and round(-c.ci_high, 3) == 0.174 and round(-c.ci_low, 3) == 1.556
    assert round(c.p_adjusted, 3) == 0.012
    assert a.inference.games_howell is not None


def test_holm_within_families():
    """Planned p values are Holm-adjusted together; the exploratory one forms its own family."""
    from statsmodels.stats.multitest import multipletests

    a, _ = plantgrowth()
    planned = [h for h in a.hypotheses if h.family == "planned"]
    ref = multipletests([h.test.p for h in planned], method="holm")[1]  # reference library
    assert np.allclose([h.p_adjusted for h in planned], ref, rtol=1e-12)
    explor = [h for h in a.hypotheses if h.family == "exploratory"][0]
    assert explor.p_adjusted == pytest.approx(explor.test.p)


@pytest.mark.parametrize("policy, expected", [("classical", "classical"), ("always-robust", "robust")])
def test_unequal_variance_policy(policy, expected):
    """The plan's policy decides which test is confirmatory and which p is adjusted."""
    a, _ = plantgrowth(unequal_variances=policy)
    for h in a.hypotheses:
        assert h.extras.confirmatory == expected
        p = h.extras.robust.p if expected == "robust" else h.test.p
        assert h.extras.confirmatory_p == p


def test_robust_if_heterogeneous_follows_brown_forsythe():
    """robust-if-heterogeneous switches to robust tests only when Brown–Forsythe rejects at α."""
    rng = np.random.default_rng(4)
    n = 30
    y = np.r_[rng.normal(0, 1, n), rng.normal(0.3, 5, n), rng.normal(0.5, 10, n)]
    cell = np.repeat(np.arange(3), n)
    d = build_design([Factor("g", ("a", "b", "c"))], "cell-means")
    a = fit_analysis(d, y, cell, [compile_statement(d, "a < c")], unequal_variances="robust-if-heterogeneous", permutations=0)
    assert a.inference.assumptions.heterogeneous
    assert a.hypotheses[0].extras.confirmatory == "robust"
    ref = stats.ttest_ind(y[cell == 0], y[cell == 2], equal_var=False, alternative="less")  # reference library
    assert math.isclose(a.hypotheses[0].extras.robust.p, ref.pvalue, rel_tol=1e-9)


def test_outlier_is_listed_and_sensitivity_rerun():
    """A planted outlier is flagged and the planned tests are rerun without it, beside the originals.

    The rerun equals statsmodels OLS on the cell-means model of the data without the flagged row
    (reference library): estimate, SE, t and df from ``t_test``, the one-sided p and bound from
    scipy.stats.t (pooled over all three cells, so not a two-sample t test)."""
    rng = np.random.default_rng(9)
    y = rng.normal(10, 1, 60)
    y[17] = 25.0
    cell = np.repeat(np.arange(3), 20)
    d = build_design([Factor("g", ("a", "b", "c"))], "cell-means")
    a = fit_analysis(d, y, cell, [compile_statement(d, "a > b")], permutations=0)
    s = a.inference.outlier_sensitivity
    assert s.rows_removed == (17,)
    name, test, note = s.tests[0]
    assert note is None
    keep = np.arange(60) != 17
    fit = sm.OLS(y[keep], np.eye(3)[cell[keep]]).fit()  # reference library
    tt = fit.t_test(np.array([[1.0, -1.0, 0.0]]))
    t_ref, df_ref = float(tt.tvalue[0, 0]), float(fit.df_resid)
    assert math.isclose(test.estimate, float(tt.effect[0]), rel_tol=1e-12)
    assert math.isclose(test.se, float(tt.sd[0, 0]), rel_tol=1e-12)
    assert math.isclose(test.statistic, t_ref, rel_tol=1e-10)
    assert test.df == (df_ref,) == (56.0,)
    assert math.isclose(test.p, stats.t.sf(t_ref, df_ref), rel_tol=1e-9)
    assert math.isclose(test.ci[0], test.estimate - stats.t.ppf(0.95, df_ref) * test.se, rel_tol=1e-10)
    full = sm.OLS(y, np.eye(3)[cell]).fit().t_test(np.array([[1.0, -1.0, 0.0]]))
    assert math.isclose(a.hypotheses[0].test.statistic, float(full.tvalue[0, 0]), rel_tol=1e-10)
    assert not math.isclose(test.p, a.hypotheses[0].test.p, rel_tol=1e-3)


def test_toothgrowth_partial_eta_squared_rows():
    """Each ToothGrowth row carries partial η² = SS/(SS + SS_error) with a 90% interval that brackets it."""
    df = pd.read_csv(DATA_DIR / "ToothGrowth.csv")
    d = build_design([Factor("supp", ("OJ", "VC")), Factor("dose", ("0.5", "1.0", "2.0"))], "effects")
    codes = np.column_stack([pd.Categorical(df.supp, categories=["OJ", "VC"]).codes,
                             pd.Categorical(df.dose.astype(str), categories=["0.5", "1.0", "2.0"]).codes])
    a = fit_analysis(d, df.len.to_numpy(float), d.cell_index(codes), [], permutations=0)
    for r, x in zip(a.anova.rows, a.inference.rows):
        pe = x.effect_sizes.partial_eta_squared
        assert math.isclose(pe.value, r.ss / (r.ss + a.anova.ss_error), rel_tol=1e-12)
        assert pe.ci[0] <= pe.value <= pe.ci[1]
