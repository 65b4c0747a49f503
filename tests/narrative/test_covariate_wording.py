"""The report of an analysis of covariance shows each piece: the covariates in Methods with the
value the adjusted means are taken at, the covariate columns of the design matrix and what each
slope means, L = [C·D, 0], the adjusted means beside the raw ones, the slopes, the homogeneity-of-
slopes check with its note, the per-cell-slopes statement and the caution on covariates measured
after allocation. A report without covariates says none of it.

Reference values: statsmodels OLS on the rows (tests/ancova_project.py), formatted by the report's
number rule (reporter.narrative.numbers, used for the formatting only). The wording rules are the
report's own (common practice, no source).
"""

from __future__ import annotations

from pathlib import Path

import pytest
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm

from ancova_project import LEVELS, reference_fit, write_ancova_project
from reporter.api import build_report
from reporter.narrative.document import DefinitionList, Note, Paragraph, Section, Table, plain
from reporter.narrative.numbers import MINUS, format_number, format_p_cell

DEMO = Path(__file__).resolve().parents[2] / "demo_project"


def _blocks(doc):
    return list(doc.walk())


def _table(doc, ident) -> Table:
    found = [b for b in doc.walk() if isinstance(b, Table) and b.id == ident]
    assert found, f"no table {ident!r}"
    return found[0]


def _cells(table: Table) -> list[list[str]]:
    return [[plain(c) for c in row] for row in table.rows]


def _text(doc) -> str:
    parts = [plain(p) for s in doc.summary for p in [s.runs]]
    for b in doc.walk():
        if isinstance(b, Paragraph):
            parts.append(plain(b.runs))
        elif isinstance(b, Table):
            parts += [plain(b.caption), *(plain(n) for n in b.notes)]
        elif isinstance(b, DefinitionList):
            parts += [plain(t) + ": " + plain(d) for t, d in b.items]
        elif isinstance(b, Note):
            parts.append(b.title)
        elif isinstance(b, Section):
            parts.append(b.title)
    return "\n".join(parts) + "\n" + "\n".join(plain(i) for b in doc.walk() if hasattr(b, "items")
                                            and not isinstance(b, DefinitionList) for i in b.items)


@pytest.fixture(scope="module")
def common(tmp_path_factory):
    project = write_ancova_project(tmp_path_factory.mktemp("common"))
    report = build_report(project.plan)
    return project, report, report.document()


@pytest.fixture(scope="module")
def per_cell(tmp_path_factory):
    project = write_ancova_project(tmp_path_factory.mktemp("per-cell"), slopes="per-cell", adjust_to=50,
                                   cell_slopes=(0.2, 0.7, 1.3))
    report = build_report(project.plan)
    return project, report, report.document()


def test_methods_name_the_covariate_its_reference_and_the_type_i_order(common):
    """Methods: the covariate with its description, the mean it is adjusted to (numpy mean of the
    rows used), one common slope, adjusted means as the subject of every hypothesis, covariates
    first in Type I, and the assumption that the factors cannot change the covariate."""
    project, _, doc = common
    text = _text(doc)
    ref = format_number(project.rows["x"].mean(), 2)
    assert "An analysis of covariance: the model adjusts score for one covariate, pretest (reading score " \
           "before allocation)." in text
    assert f"at pretest = {ref} (its mean over the analysed rows)" in text
    assert "one slope common to all cells for pretest" in text
    assert "Every hypothesis about means, every effect and every cell coefficient below refers to these adjusted means" in text
    assert "In Type I sums of squares the covariates enter first" in text
    assert "the covariate is not affected by the factors (for example, measured before allocation" in text
    assert doc.subtitle.startswith("Analysis of covariance report")
    assert "adjusted for pretest." in plain(doc.summary[0].runs)


def test_adjusted_means_table_against_statsmodels(common):
    """Adjusted M, SE and CI of each cell are statsmodels' cell coefficients of y ~ C(g) + (x − x̄) − 1
    with their standard errors and 95% intervals; raw M is the pandas cell mean."""
    project, _, doc = common
    fit = reference_fit(project)
    ci = fit.conf_int(0.05)
    rows = _cells(_table(doc, "adjusted-means"))
    raw = project.rows.groupby("g", observed=False)["y"].mean()
    for row, g in zip(rows, LEVELS):
        name = f"C(g)[{g}]"
        assert row[0] == g
        assert row[2] == format_number(raw[g], 2)
        assert row[3] == format_number(fit.params[name], 2)
        assert row[4] == format_number(fit.bse[name], 2)
        assert row[5] == f"[{format_number(ci.loc[name, 0], 2)}, {format_number(ci.loc[name, 1], 2)}]"
    assert f"pretest = {format_number(project.reference, 2)}" in plain(_table(doc, "adjusted-means").caption)


def test_design_matrix_shows_the_covariate_column_and_the_slope_meaning(common):
    """The design matrix has a column x − x* in every row; the coefficient table says what the slope
    means and prints statsmodels' slope and SE."""
    project, _, doc = common
    fit = reference_fit(project)
    ref = format_number(project.reference, 2)
    matrix = _table(doc, "design-matrix")
    assert [plain(c.label) for c in matrix.columns][-2] == "β3"
    assert all(row[-2] == f"pretest {MINUS} {ref}" for row in _cells(matrix))
    assert "4 columns" in plain(matrix.notes[0])
    slope_row = _cells(_table(doc, "coefficients"))[-1]
    assert slope_row[:3] == ["β3", "pretest", "slope of pretest"]
    assert "per unit of pretest, within a cell (common to all cells)" in slope_row[3]
    assert slope_row[4:] == [format_number(fit.params["xc"], 2), format_number(fit.bse["xc"], 2)]


