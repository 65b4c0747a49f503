"""The inference layer with a covariate, wired through fit_analysis, on the anorexia data of Hand
et al. (1993), *A Handbook of Small Data Sets*, data set 285 (post-treatment weight, pre-treatment
weight as the covariate, three treatments), and on simulated unbalanced 2 x 2 data; every number
against statsmodels OLS with sum coding (reference library) or scipy.stats."""

from __future__ import annotations

from dataclasses import replace
from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.formula.api import ols
from statsmodels.stats.anova import anova_lm

import reporter
from conftest import DATA_DIR
from reporter.inference.analysis import fit_analysis
from reporter.inference.effectsizes import partial_eta_squared_ci
from reporter.intake.cells import describe_cells, describe_covariates
from reporter.intake.memory_rows import MemoryRows
from reporter.intake.plan import CovariateSpec
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_effect, compile_statement

from ancova_cases import simulate

TREATMENTS = ("Cont", "CBT", "FT")


def _anorexia():
    df = pd.read_csv(DATA_DIR / "anorexia.csv")
    cell = pd.Categorical(df.Treat, categories=TREATMENTS).codes.astype(int)
    return df, cell, df.Postwt.to_numpy(float), df.Prewt.to_numpy(float)[:, None]


def _analyze(design, cell, y, x, hyps, **kw):
    k = design.k
    cells = replace(describe_cells(y, cell, k), covariates=describe_covariates(y, x, cell, k))
    rows = MemoryRows(y, cell, k, np.arange(1, y.size + 1), x=x)
    return fit_analysis(design, cells, rows, hyps, **kw)


@pytest.fixture(scope="module")
def anorexia():
    df, cell, y, x = _anorexia()
    d = build_design([Factor("Treat", TREATMENTS)], "cell-means")
    hyps = [compile_effect(d, "Treat"), compile_statement(d, "CBT > Cont"),
            compile_statement(d, "FT = Cont", role="exploratory")]
    a = _analyze(d, cell, y, x, hyps, posthoc=("all-pairs", "versus-control"), control="Cont",
                 permutations=999, seed=3)
    fit = ols("Postwt ~ C(Treat, Sum) + Prewt", df).fit()
    hc3 = ols("Postwt ~ C(Treat, Sum) + Prewt", df).fit(cov_type="HC3", use_t=True)
    return a, df, fit, hc3


def _contrast_rows(fit, C, xbar):
    """L over the statsmodels parameters (Intercept, Treat sum-coded, Prewt) for C over the
    adjusted means at Prewt = xbar: mu_adj = Intercept + Treat effect + b·xbar."""
    names = list(fit.params.index)
    A = np.zeros((3, len(names)))
    A[:, names.index("Intercept")] = 1.0
    A[:, names.index("Prewt")] = xbar
    for i, level in enumerate(TREATMENTS):
        col = f"C(Treat, Sum)[S.{level}]"
        if col in names:
            A[i, names.index(col)] = 1.0
        else:  # the last level in statsmodels' (sorted) order: minus the others
            A[i, [j for j, nm in enumerate(names) if nm.startswith("C(Treat, Sum)")]] = -1.0
    return np.asarray(C, float) @ A


def test_effect_sizes_and_sensitivity_use_the_ancova_table(anorexia):
    """Partial η² of Treat = SS_Treat/(SS_Treat + SSE) with statsmodels anova_lm(typ=3) on sum
    coding (reference library), error df 68 = 72 − 3 − 1 (the slope counted); the sensitivity
    analysis uses the same error df."""
    a, df, fit, _ = anorexia
    table = anova_lm(fit, typ=3)
    ss_t, sse = table.loc["C(Treat, Sum)", "sum_sq"], table.loc["Residual", "sum_sq"]
    row = next(i for i, r in enumerate(a.anova.rows) if r.factors == ("Treat",))
    es = a.inference.rows[row].effect_sizes
    assert es.partial_eta_squared.value == pytest.approx(ss_t / (ss_t + sse), rel=1e-9)
    assert es.df_error == 68
    mse = sse / 68
    assert es.partial_omega_squared.value == pytest.approx((ss_t - 2 * mse) / (ss_t + (72 - 2) * mse), rel=1e-9)
    assert es.F == pytest.approx(table.loc["C(Treat, Sum)", "F"], rel=1e-9)
    assert es.partial_eta_squared.ci == partial_eta_squared_ci(es.F, 2, 68, 0.90)
    assert a.inference.rows[row].sensitivity.df_error == 68


