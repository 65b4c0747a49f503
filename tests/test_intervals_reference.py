"""Every interval in results.json against an independent computation, end to end.

Each plan runs through ``reporter.report`` (the public path) and each number in results.json is
compared with a value computed in this file from the rows: statsmodels OLS on the cell-means
model (``t_test``, ``f_test``, ``conf_int``), ``scipy.stats.t`` for one-sided bounds and p values,
``scipy.stats.t.interval`` for a cell's own interval, root finding on ``scipy.stats.nct`` and
``scipy.stats.ncf`` for effect-size intervals, and Hedges' (1981) gamma-function J.

The data are seeded simulated samples and the published PlantGrowth and ToothGrowth sets
(sources in tests/data/README.md). Small cells keep the error df small, so that a wrong
quantile (1 − α against 1 − α/2), a wrong df (n against n − 1) or J's approximation moves a
printed digit.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from refcheck import (
    FLIP, Reference, assert_close, eta_interval, hedges_j, make_project, oriented, run, simulated,
    report_scope, standardized_contrast, toothgrowth,
)

ONEWAY = [("g", ("a", "b", "c", "d"))]

# (name, statement, weights over a, b, c, d, h, alternative as the statement reads)
STATEMENTS = [
    ("two-sided", "a = b", [1, -1, 0, 0], 0.0, "two-sided"),
    ("greater", "c > a", [-1, 0, 1, 0], 0.0, "greater"),
    ("less", "b < d", [0, 1, 0, -1], 0.0, "less"),
    ("less-positive-estimate", "c < b", [0, -1, 1, 0], 0.0, "less"),
    ("average-vs-one", "(b + c)/2 > a", [-1, 0.5, 0.5, 0], 0.0, "greater"),
    ("with-constant", "d - a = 1", [-1, 0, 0, 1], 1.0, "two-sided"),
    ("less-with-constant", "c - a < 3", [-1, 0, 1, 0], 3.0, "less"),
]


def _oneway(seed=3):
    """Four cells of 5, 8, 6 and 7 rows (error df 22); seeded normal data, two decimals."""
    return simulated(ONEWAY, [10.0, 11.0, 12.5, 10.5], [5, 8, 6, 7], sd=1.5, seed=seed)


@pytest.fixture(scope=report_scope, params=[0.05, 0.10], ids=["alpha.05", "alpha.10"])
def oneway_run(request, tmp_path_factory):
    project = _oneway()
    hyps = [(name, "means", text, "planned") for name, text, *_ in STATEMENTS]
    hyps.append(("effect", "effect", "g", "planned"))
    out = run(tmp_path_factory.mktemp("oneway"), project, hyps, {"alpha": request.param,
                                                                  "correction": "none"})
    return request.param, project, Reference(project), out


@pytest.mark.parametrize("name, statement, w, h, alternative", STATEMENTS, ids=[s[0] for s in STATEMENTS])
def test_contrast_interval_and_test_match_statsmodels(oneway_run, name, statement, w, h, alternative):
    """Estimate, SE, t, df, p and the interval of each contrast equal statsmodels OLS ``t_test``
    on the row-level cell-means model; two-sided intervals are ``conf_int(alpha)`` (quantile
    1 − α/2), one-sided bounds estimate ∓ t_{1−α}·SE with scipy.stats.t.ppf(1 − α) (reference
    libraries). The open side of a one-sided interval is null."""
    alpha, project, ref, out = oneway_run
    got = out.hypothesis(name)
    sign = oriented(got["contrast"]["cells"][0], w)
    w_json = sign * np.asarray(w, float)
    alt = alternative if sign == 1 else FLIP[alternative]
    assert got["alternative"] == alt
    exp = ref.contrast(w_json, sign * h, alt, alpha)
    assert got["test"] == "t"
    assert_close(got["estimate"], exp["estimate"], f"{name} estimate")
    assert_close(got["se"], exp["se"], f"{name} SE")
    assert_close(got["statistic"], exp["t"], f"{name} t")
    assert got["df"] == [exp["df"]]
    assert_close(got["p"], exp["p"], f"{name} p", rel=1e-9)
    low, high = got["ci"]
    assert_close(low, exp["ci"][0], f"{name} lower limit")
    assert_close(high, exp["ci"][1], f"{name} upper limit")
    assert got["ci_level"] == pytest.approx(1 - alpha)
    assert got["ci_sides"] == (2 if alt == "two-sided" else 1)


def test_one_sided_bound_lies_on_the_side_of_the_alternative(oneway_run):
    """A '<' hypothesis bounds the contrast from above (estimate + t_{1−α}·SE, above the
    estimate); a '>' hypothesis from below. Quantile from scipy.stats.t.ppf (reference library)."""
    alpha, _, ref, out = oneway_run
    q = stats.t.ppf(1 - alpha, ref.df)
    for h in out.results["hypotheses"]:
        if h["test"] != "t" or h["alternative"] == "two-sided":
            continue
        low, high = h["ci"]
        if h["alternative"] == "less":
            assert low is None and high > h["estimate"]
            assert_close(high, h["estimate"] + q * h["se"], h["name"])
        else:
            assert high is None and low < h["estimate"]
            assert_close(low, h["estimate"] - q * h["se"], h["name"])


def test_two_sided_interval_uses_half_alpha(oneway_run):
    """The half-width of a two-sided interval is t_{1−α/2}·SE (scipy.stats.t.ppf), not t_{1−α}·SE."""
    alpha, _, ref, out = oneway_run
    got = out.hypothesis("two-sided")
    half = (got["ci"][1] - got["ci"][0]) / 2
    assert_close(half, stats.t.ppf(1 - alpha / 2, ref.df) * got["se"], "half-width")
    assert not math.isclose(half, stats.t.ppf(1 - alpha, ref.df) * got["se"], rel_tol=1e-3)


def test_effect_F_matches_statsmodels(oneway_run):
    """The omnibus effect: F, df and p equal statsmodels ``f_test`` of the successive
    differences (reference library); partial η² and Cohen's f intervals invert scipy.stats.ncf."""
    alpha, _, ref, out = oneway_run
    got = out.hypothesis("effect")
    C = np.array([[1, -1, 0, 0], [0, 1, -1, 0], [0, 0, 1, -1]], float)
    exp = ref.f_test(C)
    assert_close(got["statistic"], exp["F"], "F")
    assert got["df"] == list(exp["df"])
    assert_close(got["p"], exp["p"], "p", rel=1e-9)
    sizes = {e["name"]: e for e in got["effect_sizes"]}
    pes = sizes["partial_eta_squared"]
    F, (df1, df2) = exp["F"], exp["df"]
    assert_close(pes["value"], F * df1 / (F * df1 + df2), "partial eta squared")
    (lo, hi), (flo, fhi) = eta_interval(F, df1, df2, 1 - 2 * alpha)
    assert pes["ci_level"] == pytest.approx(1 - 2 * alpha)
    assert_close(pes["ci"][0], lo, "partial eta squared lower", rel=1e-8, abs_=1e-12)
    assert_close(pes["ci"][1], hi, "partial eta squared upper", rel=1e-8)
    f = sizes["cohens_f"]
    assert_close(f["value"], math.sqrt(F * df1 / df2), "Cohen's f")
    assert_close(f["ci"][0], flo, "Cohen's f lower", rel=1e-8, abs_=1e-12)
    assert_close(f["ci"][1], fhi, "Cohen's f upper", rel=1e-8)


