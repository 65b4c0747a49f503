"""Two one-sided tests (TOST) of equivalence claims, against references computed here.

Sources of the reference values:
* statsmodels.stats.weightstats.ttost_ind (two independent samples, pooled and Welch) on the
  PlantGrowth data (Dobson 1983, An Introduction to Statistical Modelling, Table 2.1; tests/data);
* scipy.stats.t on a published worked example: Lakens (2017), "Equivalence tests: a practical primer
  for t tests, correlations, and meta-analyses", Social Psychological and Personality Science 8,
  355-362, the two-sample example with bounds of d = ±0.5 (the summary inputs below are quoted from
  memory of that example: means 4.7857 and 4.6569, SDs 1.0897 and 1.1895, n 49 and 51);
* statsmodels OLS t_test with the contrast on all three PlantGrowth groups (the model's error df).
"""

from __future__ import annotations

import math
from fractions import Fraction as Fr
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy import stats
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.weightstats import ttost_ind

from reporter.fitting.equivalence import EQUIVALENT, INCONCLUSIVE, NOT_EQUIVALENT, decide, tost
from reporter.fitting.linear import fit_model
from reporter.inference.analysis import fit_analysis, fit_analysis_on_rows
from reporter.intake.cells import CellStats
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_statement

DATA = Path(__file__).resolve().parents[1] / "data" / "PlantGrowth.csv"
REL = 1e-10


def plant_growth():
    return pd.read_csv(DATA)


def rows_fit(frame, groups, statement, **options):
    design = build_design([Factor("group", tuple(groups))], "cell-means")
    frame = frame[frame.group.isin(groups)]
    cell = frame.group.map({g: i for i, g in enumerate(groups)}).to_numpy()
    c = compile_statement(design, statement, name="claim")
    return fit_analysis_on_rows(design, frame.weight.to_numpy(float), cell, [c], **options).hypotheses[0]


def test_two_groups_match_statsmodels_ttost_ind_pooled_and_welch():
    """ctrl − trt1 within (−0.5, 0.7): both one-sided t and p, the df and the decision p match
    statsmodels' ttost_ind (pooled); the Welch-type TOST matches ttost_ind(usevar="unequal")."""
    pg = plant_growth()
    h = rows_fit(pg, ["ctrl", "trt1"], "-0.5 < ctrl - trt1 < 0.7")
    x1 = pg.weight[pg.group == "ctrl"].to_numpy()
    x2 = pg.weight[pg.group == "trt1"].to_numpy()
    p, (t1, p1, df1), (t2, p2, df2) = ttost_ind(x1, x2, -0.5, 0.7, usevar="pooled")
    t = h.test
    assert t.lower.statistic == pytest.approx(t1, rel=REL) and t.lower.p == pytest.approx(p1, rel=REL)
    assert t.upper.statistic == pytest.approx(t2, rel=REL) and t.upper.p == pytest.approx(p2, rel=REL)
    assert t.df[0] == df1 == df2 == 18 and t.p == pytest.approx(p, rel=REL)
    # the 1 − 2α interval: scipy.stats.t quantile with the pooled SE
    se = math.sqrt(((x1.var(ddof=1) * 9 + x2.var(ddof=1) * 9) / 18) * (1 / 10 + 1 / 10))
    d = x1.mean() - x2.mean()
    q = stats.t.ppf(0.95, 18)
    assert t.ci == pytest.approx((d - q * se, d + q * se), rel=REL) and t.ci_level == pytest.approx(0.90)
    w = h.extras.robust.equivalence
    p, (t1, p1, df1), (t2, p2, df2) = ttost_ind(x1, x2, -0.5, 0.7, usevar="unequal")
    assert w.lower.statistic == pytest.approx(t1, rel=REL) and w.lower.p == pytest.approx(p1, rel=REL)
    assert w.upper.statistic == pytest.approx(t2, rel=REL) and w.upper.p == pytest.approx(p2, rel=REL)
    assert w.df[0] == pytest.approx(df1, rel=REL) and w.p == pytest.approx(p, rel=REL)
    assert w.ci == pytest.approx((d - stats.t.ppf(0.95, df1) * w.se, d + stats.t.ppf(0.95, df1) * w.se), rel=REL)


