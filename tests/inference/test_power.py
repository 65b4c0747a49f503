"""Tests of reporter.inference.power against statsmodels.stats.power (reference library)."""

from __future__ import annotations

import math

import pytest
import statsmodels.stats.power as sm_power

from reporter.errors import PlanError
from reporter.inference.power import (
    NONCENTRALITY_CONVENTION,
    compute_power,
    describe_sensitivity,
    solve_cell_size,
    solve_detectable_f,
)


SENSITIVITY_CASES = [(1, 40, 0.80), (2, 60, 0.90), (3, 100, 0.80), (5, 30, 0.90), (2, 300, 0.80)]
CELL_SIZE_CASES = [(0.25, 2, 0.80), (0.10, 1, 0.80), (0.40, 3, 0.90), (0.60, 4, 0.80), (0.18, 5, 0.90)]


@pytest.mark.parametrize(
    ("df1", "n_total", "power"),
    SENSITIVITY_CASES,
    ids=[f"df{a}-N{b}-pow{c}" for a, b, c in SENSITIVITY_CASES],
)
def test_detectable_f_matches_statsmodels(df1, n_total, power):
    """Minimum detectable f equals FTestAnovaPower.solve_power(effect_size=None), k = df1 + 1."""
    expected = sm_power.FTestAnovaPower().solve_power(
        effect_size=None, nobs=n_total, alpha=0.05, power=power, k_groups=df1 + 1
    )
    assert solve_detectable_f(df1, n_total, alpha=0.05, power=power) == pytest.approx(expected, rel=1e-6)


@pytest.mark.parametrize(
    ("effect_f", "df1", "power"),
    CELL_SIZE_CASES,
    ids=[f"f{a}-df{b}-pow{c}" for a, b, c in CELL_SIZE_CASES],
)
def test_cell_size_matches_statsmodels(effect_f, df1, power):
    """Cell size: exact N equals FTestAnovaPower.solve_power(nobs=None); n is its per-cell ceiling."""
    k = df1 + 1
    engine = sm_power.FTestAnovaPower()
    n_total_sm = engine.solve_power(effect_size=effect_f, nobs=None, alpha=0.05, power=power, k_groups=k)
    plan = solve_cell_size(effect_f, df1, n_cells=k, alpha=0.05, power=power)
    assert plan.n_total_exact == pytest.approx(n_total_sm, rel=1e-6)
    assert plan.n_per_cell == math.ceil(n_total_sm / k)
    assert plan.n_total == plan.n_per_cell * k and plan.df_error == plan.n_total - k
    assert plan.achieved_power == pytest.approx(
        engine.power(effect_f, plan.n_total, 0.05, k_groups=k), rel=1e-10
    )
    assert plan.achieved_power >= power
    assert engine.power(effect_f, (plan.n_per_cell - 1) * k, 0.05, k_groups=k) < power


def test_power_in_factorial_design_matches_statsmodels_ftest_power():
    """df_error = N - k in a 2 x 3 design: power equals statsmodels ftest_power with nobs = N."""
    n_total, n_cells, df1 = 60, 6, 2
    expected = sm_power.ftest_power(0.3, df2=n_total - n_cells, df1=df1, alpha=0.05, ncc=n_cells - df1)
    assert compute_power(0.3, df1, n_total, df_error=n_total - n_cells) == pytest.approx(expected, rel=1e-10)


def test_power_at_zero_effect_is_alpha():
    """f = 0 gives power alpha, the size of the test (uses the central F; scipy issue 26188)."""
    assert compute_power(0.0, 3, 48) == pytest.approx(0.05, rel=1e-10)


def test_sensitivity_reports_both_default_powers():
    """describe_sensitivity gives one f per power (80% and 90%), growing with power."""
    result = describe_sensitivity(2, 60)
    assert result.powers == (0.80, 0.90)
    assert result.detectable_f[0] < result.detectable_f[1]
    assert result.df_error == 57
    assert result.convention == NONCENTRALITY_CONVENTION
    for f, p in zip(result.detectable_f, result.powers):
        assert compute_power(f, 2, 60) == pytest.approx(p, abs=1e-9)


def test_power_not_above_alpha_is_a_plan_error():
    """power <= alpha is rejected with a message naming both values."""
    with pytest.raises(PlanError, match=r"'power' must exceed 'alpha'"):
        solve_detectable_f(2, 60, alpha=0.05, power=0.04)