def test_contrast_over_coefficients_has_a_zero_for_the_slope(common):
    """L = [C·D, 0]: the caption says so and the slope's column is 0 in every row."""
    _, _, doc = common
    for ident in ("h1-betas", "h2-betas"):
        table = _table(doc, ident)
        assert "L = [C·D, 0]" in plain(table.caption)
        assert [plain(c.label) for c in table.columns][-2] == "β3"
        assert all(row[-2] == "0" for row in _cells(table))


def test_slopes_table_and_covariate_row_against_statsmodels(common):
    """The slope's estimate, SE, t, df and p are statsmodels'; the ANCOVA table's covariate row comes
    first with F = t² (Type III: the slope's Wald test)."""
    project, _, doc = common
    fit = reference_fit(project)
    row = _cells(_table(doc, "slopes"))[0]
    assert row == ["pretest", format_number(fit.params["xc"], 2), format_number(fit.bse["xc"], 2),
                   format_number(fit.tvalues["xc"], 2), str(int(fit.df_resid)), format_p_cell(fit.pvalues["xc"])]
    anova = _table(doc, "anova")
    assert plain(anova.caption) == "Analysis of covariance of score"
    first = _cells(anova)[0]
    assert first[:2] == ["pretest", "1"] and first[4] == format_number(fit.tvalues["xc"] ** 2, 2)


def test_slopes_check_against_statsmodels_interaction_f(common):
    """The homogeneity-of-slopes F is statsmodels' comparison of y ~ C(g) + x with y ~ C(g) * x."""
    project, _, doc = common
    df = project.rows
    small = smf.ols("y ~ C(g) + x", data=df).fit()
    large = smf.ols("y ~ C(g) * x", data=df).fit()
    cmp = anova_lm(small, large)
    F, p = float(cmp["F"].iloc[1]), float(cmp["Pr(>F)"].iloc[1])
    text = _text(doc)
    df1, df2 = int(cmp["df_diff"].iloc[1]), int(large.df_resid)
    assert f"Homogeneity of slopes (cell × pretest): F({df1}, {df2}) = {format_number(F, 2)}, p = {format_p_cell(p)}" \
        in text
    assert "does not indicate that the slopes differ" in text  # p > .05 for these data (common slopes simulated)


def test_per_cell_slopes_state_where_effects_are_evaluated(per_cell):
    """Per-cell slopes at a stated value: Methods and the ANOVA notes say effects are evaluated at
    pretest = 50; the slopes table has one row per cell (statsmodels' C(g):xc); the slopes check
    rejects for these data (slopes 0.2, 0.7, 1.3 simulated) and its note says what that means."""
    project, _, doc = per_cell
    fit = reference_fit(project)
    text = _text(doc)
    assert "every effect and every hypothesis is evaluated at pretest = 50" in text
    assert "a separate slope in each cell for pretest" in text
    rows = _cells(_table(doc, "slopes"))
    assert [r[1] for r in rows] == list(LEVELS)
    for r, g in zip(rows, LEVELS):
        assert r[2] == format_number(fit.params[f"C(g)[{g}]:xc"], 2)
        assert r[3] == format_number(fit.bse[f"C(g)[{g}]:xc"], 2)
    notes = [b for b in doc.walk() if isinstance(b, Note) and b.title == "The slopes differ between cells"]
    assert notes and "plan already fits a slope per cell" in plain(notes[0].blocks[0].runs)
    matrix = _cells(_table(doc, "design-matrix"))
    assert matrix[0][4:7] == [f"pretest {MINUS} 50", "0", "0"]


def test_caution_on_covariates_measured_after_allocation(common):
    """The cautions say the adjustment needs a covariate the factors cannot change."""
    _, _, doc = common
    caution = [b for b in doc.walk() if isinstance(b, Note) and b.kind == "caution" and b.title == "Before drawing conclusions"]
    items = [plain(i) for i in caution[0].blocks[0].items]
    assert any("measured before allocation" in i and "pretest" in i for i in items)


def test_report_without_covariates_says_nothing_of_them():
    """The one-way demo has no covariate wording, table or column."""
    doc = build_report(DEMO / "oneway.toml").document()
    ids = {b.id for b in doc.walk() if isinstance(b, Table)}
    assert not ids & {"adjusted-means", "slopes"}
    text = _text(doc)
    for words in ("covariate", "adjusted mean", "L = [C·D, 0]", "Homogeneity of slopes"):
        assert words not in text
    assert doc.subtitle.startswith("Analysis of variance report")


def test_what_covariates_rule_out_is_listed_with_its_reason(common):
    """The assumption checks list the tests that do not apply to adjusted means (Welch's tests,
    Games–Howell, Kruskal–Wallis), each with the inference layer's reason, once."""
    _, report, doc = common
    notes = [b for b in doc.walk() if isinstance(b, Note) and b.title == "Not computed with covariates"]
    assert len(notes) == 1
    items = [plain(i) for i in notes[0].blocks[0].items]
    reasons = dict(report.analysis.inference.not_applicable)
    assert {"Welch's ANOVA", "Kruskal–Wallis test"} <= set(reasons)
    assert items == [f"{what} — {why}." for what, why in report.analysis.inference.not_applicable]
    assert sum("Kruskal–Wallis" in plain(b.runs) for b in doc.walk() if isinstance(b, Paragraph)) == 0


def test_effect_wording_speaks_of_adjusted_means(common):
    """The omnibus effect is read as a statement about unweighted adjusted means, in words, in the
    reading and in the results sentence."""
    _, _, doc = common
    text = _text(doc)
    assert "the unweighted adjusted mean of score is the same at every level of method" in text
    assert "all unweighted adjusted means of method are equal" in text
    assert "clear differences among the unweighted adjusted means" in text
