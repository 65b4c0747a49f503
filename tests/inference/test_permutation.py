"""Tests of reporter.inference.permutation against the F distribution, scipy.stats.permutation_test,
statsmodels OLS and the p-value rule of Phipson & Smyth (2010)."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from reporter.errors import FitError
from reporter.inference.permutation import _null_distribution, permutation_f_test


INTERACTION_2X3 = np.kron([[1.0, -1.0]], [[1.0, -1.0, 0.0], [0.0, 1.0, -1.0]])


def _one_way(seed=0):
    """Four unbalanced normal cells with small mean differences."""
    rng = np.random.default_rng(seed)
    sizes = [25, 40, 30, 45]
    codes = np.repeat(np.arange(4), sizes)
    return rng.normal(np.repeat([0.0, 0.2, 0.35, 0.1], sizes)), codes, 4


def _two_by_three(seed=100):
    """A 2 x 3 design (A-major cells), unbalanced, with main effects and a small interaction."""
    rng = np.random.default_rng(seed)
    sizes = [10, 14, 9, 12, 16, 11]
    codes = np.repeat(np.arange(6), sizes)
    return rng.normal(np.repeat([0.0, 0.5, 1.0, 0.3, 0.5, 1.5], sizes)), codes, 6


def test_one_way_p_close_to_f_distribution():
    """On normal data with m = 20000 the permutation p lies within 4 Monte Carlo standard errors of
    the F-distribution p of scipy.stats.f_oneway (reference library); the remaining gap between the
    exact permutation and normal-theory p is small at N = 140."""
    y, codes, k = _one_way()
    res = permutation_f_test(y, codes, k, n_permutations=20_000, seed=11)
    ref = stats.f_oneway(*[y[codes == c] for c in range(k)])
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert (res.df1, res.df2) == (3, y.size - 4)
    assert abs(res.p - ref.pvalue) < 4 * res.mc_se


def test_one_way_p_agrees_with_scipy_permutation_test():
    """The p agrees with scipy.stats.permutation_test (independent, vectorized F) within 4 combined
    Monte Carlo standard errors (reference library)."""
    y, codes, k = _one_way(seed=3)
    samples = [y[codes == c] for c in range(k)]

    def f_stat(*groups, axis=-1):
        return stats.f_oneway(*groups, axis=axis).statistic

    ref = stats.permutation_test(
        samples, f_stat, vectorized=True, n_resamples=9999,
        permutation_type="independent", alternative="greater", rng=2,
    )
    res = permutation_f_test(y, codes, k, n_permutations=9999, seed=2)
    se_ref = np.sqrt(ref.pvalue * (1 - ref.pvalue) / 9999)
    assert abs(res.p - ref.pvalue) < 4 * np.hypot(res.mc_se, se_ref)


def test_freedman_lane_interaction_p_close_to_f_distribution():
    """Freedman-Lane p for a 2 x 3 interaction lies within 4 Monte Carlo standard errors of the F p,
    and its observed F equals statsmodels OLS f_test on the cell-means model (reference library)."""
    y, codes, k = _two_by_three()
    res = permutation_f_test(y, codes, k, INTERACTION_2X3, n_permutations=20_000, seed=11)
    ref = sm.OLS(y, np.eye(k)[codes]).fit().f_test(INTERACTION_2X3)
    assert res.statistic == pytest.approx(float(np.squeeze(ref.fvalue)), rel=1e-10)
    assert (res.df1, res.df2) == (int(ref.df_num), int(ref.df_denom))
    assert abs(res.p - float(ref.pvalue)) < 4 * res.mc_se
    assert res.method.startswith("Freedman-Lane")


def test_p_is_one_over_m_plus_one_when_nothing_reaches_observed():
    """Perfectly separated cells: no rearrangement reaches the observed F (b = 0), so
    p = 1/(m + 1) (Phipson & Smyth 2010)."""
    codes = np.repeat(np.arange(3), 10)
    y = codes * 100.0 + np.tile(np.linspace(0.0, 1.0, 10), 3)
    res = permutation_f_test(y, codes, 3, n_permutations=999, seed=4)
    assert res.n_extreme == 0
    assert res.p == 1 / 1000
    assert res.mc_se == pytest.approx(np.sqrt(0.001 * 0.999 / 999), rel=1e-12)


def test_p_is_one_when_observed_f_is_zero():
    """Equal cell means give F = 0, reached by every rearrangement: b = m and p = 1 (Phipson &
    Smyth 2010)."""
    codes = np.repeat(np.arange(3), 4)
    y = np.array([1.0, 2.0, 3.0, 6.0, 6.0, 3.0, 2.0, 1.0, 2.0, 6.0, 1.0, 3.0])
    res = permutation_f_test(y, codes, 3, n_permutations=500, seed=4)
    assert res.statistic == pytest.approx(0.0, abs=1e-12)
    assert res.n_extreme == 500 and res.p == 1.0 and res.mc_se == 0.0


def test_seed_reproduces_and_is_recorded():
    """The same seed gives the same result, another seed a different one, and a drawn seed replays."""
    y, codes, k = _one_way()
    a = permutation_f_test(y, codes, k, n_permutations=2000, seed=5)
    assert a == permutation_f_test(y, codes, k, n_permutations=2000, seed=5)
    assert a.n_extreme != permutation_f_test(y, codes, k, n_permutations=2000, seed=6).n_extreme
    drawn = permutation_f_test(y, codes, k, n_permutations=2000)
    assert drawn == permutation_f_test(y, codes, k, n_permutations=2000, seed=drawn.seed)


def test_freedman_lane_equals_row_permutation_for_one_way():
    """With C = all one-way differences the reduced model is the grand mean, so Freedman-Lane and
    row permutation give the same null distribution and p for the same seed (Freedman & Lane 1983)."""
    y, codes, k = _one_way()
    C = np.array([[1.0, -1.0, 0.0, 0.0], [0.0, 1.0, -1.0, 0.0], [0.0, 0.0, 1.0, -1.0]])
    rows = _null_distribution(y, codes, k, None, 3000, 9)
    fl = _null_distribution(y, codes, k, C, 3000, 9)
    np.testing.assert_allclose(fl.null, rows.null, rtol=1e-10)
    a = permutation_f_test(y, codes, k, n_permutations=3000, seed=9)
    b = permutation_f_test(y, codes, k, C, n_permutations=3000, seed=9)
    assert (a.n_extreme, a.p) == (b.n_extreme, b.p)
    assert a.statistic == pytest.approx(b.statistic, rel=1e-12)


def test_result_does_not_depend_on_block_size():
    """The permutation stream is the same whatever the block size (reproducibility)."""
    y, codes, k = _two_by_three()
    a = _null_distribution(y, codes, k, INTERACTION_2X3, 1000, 3, block=7)
    b = _null_distribution(y, codes, k, INTERACTION_2X3, 1000, 3, block=256)
    np.testing.assert_array_equal(a.null, b.null)


def test_row_order_does_not_matter():
    """Shuffling the rows of the data leaves the observed F unchanged (invariance)."""
    y, codes, k = _two_by_three()
    perm = np.random.default_rng(1).permutation(y.size)
    a = permutation_f_test(y, codes, k, INTERACTION_2X3, n_permutations=10, seed=1)
    b = permutation_f_test(y[perm], codes[perm], k, INTERACTION_2X3, n_permutations=10, seed=1)
    assert a.statistic == pytest.approx(b.statistic, rel=1e-12)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"n_permutations": 0}, "'n_permutations' must be a positive whole number \\(got 0\\)"),
        ({"seed": -1}, "'seed' must be a non-negative"),
        ({"C": [[1.0, -1.0, 0.0, 0.0, 0.0]]}, "one column per cell \\(4\\)"),
        ({"C": [[1.0, 0.0, 0.0, 0.0]]}, "can only test contrasts"),
    ],
    ids=["count", "seed", "C-shape", "not-a-contrast"],
)
def test_bad_input_messages(kwargs, message):
    """Bad arguments raise FitError naming the argument and the value received."""
    y, codes, k = _one_way()
    with pytest.raises(FitError, match=message):
        permutation_f_test(y, codes, k, **kwargs)