def test_three_groups_use_the_model_error_df_as_statsmodels_ols():
    """trt2 − trt1 within ±1 in the three-group model: SE and df (27) of the model, as statsmodels
    OLS t_test of the same contrast; p from scipy.stats.t on its t values."""
    pg = plant_growth()
    h = rows_fit(pg, ["ctrl", "trt1", "trt2"], "-1 < trt2 - trt1 < 1")
    ols = smf.ols("weight ~ C(group) - 1", pg).fit()
    names = list(ols.params.index)
    r = np.zeros(3)
    r[names.index("C(group)[trt2]")], r[names.index("C(group)[trt1]")] = 1, -1
    tt = ols.t_test(r)
    est, se, df = float(tt.effect[0]), float(tt.sd[0, 0]), ols.df_resid
    assert h.test.estimate == pytest.approx(est, rel=REL) and h.test.se == pytest.approx(se, rel=REL)
    assert h.test.df == (27.0,) == (df,)
    assert h.test.lower.p == pytest.approx(stats.t.sf((est + 1) / se, df), rel=REL)
    assert h.test.upper.p == pytest.approx(stats.t.cdf((est - 1) / se, df), rel=REL)
    assert h.test.ci == pytest.approx(tuple(tt.conf_int(alpha=0.10)[0]), rel=REL)


def lakens_cells():
    """The summary inputs of the published example (from memory; see the module docstring)."""
    n = np.array([49, 51])
    mean = np.array([4.7857, 4.6569])
    sd = np.array([1.0897, 1.1895])
    return CellStats(n=n, offset_mean=mean, ss=sd**2 * (n - 1), pivot=0.0, pivot_exact=Fr(0)), n, mean, sd


def test_published_example_sd_bounds_with_scipy_t():
    """Bounds of ±0.5 residual SDs on Lakens' (2017) two-sample example: the bounds are 0.5 times
    the pooled SD; both one-sided t and p, the decision p and the 90% interval as scipy.stats.t
    gives them from the summary statistics (classical and Welch-type)."""
    cells, n, mean, sd = lakens_cells()
    design = build_design([Factor("g", ("first", "second"))], "cell-means")
    c = compile_statement(design, "-0.5 sd < first - second < 0.5 sd", name="eq")
    an = fit_analysis(design, cells, None, [c])
    h = an.hypotheses[0]
    df = int(n.sum() - 2)
    sp = math.sqrt(float(np.sum(sd**2 * (n - 1))) / df)
    se = sp * math.sqrt(1 / n[0] + 1 / n[1])
    d = mean[0] - mean[1]
    lo, hi = -0.5 * sp, 0.5 * sp
    t1, t2 = (d - lo) / se, (d - hi) / se
    assert h.contrast.bounds == (Fr(-1, 2) * Fr(sp), Fr(1, 2) * Fr(sp)) or \
        [float(b) for b in h.contrast.bounds] == pytest.approx([lo, hi], rel=REL)
    assert h.contrast.from_sd.residual_sd == pytest.approx(sp, rel=REL)
    assert h.test.lower.statistic == pytest.approx(t1, rel=REL)
    assert h.test.lower.p == pytest.approx(stats.t.sf(t1, df), rel=REL)
    assert h.test.upper.statistic == pytest.approx(t2, rel=REL)
    assert h.test.upper.p == pytest.approx(stats.t.cdf(t2, df), rel=REL)
    assert h.test.p == pytest.approx(max(stats.t.sf(t1, df), stats.t.cdf(t2, df)), rel=REL)
    q = stats.t.ppf(0.95, df)
    assert h.test.ci == pytest.approx((d - q * se, d + q * se), rel=REL)
    assert h.test.decision == EQUIVALENT  # the interval lies inside ±0.5 SD here
    # Welch–Satterthwaite version (Welch 1947), df from the Satterthwaite formula
    a = sd**2 / n
    wdf = a.sum() ** 2 / float(np.sum(a**2 / (n - 1)))
    wse = math.sqrt(a.sum())
    w = h.extras.robust.equivalence
    assert w.df[0] == pytest.approx(wdf, rel=REL)
    assert w.lower.p == pytest.approx(stats.t.sf((d - lo) / wse, wdf), rel=REL)
    assert w.upper.p == pytest.approx(stats.t.cdf((d - hi) / wse, wdf), rel=REL)


