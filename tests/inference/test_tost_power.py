"""Exact power of two one-sided tests (TOST), checked against an independent computation with
scipy (scipy.integrate.quad over scipy.stats.chi and scipy.stats.norm, quantile from scipy.stats.t)
and against a seeded Monte Carlo simulation of raw data."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from reporter.inference.power import describe_equivalence_power, tost_cell_size, tost_power
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_statement


def scipy_tost_power(low, high, v, df, alpha, delta=0.0):
    """P(low + q·S·v < D < high − q·S·v), D ~ N(delta, v²), S = sigma-scaled chi/√df: the integral
    over S written out with scipy (an independent route: scipy.stats.chi density, quad)."""
    q = stats.t.ppf(1 - alpha, df)
    top = (high - low) / (2 * q * v)

    def f(s):
        inside = stats.norm.cdf((high - delta) / v - q * s) - stats.norm.cdf((low - delta) / v + q * s)
        return max(inside, 0.0) * stats.chi.pdf(s * math.sqrt(df), df) * math.sqrt(df)

    return integrate.quad(f, 0, top, epsabs=1e-14, epsrel=1e-12, limit=400, points=[min(top, 1.0)])[0]


@pytest.mark.parametrize("low, high, n, k, alpha, delta", [
    (-0.5, 0.5, 50, 2, 0.05, 0.0),
    (-0.3, 0.3, 20, 2, 0.05, 0.0),
    (-1.0, 0.5, 10, 2, 0.05, 0.2),
    (-0.2, 0.2, 1000, 2, 0.05, 0.0),
    (-0.8, 0.8, 12, 4, 0.025, -0.3),
    (-0.5, 0.5, 5, 3, 0.10, 0.0),
])
def test_power_matches_an_independent_scipy_integral(low, high, n, k, alpha, delta):
    v = math.sqrt(2 / n)
    df = k * (n - 1)
    ours = tost_power(low, high, v, df, alpha, delta)
    assert ours == pytest.approx(scipy_tost_power(low, high, v, df, alpha, delta), rel=1e-8, abs=1e-12)


def test_power_matches_a_seeded_monte_carlo():
    """Two groups of 15, bounds ±0.9 SD, true difference 0.2 SD: 40,000 simulated studies
    (numpy default_rng(20261202)); tolerance 4 binomial standard errors."""
    rng = np.random.default_rng(20261202)
    n, reps, low, high, delta, alpha = 15, 40_000, -0.9, 0.9, 0.2, 0.05
    a = rng.normal(delta, 1.0, (reps, n))
    b = rng.normal(0.0, 1.0, (reps, n))
    d = a.mean(1) - b.mean(1)
    sp = np.sqrt((a.var(1, ddof=1) + b.var(1, ddof=1)) / 2)
    se = sp * math.sqrt(2 / n)
    q = stats.t.ppf(1 - alpha, 2 * n - 2)
    hit = ((d - low) / se > q) & ((d - high) / se < -q)
    mc = hit.mean()
    exact = tost_power(low, high, math.sqrt(2 / n), 2 * n - 2, alpha, delta)
    assert abs(exact - mc) < 4 * math.sqrt(mc * (1 - mc) / reps)


def test_cell_size_is_the_smallest_reaching_the_power():
    """n per cell: the power (scipy reference) at n reaches the target, at n − 1 it does not."""
    for low, high, target in [(-0.5, 0.5, 0.8), (-0.5, 0.5, 0.9), (-0.3, 0.4, 0.8)]:
        n = tost_cell_size(low, high, 2.0, 2, 0.05, target)
        assert scipy_tost_power(low, high, math.sqrt(2 / n), 2 * (n - 1), 0.05) >= target
        assert scipy_tost_power(low, high, math.sqrt(2 / (n - 1)), 2 * (n - 2), 0.05) < target
    assert tost_cell_size(0.1, 0.5, 2.0, 2, 0.05, 0.8) is None  # 0 outside the bounds


def test_power_at_the_study_and_in_the_planning_table():
    """The fitted claim's power uses the study's n per cell; the lock's planning row the same
    function at equal n (scipy reference for both)."""
    from types import SimpleNamespace as NS

    from reporter.intake.plan import PlanningSpec
    from reporter.trail.planning import a_priori_power

    design = build_design([Factor("g", ("a", "b", "c"))], "cell-means")
    p = describe_equivalence_power([0, 1, -1], [12, 9, 14], (-1.2, 1.2), 2.0, 32, alpha=0.05)
    v = math.sqrt(1 / 9 + 1 / 14)
    assert p.bounds_sd == (-0.6, 0.6)
    assert p.power_now == pytest.approx(scipy_tost_power(-0.6, 0.6, v, 32, 0.05), rel=1e-8)
    c = compile_statement(design, "-0.6 sd < b - c < 0.6 sd", name="eq")
    plan = NS(planning=PlanningSpec(smallest_effect_d=0.5), analysis=NS(alpha=0.05))
    (row,) = a_priori_power(plan, design, [c])
    assert row.test == "TOST" and row.bounds == (-0.6, 0.6) and row.n_per_cell == p.n_per_cell
    for n, target in zip(row.n_per_cell, row.powers):
        assert scipy_tost_power(-0.6, 0.6, math.sqrt(2 / n), 3 * (n - 1), 0.05) >= target
        assert scipy_tost_power(-0.6, 0.6, math.sqrt(2 / (n - 1)), 3 * (n - 2), 0.05) < target
    raw = compile_statement(design, "-1.2 < b - c < 1.2", name="raw")
    (missing,) = a_priori_power(plan, design, [raw])
    assert missing.n_per_cell == (None, None) and "assumed_sd" in missing.reason
    plan2 = NS(planning=PlanningSpec(smallest_effect_d=0.5, assumed_sd=2.0), analysis=NS(alpha=0.05))
    (scaled,) = a_priori_power(plan2, design, [raw])
    assert scaled.n_per_cell == row.n_per_cell
