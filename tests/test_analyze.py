"""reporter.analyze(): a plan given as keyword arguments, fitted to a DataFrame, and the Report's outputs."""

from __future__ import annotations

import copy
import hashlib
import json
import math
import tomllib
from importlib import resources
from pathlib import Path

import jsonschema
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm

import reporter
from reporter.cli import main
from reporter.render.results_json import load_schema

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_project"
EPOCH = "1767225600"

# The factorial demo as keyword arguments (the same plan as demo_project/factorial.toml, less [study]).
HYPOTHESES = {
    "schedules differ": {"effect": "schedule"},
    "feedback conditions differ": "effect: feedback",
    "spacing benefit depends on feedback": "effect:schedule x feedback",
    "with immediate feedback, spacing beats massing":
        "mean(schedule=spaced, feedback=immediate) > mean(schedule=massed, feedback=immediate)",
    "any feedback beats none": {"means": "(delayed + immediate)/2 > none", "role": "exploratory",
                                "description": "pooled over the two kinds of feedback"},
}
OPTIONS = dict(coding="sum-to-zero", sums_of_squares="type-III", follow_up=["all-pairs-tukey"],
               follow_up_compares="feedback", unequal_variances="always-robust", permutations=500)


def _frame(**kw) -> pd.DataFrame:
    return pd.read_csv(DEMO / "recall_factorial.csv", **kw)


def _analyze(df: pd.DataFrame, **extra) -> reporter.Report:
    return reporter.analyze(df, outcome="recalled", factors={"schedule": ["massed", "spaced"], "feedback": None},
                            hypotheses=HYPOTHESES, **{**OPTIONS, **extra})


@pytest.fixture(autouse=True)
def _fixed_time(monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)


def test_notebook_use(tmp_path):
    """In a notebook: analyze() on a DataFrame shows HTML, and to_json() is results.json as a dict.

    Reference: the Type III ANOVA of statsmodels (anova_lm, typ=3) on sum-to-zero coding."""
    df = _frame()
    before = df.copy(deep=True)
    args = copy.deepcopy(HYPOTHESES)
    report = _analyze(df)
    pd.testing.assert_frame_equal(df, before)  # the data are read, never modified
    assert HYPOTHESES == args

    html = report._repr_html_()
    assert html.startswith("<!DOCTYPE html>")
    assert "schedules differ" in html and "any feedback beats none" in html
    assert "recalled by schedule and feedback" in html

    doc = report.to_json()
    jsonschema.validate(doc, load_schema())
    written = report.write(tmp_path / "out", formats=("json",))
    assert doc == json.loads(written[0].read_text(encoding="utf-8"))  # equal to the file's content

    fit = smf.ols("recalled ~ C(schedule, Sum) * C(feedback, Sum)", data=df).fit()
    ref = anova_lm(fit, typ=3)
    rows = {r["source"]: r for r in doc["anova"]["rows"]}
    for source, term in (("schedule", "C(schedule, Sum)"), ("feedback", "C(feedback, Sum)"),
                         ("schedule × feedback", "C(schedule, Sum):C(feedback, Sum)")):
        assert math.isclose(rows[source]["F"], ref.loc[term, "F"], rel_tol=1e-9)  # statsmodels anova_lm
        assert math.isclose(rows[source]["ss"], ref.loc[term, "sum_sq"], rel_tol=1e-9)
    assert [h["name"] for h in doc["hypotheses"]] == list(HYPOTHESES)
    assert [h["role"] for h in doc["hypotheses"]] == ["planned"] * 4 + ["exploratory"]
    assert [h.effect for h in report.plan.hypotheses[:3]] == ["schedule", "feedback", "schedule x feedback"]


