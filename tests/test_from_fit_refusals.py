"""from_statsmodels refuses, with one message each, every fit whose report would not reproduce it.

Fits are made by statsmodels (the reference library) on seeded simulated data (numpy
default_rng(20261202)): three factors a (3 levels), b (2), c (2), a numeric column x, weights w.
Each class of refusal is checked on several members; a message must name the rule and the fix.
"""

from __future__ import annotations

import dataclasses
import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf

from reporter.errors import FittedModelError, ReporterError
from reporter.from_fit import check_residual_ss, from_statsmodels, read_fit


@pytest.fixture(scope="module")
def frame() -> pd.DataFrame:
    rng = np.random.default_rng(20261202)
    n = 72
    df = pd.DataFrame({
        "a": rng.choice(["lo", "mid", "hi"], n),
        "b": rng.choice(["no", "yes"], n),
        "c": rng.choice(["p", "q"], n),
        "x": rng.uniform(1, 5, n),
        "w": rng.uniform(0.5, 2.0, n),
    })
    df["y"] = 10 + (df.a == "hi") * 2.0 + (df.b == "yes") * 1.0 + rng.normal(0, 1.5, n)
    return df


def _refused(fit, *phrases):
    with pytest.raises(FittedModelError) as info:
        from_statsmodels(fit)
    message = str(info.value)
    assert isinstance(info.value, ReporterError)
    assert "\n" not in message
    for phrase in phrases:
        assert phrase in message, message
    return message


def _quiet(make):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return make()


@pytest.mark.parametrize("make", [
    lambda df: smf.glm("y ~ C(a)", df).fit(),
    lambda df: smf.rlm("y ~ C(a)", df).fit(),
    lambda df: smf.quantreg("y ~ C(a)", df).fit(),
    lambda df: smf.logit("hit ~ C(a)", df.assign(hit=(df["y"] > 11).astype(float))).fit(disp=0),
    lambda df: smf.mixedlm("y ~ C(a)", df, groups=df["c"]).fit(),
], ids=["glm", "rlm", "quantile", "logit", "mixed"])
def test_not_ordinary_least_squares(frame, make):
    """A fit by another estimator than OLS is refused, naming it and the OLS call to use."""
    fit = _quiet(lambda: make(frame))
    _refused(fit, "ordinary least-squares", "statsmodels.formula.api.ols")


@pytest.mark.parametrize("make, phrase", [
    (lambda df: df, "DataFrame"),
    (lambda df: None, "NoneType"),
    (lambda df: {"params": [1.0]}, "dict"),
    (lambda df: smf.ols("y ~ C(a)", df), "not the model itself"),
    (lambda df: smf.ols("y ~ C(a)", df).fit_regularized(alpha=0.1), "penalized"),
], ids=["frame", "none", "dict", "unfitted", "regularized"])
def test_not_a_fit(frame, make, phrase):
    """Anything but the results of .fit() is refused, saying what to pass."""
    _refused(_quiet(lambda: make(frame)), phrase, ".fit()")


@pytest.mark.parametrize("make", [
    lambda df: smf.wls("y ~ C(a)", df, weights=df["w"]).fit(),
    lambda df: smf.wls("y ~ C(a)", df, weights=np.ones(len(df))).fit(),
    lambda df: smf.gls("y ~ C(a)", df, sigma=np.diag(df["w"].to_numpy())).fit(),
    lambda df: smf.glsar("y ~ C(a)", df, rho=1).iterative_fit(2),
], ids=["wls", "wls-unit-weights", "gls", "glsar"])
def test_weights(frame, make):
    """Weighted and generalized least squares are refused: the report weighs rows equally."""
    _refused(_quiet(lambda: make(frame)), "weights", "unequal_variances")


def test_weights_on_an_ols_model(frame):
    """An OLS model whose weights were set to other values than 1 is refused as weighted."""
    fit = smf.ols("y ~ C(a)", frame).fit()
    fit.model.weights = frame["w"].to_numpy()
    _refused(fit, "weights that are not all 1")


@pytest.mark.parametrize("make", [
    lambda df: sm.OLS(df["y"].to_numpy(), sm.add_constant(df["x"].to_numpy())).fit(),
    lambda df: sm.OLS(df["y"], pd.get_dummies(df["a"], dtype=float)).fit(),
    lambda df: sm.OLS(df["y"], sm.add_constant(pd.get_dummies(df[["a", "b"]], drop_first=True, dtype=float))).fit(),
], ids=["arrays", "dummies-frame", "dummies-with-constant"])
def test_no_formula(frame, make):
    """A fit made from arrays or a design matrix keeps no factors: refused, with the formula call."""
    _refused(make(frame), "not from a formula", "statsmodels.formula.api.ols")


@pytest.mark.parametrize("formula, term", [
    ("y ~ C(a) + x", "x"),
    ("y ~ C(a) * x", "x"),
    ("y ~ x:C(a) + C(a)", "x"),
    ('y ~ C(a) + Q("x")', 'Q("x")'),
    ("y ~ x", "x"),
], ids=["additive", "crossed", "slope-per-level", "quoted", "alone"])
def test_continuous_covariate(frame, formula, term):
    """A numeric column entering as a slope is refused as a covariate, pointing to C(...)."""
    message = _refused(smf.ols(formula, frame).fit(), "continuous covariate", "C(")
    assert term in message


