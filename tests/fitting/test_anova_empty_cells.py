"""Type III rows with an empty cell test the part of the hypothesis the observed cells estimate.

References: statsmodels OLS on the observed cells (cell-means dummies) and its f_test of the same
estimable contrast (reference library), a hand derivation of the estimable part on a 2 × 3 and on
a 2 × 2 design with one empty cell, and ToothGrowth (Crampton 1947; R datasets) as data.
"""

from __future__ import annotations

import json
from fractions import Fraction

import jsonschema
import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import reporter
from conftest import DATA_DIR
from reporter.fitting.anova import estimable_part
from reporter.render.results_json import load_schema

PLAN = """
title = "ToothGrowth without one cell"
[data]
path = "teeth.csv"
outcome = "len"
[[factors]]
name = "supp"
levels = ["OJ", "VC"]
[[factors]]
name = "dose"
levels = {doses}
[analysis]
permutations = 0
"""


def _project(project, doses, drop):
    frame = pd.read_csv(DATA_DIR / "ToothGrowth.csv")
    frame["dose"] = frame["dose"].map(lambda d: f"d{d:g}")
    frame = frame[frame["dose"].isin(doses)]
    frame = frame[~((frame["supp"] == drop[0]) & (frame["dose"] == drop[1]))]
    plan = project(PLAN.format(doses=json.dumps(doses)), {"teeth.csv": frame.to_csv(index=False)})
    return plan, frame


def test_hand_derivation_two_by_three():
    """2 × 3, cell (VC, d2) empty (index 5). B's rows are (b1 − b2) and (b2 − b3) averaged over A;
    only the first avoids the empty cell, so the estimable part is 1 of 2 df: b1 − b2 summed over
    A. The interaction rows are (b1 − b2)(a1 − a2) and (b2 − b3)(a1 − a2); likewise only the first
    survives. A's single row needs the empty cell: df 0 (hand derivation)."""
    half, third = Fraction(1, 2), Fraction(1, 3)
    B = [(half, -half, 0, half, -half, 0), (0, half, -half, 0, half, -half)]
    AB = [(1, -1, 0, -1, 1, 0), (0, 1, -1, 0, -1, 1)]
    A = [(third, third, third, -third, -third, -third)]
    assert estimable_part(B, [5]) == ((1, -1, 0, 1, -1, 0),)
    assert estimable_part(AB, [5]) == ((1, -1, 0, -1, 1, 0),)
    assert estimable_part(A, [5]) == ()


def test_hand_derivation_two_by_two():
    """2 × 2 with cell (2, 2) empty: each effect is one row with weight on the empty cell, so
    nothing of it is estimable (hand derivation): df 0, not testable."""
    q = Fraction(1, 2)
    for row in [(q, q, -q, -q), (q, -q, q, -q), (1, -1, -1, 1)]:
        assert estimable_part([row], [3]) == ()


def test_two_by_two_with_an_empty_cell_reports_untestable_rows(project):
    plan, _ = _project(project, ["d0.5", "d1"], ("VC", "d1"))
    doc = json.loads(reporter.report(plan).render("json"))
    for row in doc["anova"]["rows"][:-1]:
        assert row["df"] == 0 and row["F"] is None and row["df_hypothesis"] == 1
        assert "none of its 1 df can be tested" in row["note"]


def test_partial_rows_match_statsmodels_f_test_of_the_estimable_contrast(project):
    doses = ["d0.5", "d1", "d2"]
    plan, frame = _project(project, doses, ("VC", "d2"))
    report = reporter.report(plan)
    doc = json.loads(report.render("json"))
    jsonschema.validate(doc, load_schema())
    cells = [(s, d) for s in ("OJ", "VC") for d in doses]
    observed = [c for c in cells if c != ("VC", "d2")]
    X = np.column_stack([((frame["supp"] == s) & (frame["dose"] == d)).to_numpy(float) for s, d in observed])
    fit = sm.OLS(frame["len"].to_numpy(float), X).fit()
    rows = {r["source"]: r for r in doc["anova"]["rows"]}
    assert rows["supp"]["F"] is None and rows["supp"]["df"] == 0
    for source, expected in (("dose", [1, -1, 0, 1, -1, 0]), ("supp × dose", [1, -1, 0, -1, 1, 0])):
        row = rows[source]
        assert row["tested_contrast"] == [expected]
        assert (row["df"], row["df_hypothesis"]) == (1, 2)
        ref = fit.f_test(np.array([expected[:5]], float))
        assert row["F"] == pytest.approx(float(np.squeeze(ref.fvalue)), rel=1e-10)
        assert row["p"] == pytest.approx(float(ref.pvalue), rel=1e-9)
        assert "1 of the effect's 2 df" in row["note"] and "remaining 1 df needs the empty cell" in row["note"]
    text = report.render("md").decode("utf-8")
    assert "partly testable" in text