def test_robust_tests_are_hc3_with_covariate_leverage(anorexia):
    """The effect's robust F and the one-sided contrast's robust t equal statsmodels' f_test and
    t_test on the HC3 fit (reference library) to 1e-9."""
    a, df, _, hc3 = anorexia
    xbar = df.Prewt.mean()
    rob = a.hypotheses[0].extras.robust
    ref = hc3.f_test(_contrast_rows(hc3, [[1, -1, 0], [0, 1, -1]], xbar))
    assert rob.method == "HC3 Wald F"
    assert rob.statistic == pytest.approx(float(ref.fvalue), rel=1e-9)
    assert rob.df == (2, 68)
    t = a.hypotheses[1].extras.robust
    ref_t = hc3.t_test(_contrast_rows(hc3, [[-1, 1, 0]], xbar))
    assert t.method == "HC3 t"
    assert t.statistic == pytest.approx(np.asarray(ref_t.tvalue).item(), rel=1e-9)
    assert t.p == pytest.approx(np.asarray(ref_t.pvalue).item() / 2, rel=1e-8)  # one-sided, t > 0


def test_standardized_contrast_uses_the_adjusted_model(anorexia):
    """d's t equals the classical t of the adjusted contrast, statsmodels t_test (reference), and
    d = (CBT − Cont adjusted)/sqrt(MSE of the covariance model)."""
    a, df, fit, _ = anorexia
    h = a.hypotheses[1]
    ref = fit.t_test(_contrast_rows(fit, [[-1, 1, 0]], df.Prewt.mean()))
    assert h.test.statistic == pytest.approx(np.asarray(ref.tvalue).item(), rel=1e-9)
    d = h.extras.effect_size
    assert d.value == pytest.approx(np.asarray(ref.effect).item() / np.sqrt(fit.mse_resid), rel=1e-9)
    assert "covariate-adjusted model" in d.method


def test_posthoc_families_on_adjusted_means(anorexia):
    """Tukey–Kramer differences and SEs of the adjusted means equal statsmodels t_test (reference),
    p from scipy.stats.studentized_range; Dunnett with two comparisons is computed."""
    a, df, fit, _ = anorexia
    fams = {key: res for key, _, res, _ in a.inference.posthoc}
    for c in fams["all-pairs"].comparisons:
        C = np.zeros((1, 3))
        C[0, c.first], C[0, c.second] = 1, -1
        ref = fit.t_test(_contrast_rows(fit, C, df.Prewt.mean()))
        assert c.difference == pytest.approx(np.asarray(ref.effect).item(), rel=1e-9)
        assert c.se == pytest.approx(np.asarray(ref.sd).item(), rel=1e-9)
        assert c.p_adjusted == pytest.approx(stats.studentized_range.sf(np.sqrt(2) * abs(c.statistic), 3, 68),
                                             abs=1e-8)
    assert len(fams["versus-control"].comparisons) == 2


def test_permutation_keeps_the_covariate(anorexia):
    """The permutation F of the effect is Freedman–Lane with the covariate kept; its observed F is
    the classical F of the adjusted means."""
    a, *_ = anorexia
    perm = a.hypotheses[0].extras.permutation
    assert "covariates kept" in perm.method
    assert perm.statistic == pytest.approx(a.hypotheses[0].test.statistic, rel=1e-9)


def test_checks_on_ancova_residuals_and_slopes(anorexia):
    """Levene on the ANCOVA residuals by cell equals scipy.stats.levene of statsmodels' residuals
    (reference libraries); the slopes check equals statsmodels' F for adding Treat x Prewt."""
    a, df, fit, _ = anorexia
    checks = a.inference.assumptions
    _, cell, _, _ = _anorexia()
    groups = [fit.resid[cell == c] for c in range(3)]
    assert checks.levene.statistic == pytest.approx(stats.levene(*groups, center="mean").statistic, rel=1e-9)
    inter = ols("Postwt ~ C(Treat, Sum) * Prewt", df).fit()
    F, p, df1 = inter.compare_f_test(fit)
    assert checks.slopes.F == pytest.approx(F, rel=1e-9)
    assert (checks.slopes_note is not None) == (checks.slopes.p < 0.05)
    assert any("residuals of the covariance analysis" in n for n in checks.notes)


def test_tests_not_defined_for_adjusted_means_say_why(anorexia):
    """Welch's ANOVA, Games–Howell and Kruskal–Wallis are not computed, each with its reason."""
    a, *_ = anorexia
    inf = a.inference
    assert inf.welch_oneway is None and inf.games_howell is None and inf.kruskal is None
    why = dict(inf.not_applicable)
    assert {"Welch's ANOVA", "Games–Howell pairs", "Kruskal–Wallis test"} <= set(why)
    assert "adjusted" in why["Welch's ANOVA"] and inf.kruskal_note == why["Kruskal–Wallis test"]


