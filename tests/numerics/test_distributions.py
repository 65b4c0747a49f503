"""Tests of reporter.numerics.distributions against scipy.stats (reference library) on grids that
include the extreme tails, the support's boundaries and invalid parameters, plus closed forms of
the F distribution; and a check that a report run without post-hoc families never imports
scipy.stats.

Tolerance: 1e-12 relative wherever scipy.stats computes the same ``scipy.special`` function
(in practice the values are bit-identical). ``f_isf`` below q = 1e-3 is deliberately not
scipy.stats' ``fdtri(1 - q)`` and is checked against closed forms and by inversion instead.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from reporter.numerics import distributions as D

RTOL = 1e-12
ROOT = Path(__file__).resolve().parents[2]

X = np.array(
    [-np.inf, -1e8, -1e3, -40.0, -5.0, -1.0, -1e-8, 0.0, 1e-300, 1e-8, 0.3, 1.0, 2.5, 7.0,
     40.0, 1e3, 1e8, np.inf, np.nan]
)
Q = np.array(
    [0.0, 1e-300, 1e-100, 1e-20, 1e-10, 1e-6, 1e-3, 0.025, 0.05, 0.5, 0.95, 0.975,
     1 - 1e-6, 1 - 1e-12, 1.0, -0.1, 1.1, np.nan]
)
DF = [0.5, 1.0, 2.0, 3.0, 7.5, 30.0, 1e3, 1e8]
BAD_DF = [0.0, -1.0, np.nan]
DF_IDS = [f"df{d:g}" for d in DF]


def _close(ours, ref):
    np.testing.assert_allclose(ours, ref, rtol=RTOL, atol=0.0, equal_nan=True)


@pytest.mark.parametrize("df", DF + BAD_DF, ids=DF_IDS + ["df0", "df-1", "dfnan"])
def test_student_t_matches_scipy(df):
    """t cdf, sf, ppf and isf equal scipy.stats.t over the grid, tails and boundaries included."""
    _close(D.t_cdf(X, df), stats.t.cdf(X, df))
    _close(D.t_sf(X, df), stats.t.sf(X, df))
    _close(D.t_ppf(Q, df), stats.t.ppf(Q, df))
    _close(D.t_isf(Q, df), stats.t.isf(Q, df))


@pytest.mark.parametrize("df1", DF + BAD_DF, ids=[f"d1-{d:g}" for d in DF + BAD_DF])
@pytest.mark.parametrize("df2", DF + [0.0], ids=[f"d2-{d:g}" for d in DF + [0.0]])
def test_f_matches_scipy(df1, df2):
    """F cdf, sf, ppf equal scipy.stats.f; isf too wherever scipy.stats keeps precision (q >= 1e-3)."""
    _close(D.f_cdf(X, df1, df2), stats.f.cdf(X, df1, df2))
    _close(D.f_sf(X, df1, df2), stats.f.sf(X, df1, df2))
    _close(D.f_ppf(Q, df1, df2), stats.f.ppf(Q, df1, df2))
    q = Q[~((Q > 0) & (Q < 1e-3))]
    _close(D.f_isf(q, df1, df2), stats.f.isf(q, df1, df2))


SMALL_Q = np.array([1e-3 * (1 - 1e-9), 1e-4, 1e-6, 1e-10, 1e-16, 1e-30, 1e-100, 1e-250])


@pytest.mark.parametrize("df2", [1.0, 2.0, 5.0, 17.0, 120.0, 1e4], ids=lambda d: f"d2-{d:g}")
def test_f_upper_quantile_of_two_numerator_df_equals_its_closed_form(df2):
    """F(2, v): P(F > x) = (1 + 2x/v)^(-v/2) (Johnson, Kotz & Balakrishnan 1995, ch. 27), so
    x = (v/2) expm1(-(2/v) log q); f_isf keeps 1e-12 of it far below what 1 - q can hold."""
    with np.errstate(over="ignore"):  # x beyond the largest double is inf on both sides
        exact = df2 / 2.0 * np.expm1(-2.0 / df2 * np.log(SMALL_Q))
    _close(D.f_isf(SMALL_Q, 2.0, df2), exact)


@pytest.mark.parametrize("df2", [1.0, 3.0, 10.0, 57.0, 1e3], ids=lambda d: f"d2-{d:g}")
def test_f_upper_quantile_of_one_numerator_df_is_a_squared_t_quantile(df2):
    """F(1, v) = T_v^2, so the upper-q point of F(1, v) is t_isf(q/2, v)^2 (identity; stdtrit
    keeps small q down to about 1e-200, so this checks the beta inversion against a different
    special function)."""
    q = SMALL_Q[SMALL_Q >= 1e-100]
    _close(D.f_isf(q, 1.0, df2), D.t_isf(q / 2.0, df2) ** 2)


@pytest.mark.parametrize(("df1", "df2"), [(3, 17), (0.5, 4), (12, 2), (40, 300)], ids=["3-17", "0.5-4", "12-2", "40-300"])
def test_f_upper_quantile_inverts_the_survival_function(df1, df2):
    """f_sf(f_isf(q)) = q in the far tail (1e-10 relative: the inversion's own conditioning)."""
    x = D.f_isf(SMALL_Q, df1, df2)
    assert np.all(np.isfinite(x))
    np.testing.assert_allclose(D.f_sf(x, df1, df2), SMALL_Q, rtol=1e-10, atol=0.0)


@pytest.mark.parametrize("df", DF + BAD_DF, ids=DF_IDS + ["df0", "df-1", "dfnan"])
def test_chi_square_sf_matches_scipy(df):
    """chi2_sf equals scipy.stats.chi2.sf, including x <= 0, infinity and invalid df."""
    _close(D.chi2_sf(X, df), stats.chi2.sf(X, df))


def test_normal_matches_scipy():
    """norm_cdf and norm_ppf equal scipy.stats.norm.cdf / ppf, tails and q outside [0, 1] included."""
    _close(D.norm_cdf(X), stats.norm.cdf(X))
    _close(D.norm_ppf(Q), stats.norm.ppf(Q))


# Boost warns that its series did not converge for some far-tail points, in scipy.stats and here
# alike (the same function); the values are still compared.
@pytest.mark.filterwarnings("ignore:Error in function cdf:RuntimeWarning")
@pytest.mark.parametrize("nc", [1e-8, 0.5, 3.0, 40.0], ids=["nc1e-8", "nc0.5", "nc3", "nc40"])
@pytest.mark.parametrize(("df1", "df2"), [(1, 1), (3, 17), (2.5, 100), (30, 5)], ids=["1-1", "3-17", "2.5-100", "30-5"])
def test_noncentral_f_matches_scipy(df1, df2, nc):
    """ncf_cdf and ncf_sf equal scipy.stats.ncf.cdf / sf for positive noncentrality."""
    _close(D.ncf_cdf(X, df1, df2, nc), stats.ncf.cdf(X, df1, df2, nc))
    _close(D.ncf_sf(X, df1, df2, nc), stats.ncf.sf(X, df1, df2, nc))


@pytest.mark.parametrize(("df1", "df2"), [(1, 1), (3, 17), (30, 5)], ids=["1-1", "3-17", "30-5"])
def test_noncentral_f_at_zero_noncentrality_is_the_central_f(df1, df2):
    """At nc = 0, ncf_sf is scipy.stats.f.sf, where scipy.stats.ncf.sf gives -cdf (scipy issue 26188)."""
    _close(D.ncf_sf(X, df1, df2, 0.0), stats.f.sf(X, df1, df2))
    _close(D.ncf_cdf(X, df1, df2, 0.0), stats.f.cdf(X, df1, df2))


@pytest.mark.parametrize("nc", [-5.0, -0.5, 0.0, 1e-8, 0.5, 3.0, 40.0], ids=lambda v: f"nc{v:g}")
@pytest.mark.parametrize("df", [1.0, 3.0, 17.0, 1e3], ids=lambda v: f"df{v:g}")
def test_noncentral_t_cdf_matches_scipy(df, nc):
    """nct_cdf equals scipy.stats.nct.cdf, negative and zero noncentrality included."""
    _close(D.nct_cdf(X, df, nc), stats.nct.cdf(X, df, nc))


def test_scalar_arguments_give_numpy_scalars_and_arrays_keep_their_shape():
    """Scalars in give a 0-d NumPy float (not an array); arrays broadcast as in scipy.stats."""
    value = D.f_sf(2.0, 3, 10)
    assert isinstance(value, np.float64) and not isinstance(value, np.ndarray)
    grid = D.t_sf(np.zeros((2, 3)), np.array([1.0, 2.0, 3.0]))
    assert grid.shape == (2, 3) and np.all(grid == 0.5)


# ---------------------------------------------------------------------------------------------
# the run path


PROBE = """
import runpy, sys
sys.argv = ["reporter", "run", {plan!r}, "--out", {out!r}, "--format", "html,json"]
try:
    runpy.run_module("reporter", run_name="__main__", alter_sys=True)
except SystemExit as exc:
    if exc.code not in (0, None):
        raise
print("scipy.stats imported:", "scipy.stats" in sys.modules)
print("scipy.optimize imported:", "scipy.optimize" in sys.modules)
"""


@pytest.mark.parametrize(
    ("plan", "expected"),
    [("oneway.toml", False), ("factorial.toml", False), ("factorial.toml", True)],
    ids=["oneway-no-posthoc", "factorial-with-posthoc", "probe-sees-an-import"],
)
def test_report_run_never_imports_scipy_stats(plan, expected, tmp_path):
    """A run never imports scipy.stats (slow to import), post-hoc families included (their
    distributions are our own quadratures); the last case imports it on purpose first, which
    shows the probe can see it."""
    code = PROBE.format(plan=str(ROOT / "demo_project" / plan), out=str(tmp_path))
    if expected:
        code = "import scipy.stats\n" + code
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(filter(None, [str(ROOT), os.environ.get("PYTHONPATH")])))
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, cwd=tmp_path)
    assert res.returncode == 0, res.stderr
    assert (tmp_path / "report.html").is_file() and (tmp_path / "results.json").is_file()
    lines = res.stdout.strip().splitlines()
    assert lines[-2] == f"scipy.stats imported: {expected}"
    if not expected:
        assert lines[-1] == "scipy.optimize imported: False"
