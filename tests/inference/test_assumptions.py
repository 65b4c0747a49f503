"""Tests of reporter.inference.assumptions against scipy.stats (levene, shapiro) and statsmodels
(OLS influence, ProbPlot)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import pandas as pd
import statsmodels.api as sm
from scipy import stats

from reporter.errors import FitError
from reporter.inference.assumptions import (
    _royston_shapiro_wilk,
    _shapiro_wilk_coefficients,
    brown_forsythe,
    find_outliers,
    levene,
    qq_points,
    shapiro_wilk,
    studentized_residuals,
)

from conftest import plant_growth_codes


DATA = Path(__file__).parents[1] / "data"


def _tooth_growth():
    """ToothGrowth as a 2 x 3 design, six cells (supp-major)."""
    frame = pd.read_csv(DATA / "ToothGrowth.csv")
    supp = frame["supp"].map({"OJ": 0, "VC": 1}).to_numpy()
    dose = frame["dose"].map({0.5: 0, 1.0: 1, 2.0: 2}).to_numpy()
    return frame["len"].to_numpy(float), supp * 3 + dose, 6


def _random_unbalanced():
    """Odd and even cell sizes (so medians are both middle values and midpoints), rows shuffled."""
    rng = np.random.default_rng(1357)
    sizes = [7, 10, 5, 12]
    codes = np.repeat(np.arange(4), sizes)
    y = rng.normal(np.repeat([0.0, 1.0, 0.5, 2.0], sizes), np.repeat([1.0, 2.0, 0.5, 1.5], sizes))
    perm = rng.permutation(codes.size)
    return y[perm], codes[perm], 4


DATASETS = {"PlantGrowth": plant_growth_codes, "ToothGrowth": _tooth_growth, "random-unbalanced": _random_unbalanced}


@pytest.mark.parametrize("name", list(DATASETS), ids=list(DATASETS))
@pytest.mark.parametrize(
    ("func", "center"), [(levene, "mean"), (brown_forsythe, "median")], ids=["levene", "brown-forsythe"]
)
def test_homogeneity_matches_scipy_levene(name, func, center):
    """W and p equal scipy.stats.levene(center='mean' / 'median') (reference library)."""
    y, codes, k = DATASETS[name]()
    res = func(y, codes, k)
    ref = stats.levene(*[y[codes == c] for c in range(k)], center=center)
    assert res.center == center
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-10)
    assert res.p == pytest.approx(ref.pvalue, rel=1e-8)
    assert (res.df1, res.df2) == (k - 1, y.size - k)


def test_homogeneity_undefined_for_pairs():
    """Cells of two rows have equal absolute deviations, so Levene's F is undefined: FitError."""
    with pytest.raises(FitError, match="no spread"):
        levene([1.0, 2.0, 5.0, 9.0], [0, 0, 1, 1])


@pytest.mark.parametrize("name", list(DATASETS), ids=list(DATASETS))
def test_shapiro_matches_scipy_on_residuals(name):
    """W and p equal scipy.stats.shapiro on y minus its cell mean (reference library)."""
    y, codes, k = DATASETS[name]()
    means = np.array([y[codes == c].mean() for c in range(k)])
    ref = stats.shapiro(y - means[codes])
    res = shapiro_wilk(y, codes, k)
    assert not res.skipped and res.n == y.size
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-6)
    assert res.p == pytest.approx(ref.pvalue, rel=1e-5)


def _sample(kind: str, n: int, seed: int) -> np.ndarray:
    """Seeded samples: normal, skewed, heavily tied (rounded), and far from zero (shifted)."""
    rng = np.random.default_rng(seed)
    if kind == "normal":
        return rng.normal(size=n)
    if kind == "exponential":
        return rng.exponential(size=n)
    if kind == "ties":
        return np.round(rng.normal(size=n) * 2.0)
    return rng.uniform(size=n) ** 3 * 100.0 + 1e6


SW_SIZES = [3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 17, 20, 31, 50, 100, 250, 500, 1000, 2000, 4999, 5000]
SW_KINDS = ["normal", "exponential", "ties", "shifted"]


@pytest.mark.parametrize("kind", SW_KINDS, ids=SW_KINDS)
@pytest.mark.parametrize("n", SW_SIZES, ids=[f"n{n}" for n in SW_SIZES])
def test_royston_shapiro_wilk_matches_scipy_on_seeded_samples(n, kind):
    """W to 1e-8 and p to 1e-5 relative of scipy.stats.shapiro (reference library), 5 seeds each.

    scipy's coefficients differ from exact Phi^-1 ones by up to ~1e-7 relative (it evaluates the
    normal quantile approximately), which moves W by up to ~1e-9 and, through log(1 - W) near
    W = 1 at large n, p by up to ~1e-6. The absolute 1e-14 on p covers samples of three values
    with a tie, whose W is 3/4 and p exactly 0 but both computations leave rounding noise.
    """
    for seed in range(5):
        x = _sample(kind, n, 1000 * n + seed)
        if np.ptp(x) == 0:
            continue
        ref = stats.shapiro(x)
        w, p = _royston_shapiro_wilk(x)
        assert w == pytest.approx(ref.statistic, rel=1e-8)
        assert p == pytest.approx(ref.pvalue, rel=1e-5, abs=1e-14)