def test_levels_in_order_of_first_appearance():
    """factors={name: None} takes the levels in order of first appearance (pandas Series.unique keeps that order)."""
    df = _frame()
    report = reporter.analyze(df, outcome="recalled", factors=["feedback", "schedule"], permutations=0)
    levels = [f["levels"] for f in report.to_json()["design"]["factors"]]
    assert levels == [list(df["feedback"].unique()), list(df["schedule"].unique())]
    numeric = pd.DataFrame({"y": [1.0, 2.5, 3.0, 4.5, 2.0, 3.5, float("nan")], "dose": [10, 5, 10, 20, 5, 20, 5]})
    shown = reporter.analyze(numeric, outcome="y", factors={"dose": None}, permutations=0)
    assert shown.plan.factors[0].levels == ("10", "5", "20")


def _numbers_equal(a, b, path="", *, rel=0.0):
    """Walk two results.json documents; every number and text equal (rel > 0: numbers within rel)."""
    if isinstance(a, dict):
        assert list(a) == list(b), path
        for k in a:
            _numbers_equal(a[k], b[k], f"{path}.{k}", rel=rel)
    elif isinstance(a, list):
        assert len(a) == len(b), path
        for i, (x, y) in enumerate(zip(a, b)):
            _numbers_equal(x, y, f"{path}[{i}]", rel=rel)
    elif isinstance(a, float) and isinstance(b, float) and rel:
        assert math.isclose(a, b, rel_tol=rel, abs_tol=rel * 1e-3), (path, a, b)
    else:
        assert a == b, (path, a, b)


# Provenance fields that name where the data came from: a DataFrame in one run, a CSV file in the other
# (and the command line, which only the command has).
_SOURCE_FIELDS = ("data_sha256", "data_file", "plan_file", "data_format", "data_path", "plan_path",
                  "paths_relative_to", "data_bytes", "argv", "exact_decimal_intake")


def _command_line_results(report: reporter.Report, df: pd.DataFrame, folder: Path) -> dict:
    folder.mkdir()
    (folder / "plan.toml").write_text(report.plan_toml(), encoding="utf-8")
    df.to_csv(folder / "data.csv", index=False)
    assert main(["run", str(folder / "plan.toml"), "--out", str(folder / "out"), "--format", "json"]) == 0
    return json.loads((folder / "out" / "results.json").read_text(encoding="utf-8"))


def test_plan_toml_through_the_command_line(tmp_path):
    """analyze(...).plan_toml() beside a CSV of the same data, run by `anova-report run`, gives the same
    results.json: every number equal when the frame holds the file's text (both read it as exact
    decimals), and the same plan hash."""
    df = _frame(dtype=str)
    report = _analyze(df)
    mine, theirs = report.to_json(), _command_line_results(report, df, tmp_path / "cli")
    for key in _SOURCE_FIELDS:
        mine["provenance"].pop(key), theirs["provenance"].pop(key)
    mine.pop("results_sha256"), theirs.pop("results_sha256")  # a digest of the fields above too
    _numbers_equal(mine, theirs)
    text = report.plan_toml().encode("utf-8")
    assert mine["provenance"]["plan_sha256"] == hashlib.sha256(text).hexdigest() == report.plan.sha256


def test_plan_toml_of_a_float_frame_through_the_command_line(tmp_path):
    """With float64 columns (pandas' default) every number agrees within 1e-9 relative: the frame holds
    the binary values, the CSV the decimals they print as (intake tolerance: common practice, no source)."""
    df = _frame()
    report = _analyze(df)
    mine, theirs = report.to_json(), _command_line_results(report, df, tmp_path / "cli")
    assert mine["provenance"].pop("exact_decimal_intake") is False
    assert theirs["provenance"].pop("exact_decimal_intake") is True
    for key in _SOURCE_FIELDS[:-1]:
        mine["provenance"].pop(key), theirs["provenance"].pop(key)
    mine.pop("results_sha256"), theirs.pop("results_sha256")
    _numbers_equal(mine, theirs, rel=1e-9)


