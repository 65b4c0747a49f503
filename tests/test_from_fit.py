"""from_statsmodels reads the fit as statsmodels made it: rows used, levels in the formula's order,
and a coding whose coefficients are the fit's own.

Reference: statsmodels (``fit.params``, ``fit.nobs``, ``fit.ssr``, ``anova_lm``) on seeded simulated
data (numpy default_rng(20261202)) and on PlantGrowth (Dobson, A. J. (1983), An Introduction to
Statistical Modelling, Chapman and Hall, Table 2.1; tests/data/README.md).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm

import reporter
from reporter.from_fit import read_fit

DATA = __import__("pathlib").Path(__file__).resolve().parent / "data"


@pytest.fixture(scope="module")
def frame() -> pd.DataFrame:
    rng = np.random.default_rng(20261202)
    n = 90
    df = pd.DataFrame({
        "dose": rng.choice(["low", "mid", "high"], n),
        "sex": rng.choice(["f", "m"], n),
        "batch": rng.choice([1, 2, 3], n),
    })
    df["y"] = 20 + (df.dose == "high") * 3.0 - (df.sex == "m") * 1.5 + df.batch * 0.5 + rng.normal(0, 2, n)
    df.loc[[4, 9], "y"] = np.nan  # dropped by statsmodels
    df.loc[[12], "sex"] = None  # dropped by statsmodels
    return df


def _params_match(report, fit) -> None:
    """The report's coefficients are the fit's, one for one (compared in sorted order)."""
    ours = np.sort(np.array(report.analysis.fit.coefficients, dtype=float))
    theirs = np.sort(fit.params.to_numpy())
    assert np.allclose(ours, theirs, rtol=1e-10, atol=1e-10)


@pytest.mark.parametrize("formula, coding, levels", [
    ("y ~ C(dose) * C(sex)", "reference-level", {"dose": ("high", "low", "mid"), "sex": ("f", "m")}),
    ('y ~ C(dose, Treatment(reference="low")) * C(sex, Treatment("m"))', "reference-level",
     {"dose": ("low", "high", "mid"), "sex": ("m", "f")}),
    ("y ~ C(dose, Sum) * C(sex, Sum)", "sum-to-zero", {"dose": ("high", "low", "mid"), "sex": ("f", "m")}),
    ('y ~ C(dose, Sum(omit="high")) * C(sex, Sum)', "sum-to-zero", {"dose": ("low", "mid", "high"), "sex": ("f", "m")}),
    ("y ~ dose * sex", "reference-level", {"dose": ("high", "low", "mid"), "sex": ("f", "m")}),
    ("y ~ C(dose):C(sex) - 1", "cell-means", {"dose": ("high", "low", "mid"), "sex": ("f", "m")}),
], ids=["treatment", "treatment-reference", "sum", "sum-omit", "text-columns", "cell-means-form"])
def test_coding_follows_the_fit(frame, formula, coding, levels):
    """Treatment coding maps to reference-level (its reference listed first), sum coding to
    sum-to-zero (the level coded -1 listed last), one indicator per cell to cell-means: the
    report's coefficients equal fit.params."""
    fit = smf.ols(formula, frame).fit()
    structure = read_fit(fit)
    assert structure.coding == coding
    assert structure.levels == levels
    report = reporter.from_statsmodels(fit, permutations=200)
    assert report.prepared.plan.analysis.parameterization == {
        "reference-level": "reference", "sum-to-zero": "effects", "cell-means": "cell-means"}[coding]
    _params_match(report, fit)


def test_rows_used_are_the_fit_rows(frame):
    """Rows statsmodels dropped (missing outcome or factor) are left out; a subset is respected."""
    fit = smf.ols("y ~ C(dose) * C(sex)", frame).fit()
    report = reporter.from_statsmodels(fit, permutations=200)
    assert report.analysis.cells.n_total == fit.nobs == len(frame) - 3
    assert math.isclose(report.analysis.anova.ss_error, fit.ssr, rel_tol=1e-10)
    part = smf.ols("y ~ C(dose) * C(sex)", frame, subset=frame.index[10:70]).fit()
    report = reporter.from_statsmodels(part, permutations=200)
    assert report.analysis.cells.n_total == part.nobs
    assert math.isclose(report.analysis.anova.ss_error, part.ssr, rel_tol=1e-10)


def test_index_labels_do_not_matter(frame):
    """A frame indexed by repeated text labels gives the same rows as a plain index."""
    relabelled = frame.set_axis(["r"] * len(frame))
    a = reporter.from_statsmodels(smf.ols("y ~ C(dose) * C(sex)", frame).fit(), permutations=200)
    b = reporter.from_statsmodels(smf.ols("y ~ C(dose) * C(sex)", relabelled).fit(), permutations=200)
    assert [r.F for r in a.analysis.anova.rows] == [r.F for r in b.analysis.anova.rows]