def test_minimum_effect_in_sd_units_is_one_sided_against_h():
    """'first - second > -0.3 sd' (non-inferiority by 0.3 SD): the one-sided t against
    h = −0.3 times the residual SD, as scipy.stats.t gives it."""
    cells, n, mean, sd = lakens_cells()
    design = build_design([Factor("g", ("first", "second"))], "cell-means")
    c = compile_statement(design, "first - second > -0.3 sd", name="ni")
    h = fit_analysis(design, cells, None, [c]).hypotheses[0]
    df = int(n.sum() - 2)
    sp = math.sqrt(float(np.sum(sd**2 * (n - 1))) / df)
    se = sp * math.sqrt(1 / n[0] + 1 / n[1])
    t = (mean[0] - mean[1] + 0.3 * sp) / se
    assert h.test.alternative == "greater" and h.test.rhs == pytest.approx(-0.3 * sp, rel=REL)
    assert h.test.statistic == pytest.approx(t, rel=REL) and h.test.p == pytest.approx(stats.t.sf(t, df), rel=REL)


def test_equivalence_p_enters_the_multiplicity_family():
    """The TOST p (the larger one-sided p) is the one Holm adjusts (statsmodels multipletests)."""
    pg = plant_growth()
    design = build_design([Factor("group", ("ctrl", "trt1", "trt2"))], "cell-means")
    cs = [compile_statement(design, s, name=s) for s in ("-1 < trt2 - trt1 < 1", "trt2 > ctrl", "-0.5 < ctrl - trt1 < 0.5")]
    cell = pg.group.map({"ctrl": 0, "trt1": 1, "trt2": 2}).to_numpy()
    an = fit_analysis_on_rows(design, pg.weight.to_numpy(float), cell, cs, correction="holm")
    ps = [h.test.p for h in an.hypotheses]
    assert an.hypotheses[0].test.p == max(an.hypotheses[0].test.lower.p, an.hypotheses[0].test.upper.p)
    ref = multipletests(ps, method="holm")[1]
    assert [h.p_adjusted for h in an.hypotheses] == pytest.approx(list(ref), rel=1e-12)


# ---- the decision at the edges -----------------------------------------------------------------

def _fit():
    pg = plant_growth()
    design = build_design([Factor("group", ("ctrl", "trt1", "trt2"))], "cell-means")
    cell = pg.group.map({"ctrl": 0, "trt1": 1, "trt2": 2}).to_numpy()
    from reporter.intake.cells import describe_cells
    return design, fit_model(describe_cells(pg.weight.to_numpy(float), cell, 3), design.matrix)


W = ((Fr(-1), Fr(1), Fr(0)),)  # trt1 − ctrl


def _edges():
    design, fit = _fit()
    lo, hi = tost(fit, W, (Fr(-10), Fr(10))).ci
    return fit, lo, hi


def down(x):
    return float(np.nextafter(x, -np.inf))


def up(x):
    return float(np.nextafter(x, np.inf))


