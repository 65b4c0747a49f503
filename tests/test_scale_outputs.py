"""Outputs whose size does not grow with the number of rows, and the report without rows.

A seeded numpy generator writes 10^5 rows (invented reaction times in four groups) as Parquet; a
plan with one directional and one omnibus hypothesis and default [analysis] is run through the
Python interface. Bounds (from the project's scale requirements): report.html ≤ 1.5 MB,
results.json ≤ 1 MB, report.pdf ≤ 3 MB, and no array in results.json longer than 1,000.
"""

from __future__ import annotations

import dataclasses
import json

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import reporter
from reporter.cli import main
from reporter.run import analyse, render_outputs

PLAN = """
title = "Reaction time in four groups (simulated)"
[data]
path = "rt.parquet"
outcome = "y"
[[factors]]
name = "g"
levels = ["a", "b", "c", "d"]
[[hypotheses]]
name = "b is slower than a"
means = "b > a"
[[hypotheses]]
name = "groups differ"
effect = "g"
"""


def _project(tmp_path, rows: int, means=(400.0, 410.0, 415.0, 430.0)):
    rng = np.random.default_rng(20261202)
    g = rng.integers(0, 4, rows)
    y = rng.normal(np.array(means)[g], 50.0)
    y[:40] += 600.0  # some gross errors, so the outlier list has something to cap
    pq.write_table(pa.table({"g": np.array(["a", "b", "c", "d"])[g], "y": y}), tmp_path / "rt.parquet")
    plan = tmp_path / "plan.toml"
    plan.write_text(PLAN, encoding="utf-8")
    return plan


def _longest_array(doc) -> int:
    if isinstance(doc, list):
        return max([len(doc)] + [_longest_array(v) for v in doc])
    if isinstance(doc, dict):
        return max([0] + [_longest_array(v) for v in doc.values()])
    return 0


@pytest.fixture(scope="module")
def big(tmp_path_factory):
    path = _project(tmp_path_factory.mktemp("big"), 100_000)
    rep = reporter.report(path)
    return rep, render_outputs(rep.prepared, rep.analysis, ("html", "json", "pdf"))


def test_outputs_within_size_bounds_at_1e5_rows(big):
    _, out = big
    assert len(out["html"]) <= 1_500_000
    assert len(out["json"]) <= 1_000_000
    assert len(out["pdf"]) <= 3_000_000


def test_results_json_has_no_per_row_arrays(big):
    rep, out = big
    doc = json.loads(out["json"])
    assert doc["data"]["n_analysed"] == 100_000
    assert _longest_array(doc) <= 1000
    a = doc["assumptions"]
    assert a["qq"]["summarized"] and len(a["qq"]["sample"]) == 1000 and a["qq"]["n_residuals"] == 100_000
    assert a["outliers"]["total"] > 100 and len(a["outliers"]["rows"]) == 100
    assert a["shapiro_wilk"]["sampled"] and a["shapiro_wilk"]["n"] == 5000
    assert "permutation_max_rows" in doc["robust"]["permutation_note"]


def test_report_says_what_is_summarized(big):
    _, out = big
    html = out["html"].decode("utf-8")
    assert "evenly spaced quantiles" in html
    assert "random sample of 5,000" in html
    assert "order statistics at evenly spaced ranks" in html
    assert "the 20 largest" in html


def test_report_without_row_access_renders_and_says_why(tmp_path):
    """With rows=None (as from a summary table) every format renders; row-level parts say why."""
    prep = reporter.api.prepare(_project(tmp_path, 400))
    prep = dataclasses.replace(prep, rows=None)
    out = render_outputs(prep, analyse(prep, quiet=True), ("html", "json", "md"))
    doc = json.loads(out["json"])
    assert doc["assumptions"]["qq"] is None and doc["assumptions"]["outliers"] is None
    assert doc["assumptions"]["shapiro_wilk"]["note"].startswith("not available")
    assert doc["robust"]["kruskal_wallis"]["note"].startswith("not available")
    assert "not available" in out["md"].decode("utf-8")


def test_quiet_run_prints_nothing_on_stderr(tmp_path, capfd, monkeypatch):
    """--quiet: no notice and no progress on stderr, even for a run announced as long."""
    import reporter.inference.permutation as P

    monkeypatch.setattr(P, "TIME_BUDGET", 0.0)
    plan = _project(tmp_path, 400, means=(400.0, 450.0, 500.0, 550.0))  # a small p: no early stop
    assert main(["run", str(plan), "--out", str(tmp_path / "q"), "--format", "json", "--quiet"]) == 0
    assert capfd.readouterr().err == ""
    assert main(["run", str(plan), "--out", str(tmp_path / "v"), "--format", "json"]) == 0
    assert "permutation F test" in capfd.readouterr().err
