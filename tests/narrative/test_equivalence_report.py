"""Equivalence and margin claims through the whole report: the three outcomes in words, the table
and the figure of the interval against the bounds, the methods, results.json and the analysis plan.

The data are simulated here (numpy default_rng(20261202)); each claim's decision is checked against
the 90% interval computed from the rows with scipy.stats.t (pooled SD of the three groups)."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import stats

import reporter
from refcheck import simulated, write_project

HYPS = [
    ("a and b equivalent", "means", "-1.5 < b - a < 1.5", "planned"),           # equivalent
    ("a and c equivalent", "means", "-0.5 < c - a < 0.5", "planned"),           # not equivalent
    ("a and b within 0.3 SD", "means", "-0.3 sd < b - a < 0.3 sd", "planned"),  # inconclusive
    ("c beats a by more than 2", "means", "c - a > 2", "exploratory"),
    ("b not worse than a by 0.3 SD", "means", "b - a > -0.3 sd", "exploratory"),
]


@pytest.fixture(scope="module")
def outputs(tmp_path_factory):
    project = simulated((("g", ("a", "b", "c")),), (10.0, 10.1, 13.0), (60, 60, 60), sd=1.0, seed=20261202)
    path = write_project(tmp_path_factory.mktemp("eqv"), project, HYPS)
    rep = reporter.report(path)
    return project, json.loads(rep.render("json")), rep.render("md").decode(), rep.render("html").decode()


def _interval(project, w):
    y, cell = project.y, project.cell
    groups = [y[cell == i] for i in range(3)]
    n = np.array([g.size for g in groups])
    df = n.sum() - 3
    mse = sum(((g - g.mean()) ** 2).sum() for g in groups) / df
    est = sum(wi * g.mean() for wi, g in zip(w, groups))
    se = math.sqrt(mse * sum(wi * wi / ni for wi, ni in zip(w, n)))
    q = stats.t.ppf(0.95, df)
    return est - q * se, est + q * se, math.sqrt(mse)


def test_three_outcomes_in_json_match_the_scipy_interval(outputs):
    project, doc, _, _ = outputs
    hyps = {h["name"]: h for h in doc["hypotheses"]}
    lo, hi, sd = _interval(project, (-1, 1, 0))
    eq = hyps["a and b equivalent"]["equivalence"]
    assert eq["ci"] == pytest.approx([lo, hi], rel=1e-10) and -1.5 < lo and hi < 1.5
    assert eq["decision"] == "equivalent"
    lo, hi, _ = _interval(project, (-1, 0, 1))
    assert lo > 0.5 and hyps["a and c equivalent"]["equivalence"]["decision"] == "not equivalent"
    lo, hi, _ = _interval(project, (-1, 1, 0))
    h3 = hyps["a and b within 0.3 SD"]
    assert h3["sd_units"]["residual_sd"] == pytest.approx(sd, rel=1e-10)
    assert h3["equivalence"]["bounds"] == pytest.approx([-0.3 * sd, 0.3 * sd], rel=1e-10)
    assert not (hi < -0.3 * sd or lo > 0.3 * sd) and not (-0.3 * sd < lo and hi < 0.3 * sd)
    assert h3["equivalence"]["decision"] == "inconclusive"


def test_report_words_each_outcome(outputs):
    _, _, md, html = outputs
    text = " ".join(md.split())
    assert "a and b equivalent: equivalent within the bounds between −1.50 and 1.50," in text
    assert "a and c equivalent: not equivalent: the difference lies beyond the bounds" in text
    assert "a and b within 0.3 SD: inconclusive: neither equivalence nor a difference beyond the bounds" in text
    assert "Reading: equivalent." in text and "Reading: not equivalent." in text and "Reading: inconclusive." in text
    assert "these bounds are estimates too" in text
    assert "minimum-effect claim" in text and "non-inferiority claim" in text
    assert "two one-sided tests" in text and "Schuirmann, 1987" in text
    assert "Equivalence claims: the interval against the bounds" in text
    assert 'id="fig-equivalence"' in html or "fig-equivalence" in html
    assert "Power of the equivalence tests" in text


def test_analysis_plan_names_the_claims(tmp_path):
    """The lock: bounds and unit of each claim, the planning table's TOST rows (n per cell from
    the exact power, checked against scipy in tests/inference/test_tost_power.py) and the plan
    document's words for each kind of test."""
    from reporter.intake.plan import load_plan
    from reporter.render.html import render_html
    from reporter.trail.lock import build_lock
    from reporter.trail.plan_document import build_plan_document

    project = simulated((("g", ("a", "b", "c")),), (10.0, 10.1, 13.0), (5, 5, 5), seed=1)
    path = write_project(tmp_path, project, HYPS)
    path.write_text(path.read_text(encoding="utf-8") + "\n[planning]\nsmallest_difference = 1.0\nassumed_sd = 2.0\n",
                    encoding="utf-8")
    locked = build_lock(load_plan(path))
    content = json.loads(locked.lock_bytes)
    rec = {h["name"]: h for h in content["hypotheses"]}
    assert rec["a and b within 0.3 SD"]["bounds"] == ["-3/10", "3/10"] and rec["a and b within 0.3 SD"]["unit"] == "sd"
    rows = {r["name"]: r for r in content["power"]}
    assert rows["a and b equivalent"]["test"] == "TOST" and rows["a and b equivalent"]["bounds_sd"] == [-0.75, 0.75]
    assert rows["a and b within 0.3 SD"]["bounds_sd"] == [-0.3, 0.3]
    html = " ".join(render_html(build_plan_document(locked), template="plan.html.j2").decode().split())
    assert "equivalence claim, two one-sided t tests" in html
    import re
    plain = re.sub(r"<[^>]+>", "", html)
    assert "two one-sided t" in plain and "bounds −0.75 to 0.75 SD" in plain, re.findall(r".{80}0\.75.{40}", plain)
