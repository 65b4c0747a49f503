"""An equivalence claim about covariate-adjusted means: both one-sided tests and the 1 − 2α
interval match statsmodels OLS (cell-means coding with the centred covariate, t_test of the
contrast against each bound) with p from scipy.stats.t; data simulated here with
numpy default_rng(20261203)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from scipy import stats

from reporter.inference.analysis import fit_analysis_on_rows
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_statement


def test_adjusted_equivalence_matches_statsmodels():
    rng = np.random.default_rng(20261203)
    n = np.array([14, 19, 11])
    cell = np.repeat(np.arange(3), n)
    x = rng.normal(50, 10, cell.size) + 2.0 * cell
    y = 5 + 0.4 * x + np.array([0.0, 0.3, 1.5])[cell] + rng.normal(0, 2, cell.size)
    design = build_design([Factor("g", ("a", "b", "c"))], "cell-means")
    c = compile_statement(design, "-1.5 < b - a < 1.5", name="eq")
    h = fit_analysis_on_rows(design, y, cell, [c], x=x[:, None], inference=False).hypotheses[0]
    frame = pd.DataFrame({"y": y, "g": np.array(["a", "b", "c"])[cell], "xc": x - x.mean()})
    ols = smf.ols("y ~ C(g) - 1 + xc", frame).fit()
    r = np.zeros(len(ols.params))
    names = list(ols.params.index)
    r[names.index("C(g)[b]")], r[names.index("C(g)[a]")] = 1, -1
    df = ols.df_resid
    t_low = float(np.ravel(ols.t_test((r, -1.5)).tvalue)[0])
    t_high = float(np.ravel(ols.t_test((r, 1.5)).tvalue)[0])
    t = h.test
    assert t.df == (df,)
    assert t.lower.statistic == pytest.approx(t_low, rel=1e-9) and t.upper.statistic == pytest.approx(t_high, rel=1e-9)
    assert t.lower.p == pytest.approx(stats.t.sf(t_low, df), rel=1e-9)
    assert t.upper.p == pytest.approx(stats.t.cdf(t_high, df), rel=1e-9)
    assert t.ci == pytest.approx(tuple(ols.t_test(r).conf_int(alpha=0.10)[0]), rel=1e-9)
