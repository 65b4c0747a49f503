"""The [planning] table and the a-priori power table of the analysis plan.

References: statsmodels.stats.power (FTestAnovaPower, TTestIndPower) and scipy.stats (ncf, nct)
compute the power of each cell size independently of the project's routines; each n must be the
smallest whole cell size whose reference power reaches the target. Published values: Cohen (1992),
"A power primer", Psychological Bulletin 112(1), 155-159, Table 2, at alpha = .05 and power .80:
64 per group for a two-sample t test (two-tailed) at d = .50, and 45 per group for a four-group
ANOVA at f = .25 (from memory; not re-checked against the printed table here).
"""

from __future__ import annotations

import pytest
from scipy import stats
from statsmodels.stats.power import FTestAnovaPower, TTestIndPower

from reporter.errors import PlanError
from reporter.intake.plan import plan_from_dict
from reporter.model.design import design_from_plan
from reporter.model.hypotheses import compile_hypotheses
from reporter.trail.planning import a_priori_power


def _plan(levels, hypotheses, planning, factors=None, alpha=0.05):
    doc = {
        "title": "t",
        "data": {"path": "d.csv", "outcome": "y"},
        "factors": factors or [{"name": "g", "levels": levels}],
        "hypotheses": hypotheses,
        "analysis": {"alpha": alpha},
        "planning": planning,
    }
    return plan_from_dict(doc)


def _power(plan):
    design = design_from_plan(plan)
    return a_priori_power(plan, design, compile_hypotheses(plan, design)), design.k


@pytest.mark.parametrize("f", [0.1, 0.25, 0.4])
@pytest.mark.parametrize("k", [3, 4, 6])
def test_oneway_effect_against_statsmodels(f, k):
    """statsmodels FTestAnovaPower (nobs = total N, lambda = f**2 * N, df = (k - 1, N - k))."""
    plan = _plan([f"l{i}" for i in range(k)], [{"name": "all", "effect": "g"}], {"smallest_effect_f": f})
    (row,), _ = _power(plan)
    ref = FTestAnovaPower()
    for target, n in zip((0.8, 0.9), row.n_per_cell):
        assert ref.power(f, n * k, 0.05, k_groups=k) >= target
        assert ref.power(f, (n - 1) * k, 0.05, k_groups=k) < target


@pytest.mark.parametrize("d", [0.3, 0.5, 0.8])
@pytest.mark.parametrize("statement, alternative", [("a > b", "larger"), ("a = b", "two-sided")])
def test_two_group_contrast_against_statsmodels(d, statement, alternative):
    """statsmodels TTestIndPower (equal groups, df = 2n - 2, noncentrality d * sqrt(n / 2))."""
    plan = _plan(["a", "b"], [{"name": "h", "means": statement}], {"smallest_effect_d": d})
    (row,), _ = _power(plan)
    ref = TTestIndPower()
    for target, n in zip((0.8, 0.9), row.n_per_cell):
        assert ref.power(d, n, 0.05, ratio=1.0, alternative=alternative) >= target
        assert ref.power(d, n - 1, 0.05, ratio=1.0, alternative=alternative) < target


def test_published_cell_sizes():
    """Cohen (1992), Table 2 (from memory): 64 per group (t, d = .5, two-tailed), 45 per group
    (four-group ANOVA, f = .25), alpha = .05, power .80."""
    (t_row,), _ = _power(_plan(["a", "b"], [{"name": "h", "means": "a = b"}], {"smallest_effect_d": 0.5}))
    (f_row,), _ = _power(_plan(["a", "b", "c", "d"], [{"name": "h", "effect": "g"}], {"smallest_effect_f": 0.25}))
    assert t_row.n_per_cell[0] == 64
    assert f_row.n_per_cell[0] == 45


def test_general_contrast_and_factorial_effect_against_scipy():
    """A contrast over four cells (df = k(n - 1), noncentrality d * sqrt(n / sum c**2)) by scipy.stats.nct,
    and a 2 x 3 interaction (df = (2, N - 6), lambda = f**2 * N) by scipy.stats.ncf."""
    plan = _plan(None, [{"name": "avg", "means": "(a + b)/2 > c"}],
                 {"smallest_difference": 3.0, "assumed_sd": 5.0}, factors=[{"name": "g", "levels": ["a", "b", "c", "d"]}])
    (row,), k = _power(plan)
    d, ssq = 3.0 / 5.0, 0.25 + 0.25 + 1.0

    def t_power(n):
        df = k * (n - 1)
        return stats.nct.sf(stats.t.isf(0.05, df), df, d * (n / ssq) ** 0.5)

    for target, n in zip((0.8, 0.9), row.n_per_cell):
        assert t_power(n) >= target > t_power(n - 1)
    factorial = _plan(None, [{"name": "ab", "effect": "A x B"}], {"smallest_effect_f": 0.25},
                      factors=[{"name": "A", "levels": ["x", "y"]}, {"name": "B", "levels": ["p", "q", "r"]}])
    (row,), k = _power(factorial)

    def f_power(n):
        big_n = n * k
        return stats.ncf.sf(stats.f.isf(0.05, 2, big_n - k), 2, big_n - k, 0.0625 * big_n)

    assert row.df1 == 2
    for target, n in zip((0.8, 0.9), row.n_per_cell):
        assert f_power(n) >= target > f_power(n - 1)


def test_missing_effect_kind_and_exploratory_rows():
    """A test without its kind of effect gets no n and a reason; exploratory hypotheses get no row."""
    plan = _plan(["a", "b", "c"], [{"name": "t", "means": "a > b"}, {"name": "F", "effect": "g"},
                                   {"name": "x", "means": "a = c", "role": "exploratory"}], {"smallest_effect_f": 0.3})
    rows, _ = _power(plan)
    assert [r.name for r in rows] == ["t", "F"]
    assert rows[0].n_per_cell == (None, None) and "smallest_effect_d" in rows[0].reason
    assert None not in rows[1].n_per_cell


@pytest.mark.parametrize("planning, message", [
    ({"smallest_efect_f": 0.2}, "'planning.smallest_efect_f' is not a known key. Did you mean 'smallest_effect_f'?"),
    ({"smallest_effect_f": -0.2}, "'planning.smallest_effect_f' must be a positive number such as 0.25 (got -0.2)"),
    ({"smallest_effect_d": "big"}, "'planning.smallest_effect_d' must be a positive number"),
    ({"smallest_effect_d": 0.5, "smallest_difference": 2, "assumed_sd": 4}, "cannot stand beside 'smallest_effect_d'"),
    ({"smallest_difference": 2}, "'planning.assumed_sd' is required with 'smallest_difference'"),
    ({"assumed_sd": 4, "smallest_effect_f": 0.2}, "'planning.assumed_sd' is only used with 'smallest_difference'"),
    ({}, "'planning' names no smallest effect of interest"),
    ({"smallest_effect_f": 0.2, "powers": [0.8, 1.2]}, "'planning.powers[2]' must lie between alpha (0.05) and 1"),
    ({"smallest_effect_f": 0.2, "powers": [0.8, 0.8]}, "'planning.powers' lists a power twice"),
    ({"smallest_effect_f": 0.2, "powers": "0.8"}, "'planning.powers' must be a list of 1 to 5 powers"),
])
def test_planning_errors(planning, message):
    with pytest.raises(PlanError) as err:
        _plan(["a", "b"], [{"name": "h", "means": "a > b"}], planning)
    assert message in str(err.value)