def test_plan_toml_is_a_plan_file(tmp_path):
    """plan_toml() parses with tomllib (TOML v1.0.0) and loads back as the same plan; data_path renames the data."""
    report = _analyze(_frame())
    text = report.plan_toml()
    doc = tomllib.loads(text)
    assert doc["analysis"]["coding"] == "sum-to-zero" and doc["data"]["path"] == "data.csv"
    path = tmp_path / "plan.toml"
    path.write_text(report.plan_toml(data_path="recall.csv"), encoding="utf-8")
    again = reporter.load_plan(path)
    assert again.data.path == tmp_path / "recall.csv"
    assert again.factors == report.plan.factors and again.analysis == report.plan.analysis
    assert [(h.name, h.means, h.effect, h.role, h.description) for h in again.hypotheses] == [
        (h.name, h.means, h.effect, h.role, h.description) for h in report.plan.hypotheses]


def test_report_writers(tmp_path):
    """to_html, to_pdf and to_markdown write/return the same documents as render()."""
    report = _analyze(_frame(), follow_up=[])
    html = report.to_html(tmp_path / "r.html")
    assert html.read_bytes() == report.render("html")
    pdf = report.to_pdf(tmp_path / "sub" / "r.pdf")
    assert pdf.read_bytes().startswith(b"%PDF-")
    md = report.to_markdown()
    assert isinstance(md, str) and md == report.render("md").decode("utf-8")
    assert "recalled by schedule and feedback" in md
    with pytest.raises(reporter.RenderError, match=r"to_html\(.*is a folder; give a file name"):
        report.to_html(tmp_path)
    with pytest.raises(reporter.RenderError, match=r"to_pdf\(path\): give the path"):
        report.to_pdf("")


def test_file_report_plan_toml():
    """A report from a plan file gives that plan back as a plan file (data path relative to it)."""
    report = reporter.report(DEMO / "oneway.toml")
    doc = tomllib.loads(report.plan_toml())
    assert doc["data"]["path"] == "recall_oneway.csv"
    assert doc["title"] == report.plan.title


F = {"schedule": None, "feedback": None}
BAD = [
    (dict(factors=F, alfa=0.1), reporter.PlanError, "analyze(): 'alfa' is not a known keyword. Did you mean 'alpha'?"),
    (dict(factors=F, ss_type="III"), reporter.PlanError, "Did you mean 'sums_of_squares'?"),
    (dict(factors=F, hypothesis={}), reporter.PlanError, "'hypothesis' is not a known keyword. Did you mean 'hypotheses'?"),
    (dict(factors=F, alpha=2), reporter.PlanError, "analyze(): 'alpha' must be a number between"),
    (dict(factors=F, coding="effects"), reporter.PlanError, "'coding' must be one of"),
    (dict(factors=F, follow_up=["versus-control-dunnett"]), reporter.PlanError, "'follow_up_control' is required"),
    (dict(factors=F, follow_up=["all-pairs-tukey"], follow_up_compares="sched"), reporter.PlanError,
     'Did you mean "schedule"?'),
    (dict(factors="schedule"), reporter.PlanError, "'factors' must map each factor name"),
    (dict(factors={}), reporter.PlanError, "'factors' is empty"),
    (dict(factors={"sched": None}), reporter.DataError, "factors['sched'] reads the column 'sched'"),
    (dict(factors={"schedule": ["massed"]}), reporter.PlanError, "factors['schedule'] must list at least 2 levels"),
    (dict(factors={"schedule": "massed"}), reporter.PlanError, "factors['schedule'] must be a list of levels"),
    (dict(factors={"schedule": {"level": None}}), reporter.PlanError, "Did you mean 'levels'?"),
    (dict(factors={"schedule": None, "feedback": ["none", "delayed"]}), reporter.DataError,
     'factors={name: {"levels": [...], "exclude": [...]}}'),
    (dict(factors=F, hypotheses={"h": "effect: "}), reporter.PlanError, "hypotheses['h']['effect'] must not be empty"),
    (dict(factors=F, hypotheses={"h": "effect: schedule:feedback"}), reporter.PlanError,
     'Write effect = "schedule x feedback"'),
    (dict(factors=F, hypotheses={"h": {"efect": "schedule"}}), reporter.PlanError, "Did you mean 'effect'?"),
    (dict(factors=F, hypotheses={"h": "spaced > bogus"}), reporter.HypothesisError,
     "analyze(): hypotheses['h']: 'bogus' is not a level"),
    (dict(factors=F, hypotheses={"h": {"effect": "schedule", "role": "primary"}}), reporter.PlanError,
     "hypotheses['h']['role'] must be one of"),
    (dict(factors=F, hypotheses=["a > b"]), reporter.PlanError, "'hypotheses' must map"),
    (dict(factors=F, title=""), reporter.PlanError, "'title' must not be empty"),
    (dict(factors=F, title="a\ud800"), reporter.PlanError, "lone surrogate"),
    (dict(factors=F, study={"allocaton": "x"}), reporter.PlanError, "study['allocaton'] is not a known key"),
    (dict(factors=F, outcome="recall"), reporter.DataError, "has no column 'recall'"),
    (dict(factors=F, outcome=None), reporter.PlanError, "'outcome' must be the name"),
]