@pytest.mark.parametrize("name, statement, w, h, alternative", STATEMENTS, ids=[s[0] for s in STATEMENTS])
def test_standardized_contrast_and_its_interval(oneway_run, name, statement, w, h, alternative):
    """d = (c'ȳ − h)/√MSE with the weights scaled to sum ±1; its interval is the noncentral-t
    inversion (Steiger & Fouladi 1997) found here by brentq on scipy.stats.nct, at 1 − α,
    one-sided for a directional hypothesis; g = J·d with Hedges' (1981) exact J."""
    alpha, _, ref, out = oneway_run
    got = out.hypothesis(name)
    sign = oriented(got["contrast"]["cells"][0], w)
    alt = alternative if sign == 1 else FLIP[alternative]
    exp = standardized_contrast(ref, sign * np.asarray(w, float), sign * h, alt, 1 - alpha)
    sizes = {e["name"]: e for e in got["effect_sizes"]}
    d = sizes["standardized_contrast_d"]
    assert_close(d["value"], exp["d"], "d")
    assert d["ci_level"] == pytest.approx(1 - alpha)
    for got_limit, exp_limit, side in zip(d["ci"], exp["ci"], ("lower", "upper")):
        if math.isinf(exp_limit):
            assert got_limit is None, f"{side} limit of a one-sided interval must be open"
        else:
            assert_close(got_limit, exp_limit, f"d {side} limit", rel=1e-8, abs_=1e-10)
    assert_close(sizes["hedges_g"]["value"], exp["g"], "Hedges' g")


