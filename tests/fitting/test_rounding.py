"""Bounds on F, t and p when the cell summaries were rounded (reporter.fitting.rounding).

References: brute force over the corners of the rounding box, each corner refitted through the
project's own fitting path (fit_model, fit_anova, fit_contrast), and the unrounded statistics of
seeded simulated data; the quadratic forms are checked against the fitted sums of squares.
"""

from __future__ import annotations

import itertools
import math
from fractions import Fraction

import numpy as np
import pytest

from reporter.fitting.anova import fit_anova
from reporter.fitting.linear import fit_contrast, fit_model
from reporter.fitting.rounding import bound_rounding, spread_ss_interval
from reporter.intake.cells import CellStats
from reporter.intake.plan import plan_from_dict
from reporter.model.design import design_from_plan
from reporter.model.hypotheses import compile_hypotheses


def _plan(factors, hypotheses):
    return plan_from_dict({"title": "t", "data": {"path": "x.csv", "outcome": "y"},
                           "factors": factors, "hypotheses": hypotheses})


def _cells(n, mean, sd):
    n = np.asarray(n)
    mean = np.asarray(mean, dtype=float)
    sd = np.asarray(sd, dtype=float)
    ss = np.where(n > 1, (n - 1) * np.nan_to_num(sd) ** 2, 0.0)
    return CellStats(n=n, offset_mean=mean - mean[0], ss=ss, pivot=float(mean[0]), pivot_exact=Fraction(float(mean[0])))


def _fit(plan, design, n, mean, sd, ss_type="III"):
    cells = _cells(n, mean, sd)
    fit = fit_model(cells, design.matrix)
    table = fit_anova(design, fit, ss_type)
    contrasts = compile_hypotheses(plan, design, tuple(int(x) for x in n))
    tests = [fit_contrast(fit, c.weights, c.rhs, c.alternative, 0.05, c.test) for c in contrasts]
    return cells, table, contrasts, tests


TWO = _plan([{"name": "g", "levels": ["a", "b"]}],
            [{"name": "a above b", "means": "a > b"}, {"name": "a below b", "means": "a < b"},
             {"name": "a equals b", "means": "a = b"}, {"name": "g", "effect": "g"}])


@pytest.mark.parametrize(
    "mean", [(10.23, 9.87), (10.01, 10.00), (9.50, 10.75)], ids=["apart", "within-rounding", "reversed"],
)
def test_two_cells_match_brute_force_corners(mean):
    """On 2 cells every bound equals the extreme over the 16 corners of the box (means and SDs each
    at an end of its interval), refitted from scratch; where the means' difference can vanish,
    F and |t| reach 0 inside the box and p reaches 1."""
    design = design_from_plan(TWO)
    n, sd, u = (5, 7), np.array([0.41, 0.66]), 0.005
    cells, table, contrasts, tests = _fit(TWO, design, n, mean, sd)
    b = bound_rounding(design, cells, sd, "sd", u, u, table, contrasts, tests)
    stats = {name: [] for name in ("F", "t0", "t1", "t2", "p0", "p1", "p2", "pF")}
    for dm in itertools.product((-u, u), repeat=2):
        for ds in itertools.product((-u, u), repeat=2):
            _, tab, _, te = _fit(TWO, design, n, np.add(mean, dm), sd + np.array(ds))
            stats["F"].append(tab.rows[0].F)
            stats["pF"].append(tab.rows[0].p)
            for i in range(3):
                stats[f"t{i}"].append(te[i].statistic)
                stats[f"p{i}"].append(te[i].p)
    rel = 1e-12
    can_vanish = abs(mean[0] - mean[1]) <= 2 * u
    f_lo = 0.0 if can_vanish else min(stats["F"])
    assert b.anova[0].low == pytest.approx(f_lo, rel=rel, abs=1e-15)
    assert b.anova[0].high == pytest.approx(max(stats["F"]), rel=rel)
    assert b.anova[0].p_low == pytest.approx(min(stats["pF"]), rel=rel)
    assert b.anova[0].p_high == pytest.approx(1.0 if can_vanish else max(stats["pF"]), rel=rel)
    for i in range(3):
        h = b.hypotheses[i]
        assert (h.low, h.high) == pytest.approx((min(stats[f"t{i}"]), max(stats[f"t{i}"])), rel=rel)
        if i < 2:  # one-sided: p is monotone in t, so its ends sit at corners
            assert (h.p_low, h.p_high) == pytest.approx((min(stats[f"p{i}"]), max(stats[f"p{i}"])), rel=rel)
        else:
            assert h.p_low == pytest.approx(min(stats["p2"]), rel=rel)
            assert h.p_high == pytest.approx(1.0 if can_vanish else max(stats["p2"]), rel=rel)
    assert b.hypotheses[3].low == pytest.approx(b.anova[0].low, rel=rel, abs=1e-15)
    assert all(x.exact for x in (*b.anova, *b.hypotheses))


FACTORIAL = _plan(
    [{"name": "dose", "levels": ["low", "mid", "high"]}, {"name": "sex", "levels": ["f", "m"]}],
    [{"name": "mid beats low", "means": "mid > low"}, {"name": "dose", "effect": "dose"},
     {"name": "interaction", "effect": "dose x sex"}, {"name": "chain", "means": "low = mid = high"},
     {"name": "shifted", "means": "high - low = 1"}],
)


