"""Edges of reporter.inference.effectsizes that a mutation run found unguarded, each against an
independent computation: Hedges' (1981) gamma-function J, noncentral-t and noncentral-F
inversions by brentq on scipy.stats.nct / scipy.stats.ncf, and the scaling rule of a
standardized contrast written out by hand.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import special, stats

from reporter.errors import FitError
from reporter.inference.effectsizes import (
    hedges_correction, partial_eta_squared_ci, standardized_contrast, t_noncentrality_ci,
)

from refcheck import ncf_interval, nct_interval


@pytest.mark.parametrize("df, exact", [
    (2.0, 1 / math.sqrt(math.pi)),                              # Γ(1) / (√1 · Γ(1/2))
    (1.5, math.gamma(0.75) / (math.sqrt(0.75) * math.gamma(0.25))),
    (3.0, math.gamma(1.5) / (math.sqrt(1.5) * math.gamma(1.0))),
])
def test_hedges_j_at_the_smallest_df(df, exact):
    """J = Γ(m/2) / (√(m/2) Γ((m − 1)/2)) (Hedges 1981, eq. 6b), by math.gamma, where the
    approximation 1 − 3/(4m − 1) is far off."""
    assert hedges_correction(df) == pytest.approx(exact, rel=1e-13)
    assert abs(exact - (1 - 3 / (4 * df - 1))) > 3e-3


@pytest.mark.parametrize("df", [1.0, 0.5, math.inf, math.nan])
def test_hedges_j_needs_more_than_one_df(df):
    """J is undefined for m <= 1 (Γ((m − 1)/2) has a pole at 0): a clear error, not J = 0."""
    with pytest.raises(FitError, match="more than 1"):
        hedges_correction(df)


def test_default_levels_of_the_interval_helpers():
    """partial_eta_squared_ci defaults to 90% (Steiger 2004: 1 − 2α at α = .05) and
    t_noncentrality_ci to 95%; both against brentq on scipy.stats.ncf / scipy.stats.nct."""
    F, df1, df2 = 4.2, 2, 27
    lo, hi = ncf_interval(F, df1, df2, 0.90)
    m = df1 + df2 + 1
    got = partial_eta_squared_ci(F, df1, df2)
    assert got == pytest.approx((lo / (lo + m), hi / (hi + m)), rel=1e-8)
    t, df = 2.3, 18
    assert t_noncentrality_ci(t, df) == pytest.approx(nct_interval(t, df, 0.95), rel=1e-8)


def _d_reference(weights, h, means, n, mse, df, level=0.95):
    """d = s(c'ȳ − h)/√MSE with s = 1/Σ(positive weights); interval: noncentral-t bounds times
    √Σ(s·c)²/n."""
    c = np.asarray(weights, float)
    s = 1 / c[c > 0].sum()
    used = c != 0
    spread = math.sqrt(float(np.sum((s * c[used]) ** 2 / np.asarray(n, float)[used])))
    d = s * (float(c @ means) - h) / math.sqrt(mse)
    lo, hi = nct_interval(d / spread, df, level)
    return d, (lo * spread, hi * spread)


CASES = {
    # a cell with a single row takes part in the contrast
    "one-row cell": ([1, -1, 0], 0.0, [5.2, 3.9, 4.4], [1, 6, 5]),
    # weights in thirds: their float sum is 5.6e-17, still a contrast (scale 1/Σ positive)
    "thirds": ([1 / 3, 1 / 3, 1 / 3, -1 / 3, -1 / 3, -1 / 3], 0.0, [5.1, 4.8, 6.0, 4.2, 4.0, 4.5], [4, 5, 6, 5, 4, 6]),
}


@pytest.mark.parametrize("case", list(CASES))
def test_standardized_contrast_scaling_and_interval(case):
    """d and its 95% interval against the scaling rule and brentq on scipy.stats.nct; g = J·d."""
    weights, h, means, n = CASES[case]
    if case == "thirds":
        assert sum(weights) != 0  # the float sum is not exactly zero
    mse, df = 1.7, 23.0
    est = float(np.dot(weights, means))
    res = standardized_contrast(weights, h, est, n, mse, df)
    d, ci = _d_reference(weights, h, np.array(means), n, mse, df)
    assert res.d.value == pytest.approx(d, rel=1e-12)
    assert res.d.ci == pytest.approx(ci, rel=1e-8)
    j = math.exp(special.gammaln(df / 2) - 0.5 * math.log(df / 2) - special.gammaln((df - 1) / 2))
    assert res.g.value == pytest.approx(j * d, rel=1e-12)


def test_standardized_contrast_one_sided_interval():
    """A '>' contrast has a one-sided lower bound from nct.cdf(t; df, δ) = level (brentq)."""
    weights, means, n = [-1, 0, 1], np.array([4.0, 4.5, 5.3]), [6, 6, 7]
    mse, df = 1.2, 16.0
    res = standardized_contrast(weights, 0.0, float(np.dot(weights, means)), n, mse, df,
                                alternative="greater")
    spread = math.sqrt(1 / 6 + 1 / 7)
    d = (5.3 - 4.0) / math.sqrt(mse)
    lo, hi = nct_interval(d / spread, df, 0.95, "greater")
    assert res.d.ci[0] == pytest.approx(lo * spread, rel=1e-8)
    assert math.isinf(res.d.ci[1])
    assert stats.nct.cdf(d / spread, df, lo) == pytest.approx(0.95, abs=1e-9)


def test_standardized_contrast_refuses_weights_that_do_not_sum_to_zero():
    """2a − b is not a difference of means: its size in SD units depends on where the scale
    starts, so no d is given (the sum of the weights is named)."""
    with pytest.raises(FitError, match="sum to 1, not 0"):
        standardized_contrast([2, -1, 0], 3.0, 6.5, [5, 6, 5], 1.7, 23.0)