def test_cell_intervals_use_n_minus_1_df(oneway_run):
    """Each cell's own interval is scipy.stats.t.interval(1 − α, n − 1, mean, SD/√n) (reference
    library); the pooled one is statsmodels OLS ``conf_int`` of that cell's coefficient (error df)."""
    alpha, project, ref, out = oneway_run
    pooled = ref.fit.conf_int(alpha=alpha)
    for c, cell in enumerate(out.results["cells"]):
        y = project.y[project.cell == c]
        assert cell["n"] == y.size
        assert_close(cell["mean"], y.mean(), "mean")
        assert_close(cell["sd"], y.std(ddof=1), "SD")
        assert_close(cell["se"], y.std(ddof=1) / math.sqrt(y.size), "SE")
        low, high = ref.cell_interval(c, alpha)
        assert_close(cell["ci"][0], low, f"cell {c} lower")
        assert_close(cell["ci"][1], high, f"cell {c} upper")
        assert_close(cell["ci_pooled"][0], pooled[c, 0], f"cell {c} pooled lower")
        assert_close(cell["ci_pooled"][1], pooled[c, 1], f"cell {c} pooled upper")


# ---------------------------------------------------------------------------------------------
# Hedges' J where its approximation is visibly different


def test_hedges_g_uses_the_exact_J_at_small_df(tmp_path):
    """Three cells of two rows: error df 3, where J = Γ(3/2)/(√(3/2)·Γ(1)) = 0.72360 and the
    approximation 1 − 3/(4·3 − 1) = 0.72727 differ in the third digit (Hedges 1981, eq. 6b and
    the approximation after it). g in results.json is the exact J times d."""
    project = make_project([("g", ("a", "b", "c"))],
                           {"a": [3.1, 4.4], "b": [5.0, 6.2], "c": [4.0, 4.9]})
    out = run(tmp_path, project, [("b over a", "means", "b > a", "planned")])
    ref = Reference(project)
    assert ref.df == 3
    j = hedges_j(3)
    assert_close(j, math.gamma(1.5) / (math.sqrt(1.5) * math.gamma(1.0)), "J by math.gamma")
    assert abs(j - (1 - 3 / 11)) > 3e-3
    sizes = {e["name"]: e for e in out.hypothesis("b over a")["effect_sizes"]}
    d = sizes["standardized_contrast_d"]["value"]
    assert_close(d, (np.mean([5.0, 6.2]) - np.mean([3.1, 4.4])) / math.sqrt(ref.mse), "d")
    assert_close(sizes["hedges_g"]["value"], j * d, "g = J d", rel=1e-12)


# ---------------------------------------------------------------------------------------------
# Marginal means and the factorial case (ToothGrowth)