@pytest.mark.parametrize("n", [4, 5, 6, 9, 12, 50], ids=lambda n: f"n{n}")
def test_shapiro_wilk_of_the_coefficients_themselves_is_one(n):
    """Values equal to the coefficient vector give W = 1 and p = 1 (scipy.stats.shapiro agrees),
    though rounding can put the computed 1 - W at or below zero."""
    a = _shapiro_wilk_coefficients(n)
    x = np.concatenate([-a, np.zeros(n % 2), a[::-1]])
    ref = stats.shapiro(x)
    w, p = _royston_shapiro_wilk(x)
    assert w == pytest.approx(ref.statistic, abs=1e-14) and w <= 1.0
    assert p == pytest.approx(ref.pvalue, abs=1e-10)


@pytest.mark.parametrize(
    ("x", "w", "p"),
    [([0.0, 1.0, 2.0], 1.0, 1.0), ([0.0, 0.0, 1.0], 0.75, 0.0), ([3.0, 1.0, 1.5], None, None)],
    ids=["equally-spaced", "two-tied", "general"],
)
def test_shapiro_wilk_of_three_values(x, w, p):
    """n = 3: a = sqrt(1/2), W >= 3/4 and p = (6/pi)(asin(sqrt(W)) - pi/3) exactly (Royston 1995);
    checked against scipy.stats.shapiro and, for the two limiting samples, against W = 1, p = 1
    and W = 3/4, p = 0."""
    assert _shapiro_wilk_coefficients(3).tolist() == [np.sqrt(0.5)]
    ours = _royston_shapiro_wilk(np.array(x))
    ref = stats.shapiro(x)
    assert ours[0] == pytest.approx(ref.statistic, rel=1e-12)
    assert ours[1] == pytest.approx(ref.pvalue, rel=1e-10, abs=1e-14)
    if w is not None:
        assert ours == pytest.approx((w, p), abs=1e-14)


def test_shapiro_wilk_on_the_weights_example_of_shapiro_and_wilk():
    """Eleven weights (lb) from Shapiro & Wilk (1965), Biometrika 52, 591-611, with W = 0.79 there
    (sample and value from memory, not checked against the printed paper)."""
    w, p = _royston_shapiro_wilk(np.array([148, 154, 158, 160, 161, 162, 166, 170, 182, 195, 236.0]))
    assert w == pytest.approx(0.79, abs=0.005)
    assert p < 0.01


def test_shapiro_wilk_is_invariant_to_order_shift_and_scale():
    """W and p do not change when the values are shuffled or transformed by a -> 3a + 7 (identity)."""
    x = _sample("exponential", 40, 7)
    rng = np.random.default_rng(8)
    base = _royston_shapiro_wilk(x)
    assert _royston_shapiro_wilk(rng.permutation(x)) == pytest.approx(base, rel=1e-12)
    assert _royston_shapiro_wilk(3.0 * x + 7.0) == pytest.approx(base, rel=1e-12)


def test_shapiro_skipped_below_its_range():
    """Below n = 3 (range of Royston's 1995 approximation) the test is skipped and says why."""
    res = shapiro_wilk(np.array([0.3, 1.2]), np.zeros(2, int))
    assert res.skipped and res.reason == "too-few-rows" and res.p is None and res.n == 2


def test_shapiro_above_5000_uses_a_seeded_sample():
    """Above 5,000 residuals the test runs on a seeded sample of 5,000 rows (the rule of
    reporter.intake.rows.sample_positions) and says so; W and p equal scipy.stats.shapiro on the same sampled residuals (reference library)."""
    rng = np.random.default_rng(5)
    size = 12_345
    codes = rng.integers(0, 3, size)
    y = rng.exponential(size=size) + codes
    res = shapiro_wilk(y, codes, 3, seed=77)
    assert res.sampled and not res.skipped and res.n == 5000 and res.n_available == size and res.seed == 77
    # The rule, written here from its definition: the 5,000 positions with the smallest
    # MurmurHash3 fmix32 (Appleby 2011) of (position * 2654435761 + seed) mod 2^32.
    m = (1 << 32) - 1

    def key(p: int) -> int:
        h = (p * 2654435761 + 77) & m
        h = ((h ^ (h >> 16)) * 0x85EBCA6B) & m
        h = ((h ^ (h >> 13)) * 0xC2B2AE35) & m
        return h ^ (h >> 16)

    idx = np.array(sorted(sorted(range(size), key=key)[:5000]))
    means = np.array([y[codes == c].mean() for c in range(3)])
    ref = stats.shapiro((y - means[codes])[idx])
    assert res.statistic == pytest.approx(ref.statistic, rel=1e-6)
    assert res.p == pytest.approx(ref.pvalue, rel=1e-4, abs=1e-12)
    assert shapiro_wilk(y, codes, 3, seed=77) == res
    assert shapiro_wilk(y, codes, 3, seed=78).statistic != res.statistic