def test_ordered_categorical_keeps_its_level_order(frame):
    """A pandas Categorical keeps its categories' order (the formula's level order)."""
    df = frame.assign(dose=pd.Categorical(frame.dose, categories=["low", "mid", "high"], ordered=True))
    fit = smf.ols("y ~ dose * sex", df).fit()
    assert read_fit(fit).levels["dose"] == ("low", "mid", "high")
    report = reporter.from_statsmodels(fit, hypotheses={"trend": {"effect": "dose"}}, permutations=200)
    assert [lv for lv in report.prepared.design.factors[0].levels] == ["low", "mid", "high"]
    _params_match(report, fit)


def test_numeric_levels_in_c(frame):
    """C(batch) with numbers as levels: the levels are the numbers' text, in numeric order."""
    fit = smf.ols("y ~ C(batch) * C(sex, Sum)", frame).fit()
    structure = read_fit(fit)
    assert structure.levels["batch"] == ("1", "2", "3")
    assert structure.coding == "cell-means" and "batch" in structure.notes[0]
    report = reporter.from_statsmodels(fit, hypotheses={"batch 3 above batch 1": "`3` > `1`"}, permutations=200)
    table = anova_lm(smf.ols("y ~ C(batch, Sum) * C(sex, Sum)", frame).fit(), typ=3)
    assert math.isclose(report.analysis.anova.rows[0].F, table.loc["C(batch, Sum)", "F"], rel_tol=1e-9)


@pytest.mark.parametrize("formula", ["y ~ C(dose, Poly) * C(sex)", "y ~ C(dose, Helmert) * C(sex, Helmert)",
                                     "y ~ C(dose, Diff) * C(sex)", "y ~ C(dose) * C(sex) - 1"],
                         ids=["poly", "helmert", "diff", "no-intercept-factorial"])
def test_codings_without_a_counterpart(frame, formula):
    """Codings the report has no name for give cell-means with a note; tables are unchanged."""
    fit = smf.ols(formula, frame).fit()
    structure = read_fit(fit)
    assert structure.coding == "cell-means"
    assert len(structure.notes) == 1 and "do not depend on the coding" in structure.notes[0]
    report = reporter.from_statsmodels(fit, permutations=200)
    table = anova_lm(smf.ols("y ~ C(dose, Sum) * C(sex, Sum)", frame).fit(), typ=3)
    for row, F in zip(report.analysis.anova.rows, table["F"].iloc[1:4]):
        assert math.isclose(row.F, F, rel_tol=1e-9)


def test_one_factor_without_intercept_is_the_cell_means_model():
    """PlantGrowth (Dobson 1983), weight ~ C(group) - 1: coefficients are the group means, the
    table tests equal means (F(2, 27) = 4.846, as with the intercept; anova_lm on that fit)."""
    frame = pd.read_csv(DATA / "PlantGrowth.csv")
    no_intercept = smf.ols("weight ~ C(group) - 1", frame).fit()
    with_intercept = smf.ols("weight ~ C(group)", frame).fit()
    report = reporter.from_statsmodels(no_intercept, permutations=200)
    assert report.prepared.plan.analysis.parameterization == "cell-means"
    _params_match(report, no_intercept)
    F = anova_lm(with_intercept, typ=1).loc["C(group)", "F"]
    assert math.isclose(report.analysis.anova.rows[0].F, F, rel_tol=1e-10)
    assert round(report.analysis.anova.rows[0].F, 3) == 4.846  # tests/data/README.md (from memory)


def test_default_hypotheses_test_every_effect(frame):
    """Without hypotheses the report tests each effect of the full factorial model."""
    fit = smf.ols("y ~ C(dose) * C(sex)", frame).fit()
    report = reporter.from_statsmodels(fit, permutations=200)
    names = [h.contrast.name for h in report.analysis.hypotheses]
    assert names == ["dose", "sex", "dose x sex"]
    table = anova_lm(smf.ols("y ~ C(dose, Sum) * C(sex, Sum)", frame).fit(), typ=3)
    for h, F in zip(report.analysis.hypotheses, table["F"].iloc[1:4]):
        assert math.isclose(h.test.statistic, F, rel_tol=1e-9)


def test_transformed_outcome(frame):
    """The outcome may be an expression of a column; it keeps the formula's spelling."""
    fit = smf.ols("np.log(y) ~ C(dose) * C(sex)", frame).fit()
    report = reporter.from_statsmodels(fit, permutations=200)
    assert report.prepared.plan.data.outcome == "np.log(y)"
    assert math.isclose(report.analysis.anova.ss_error, fit.ssr, rel_tol=1e-10)