def test_two_by_two_with_two_covariates_against_statsmodels():
    """Simulated unbalanced 2 x 2 with two covariates: the interaction's HC3 F and every Type III
    row's partial η² equal statsmodels (sum coding, reference library)."""
    sizes = [9, 14, 11, 16]
    cell, y, x = simulate(sizes, p=2, seed=12)
    d = build_design([Factor("A", ("a1", "a2")), Factor("B", ("b1", "b2"))], "cell-means")
    a = _analyze(d, cell, y, x, [compile_effect(d, "A x B")], permutations=0)
    df = pd.DataFrame({"y": y, "A": np.where(cell < 2, "a1", "a2"), "B": np.where(cell % 2 == 0, "b1", "b2"),
                       "x1": x[:, 0], "x2": x[:, 1]})
    formula = "y ~ C(A, Sum) * C(B, Sum) + x1 + x2"
    fit = ols(formula, df).fit()
    hc3 = ols(formula, df).fit(cov_type="HC3", use_t=True)
    names = list(hc3.params.index)
    L = np.zeros((1, len(names)))
    L[0, names.index("C(A, Sum)[S.a1]:C(B, Sum)[S.b1]")] = 1.0
    rob = a.hypotheses[0].extras.robust
    assert rob.statistic == pytest.approx(float(hc3.f_test(L).fvalue), rel=1e-9)
    table = anova_lm(fit, typ=3)
    sse = table.loc["Residual", "sum_sq"]
    for r, extra in zip(a.anova.rows, a.inference.rows):
        if r.covariate is not None or not r.factors:
            continue
        key = " : ".join(f"C({f}, Sum)" for f in r.factors).replace(" : ", ":")
        ss = table.loc[key, "sum_sq"]
        assert extra.effect_sizes.partial_eta_squared.value == pytest.approx(ss / (ss + sse), rel=1e-9)


def test_per_cell_slopes_at_a_stated_value():
    """Per-cell slopes evaluated at Prewt = 85 (adjust_to): the Treat effect's classical F, its
    HC3 F and the permutation's observed F equal statsmodels on Postwt ~ Treat * Prewt with L over
    the cell lines at 85 (reference library); Dunnett's comparisons with the control are computed
    (the adjusted means are uncorrelated with a slope per cell)."""
    df, cell, y, x = _anorexia()
    d = build_design([Factor("Treat", TREATMENTS)], "cell-means")
    spec = CovariateSpec("Prewt", 85.0, Fraction(85), "per-cell")
    a = _analyze(d, cell, y, x, [compile_effect(d, "Treat")], posthoc=("versus-control",), control="Cont",
                 permutations=199, seed=9, covariates=[spec])
    X = np.hstack([np.eye(3)[cell], np.eye(3)[cell] * x])
    A = np.hstack([np.eye(3), np.eye(3) * 85.0])
    L = np.array([[1.0, -1, 0], [0, 1, -1]]) @ A
    fit = sm.OLS(y, X).fit()
    hc3 = sm.OLS(y, X).fit(cov_type="HC3", use_t=True)
    h = a.hypotheses[0]
    assert h.test.statistic == pytest.approx(float(fit.f_test(L).fvalue), rel=1e-9)
    assert h.extras.robust.statistic == pytest.approx(float(hc3.f_test(L).fvalue), rel=1e-9)
    assert h.extras.permutation.statistic == pytest.approx(h.test.statistic, rel=1e-9)
    fams = {key: res for key, _, res, _ in a.inference.posthoc}
    assert len(fams["versus-control"].comparisons) == 2


E2E_PLAN = """
title = "Weight after treatment, adjusted for weight before (published data)"
[data]
path = "anorexia.csv"
outcome = "Postwt"
reader = "{reader}"
[[factors]]
name = "Treat"
levels = ["Cont", "CBT", "FT"]
[[covariates]]
name = "Prewt"
[analysis]
unequal_variances = "always-robust"
follow_up = ["all-pairs-tukey"]
permutations = 200
[[hypotheses]]
name = "treatments differ"
effect = "Treat"
"""


@pytest.mark.parametrize("reader", ["in-memory", "out-of-core"])
def test_plan_with_a_covariate_on_both_readers(project, reader):
    """A plan with [[covariates]] read by either reader: the confirmatory HC3 F equals statsmodels'
    f_test on the HC3 fit (reference library) to 1e-9 (the out-of-core rows through SQL batches),
    Levene on the residuals equals scipy.stats.levene, and the permutation F runs where the rows are
    in memory and says why not otherwise."""
    plan = project(E2E_PLAN.format(reader=reader), {"anorexia.csv": (DATA_DIR / "anorexia.csv").read_text()})
    a = reporter.report(plan).analysis
    df, cell, _, _ = _anorexia()
    hc3 = ols("Postwt ~ C(Treat, Sum) + Prewt", df).fit(cov_type="HC3", use_t=True)
    ref = hc3.f_test(_contrast_rows(hc3, [[1, -1, 0], [0, 1, -1]], df.Prewt.mean()))
    h = a.hypotheses[0]
    assert h.extras.confirmatory == "robust" and h.extras.robust.method == "HC3 Wald F"
    assert h.extras.robust.statistic == pytest.approx(float(ref.fvalue), rel=1e-9)
    fit = ols("Postwt ~ C(Treat, Sum) + Prewt", df).fit()
    groups = [fit.resid[cell == c] for c in range(3)]
    assert a.inference.assumptions.levene.statistic == pytest.approx(
        stats.levene(*groups, center="mean").statistic, rel=1e-9)
    if reader == "in-memory":
        assert "covariates kept" in h.extras.permutation.method
    else:
        assert h.extras.permutation is None and "not held in memory" in a.inference.permutation_note