@pytest.mark.parametrize("formula, term", [
    ("y ~ C(a) + I(x**2)", "I(x ** 2)"),
    ("y ~ C(a) + np.log(x)", "np.log(x)"),
    ("y ~ C(a) * center(x)", "center(x)"),
    ("y ~ C(a) + standardize(x)", "standardize(x)"),
    ("y ~ C(a) + bs(x, df=3)", "bs(x, df=3)"),
], ids=["power", "log", "centred", "standardized", "spline"])
def test_non_categorical_term(frame, formula, term):
    """A transformed or computed numeric term is refused, named as the formula writes it."""
    message = _refused(_quiet(lambda: smf.ols(formula, frame).fit()), "not a categorical factor")
    assert term in message


@pytest.mark.parametrize("formula, missing, refit", [
    ("y ~ C(a) + C(b)", "C(a):C(b)", "y ~ C(a) * C(b)"),
    ("y ~ C(a) * C(b) + C(c)", "C(a):C(c), C(b):C(c), C(a):C(b):C(c)", "y ~ C(a) * C(b) * C(c)"),
    ("y ~ (C(a) + C(b) + C(c))**2", "C(a):C(b):C(c)", "y ~ C(a) * C(b) * C(c)"),
    ("y ~ C(a) + C(a):C(b)", "C(b)", "y ~ C(a) * C(b)"),
    ("y ~ C(a) + C(b) - 1", "C(a):C(b)", "y ~ C(a) * C(b)"),
    ("y ~ a + b", "a:b", "y ~ a * b"),
], ids=["two-way-additive", "third-factor-additive", "no-three-way", "nested", "no-intercept", "text-columns"])
def test_missing_interaction(frame, formula, missing, refit):
    """A fit without every interaction is refused, naming the terms the report would add and the
    formula to refit with."""
    message = _refused(smf.ols(formula, frame).fit(), "full factorial", refit)
    assert f"leaves out the term{'s' if ',' in missing else ''} {missing}." in message


@pytest.mark.parametrize("formula, phrase", [
    ("y ~ 1", "no factor"),
    ("y ~ C(a) * C(a, Sum)", "two factors"),
    ("y ~ C(y)", "outcome"),
    ("y ~ C(a) * C(one)", "single level"),
    ("y ~ C(a) * solo", "single level"),
    ("y ~ C(mean) * C(b)", "reserve"),
    ("y ~ Q('a x b') * C(c)", "reserve"),
], ids=["intercept-only", "factor-twice", "outcome-as-factor", "one-level", "one-level-used", "named-mean",
        "named-with-x"])
def test_formula_without_a_design(frame, formula, phrase):
    """Formulas that do not describe a factorial design of distinct, named, compared factors are
    refused."""
    df = frame.assign(one="only", mean=frame["a"], **{"a x b": frame["a"] + frame["b"]},
                      solo=pd.Categorical(["no"] * len(frame), categories=["no", "never"]))
    _refused(_quiet(lambda: smf.ols(formula, df).fit()), phrase)


def test_frame_changed_after_the_fit(frame):
    """Levels changed in the data frame after the fit are caught before any report is made."""
    df = frame.copy()
    fit = smf.ols("y ~ C(a) * C(b)", df).fit()
    df.loc[df.index[:5], "a"] = df.loc[df.index[5:10], "a"].to_numpy()[::-1]
    df["b"] = df["b"].iloc[::-1].to_numpy()
    _refused(fit, "changed after the fit")


def test_residual_ss_disagreement_names_both_values(frame):
    """A refit whose residual SS differs from the fit's beyond 1e-8 (relative) is refused with both
    values; agreement within it passes."""
    fit = smf.ols("y ~ C(a) * C(b)", frame).fit()
    structure = read_fit(fit)
    check_residual_ss(structure, fit.ssr * (1 + 5e-9))
    wrong = dataclasses.replace(structure, ssr=fit.ssr * 1.001)
    with pytest.raises(FittedModelError) as info:
        check_residual_ss(wrong, fit.ssr)
    assert repr(fit.ssr) in str(info.value) and repr(fit.ssr * 1.001) in str(info.value)


def test_other_formula_engine(frame, monkeypatch):
    """A fit whose design was built by the formulaic engine is refused, naming the engine setting."""
    import statsmodels.formula

    monkeypatch.setattr(statsmodels.formula.options, "_formula_engine", "formulaic")
    fit = smf.ols("y ~ C(a) * C(b)", frame).fit()
    _refused(fit, "formulaic", 'formula_engine = "patsy"')


@pytest.mark.parametrize("keyword", ["outcome", "factors", "data"])
def test_keywords_read_from_the_fit(frame, keyword):
    """The outcome, the factors and the data come from the fit: giving them is refused."""
    fit = smf.ols("y ~ C(a) * C(b)", frame).fit()
    with pytest.raises(FittedModelError, match=f"{keyword} is read from the fit"):
        from_statsmodels(fit, **{keyword: "y"})