@pytest.mark.parametrize("kwargs, error, message", BAD, ids=[str(i) for i in range(len(BAD))])
def test_bad_arguments(kwargs, error, message):
    """Each bad argument gives one error naming it, with the fix, and no chained traceback."""
    df = _frame()
    kwargs = {"outcome": "recalled", "permutations": 0, **kwargs}
    with pytest.raises(error) as info:
        reporter.analyze(df, **kwargs)
    assert message in str(info.value)
    assert info.value.__cause__ is None
    assert info.value.__suppress_context__ or info.value.__context__ is None


def test_bad_data_argument():
    """Data that is neither a DataFrame nor a mapping of columns is refused by name."""
    with pytest.raises(reporter.DataError, match=r"analyze\(data\): must be a pandas DataFrame"):
        reporter.analyze([1, 2], outcome="y", factors=["g"])


def test_public_names_and_typing():
    """Every name in reporter.__all__ resolves; py.typed ships with the package (PEP 561) and in the wheel."""
    for name in reporter.__all__:
        assert getattr(reporter, name) is not None, name
    assert {"analyze", "report", "from_statsmodels", "load_plan", "Report"} <= set(reporter.__all__)
    assert resources.files("reporter").joinpath("py.typed").is_file()
    conf = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    assert "py.typed" in conf["tool"]["setuptools"]["package-data"]["reporter"]


def test_mapping_of_columns():
    """A plain mapping of column name to values works like a DataFrame (reference: scipy.stats.f_oneway)."""
    from scipy.stats import f_oneway

    data = {"g": ["a", "b", "c"] * 4, "y": [4.1, 5.0, 6.2, 3.9, 5.5, 6.0, 4.4, 4.8, 6.9, 4.0, 5.2, 6.4]}
    report = reporter.analyze(data, outcome="y", factors={"g": None}, permutations=0)
    row = report.to_json()["anova"]["rows"][0]
    ref = f_oneway(*([y for g, y in zip(data["g"], data["y"]) if g == level] for level in "abc"))
    assert math.isclose(row["F"], ref.statistic, rel_tol=1e-9) and math.isclose(row["p"], ref.pvalue, rel_tol=1e-9)


def test_document_carries_the_provenance_that_render_prints():
    """Report.document() and Report.render() share one provenance (results digest, permutation
    counts): the document renders to the very bytes of render("md"). The digest itself is
    checked against hashlib in tests/test_provenance.py."""
    from reporter.render.markdown import render_markdown

    frame = pd.DataFrame({"g": ["a"] * 4 + ["b"] * 4, "y": [1.0, 2.0, 3.0, 4.0, 2.0, 4.0, 5.0, 7.0]})
    rep = reporter.analyze(frame, outcome="y", factors={"g": None}, hypotheses={"b beats a": "b > a"})
    text = render_markdown(rep.document())
    assert text == rep.render("md")
    assert rep.to_json()["results_sha256"] in text.decode("utf-8")
