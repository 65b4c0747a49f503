"""An auxiliary result that cannot be computed is reported as not available; the analysis goes on.

Members of the class: a cell of one row, a constant cell (zero variance), every cell constant
but one, two cells only (one residual df). The classical ANOVA is defined in each, so the run
must succeed under the default policy; only a confirmatory robust test that cannot be computed
is an error (exit 2). The classical F of each run is checked against scipy.stats.f_oneway
(reference library).
"""

from __future__ import annotations

import json
import subprocess
import sys

import jsonschema
import numpy as np
import pytest
from scipy import stats

import reporter
from reporter.render.results_json import load_schema

PLAN = """
title = "Auxiliary results at the edges"
[data]
path = "d.csv"
outcome = "y"
[[factors]]
name = "dose"
levels = {levels}
[analysis]
unequal_variances = "{policy}"
follow_up = ["all-pairs-tukey", "versus-control-dunnett", "all-contrasts-scheffe"]
follow_up_control = "low"
permutations = 200
[[hypotheses]]
name = "high above low"
means = "high > low"
[[hypotheses]]
name = "doses differ"
effect = "dose"
"""

CASES = {
    "one-row cell": {"low": [1.1, 2.3, 1.7, 2.0], "mid": [2.5, 3.1, 2.2], "high": [4.0]},
    "constant cell": {"low": [1.1, 2.3, 1.7, 2.0], "mid": [2.5, 3.1, 2.2], "high": [4.0, 4.0, 4.0]},
    "all constant but one": {"low": [1.1, 2.3, 1.7, 2.0], "mid": [2.5, 2.5, 2.5], "high": [4.0, 4.0, 4.0]},
    "two cells, one residual df": {"low": [1.1, 2.3], "high": [4.0]},
    "two cells, one constant": {"low": [1.1, 2.3, 1.5], "high": [4.0, 4.0]},
}

# What each case must report as not available (result name, words the reason must contain).
EXPECTED = {
    "one-row cell": [("Welch's ANOVA", "cell dose=high has one row"),
                     ("Games–Howell pairs on the cells", "cell dose=high has one row")],
    "constant cell": [("Welch's ANOVA", "cell dose=high has zero variance")],
    "all constant but one": [("Welch's ANOVA", "cells dose=mid and dose=high have zero variance"),
                             ("Games–Howell pairs on the cells", "cells dose=mid and dose=high both have zero variance")],
    "two cells, one residual df": [("Welch's ANOVA", "cell dose=high has one row")],
    "two cells, one constant": [("Welch's ANOVA", "cell dose=high has zero variance")],
}


def _write(project, case, policy="classical"):
    data = CASES[case]
    rows = "".join(f"{v},{k}\n" for k, vs in data.items() for v in vs)
    return project(PLAN.format(levels=json.dumps(list(data)), policy=policy), {"d.csv": "y,dose\n" + rows})


@pytest.mark.parametrize("case", list(CASES))
def test_the_analysis_runs_and_says_what_is_not_available(project, case):
    plan = _write(project, case)
    report = reporter.report(plan)
    doc = json.loads(report.render("json"))
    jsonschema.validate(doc, load_schema())
    ref = stats.f_oneway(*[CASES[case][k] for k in CASES[case]])
    assert doc["anova"]["rows"][0]["F"] == pytest.approx(ref.statistic, rel=1e-10)
    missing = {x["result"]: x["reason"] for x in doc["not_available"]}
    for what, words in EXPECTED[case]:
        assert words in missing[what], (what, missing)
    assert doc["robust"]["welch_anova"] is None
    effect = next(h for h in doc["hypotheses"] if h["name"] == "doses differ")
    assert effect["robust"]["method"] == "not available" and "Welch's ANOVA" in effect["robust"]["note"]
    assert effect["confirmatory"]["test"] == "classical"
    text = report.render("md").decode("utf-8")
    assert "Welch's ANOVA: not available, because" in text
    report.render("html")


