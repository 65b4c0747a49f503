"""Hedges' g interval and the omission of a standardized contrast whose weights do not sum to 0."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import optimize, special, stats

import reporter
from reporter.errors import FitError
from reporter.inference.effectsizes import standardized_contrast
from conftest import ONEWAY_DATA, ONEWAY_PLAN


def _j_exact(df):
    """Hedges (1981), JEBS 6, 107-128, eq. 6e: J(m) = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2))."""
    return math.exp(special.gammaln(df / 2) - special.gammaln((df - 1) / 2)) / math.sqrt(df / 2)


@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"])
def test_hedges_g_interval_is_j_times_the_noncentral_t_interval(alternative):
    """g's interval = J × d's noncentral-t interval (Hedges 1981; Hedges & Olkin 1985, ch. 5),
    with d's bounds from an independent scipy.stats.nct inversion by bisection (reference)."""
    weights, n, mse, df = np.array([1.0, -1.0, 0.0]), np.array([7, 9, 12]), 2.3, 25
    estimate = 1.4
    res = standardized_contrast(weights, 0.0, estimate, n, mse, df, level=0.95, alternative=alternative)
    spread = math.sqrt(np.sum(weights**2 / n))
    t = estimate / math.sqrt(mse) / spread

    def root(target):
        return optimize.bisect(lambda delta: stats.nct.sf(t, df, delta) - target, -50, 50, xtol=1e-13)

    low, high = {"two-sided": (root(0.025), root(0.975)), "greater": (root(0.05), math.inf),
                 "less": (-math.inf, root(0.95))}[alternative]
    j = _j_exact(df)
    assert res.g.value == pytest.approx(j * estimate / math.sqrt(mse), rel=1e-12)
    for ours, theirs in zip(res.g.ci, (j * low * spread, j * high * spread)):
        assert ours == pytest.approx(theirs, abs=1e-8)
    assert res.g.ci_level == 0.95


def test_weights_that_do_not_sum_to_zero_have_no_standardized_contrast():
    """`2*a - b` is not a difference of means: d would change with the origin of the scale."""
    with pytest.raises(FitError, match="sum to 1, not 0"):
        standardized_contrast([2.0, -1.0], 0.0, 3.0, [5, 6], 1.0, 9)


# The small one-way project of conftest, with its own hypotheses.
PLAN = ONEWAY_PLAN.split("[[hypotheses]]")[0] + """[analysis]
permutations = 0
[[hypotheses]]
name = "twice coir against bark"
means = "2*coir - bark = 0"
[[hypotheses]]
name = "coir beats bark"
means = "coir > bark"
"""


def test_report_omits_d_for_a_non_contrast_and_gives_g_an_interval(project):
    report = reporter.report(project(PLAN, {"heights.csv": ONEWAY_DATA}))
    doc = json.loads(report.render("json"))
    odd, good = doc["hypotheses"]
    assert odd["effect_size"] is None and odd["effect_sizes"] == []
    assert "weights do not sum to zero" in odd["effect_size_note"]
    g = next(e for e in good["effect_sizes"] if e["name"] == "hedges_g")
    d = next(e for e in good["effect_sizes"] if e["name"] == "standardized_contrast_d")
    j = _j_exact(doc["anova"]["rows"][-1]["df"])
    assert g["ci"][0] == pytest.approx(j * d["ci"][0], rel=1e-12) and g["ci"][1] is None
    text = report.render("md").decode("utf-8")
    assert "No standardized contrast: the weights do not sum to zero" in text
    assert "*g* = " in text or "g = " in text