def test_shapiro_skips_leverage_one_rows():
    """Rows alone in their cell are left out of the residuals tested."""
    y, codes, k = plant_growth_codes()
    y2 = np.append(y, 100.0)
    codes2 = np.append(codes, 3)
    assert shapiro_wilk(y2, codes2) == shapiro_wilk(y, codes)


def _one_way_influence(y, codes, k):
    fit = sm.OLS(y, np.eye(k)[codes]).fit()
    return fit.get_influence()


@pytest.mark.parametrize("name", list(DATASETS), ids=list(DATASETS))
def test_studentized_residuals_match_statsmodels(name):
    """Internal and external studentized residuals equal statsmodels OLS get_influence()
    resid_studentized_internal / _external on the cell-means model (reference library)."""
    y, codes, k = DATASETS[name]()
    res = studentized_residuals(y, codes, k)
    infl = _one_way_influence(y, codes, k)
    np.testing.assert_allclose(res.internal, infl.resid_studentized_internal, rtol=1e-9)
    np.testing.assert_allclose(res.external, infl.resid_studentized_external, rtol=1e-9)
    np.testing.assert_allclose(res.leverage, infl.hat_matrix_diag, rtol=1e-12)


def test_outlier_found_at_its_row():
    """A planted gross error is flagged at its 0-based row, and its t equals statsmodels' external
    studentized residual (reference library); clean rows are not flagged."""
    y, codes, k = _random_unbalanced()
    y = y.copy()
    row = 17
    y[row] += 9.0 * np.std(y)
    scan = find_outliers(y, codes, k)
    assert [o.row for o in scan.outliers] == [row]
    ext = _one_way_influence(y, codes, k).resid_studentized_external
    assert scan.outliers[0].external == pytest.approx(ext[row], rel=1e-9)
    assert scan.outliers[0].cell == codes[row]
    assert scan.skipped_rows == () and scan.note is None and scan.n_checked == y.size


def test_outlier_scan_skips_leverage_one_rows():
    """Rows alone in their cell are skipped with a note, not flagged (leverage 1)."""
    y, codes, k = plant_growth_codes()
    y2 = np.append(y, 100.0)
    codes2 = np.append(codes, 3)
    scan = find_outliers(y2, codes2)
    assert scan.skipped_rows == (y.size,)
    assert scan.note is not None and "leverage 1" in scan.note
    assert all(o.row != y.size for o in scan.outliers)
    assert scan.n_checked == y.size


def test_qq_points_match_statsmodels_probplot():
    """Blom positions (i - 3/8)/(n + 1/4) equal statsmodels ProbPlot(a=3/8) theoretical quantiles and
    the sample is the sorted internally studentized residuals (reference library; Blom 1958)."""
    y, codes, k = _tooth_growth()
    qq = qq_points(y, codes, k)
    internal = _one_way_influence(y, codes, k).resid_studentized_internal
    ref = sm.ProbPlot(internal, a=3 / 8)
    np.testing.assert_allclose(qq.theoretical, ref.theoretical_quantiles, rtol=1e-12)
    np.testing.assert_allclose(qq.sample, np.sort(internal), rtol=1e-9)
    assert qq.n_residuals == y.size and not qq.summarized


@pytest.mark.parametrize("func", [levene, brown_forsythe, shapiro_wilk], ids=["levene", "brown-forsythe", "shapiro"])
def test_checks_invariant_to_affine_change_and_row_order(func):
    """An affine change of the outcome and a reordering of rows leave every statistic unchanged
    (invariance)."""
    y, codes, k = _random_unbalanced()
    perm = np.random.default_rng(2).permutation(y.size)
    a = func(y, codes, k)
    b = func(3.0 * y[perm] - 7.0, codes[perm], k)
    assert b.statistic == pytest.approx(a.statistic, rel=1e-9)
    assert b.p == pytest.approx(a.p, rel=1e-7)
