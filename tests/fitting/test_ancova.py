"""The analysis of covariance fitted from the cell statistics, against statsmodels OLS.

Reference library: statsmodels (formula OLS with C(f, Sum) coding and anova_lm; OLS on explicit
design matrices for the adjusted means and their contrasts). Published example: the anorexia
data (Hand, Daly, McConway, Lunn & Ostrowski (1993), *A Handbook of Small Data Sets*, Chapman &
Hall, data set 285; the analysis-of-covariance example of Venables & Ripley (2002), *Modern
Applied Statistics with S*, 4th ed., Springer), tests/data/anorexia.csv.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from statsmodels.formula.api import ols as sm_ols
from statsmodels.stats.anova import anova_lm

from conftest import DATA_DIR
from reporter.errors import FitError
from reporter.fitting.ancova import slopes_homogeneity
from reporter.fitting.anova import fit_anova
from reporter.fitting.linear import fit_contrast, fit_model
from reporter.intake.cells import describe_cells, describe_covariates
from reporter.model.design import Factor, build_design
from reporter.model.hypotheses import compile_effect, compile_statement

REL = 1e-9  # the acceptance tolerance (relative) against statsmodels


@dataclass(frozen=True)
class Spec:
    """A covariate as the plan gives it (name, adjust_to, adjust_to_exact, slopes)."""

    name: str
    adjust_to: float | None = None
    adjust_to_exact: Fraction | None = None
    slopes: str = "common"


def num(v) -> float:
    return float(np.asarray(v).squeeze())


def close(a, b, rel=REL, abs_=1e-11):
    return math.isclose(float(a), float(b), rel_tol=rel, abs_tol=abs_)


def ours(df, factors, outcome, covs, specs=None, param="effects"):
    design = build_design([Factor(n, tuple(lv)) for n, lv in factors], param)
    codes = np.column_stack([pd.Categorical(df[n].astype(str), categories=list(lv)).codes for n, lv in factors])
    cell = design.cell_index(codes)
    y = df[outcome].to_numpy(float)
    x = df[list(covs)].to_numpy(float)
    cells = replace(describe_cells(y, cell, design.k),
                    covariates=describe_covariates(y, x, cell, design.k, names=tuple(covs)))
    fit = fit_model(cells, design.matrix, specs)
    return design, cells, fit, cell


def explicit_fit(y, cell, k, x, ref, modes):
    """statsmodels OLS on [cell indicators, (x − x*) or per-cell (x − x*)]: the first k
    parameters are the adjusted cell means at x*."""
    dummies = np.eye(k)[cell]
    cols = [dummies]
    for j, m in enumerate(modes):
        d = (x[:, j] - ref[j])[:, None]
        cols.append(d if m == "common" else dummies * d)
    return sm.OLS(y, np.hstack(cols)).fit()


def random_frame(seed, n_factors, p, pivot=0.0):
    """Seeded unbalanced design (2-3 levels per factor, 3-12 rows per cell), p covariates that
    differ between cells (so adjustment matters), invented data."""
    rng = np.random.default_rng(seed)
    sizes = rng.integers(2, 4, size=n_factors)
    names = ["A", "B"][:n_factors]
    levels = [[f"{n.lower()}{j}" for j in range(s)] for n, s in zip(names, sizes)]
    rows = []
    slopes = rng.normal(0.5, 0.3, size=p)
    for combo in np.ndindex(*sizes):
        n = int(rng.integers(3, 13))
        effect = rng.normal() * 2
        shift = rng.normal(size=p) * 3
        for _ in range(n):
            x = 20 + shift + rng.normal(size=p) * 4
            rows.append([levels[i][combo[i]] for i in range(n_factors)] + list(x) + [pivot + effect + x @ slopes + rng.normal()])
    covs = [f"x{j + 1}" for j in range(p)]
    df = pd.DataFrame(rows, columns=names + covs + ["y"])
    return df, list(zip(names, levels)), covs


def sequential_ss(df, steps):
    """Type I by definition: the SS each formula step adds (statsmodels anova_lm of nested fits)."""
    fits = [sm_ols(f, df).fit() for f in steps]
    table = anova_lm(*fits)
    return table["ss_diff"].to_numpy()[1:], table["df_diff"].to_numpy()[1:], fits[-1]


def check_tables(df, factors, covs, design, fit):
    names = [n for n, _ in factors]
    fac = " * ".join(f"C({n}, Sum)" for n in names)
    full = sm_ols("y ~ " + " + ".join(covs) + " + " + fac, df).fit()
    assert fit.df_error == full.df_resid
    assert close(fit.ss_error, full.ssr)
    # Type I: covariates first, then the factor terms (statsmodels fits of the nested models)
    terms = [f"C({n}, Sum)" for n in names] + ([f"C({names[0]}, Sum):C({names[1]}, Sum)"] if len(names) == 2 else [])
    steps = ["y ~ 1"]
    for j in range(len(covs)):
        steps.append("y ~ " + " + ".join(covs[: j + 1]))
    for i in range(len(terms)):
        steps.append("y ~ " + " + ".join(covs + terms[: i + 1]))
    ss1, df1, _ = sequential_ss(df, steps)
    table = fit_anova(design, fit, "I")
    assert [r.source for r in table.rows][: len(covs)] == covs
    for row, ss, dfr in zip(table.rows, ss1, df1):
        assert close(row.ss, ss) and row.df == dfr, (row.source, row.ss, ss)
        assert close(row.F, ss / dfr / (full.ssr / full.df_resid))
    # Types II and III: statsmodels anova_lm with sum coding (covariate rows by name)
    for ss_type, typ in (("II", 2), ("III", 3)):
        ref = anova_lm(full, typ=typ)
        table = fit_anova(design, fit, ss_type)
        for row in table.rows:
            key = row.covariate if row.covariate else ":".join(f"C({n}, Sum)" for n in row.factors)
            assert close(row.ss, ref.loc[key, "sum_sq"]), (ss_type, key, row.ss, ref.loc[key, "sum_sq"])
            assert close(row.F, ref.loc[key, "F"]) and close(row.p, ref.loc[key, "PR(>F)"], abs_=1e-14), (ss_type, key)
            assert row.df == ref.loc[key, "df"]
    return full


def test_anorexia_published_example():
    """Anorexia data (Hand et al. 1993, data set 285): Postwt adjusted for Prewt by treatment.

    Every value is checked against statsmodels OLS (y ~ Prewt + C(Treat, Sum)): adjusted means at
    the mean Prewt, their SEs, the slope, the Type I/II/III tables, a pairwise t test, the effect F
    and the homogeneity-of-slopes F (anova_lm of the common- and separate-slopes models).
    """
    df = pd.read_csv(DATA_DIR / "anorexia.csv").rename(columns={"Postwt": "y"})
    factors = [("Treat", ["Cont", "CBT", "FT"])]
    design, cells, fit, cell = ours(df, factors, "y", ["Prewt"])
    full = check_tables(df, factors, ["Prewt"], design, fit)
    x = df[["Prewt"]].to_numpy()
    ref_x = x.mean(axis=0)
    assert close(fit.covariate_reference[0], ref_x[0], rel=1e-15)
    exp = explicit_fit(df.y.to_numpy(), cell, 3, x, ref_x, ["common"])
    adjusted = fit.adjusted_offset_mean + cells.pivot
    for c in range(3):
        assert close(adjusted[c], exp.params[c])
        assert close(math.sqrt(fit.mse * fit.unscaled_cov[c, c]), exp.bse[c])
    slope = fit.slopes[0]
    assert slope.cell is None and slope.covariate == "Prewt" and slope.df == 68
    assert close(slope.estimate, full.params["Prewt"]) and close(slope.se, full.bse["Prewt"])
    assert close(slope.p, full.pvalues["Prewt"])
    # a directional hypothesis about adjusted means (one-sided t) and its 95% interval
    h = compile_statement(design, "FT > Cont")
    res = fit_contrast(fit, h.weights, h.rhs, h.alternative)
    L = np.zeros(exp.params.size)
    L[2], L[0] = 1, -1
    tt = exp.t_test(L)
    assert close(res.statistic, num(tt.tvalue)) and close(res.p, num(tt.pvalue) / 2)
    assert close(res.estimate, num(tt.effect)) and close(res.se, num(tt.sd))
    # the effect F equals the Type III row and statsmodels' F for the treatment
    e = compile_effect(design, "Treat")
    eres = fit_contrast(fit, e.weights, e.rhs, test="F")
    assert close(eres.statistic, anova_lm(full, typ=3).loc["C(Treat, Sum)", "F"])
    # homogeneity of slopes: statsmodels comparison of y ~ Prewt + Treat with y ~ Prewt * Treat
    inter = sm_ols("y ~ Prewt * C(Treat, Sum)", df).fit()
    cmp = anova_lm(full, inter)
    chk = slopes_homogeneity(cells)
    assert close(chk.F, cmp["F"].iloc[1]) and close(chk.p, cmp["Pr(>F)"].iloc[1])
    assert (chk.df1, chk.df2) == (cmp["df_diff"].iloc[1], inter.df_resid)


CASES = [(seed, nf, p) for nf in (1, 2) for p in (1, 2) for seed in range(4)]


@pytest.mark.parametrize("seed,n_factors,p", CASES, ids=[f"s{s}-f{f}-p{p}" for s, f, p in CASES])
def test_random_common_slopes_match_statsmodels(seed, n_factors, p):
    """Seeded unbalanced designs (1 and 2 factors, 1 and 2 covariates): adjusted means, their
    covariance, the three ANOVA tables, every effect F and a pairwise t equal statsmodels."""
    df, factors, covs = random_frame(100 + seed, n_factors, p)
    design, cells, fit, cell = ours(df, factors, "y", covs)
    check_tables(df, factors, covs, design, fit)
    x = df[covs].to_numpy()
    ref = x.mean(axis=0)
    exp = explicit_fit(df.y.to_numpy(), cell, design.k, x, ref, ["common"] * p)
    cov = np.asarray(exp.cov_params())[: design.k, : design.k]
    np.testing.assert_allclose(fit.adjusted_offset_mean + cells.pivot, exp.params[: design.k], rtol=REL)
    np.testing.assert_allclose(fit.mse * fit.unscaled_cov, cov, rtol=REL, atol=1e-12 * np.abs(cov).max())
    for j, s in enumerate(fit.slopes):
        assert close(s.estimate, exp.params[design.k + j]) and close(s.se, exp.bse[design.k + j])
    for term in ([f.name for f in design.factors] + (["A x B"] if n_factors == 2 else [])):
        e = compile_effect(design, term)
        res = fit_contrast(fit, e.weights, e.rhs, test="F")
        C = np.array([[float(w) for w in row] for row in e.weights])
        ft = exp.f_test(np.hstack([C, np.zeros((C.shape[0], p))]))
        assert close(res.statistic, num(ft.fvalue)) and close(res.p, num(ft.pvalue)), term
    first, last = design.cells[0], design.cells[-1]
    stmt = f"mean({first.label}) = mean({last.label})" if n_factors == 2 else f"{first.label} = {last.label}"
    h = compile_statement(design, stmt)
    res = fit_contrast(fit, h.weights, h.rhs, h.alternative)
    L = np.zeros(exp.params.size)
    L[0], L[design.k - 1] = 1, -1
    tt = exp.t_test(L)
    assert close(res.statistic, num(tt.tvalue)) and close(res.p, num(tt.pvalue))
    lo, hi = np.asarray(tt.conf_int(alpha=0.05))[0]
    assert close(res.ci[0], lo) and close(res.ci[1], hi)


@pytest.mark.parametrize("seed,n_factors,p", CASES, ids=[f"s{s}-f{f}-p{p}" for s, f, p in CASES])
def test_random_slopes_homogeneity_matches_statsmodels(seed, n_factors, p):
    """The homogeneity-of-slopes F equals statsmodels' anova_lm comparison of the common-slope
    model with the model adding every cell x covariate interaction."""
    df, factors, covs = random_frame(200 + seed, n_factors, p)
    design, cells, fit, _ = ours(df, factors, "y", covs)
    fac = " * ".join(f"C({n}, Sum)" for n, _ in factors)
    common = sm_ols("y ~ " + " + ".join(covs) + " + " + fac, df).fit()
    separate = sm_ols("y ~ (" + " + ".join(covs) + ") * " + fac, df).fit()
    cmp = anova_lm(common, separate)
    chk = slopes_homogeneity(cells)
    assert close(chk.F, cmp["F"].iloc[1]) and close(chk.p, cmp["Pr(>F)"].iloc[1])
    assert chk.df1 == cmp["df_diff"].iloc[1] and chk.df2 == separate.df_resid
    assert close(chk.ss_error_per_cell, separate.ssr)


@pytest.mark.parametrize("seed,n_factors,p", [(0, 1, 1), (1, 2, 1), (2, 2, 2), (3, 1, 2)])
def test_per_cell_slopes_match_statsmodels(seed, n_factors, p):
    """Separate slopes (Milliken & Johnson 2002, vol. 3): adjusted means at a stated covariate
    value, the Type III factor rows (statsmodels, sum coding, covariates centred at that value so
    the effects are those at x*), the covariate rows (anova_lm of the fits without each
    covariate's slopes), and Types I and II as nested explicit OLS fits."""
    df, factors, covs = random_frame(300 + seed, n_factors, p)
    at = [22.5, 17.25][:p]
    specs = [Spec(c, a, Fraction(str(a)), "per-cell") for c, a in zip(covs, at)]
    design, cells, fit, cell = ours(df, factors, "y", covs, specs)
    assert fit.covariate_slopes_mode == "per-cell" and "evaluated at" in fit.slopes_note
    x = df[covs].to_numpy()
    y = df.y.to_numpy()
    exp = explicit_fit(y, cell, design.k, x, np.array(at), ["per-cell"] * p)
    assert fit.df_error == exp.df_resid and close(fit.ss_error, exp.ssr)
    np.testing.assert_allclose(fit.adjusted_offset_mean + cells.pivot, exp.params[: design.k], rtol=REL)
    cov = np.asarray(exp.cov_params())[: design.k, : design.k]
    np.testing.assert_allclose(fit.mse * fit.unscaled_cov, cov, rtol=REL, atol=1e-12 * np.abs(cov).max())
    for s in fit.slopes:
        j = covs.index(s.covariate)
        i = design.k + j * design.k + s.cell
        assert close(s.estimate, exp.params[i]) and close(s.se, exp.bse[i])
    d2 = df.copy()
    for c, a in zip(covs, at):
        d2[c] = d2[c] - a
    fac = " * ".join(f"C({n}, Sum)" for n, _ in factors)
    full = sm_ols("y ~ (" + " + ".join(covs) + ") * " + fac, d2).fit()
    ref3 = anova_lm(full, typ=3)
    t3 = fit_anova(design, fit, "III")
    for row in t3.rows:
        if row.covariate is None:
            key = ":".join(f"C({n}, Sum)" for n in row.factors)
            assert close(row.ss, ref3.loc[key, "sum_sq"]) and close(row.F, ref3.loc[key, "F"]), key
        else:
            j = covs.index(row.covariate)
            others = [m for i, m in enumerate(covs) if i != j]
            reduced = sm_ols("y ~ " + fac + "".join(f" + {m} * ({fac})" for m in others), d2).fit()
            cmp = anova_lm(reduced, full)
            assert close(row.F, cmp["F"].iloc[1]) and row.df == cmp["df_diff"].iloc[1]
    # Types I and II: differences of residual SS of nested explicit models (statsmodels OLS)
    effects = build_design(design.factors, "effects")
    terms = list(dict.fromkeys(c.term for c in effects.coefficients if c.term))
    dummies = np.eye(design.k)[cell]
    slope_block = {j: dummies * (x[:, j] - at[j])[:, None] for j in range(p)}

    def rss(term_list, chosen):
        cols = [j for j, c in enumerate(effects.coefficients) if c.term in set(term_list) | {()}]
        X = np.hstack([effects.matrix[cell][:, cols].astype(float)] + [slope_block[j] for j in chosen])
        return sm.OLS(y, X).fit().ssr

    every = list(range(p))
    t1 = fit_anova(design, fit, "I")
    t2 = fit_anova(design, fit, "II")
    for j in range(p):
        assert close(t1.rows[j].ss, rss([], every[:j]) - rss([], every[: j + 1]))
        others = [i for i in every if i != j]
        assert close(t2.rows[j].ss, rss(terms, others) - rss(terms, every))
    for i, term in enumerate(terms):
        row1, row2 = t1.rows[p + i], t2.rows[p + i]
        assert row1.factors == term
        assert close(row1.ss, rss(terms[:i], every) - rss(terms[: i + 1], every))
        base = [t for t in terms if t != term and not set(term) <= set(t)]
        assert close(row2.ss, rss(base, every) - rss(base + [term], every))


def test_large_leading_digits_keep_accuracy():
    """NIST StRD-style difficulty (SmLs07-09 have 13 constant leading digits; Simon & Lesage
    1989): outcome and covariate written as 1000000000000.d. Intake subtracts the exact decimal
    pivot; every statistic must equal statsmodels on the same data without the leading digits
    (slopes, SS, F and differences of adjusted means are shift invariant), to LRE >= 9, and the
    adjusted means must keep their digits on the original scale."""
    rng = np.random.default_rng(11)
    k, per = 3, 21
    cell = np.repeat(np.arange(k), per)
    dx = rng.integers(0, 10, size=k * per) / 10 + cell * 0.1
    dy = (rng.integers(0, 10, size=k * per) + (dx * 10).astype(int)) / 10
    big = Fraction(10**12)
    x_off = np.array([float(Fraction(int(round(v * 10)), 10)) for v in dx])
    y_off = np.array([float(Fraction(int(round(v * 10)), 10)) for v in dy])
    design = build_design([Factor("g", ("a", "b", "c"))], "effects")
    cells = replace(describe_cells(y_off, cell, k, 1e12, big),
                    covariates=describe_covariates(y_off, x_off[:, None], cell, k, np.array([1e12]), (big,), ("x",)))
    fit = fit_model(cells, design.matrix)
    df = pd.DataFrame({"g": cell.astype(str), "x": x_off, "y": y_off})
    ref = sm_ols("y ~ x + C(g, Sum)", df).fit()
    assert close(fit.ss_error, ref.ssr) and close(fit.slopes[0].estimate, ref.params["x"])
    t3 = anova_lm(ref, typ=3)
    table = fit_anova(design, fit, "III")
    assert close(table.rows[1].F, t3.loc["C(g, Sum)", "F"]) and close(table.rows[0].F, t3.loc["x", "F"])
    # adjusted mean on the original scale: pivot + offset, exact to the last digit of 1e12 + d
    exp = explicit_fit(y_off, cell, k, x_off[:, None], np.array([x_off.mean()]), ["common"])
    for c in range(k):
        assert close(fit.adjusted_offset_mean[c], exp.params[c])
    assert fit.covariate_reference[0] == pytest.approx(1e12 + x_off.mean(), rel=1e-16)


def test_empty_cell_with_covariate():
    """A 2 x 3 design with one empty cell: the adjusted means of the observed cells and the slope
    equal statsmodels OLS on the observed cells' indicators and the covariate; the interaction
    cannot be tested in full (its Type III row says so)."""
    df, factors, covs = random_frame(7, 2, 1)
    while len(factors[0][1]) < 2 or len(factors[1][1]) < 3:
        raise AssertionError("seed 7 gives a 2 x 3 or larger design")
    drop = (df.A == factors[0][1][-1]) & (df.B == factors[1][1][-1])
    df = df[~drop].reset_index(drop=True)
    design, cells, fit, cell = ours(df, factors, "y", covs)
    obs = np.flatnonzero(cells.observed)
    remap = {c: i for i, c in enumerate(obs)}
    x = df[covs].to_numpy()
    exp = explicit_fit(df.y.to_numpy(), np.array([remap[c] for c in cell]), obs.size, x, x.mean(axis=0), ["common"])
    np.testing.assert_allclose((fit.adjusted_offset_mean + cells.pivot)[obs], exp.params[: obs.size], rtol=REL)
    assert np.isnan(fit.adjusted_offset_mean[~cells.observed]).all()
    assert not fit.unscaled_cov[~cells.observed].any()
    t3 = fit_anova(design, fit, "III")
    inter = [r for r in t3.rows if r.factors == ("A", "B")][0]
    assert inter.note and "empty cell" in inter.note


def test_constant_covariate_is_refused():
    """A covariate constant within every cell has no within-cell slope: one clear error."""
    df, factors, covs = random_frame(5, 1, 1)
    df["x1"] = df.A.map({lv: i for i, lv in enumerate(factors[0][1])}).astype(float)
    with pytest.raises(FitError, match="constant within every cell"):
        ours(df, factors, "y", covs)


def test_no_covariates_unchanged():
    """Without covariates the fit's adjusted means are the cell means and the unscaled covariance
    is diag(1/n) (definition), so every existing test keeps its numbers."""
    rng = np.random.default_rng(3)
    cell = rng.integers(0, 4, size=40)
    cells = describe_cells(rng.normal(size=40), cell, 4)
    fit = fit_model(cells, build_design([Factor("g", tuple("abcd"))]).matrix)
    assert fit.adjusted_offset_mean is cells.offset_mean
    assert np.array_equal(np.diag(fit.unscaled_cov), 1.0 / cells.n)
    assert fit.slopes == () and fit.covariate_slopes_mode is None


@pytest.mark.parametrize("param", ["effects", "reference", "cell-means"])
def test_coefficients_over_the_full_design(param):
    """β of the factor columns with covariates: the least-squares coefficients of the row-level
    design X = [Z·D, x − x*] (statsmodels OLS) equal D⁻¹ applied to the adjusted means (the meaning
    of each β stays the same combination of means, now adjusted means), and their SEs agree."""
    from reporter.model.design import with_covariates

    df, factors, covs = random_frame(41, 2, 2)
    design, cells, fit, cell = ours(df, factors, "y", covs, param=param)
    x = df[covs].to_numpy()
    X = np.hstack([design.matrix[cell].astype(float), x - x.mean(axis=0)])
    ref = sm.OLS(df.y.to_numpy(), X).fit()
    q = design.matrix.shape[1]
    np.testing.assert_allclose(np.array(fit.coefficients, float), ref.params[:q], rtol=REL, atol=1e-10)
    np.testing.assert_allclose(np.array(fit.coefficient_se, float), ref.bse[:q], rtol=REL)
    # the design lists the slopes after the factor columns; L = [C·D, 0]
    full = with_covariates(design, [Spec(c) for c in covs])
    assert [c.symbol for c in full.covariates] == [f"β{q}", f"β{q + 1}"]
    assert full.covariates[0].meaning_words(full) == ("change in the mean outcome per unit of x1, within a cell "
                                                      "(common to all cells)")
    e = compile_effect(design, "A")
    L = full.over_all_coefficients(e.L)
    assert L.shape == (e.q, q + 2) and not L[:, q:].any()
    C = e.C
    ft = ref.f_test(np.hstack([C @ design.matrix, np.zeros((e.q, 2))]))
    res = fit_contrast(fit, e.weights, e.rhs, test="F")
    assert close(res.statistic, num(ft.fvalue))


def test_adjusted_cell_and_marginal_means_in_the_analysis():
    """fit_analysis with covariates: each cell's adjusted mean, SE and 95% interval, and the
    unweighted marginal means of the adjusted means with their SE and interval, equal statsmodels
    OLS on [cell indicators, x − x̄] (t_test of the averaging rows)."""
    from reporter.inference.analysis import fit_analysis_on_rows

    df, factors, covs = random_frame(77, 2, 2)
    design = build_design([Factor(n, tuple(lv)) for n, lv in factors], "effects")
    codes = np.column_stack([pd.Categorical(df[n], categories=lv).codes for n, lv in factors])
    cell = design.cell_index(codes)
    y = df.y.to_numpy()
    x = df[covs].to_numpy()
    a = fit_analysis_on_rows(design, y, cell, [compile_effect(design, "A")], x=x, covariates=[Spec(c) for c in covs],
                             inference=False)
    exp = explicit_fit(y, cell, design.k, x, x.mean(axis=0), ["common", "common"])
    for s in a.summaries:
        assert close(s.adjusted_mean, exp.params[s.index]) and close(s.adjusted_se, exp.bse[s.index])
        lo, hi = np.asarray(exp.conf_int(0.05))[s.index]
        assert close(s.adjusted_ci[0], lo) and close(s.adjusted_ci[1], hi)
        assert close(s.mean, y[cell == s.index].mean())
    for m in a.marginal_means:
        L = np.zeros(exp.params.size)
        idx = [c.index for c in design.cells if c.as_dict()[m.factor] == m.level]
        L[idx] = 1.0 / len(idx)
        tt = exp.t_test(L)
        assert close(m.mean, num(tt.effect)) and close(m.se, num(tt.sd))
        lo, hi = np.asarray(tt.conf_int(alpha=0.05))[0]
        assert close(m.ci[0], lo) and close(m.ci[1], hi)
    assert a.fit.df_error == exp.df_resid
    assert close(a.hypotheses[0].test.statistic, anova_lm(sm_ols("y ~ x1 + x2 + C(A, Sum) * C(B, Sum)", df).fit(),
                                                            typ=3).loc["C(A, Sum)", "F"])


@pytest.mark.filterwarnings("ignore:The design matrix is rank-deficient")
def test_slopes_check_with_a_cell_too_small_for_its_own_slopes():
    """A cell with 2 rows and 2 covariates cannot have its own slopes: the check's df come from
    the ranks of the two models, as in statsmodels' anova_lm comparison (which fits by pinv)."""
    df, factors, covs = random_frame(13, 1, 2)
    last = factors[0][1][-1]
    keep = (df.A != last) | (df.groupby("A").cumcount() < 2)
    df = df[keep].reset_index(drop=True)
    _, cells, _, _ = ours(df, factors, "y", covs)
    common = sm_ols("y ~ x1 + x2 + C(A, Sum)", df).fit()
    separate = sm_ols("y ~ (x1 + x2) * C(A, Sum)", df).fit()
    cmp = anova_lm(common, separate)
    chk = slopes_homogeneity(cells)
    assert chk.df1 == cmp["df_diff"].iloc[1] and chk.df2 == separate.df_resid
    assert close(chk.F, cmp["F"].iloc[1])


def test_mixed_slopes_match_statsmodels():
    """One covariate with a common slope and one with per-cell slopes: residual SS and df, the
    adjusted means at the stated values and their covariance, the slopes and the Type III rows
    equal statsmodels OLS on the explicit design (cell indicators, x1 − x1*, cell × (x2 − x2*))."""
    df, factors, covs = random_frame(55, 2, 2)
    specs = [Spec("x1", None, None, "common"), Spec("x2", 19.5, Fraction("19.5"), "per-cell")]
    design, cells, fit, cell = ours(df, factors, "y", covs, specs)
    assert fit.covariate_slopes_mode == "mixed"
    x = df[covs].to_numpy()
    y = df.y.to_numpy()
    ref = np.array([x[:, 0].mean(), 19.5])
    exp = explicit_fit(y, cell, design.k, x, ref, ["common", "per-cell"])
    assert fit.df_error == exp.df_resid and close(fit.ss_error, exp.ssr)
    np.testing.assert_allclose(fit.adjusted_offset_mean + cells.pivot, exp.params[: design.k], rtol=REL)
    cov = np.asarray(exp.cov_params())[: design.k, : design.k]
    np.testing.assert_allclose(fit.mse * fit.unscaled_cov, cov, rtol=REL, atol=1e-12 * np.abs(cov).max())
    common = [s for s in fit.slopes if s.cell is None]
    assert len(common) == 1 and close(common[0].estimate, exp.params[design.k]) and close(common[0].se, exp.bse[design.k])
    for s in fit.slopes:
        if s.cell is not None:
            assert close(s.estimate, exp.params[design.k + 1 + s.cell])
    t3 = fit_anova(design, fit, "III")
    x1 = [r for r in t3.rows if r.covariate == "x1"][0]
    assert close(x1.F, num(exp.tvalues[design.k]) ** 2)
    e = compile_effect(design, "A x B")
    C = np.array([[float(w) for w in row] for row in e.weights])
    ft = exp.f_test(np.hstack([C, np.zeros((C.shape[0], 1 + design.k))]))
    row = [r for r in t3.rows if r.factors == ("A", "B")][0]
    assert close(row.F, num(ft.fvalue)) and close(row.p, num(ft.pvalue))


def test_cell_without_its_own_slope_is_named():
    """Per-cell slopes need varied covariate values in every cell: a cell whose covariate is
    constant gets one message naming the covariate, the cell and the fix (no source: the rule that
    a slope needs two distinct values)."""
    df, factors, covs = random_frame(21, 1, 1)
    first = factors[0][1][0]
    df.loc[df.A == first, "x1"] = 5.0
    design = build_design([Factor(n, tuple(lv)) for n, lv in factors], "effects")
    cell = design.cell_index(pd.Categorical(df.A, categories=factors[0][1]).codes[:, None])
    y = df.y.to_numpy()
    cells = replace(describe_cells(y, cell, design.k),
                    covariates=describe_covariates(y, df[covs].to_numpy(), cell, design.k, names=("x1",)))
    with pytest.raises(FitError, match=rf"slope of covariate 'x1' in the cell \({first}\).*slopes = \"common\""):
        fit_model(cells, design.matrix, [Spec("x1", slopes="per-cell")], [c.label for c in design.cells])