@pytest.mark.parametrize("bounds, word", [
    (lambda lo, hi: (down(lo), up(hi)), EQUIVALENT),          # just inside on both sides
    (lambda lo, hi: (lo, up(hi)), INCONCLUSIVE),              # touching LOW exactly
    (lambda lo, hi: (down(lo), hi), INCONCLUSIVE),            # touching HIGH exactly
    (lambda lo, hi: (lo, hi), INCONCLUSIVE),                  # touching both
    (lambda lo, hi: (up(lo), hi + 1), INCONCLUSIVE),          # just outside on the low side
    (lambda lo, hi: (lo - 1, down(hi)), INCONCLUSIVE),        # just outside on the high side
    (lambda lo, hi: (up(hi), hi + 1), NOT_EQUIVALENT),        # entirely below LOW, just
    (lambda lo, hi: (hi, hi + 1), INCONCLUSIVE),              # its upper end touching LOW
    (lambda lo, hi: (lo - 1, down(lo)), NOT_EQUIVALENT),      # entirely above HIGH, just
    (lambda lo, hi: (lo - 1, lo), INCONCLUSIVE),              # its lower end touching HIGH
])
def test_decision_at_the_edges(bounds, word):
    """The 1 − 2α interval against the bounds, compared strictly (common practice, no source for the
    tie rule: a one-sided p equal to α does not reject, so touching is inconclusive)."""
    fit, lo, hi = _edges()
    b = bounds(lo, hi)
    t = tost(fit, W, (Fr(b[0]), Fr(b[1])))
    assert t.ci == (lo, hi)  # the interval does not depend on the bounds
    assert t.decision == word
    # at a tie the deciding p equals α up to rounding (the interval is the exact rule there)
    if word == EQUIVALENT or b[0] == lo or b[1] == hi:
        assert t.p == pytest.approx(0.05, abs=1e-12)


def test_decision_words_agree_with_the_p_values():
    """Off the ties, 'equivalent' ⇔ both one-sided p < α; 'not equivalent' ⇔ a one-sided test in
    the other direction rejects (scipy.stats.t on the same t)."""
    fit, lo, hi = _edges()
    df = fit.df_error
    for low, high in [(-2, 2), (-0.2, 0.9), (0.5, 3), (-3, -1), (0.9, 1.2), (-1.5, -0.5)]:
        t = tost(fit, W, (Fr(low), Fr(high)))
        both = t.lower.p < 0.05 and t.upper.p < 0.05
        outside = stats.t.cdf(t.lower.statistic, df) < 0.05 or stats.t.sf(t.upper.statistic, df) < 0.05
        assert (t.decision == EQUIVALENT) == both
        assert (t.decision == NOT_EQUIVALENT) == outside


def test_decide_plain_numbers():
    assert decide((1.0, 2.0), (0.0, 3.0)) == EQUIVALENT
    assert decide((1.0, 2.0), (1.0, 3.0)) == INCONCLUSIVE
    assert decide((1.0, 2.0), (2.5, 3.0)) == NOT_EQUIVALENT
    assert decide((1.0, 2.0), (2.0, 3.0)) == INCONCLUSIVE
    assert decide((1.0, 2.0), (-1.0, 0.5)) == NOT_EQUIVALENT


def test_rounding_bounds_hold_the_tost_p_over_the_rounding_box():
    """Summaries rounded to 4 decimals: the TOST p computed at random points of the rounding box
    (seeded, numpy default_rng(12)) lies within the reported p bounds (a containment check; the
    reference is the same test recomputed at each point)."""
    from reporter.fitting.rounding import bound_rounding

    cells, n, mean, sd = lakens_cells()
    design = build_design([Factor("g", ("first", "second"))], "cell-means")
    c = compile_statement(design, "-0.6 < first - second < 0.6", name="eq")
    an = fit_analysis(design, cells, None, [c], inference=False)
    b = bound_rounding(design, cells, sd, "sd", 0.00005, 0.00005, an.anova, [c], [an.hypotheses[0].test])
    (hb,) = b.hypotheses
    assert hb.p_low <= an.hypotheses[0].test.p <= hb.p_high
    rng = np.random.default_rng(12)
    for _ in range(200):
        m2 = mean + rng.uniform(-0.00005, 0.00005, 2)
        s2 = sd + rng.uniform(-0.00005, 0.00005, 2)
        cs = CellStats(n=n, offset_mean=m2, ss=s2**2 * (n - 1), pivot=0.0, pivot_exact=Fr(0))
        p = tost(fit_model(cs, design.matrix), c.weights, c.bounds).p
        assert hb.p_low - 1e-15 <= p <= hb.p_high + 1e-15