@pytest.mark.filterwarnings("ignore:Using dict data structures:DeprecationWarning")
def test_data_given_as_a_mapping_and_robust_errors(frame):
    """A fit from a dict of columns reads the same rows; robust standard errors get a note and
    leave the classical table as it is (anova_lm on the plain fit)."""
    columns = {k: frame[k].tolist() for k in ("dose", "sex", "y")}
    fit = smf.ols("y ~ C(dose) * C(sex)", columns).fit(cov_type="HC3")
    structure = read_fit(fit)
    assert structure.nobs == fit.nobs == len(frame) - 3
    assert any("HC3" in note for note in structure.notes)
    report = reporter.from_statsmodels(fit, sums_of_squares="type-II", permutations=200)
    table = anova_lm(smf.ols("y ~ C(dose) * C(sex)", frame).fit(), typ=2)
    assert math.isclose(report.analysis.anova.rows[2].F, table["F"].iloc[2], rel_tol=1e-9)


def test_summary_says_where_the_analysis_comes_from(frame):
    """The report's summary names the formula, the rows used and left out, and the coding note,
    after a summary the caller gives."""
    fit = smf.ols("y ~ C(dose, Poly) * C(sex)", frame).fit()
    report = reporter.from_statsmodels(fit, summary="A dose study.", permutations=200)
    summary = report.prepared.plan.summary
    assert summary.startswith("A dose study. The model was fitted by ordinary least squares")
    assert "y ~ C(dose, Poly) * C(sex) on 87 rows, leaving out 3 with a missing value" in summary
    assert 'coding "cell-means"' in summary
    assert "y ~ C(dose, Poly) * C(sex) on 87 rows" in report.render("html").decode("utf-8")


@pytest.mark.filterwarnings("ignore:The design matrix is rank-deficient")
def test_empty_cells_and_unused_levels(frame):
    """An empty cell keeps the fit's residual SS and tests no effect by default (a note says so);
    a category with no rows at all is left out, giving the same table as without it."""
    df = frame[~((frame.dose == "high") & (frame.sex == "m"))]
    fit = smf.ols("y ~ C(dose) * C(sex)", df).fit()
    report = reporter.from_statsmodels(fit, permutations=200)
    assert math.isclose(report.analysis.anova.ss_error, fit.ssr, rel_tol=1e-10)
    assert report.analysis.hypotheses == ()
    assert "1 of the 6 cells have no rows" in report.prepared.plan.summary
    padded = frame.assign(dose=pd.Categorical(frame.dose, categories=["low", "mid", "high", "none"]))
    fit = smf.ols("y ~ dose * C(sex)", padded).fit()
    structure = read_fit(fit)
    assert structure.levels["dose"] == ("low", "mid", "high")
    assert any("none" in note and "no rows" in note for note in structure.notes)
    report = reporter.from_statsmodels(fit, permutations=200)
    table = anova_lm(smf.ols("y ~ C(dose, Sum) * C(sex, Sum)", frame).fit(), typ=3)
    assert math.isclose(report.analysis.anova.rows[0].F, table.loc["C(dose, Sum)", "F"], rel_tol=1e-9)


@pytest.mark.parametrize("formula, typ", [
    ("y ~ C(sex) * C(dose)", 1),
    ("y ~ C(sex) * C(dose) * C(batch)", 1),
    ("y ~ C(sex) * C(dose) * C(batch)", 2),
    ("y ~ C(sex, Sum) * C(dose, Sum) * C(batch, Sum)", 3),
], ids=["two-way-sequential", "three-way-sequential", "three-way-adjusted", "three-way-unweighted"])
def test_factor_order_and_three_factors(frame, formula, typ):
    """Factors come in the formula's order (Type I is sequential in it); three factors with every
    interaction give anova_lm's rows on the same fit."""
    fit = smf.ols(formula, frame).fit()
    ss = {1: "type-I", 2: "type-II", 3: "type-III"}[typ]
    report = reporter.from_statsmodels(fit, sums_of_squares=ss, permutations=200)
    table = anova_lm(fit, typ=typ).drop(index=["Intercept", "Residual"], errors="ignore")
    expected = ["sex", "dose", "batch"] if "batch" in formula else ["sex", "dose"]
    assert [f.name for f in report.prepared.design.factors] == expected
    assert len(report.analysis.anova.rows) == len(table)
    for row, (_, ref) in zip(report.analysis.anova.rows, table.iterrows()):
        assert math.isclose(row.ss, ref["sum_sq"], rel_tol=1e-9) and math.isclose(row.F, ref["F"], rel_tol=1e-9)