def _rounded_summaries(seed, n, means, sds, decimals):
    """Per-cell n, mean and SD of seeded normal rows, unrounded and rounded to ``decimals``."""
    rng = np.random.default_rng(seed)
    rows = [rng.normal(m, s, size=k) for k, m, s in zip(n, means, sds)]
    mean = np.array([r.mean() for r in rows])
    sd = np.array([r.std(ddof=1) for r in rows])
    return mean, sd, np.round(mean, decimals), np.round(sd, decimals)


@pytest.mark.parametrize("ss_type", ["I", "II", "III"])
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_bounds_contain_the_unrounded_statistics(ss_type, seed):
    """Summaries of simulated data rounded to 1 decimal: the unrounded F, t and p of every ANOVA row
    and hypothesis lie within the bounds computed from the rounded values."""
    design = design_from_plan(FACTORIAL)
    n = (4, 7, 5, 9, 3, 6)
    mean, sd, mean_r, sd_r = _rounded_summaries(seed, n, (10, 10.4, 10.9, 10.2, 10.5, 11.5), (0.6,) * 6, 1)
    _, tab_true, _, tests_true = _fit(FACTORIAL, design, n, mean, sd, ss_type)
    cells, table, contrasts, tests = _fit(FACTORIAL, design, n, mean_r, sd_r, ss_type)
    b = bound_rounding(design, cells, sd_r, "sd", 0.05, 0.05, table, contrasts, tests)
    for bound, row in zip(b.anova, tab_true.rows):
        assert bound.low <= row.F <= bound.high and bound.p_low <= row.p <= bound.p_high
        assert bound.low < bound.statistic < bound.high
    for bound, t in zip(b.hypotheses, tests_true):
        assert bound.low <= t.statistic <= bound.high and bound.p_low <= t.p <= bound.p_high
    assert all(x.exact for x in (*b.anova, *b.hypotheses))


@pytest.mark.parametrize("ss_type", ["I", "II", "III"])
def test_without_rounding_the_bounds_collapse_to_the_fit(ss_type):
    """With zero rounding units both ends equal the fitted statistic (the quadratic forms reproduce
    the ANOVA table's sums of squares of every SS type)."""
    design = design_from_plan(FACTORIAL)
    n = (4, 7, 5, 9, 3, 6)
    mean, sd, _, _ = _rounded_summaries(5, n, (10, 10.4, 10.9, 10.2, 10.5, 11.5), (0.6,) * 6, 1)
    cells, table, contrasts, tests = _fit(FACTORIAL, design, n, mean, sd, ss_type)
    b = bound_rounding(design, cells, sd, "sd", 0.0, 0.0, table, contrasts, tests)
    for x in (*b.anova, *b.hypotheses):
        assert x.low == pytest.approx(x.statistic, rel=1e-11) and x.high == pytest.approx(x.statistic, rel=1e-11)


def _oneway_F(n, means, sd):
    """The textbook one-way F, Σ n_i(ȳ_i − ȳ)²/(k − 1) over Σ(n_i − 1)s_i²/(N − k) (Kutner et al. (2005),
    Applied Linear Statistical Models, 5th ed., section 16.5), for each row of ``means``."""
    n = np.asarray(n, dtype=float)
    grand = means @ n / n.sum()
    between = ((means - grand[:, None]) ** 2 * n).sum(axis=1) / (n.size - 1)
    return between / (((n - 1) * sd ** 2).sum() / (n.sum() - n.size))


def test_many_cells_give_a_guaranteed_outer_bound():
    """With 16 cells (more than the corner search takes) the upper end is an outer bound: it is at
    least the largest F over 2,000 random corners and the unrounded F, and within its stated
    second-order excess of the corner at the gradient's signs."""
    plan = _plan([{"name": "g", "levels": [f"l{i}" for i in range(16)]}], [{"name": "g", "effect": "g"}])
    design = design_from_plan(plan)
    n = tuple([6] * 16)
    mean, sd, mean_r, sd_r = _rounded_summaries(11, n, np.linspace(5, 5.6, 16), (0.5,) * 16, 1)
    cells, table, contrasts, tests = _fit(plan, design, n, mean_r, sd_r)
    b = bound_rounding(design, cells, sd_r, "sd", 0.05, 0.05, table, contrasts, tests)
    row = b.anova[0]
    assert not row.exact
    rng = np.random.default_rng(0)
    dm = rng.choice((-0.05, 0.05), size=(2000, 16))
    corner_max = _oneway_F(n, mean_r + dm, sd_r - 0.05).max()
    corner_min = _oneway_F(n, mean_r + dm, sd_r + 0.05).min()
    assert corner_max <= row.high and row.low <= corner_min
    true_F = _oneway_F(n, mean[None, :], sd)[0]
    assert row.low <= true_F <= row.high
    assert row.high < 1.5 * corner_max


@pytest.mark.parametrize(
    "kind, spread, expected_lo, expected_hi",
    [("sd", 0.41, 4 * 0.405 ** 2, 4 * 0.415 ** 2),
     ("variance", 0.41, 4 * 0.405, 4 * 0.415),
     ("se", 0.41, 4 * 5 * 0.405 ** 2, 4 * 5 * 0.415 ** 2),
     ("sd", 0.00, 0.0, 4 * 0.005 ** 2)],
    ids=["sd", "variance", "se", "sd-at-zero"],
)
def test_spread_interval_ends_in_ss(kind, spread, expected_lo, expected_hi):
    """The spread's interval ends become S at both ends (SD·√n for SE; no spread below 0)."""
    lo, hi = spread_ss_interval(np.array([5]), np.array([spread]), kind, 0.005)
    assert lo[0] == pytest.approx(expected_lo, rel=1e-15) and hi[0] == pytest.approx(expected_hi, rel=1e-15)