def test_one_residual_df_drops_the_outlier_scan_and_the_standardized_contrast(project):
    plan = _write(project, "two cells, one residual df")
    doc = json.loads(reporter.report(plan).render("json"))
    assert any("Residual checks not possible" in n for n in doc["assumptions"]["notes"])
    h = next(h for h in doc["hypotheses"] if h["name"] == "high above low")
    assert h["effect_size"] is None and "more than 1 residual degree of freedom" in h["effect_size_note"]


@pytest.mark.parametrize("case", ["one-row cell", "constant cell"])
def test_a_confirmatory_robust_test_that_cannot_be_computed_is_an_error(project, case):
    plan = _write(project, case, policy="always-robust")
    with pytest.raises(reporter.FitError, match="the robust test cannot be computed: .*dose=high"):
        reporter.report(plan)
    run = subprocess.run([sys.executable, "-m", "reporter", "run", str(plan), "--out", str(plan.parent / "out")],
                         capture_output=True, text=True)
    assert run.returncode == 2
    assert "always-robust" in run.stderr and "Traceback" not in run.stderr
    assert not (plan.parent / "out").exists()


def test_follow_up_families_with_an_empty_cell_say_why(project):
    """An empty control cell, and marginal means that need an empty cell, make those families not
    available; the families that can run compare the observed cells (Tukey p from
    scipy.stats.studentized_range as reference)."""
    one_way = PLAN.format(levels='["low", "mid", "high"]', policy="classical").split("[[hypotheses]]")[0]
    plan = project(one_way + '[[hypotheses]]\nname = "high above mid"\nmeans = "high > mid"\n',
                   {"d.csv": "y,dose\n1.1,mid\n2.3,mid\n1.7,high\n2.9,high\n3.3,high\n"})
    doc = json.loads(reporter.report(plan).render("json"))
    missing = {x["result"]: x["reason"] for x in doc["not_available"]}
    assert "the control cell dose=low is empty" in missing["Dunnett comparisons with the control on the cells"]
    pairs = next(f for f in doc["follow_up"] if f["family"] == "all-pairs-tukey")
    (comp,) = pairs["comparisons"]
    assert (comp["first"], comp["second"]) == ("mid", "high")
    mid, high = np.array([1.1, 2.3]), np.array([1.7, 2.9, 3.3])
    mse = (((mid - mid.mean()) ** 2).sum() + ((high - high.mean()) ** 2).sum()) / 3
    q = abs(mid.mean() - high.mean()) / (mse * (1 / 2 + 1 / 3)) ** 0.5 * 2**0.5
    assert comp["p_adjusted"] == pytest.approx(stats.studentized_range.sf(q, 2, 3), abs=1e-8)


def test_marginal_means_that_need_an_empty_cell_are_not_compared(project):
    plan = project("""
        title = "Two factors, one cell empty"
        [data]
        path = "d.csv"
        outcome = "y"
        [[factors]]
        name = "A"
        levels = ["a1", "a2"]
        [[factors]]
        name = "B"
        levels = ["b1", "b2", "b3"]
        [analysis]
        follow_up = ["all-pairs-tukey"]
        follow_up_compares = "A"
        permutations = 0
        """, {"d.csv": "y,A,B\n" + "".join(f"{v},{a},{b}\n" for v, (a, b) in zip(
            [1.0, 1.4, 2.2, 2.0, 3.1, 2.7, 1.9, 2.5, 3.3, 2.9],
            [("a1", "b1"), ("a1", "b1"), ("a1", "b2"), ("a1", "b2"), ("a1", "b3"), ("a1", "b3"),
             ("a2", "b1"), ("a2", "b1"), ("a2", "b2"), ("a2", "b2")]))})
    doc = json.loads(reporter.report(plan).render("json"))
    missing = {x["result"]: x["reason"] for x in doc["not_available"]}
    assert "the marginal mean of A=a2 needs cell A=a2, B=b3, which is empty" in missing[
        "Tukey–Kramer pairs on the levels of A"]
    assert doc["follow_up"] == []
