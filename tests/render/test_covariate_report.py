"""An analysis of covariance through every format: the HTML, the Markdown and the PDF show the
adjusted-means table, the slopes and the slopes check with the same numbers as the document model;
the HTML inlines the raw-and-adjusted-means figure; results.json validates against the published
schema and carries the covariates, slopes, adjusted means and the slopes check, matching
statsmodels OLS (tests/ancova_project.py) to 1e-9 relative.
"""

from __future__ import annotations

import io
import json
import math

import jsonschema
import pytest
import statsmodels.formula.api as smf
from pypdf import PdfReader
from statsmodels.stats.anova import anova_lm

from ancova_project import LEVELS, reference_fit, write_ancova_project
from refcheck import plain_html, plain_markdown
from reporter.api import build_report
from reporter.narrative.document import Table, plain
from reporter.render.results_json import load_schema

REL = 1e-9


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    project = write_ancova_project(tmp_path_factory.mktemp("ancova"))
    report = build_report(project.plan)
    return project, report, report.document()


def _table_texts(doc, ident) -> list[str]:
    table = next(b for b in doc.walk() if isinstance(b, Table) and b.id == ident)
    return [plain(table.caption)] + [plain(c) for row in table.rows for c in row]


@pytest.mark.parametrize("ident", ["adjusted-means", "slopes", "design-matrix", "h1-betas"])
def test_html_and_markdown_show_the_covariate_tables(run, ident):
    """Every caption and cell of the covariate tables appears in the HTML and the Markdown."""
    _, report, doc = run
    html = plain_html(report.render("html").decode("utf-8"))
    md = plain_markdown(report.render("md").decode("utf-8"))
    for text in _table_texts(doc, ident):
        assert text in html, text
        assert text in md, text


def test_html_inlines_the_adjusted_means_figure(run):
    """The raw-and-adjusted-means figure is drawn inline (SVG) with its caption."""
    _, report, _ = run
    html = report.render("html").decode("utf-8")
    i = html.find("Raw and adjusted cell means of score")
    assert i > 0
    assert "<svg" in html[max(0, i - 200_000):i]


def test_pdf_text_has_the_adjusted_means_and_the_slopes_check(run):
    """The PDF's text layer holds the adjusted-means caption, the slopes table and the slopes check."""
    _, report, doc = run
    text = " ".join(page.extract_text() for page in PdfReader(io.BytesIO(report.render("pdf"))).pages)
    text = " ".join(text.split())
    assert "Adjusted cell means of score at pretest" in text
    assert "Covariate slopes of score" in text
    assert "Homogeneity of slopes" in text
    assert "Analysis of covariance of score" in text


def test_results_json_covariate_fields_against_statsmodels(run):
    """results.json validates against the schema; the covariate's reference is the mean of the rows
    used; adjusted means, SEs, intervals and the slope match statsmodels; the slopes check matches the
    interaction F of statsmodels' anova_lm; contrast rows over the coefficients end in a 0 for the slope."""
    project, report, _ = run
    doc = json.loads(report.render("json"))
    jsonschema.validate(doc, load_schema())
    fit = reference_fit(project)
    ci = fit.conf_int(0.05)
    (cov,) = doc["covariates"]
    assert cov["name"] == "pretest" and cov["adjust_to"] == "mean" and cov["slopes"] == "common"
    assert math.isclose(cov["reference"], project.rows["x"].mean(), rel_tol=1e-12)
    for cell, g in zip(doc["cells"], LEVELS):
        name = f"C(g)[{g}]"
        assert math.isclose(cell["adjusted_mean"], fit.params[name], rel_tol=REL)
        assert math.isclose(cell["adjusted_se"], fit.bse[name], rel_tol=REL)
        assert all(math.isclose(a, b, rel_tol=REL) for a, b in zip(cell["adjusted_ci"], ci.loc[name]))
    (slope,) = doc["slopes"]
    assert slope["cell"] is None and slope["df"] == int(fit.df_resid)
    for key, ref in (("estimate", fit.params["xc"]), ("se", fit.bse["xc"]), ("t", fit.tvalues["xc"]),
                     ("p", fit.pvalues["xc"])):
        assert math.isclose(slope[key], ref, rel_tol=REL), key
    for m, g in zip(doc["adjusted_marginal_means"], LEVELS):  # one factor: the adjusted cell means
        assert m["level"] == g and math.isclose(m["mean"], fit.params[f"C(g)[{g}]"], rel_tol=REL)
        assert math.isclose(m["se"], fit.bse[f"C(g)[{g}]"], rel_tol=REL)
    small = smf.ols("y ~ C(g) + x", data=project.rows).fit()
    large = smf.ols("y ~ C(g) * x", data=project.rows).fit()
    cmp = anova_lm(small, large)
    check = doc["assumptions"]["slopes_homogeneity"]
    assert math.isclose(check["F"], cmp["F"].iloc[1], rel_tol=REL)
    assert math.isclose(check["p"], cmp["Pr(>F)"].iloc[1], rel_tol=REL)
    assert check["df"] == [int(cmp["df_diff"].iloc[1]), int(large.df_resid)]
    assert math.isclose(check["ss_error_common"], small.ssr, rel_tol=REL)
    assert math.isclose(check["ss_error_per_cell"], large.ssr, rel_tol=REL)
    assert check["note"] is None
    assert doc["anova"]["rows"][0]["covariate"] == "pretest"
    assert {x["result"] for x in doc["not_applicable"]} >= {"Welch's ANOVA", "Kruskal–Wallis test"}
    assert [c["symbol"] for c in doc["design"]["covariate_columns"]] == ["β3"]
    assert all(row[-1] == 0 for h in doc["hypotheses"] for row in h["contrast"]["coefficients"])
    assert all(len(row) == 4 for h in doc["hypotheses"] for row in h["contrast"]["coefficients"])


def test_long_notation_box_may_break_in_print(run):
    """With covariates the notation box has more than a dozen entries: the HTML marks it note-long, which
    the print rules let continue on the next page instead of leaving "The model" alone on a page; the
    demo's shorter box stays unbreakable (class note-info only)."""
    from pathlib import Path

    _, report, _ = run
    html = report.render("html").decode("utf-8")
    assert 'class="note note-info note-long"' in html
    demo = build_report(Path(__file__).resolve().parents[2] / "demo_project" / "oneway.toml").render("html").decode()
    assert "note-long" not in demo.split("</style>", 1)[1]
    assert ".note-long { break-inside: auto" in html