@pytest.fixture(scope=report_scope)
def tooth_run(tmp_path_factory):
    project = toothgrowth()
    hyps = [
        ("supp", "effect", "supp", "planned"),
        ("dose", "effect", "dose", "planned"),
        ("interaction", "effect", "supp x dose", "planned"),
        ("OJ beats VC at 0.5", "means", "mean(supp=OJ, dose=0.5) > mean(supp=VC, dose=0.5)", "planned"),
        ("dose 2 vs 1", "means", "`2.0` < `1.0`", "exploratory"),
    ]
    out = run(tmp_path_factory.mktemp("tooth"), project, hyps,
              {"alpha": 0.05, "parameterization": "effects"})
    return project, Reference(project), out


def test_marginal_means_match_statsmodels_t_test(tooth_run):
    """Each unweighted marginal mean, its SE and 95% CI equal statsmodels OLS ``t_test`` of the
    averaging contrast (weight 1/3 on each cell at that level) with ``conf_int(0.05)``."""
    project, ref, out = tooth_run
    seen = 0
    for m in out.report.analysis.marginal_means:
        w = project.marginal_weights(m.factor, m.level)
        tt = ref.fit.t_test(w[None, :])
        assert_close(m.mean, float(tt.effect[0]), f"{m.factor}={m.level} mean")
        assert_close(m.se, float(tt.sd[0, 0]), f"{m.factor}={m.level} SE")
        low, high = tt.conf_int(alpha=0.05)[0]
        assert_close(m.ci[0], float(low), f"{m.factor}={m.level} lower")
        assert_close(m.ci[1], float(high), f"{m.factor}={m.level} upper")
        seen += 1
    assert seen == 5


def test_factorial_effects_match_statsmodels(tooth_run):
    """Type III effects as hypotheses: F, df, p from statsmodels ``f_test`` of the unweighted-means
    contrasts on the cell-means model; partial η² intervals from scipy.stats.ncf (Steiger 2004)."""
    project, ref, out = tooth_run
    supp = np.kron([1, -1], [1, 1, 1]) / 3
    dose = np.kron([1, 1], [[1, -1, 0], [0, 1, -1]]) / 2
    inter = np.kron([1, -1], [[1, -1, 0], [0, 1, -1]])
    for name, C in (("supp", supp), ("dose", dose), ("interaction", inter)):
        got = out.hypothesis(name)
        exp = ref.f_test(C)
        assert_close(got["statistic"], exp["F"], f"{name} F")
        assert got["df"] == list(exp["df"])
        assert_close(got["p"], exp["p"], f"{name} p", rel=1e-9)
        pes = {e["name"]: e for e in got["effect_sizes"]}["partial_eta_squared"]
        (lo, hi), _ = eta_interval(exp["F"], *exp["df"], 0.90)
        assert_close(pes["ci"][0], lo, f"{name} lower", rel=1e-8, abs_=1e-12)
        assert_close(pes["ci"][1], hi, f"{name} upper", rel=1e-8)


def test_factorial_contrasts_match_statsmodels(tooth_run):
    """A one-sided cell contrast and a one-sided marginal-means contrast ('<') in a 2 × 3 design
    equal statsmodels ``t_test`` and scipy.stats.t one-sided bounds (reference libraries)."""
    project, ref, out = tooth_run
    w1 = np.zeros(6)
    w1[project.cell_of(supp="OJ", dose="0.5")] = 1
    w1[project.cell_of(supp="VC", dose="0.5")] = -1
    w2 = project.marginal_weights("dose", "2.0") - project.marginal_weights("dose", "1.0")
    for name, w, alt in (("OJ beats VC at 0.5", w1, "greater"), ("dose 2 vs 1", w2, "less")):
        got = out.hypothesis(name)
        sign = oriented(got["contrast"]["cells"][0], w)
        alt = alt if sign == 1 else FLIP[alt]
        exp = ref.contrast(sign * w, 0.0, alt, 0.05)
        assert_close(got["statistic"], exp["t"], f"{name} t")
        assert_close(got["p"], exp["p"], f"{name} p", rel=1e-9)
        assert_close(got["ci"][0], exp["ci"][0], f"{name} lower")
        assert_close(got["ci"][1], exp["ci"][1], f"{name} upper")
