"""ANOVA tables (Type I, II, III) against published values and statsmodels."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from statsmodels.formula.api import ols as sm_ols
from statsmodels.stats.anova import anova_lm
from scipy import stats

from conftest import DATA_DIR
from reporter.inference.analysis import fit_analysis_on_rows as fit_analysis
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_effect, compile_statement



def frame_fit(df, factors, outcome, ss_type="III", param="cell-means", hyps=()):
    """Fit a DataFrame through the fitting layer with the given factor level orders."""
    design = build_design([Factor(n, tuple(lv)) for n, lv in factors], param)
    codes = np.column_stack([
        pd.Categorical(df[n].astype(str), categories=list(lv)).codes for n, lv in factors
    ])
    cell = design.cell_index(codes)
    contrasts = [compile_statement(design, h) if ">" in h or "=" in h else compile_effect(design, h) for h in hyps]
    return fit_analysis(design, df[outcome].to_numpy(float), cell, contrasts, ss_type=ss_type), design


def test_plantgrowth_published():
    """PlantGrowth one-way: F(2, 27) = 4.846, p = .0159 (the ANOVA of R's PlantGrowth example,
    values from memory; the binding check is scipy.stats.f_oneway in the next test)."""
    df = pd.read_csv(DATA_DIR / "PlantGrowth.csv")
    a, _ = frame_fit(df, [("group", ["ctrl", "trt1", "trt2"])], "weight")
    row = a.anova.rows[0]
    assert (row.df, a.anova.df_error) == (2, 27)
    assert round(row.F, 3) == 4.846 and round(row.p, 4) == 0.0159


def test_oneway_matches_scipy_f_oneway():
    """One-way F and p equal scipy.stats.f_oneway (reference library) on PlantGrowth."""
    df = pd.read_csv(DATA_DIR / "PlantGrowth.csv")
    a, _ = frame_fit(df, [("group", ["ctrl", "trt1", "trt2"])], "weight")
    ref = stats.f_oneway(*(df.weight[df.group == g] for g in ["ctrl", "trt1", "trt2"]))
    assert math.isclose(a.anova.rows[0].F, ref.statistic, rel_tol=1e-12)
    assert math.isclose(a.anova.rows[0].p, ref.pvalue, rel_tol=1e-10)


@pytest.mark.parametrize("ss_type", ["I", "II", "III"])
def test_toothgrowth_published(ss_type):
    """ToothGrowth 2 x 3: supp F = 15.57, dose F = 92.00, supp x dose F = 4.107 (Crampton 1947; Bliss 1952).

    Balanced, so all three SS types give these values (published values from memory of R's
    documentation; confirmed with statsmodels in test_random_designs_match_statsmodels).
    """
    df = pd.read_csv(DATA_DIR / "ToothGrowth.csv")
    a, _ = frame_fit(df, [("supp", ["OJ", "VC"]), ("dose", ["0.5", "1.0", "2.0"])], "len", ss_type)
    F = {r.source: r.F for r in a.anova.rows}
    assert round(F["supp"], 2) == 15.57 and round(F["dose"], 2) == 92.00 and round(F["supp × dose"], 3) == 4.107
    assert a.anova.balanced and a.anova.types_agree
    assert "balanced" in a.anova.notes[0]


def _random_frame(rng, n_factors):
    sizes = rng.integers(2, 4, size=n_factors)
    names = ["A", "B", "D"][:n_factors]  # "C" would clash with patsy's C()
    levels = [[f"{n.lower()}{j}" for j in range(s)] for n, s in zip(names, sizes)]
    rows = []
    for combo in np.ndindex(*sizes):
        n = int(rng.integers(2, 9))
        effect = rng.normal() * 2
        for _ in range(n):
            rows.append([levels[i][combo[i]] for i in range(n_factors)] + [effect + rng.normal() * 1.5])
    df = pd.DataFrame(rows, columns=names + ["y"])
    return df, list(zip(names, levels))


@pytest.mark.parametrize("seed", range(60), ids=lambda s: f"seed{s}")
def test_random_designs_match_statsmodels(seed):
    """Type I, II and III SS and F equal statsmodels anova_lm on unbalanced 2- and 3-factor designs.

    Reference library: statsmodels (Type III with C(x, Sum) coding, as its documentation requires).
    """
    rng = np.random.default_rng(seed)
    df, factors = _random_frame(rng, 2 + seed % 2)
    names = [n for n, _ in factors]
    for ss_type, typ, coding in (("I", 1, ""), ("II", 2, ""), ("III", 3, ", Sum")):
        formula = "y ~ " + " * ".join(f"C({n}{coding})" for n in names)
        ref = anova_lm(sm_ols(formula, df).fit(), typ=typ)
        a, _ = frame_fit(df, factors, "y", ss_type)
        for row in a.anova.rows:
            key = ":".join(f"C({n}{coding})" for n in row.factors)
            assert math.isclose(row.ss, ref.loc[key, "sum_sq"], rel_tol=1e-9), (ss_type, key)
            assert math.isclose(row.F, ref.loc[key, "F"], rel_tol=1e-9), (ss_type, key)
            assert row.df == ref.loc[key, "df"]
        assert math.isclose(a.anova.ss_error, ref.loc["Residual", "sum_sq"], rel_tol=1e-9)


def test_type3_is_unweighted_means_not_treatment_coding():
    """Our Type III equals statsmodels' Type III under Sum coding; under its default treatment
    coding statsmodels' "Type III" row for A equals our F for the simple effect of A at the
    reference level of B, even in a balanced design.

    Why: dropping A's columns from a treatment-coded model with interaction tests A's
    coefficients, which are differences at B's reference level (mean(a2, b1) - mean(a1, b1)), not
    differences of unweighted marginal means. Reference library: statsmodels.
    """
    rng = np.random.default_rng(7)
    df, factors = _random_frame(rng, 2)
    balanced = df.groupby(["A", "B"]).head(2).reset_index(drop=True)  # 2 per cell: balanced
    for data in (df, balanced):
        ours, design = frame_fit(data, factors, "y", "III")
        sums = anova_lm(sm_ols("y ~ C(A, Sum) * C(B, Sum)", data).fit(), typ=3)
        treat = anova_lm(sm_ols("y ~ C(A) * C(B)", data).fit(), typ=3)
        assert math.isclose(ours.anova.rows[0].F, sums.loc["C(A, Sum)", "F"], rel_tol=1e-9)
        levels_a = factors[0][1]
        b_ref = factors[1][1][0]
        simple = " = ".join(f"mean(A={a}, B={b_ref})" for a in levels_a)
        simple_test, _ = frame_fit(data, factors, "y", "III", hyps=[simple])
        assert math.isclose(simple_test.hypotheses[0].test.statistic, treat.loc["C(A)", "F"], rel_tol=1e-9)
        assert not math.isclose(ours.anova.rows[0].F, treat.loc["C(A)", "F"], rel_tol=1e-3)


def test_empty_cell_rows_say_why():
    """With an empty cell the Type III rows that need it are marked not testable, with a reason."""
    rng = np.random.default_rng(3)
    df, factors = _random_frame(rng, 2)
    first_cell = (df.A == factors[0][1][-1]) & (df.B == factors[1][1][-1])
    df = df[~first_cell]
    for ss_type in ("I", "II", "III"):
        a, _ = frame_fit(df, factors, "y", ss_type)
        rows = {r.source: r for r in a.anova.rows}
        if ss_type == "III":
            # Not testable, or tested only in its estimable part with fewer df (hand derivation:
            # a main effect with more than 2 levels keeps the differences that avoid the cell).
            assert "empty cell" in rows["A"].note and rows["A"].df < rows["A"].df_hypothesis
            assert not rows["A"].testable or "partly testable" in rows["A"].note
        assert any("testable" in n or "estimate" in n for n in a.anova.notes) or all(r.testable for r in a.anova.rows)
    a, _ = frame_fit(df, factors, "y", "I")
    ref = anova_lm(sm_ols("y ~ C(A) * C(B)", df).fit(), typ=1)
    assert math.isclose(a.anova.rows[0].ss, ref.loc["C(A)", "sum_sq"], rel_tol=1e-9)
