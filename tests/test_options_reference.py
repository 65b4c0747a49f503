"""Every option value of the plan, run end to end, with results.json checked against a reference.

* ``correction``: each method against ``statsmodels.stats.multitest.multipletests`` applied to raw
  p values that this file computes with statsmodels OLS ``t_test`` (never the project's own p);
  the raw ``p`` of results.json must be the unadjusted one.
* ``unequal_variances``: classical, always-robust, and robust-if-heterogeneous both where the
  Brown–Forsythe check fires and where it does not; the robust statistics against scipy.stats
  (``ttest_ind(equal_var=False)``, ``levene``), statsmodels (``anova_oneway(use_var="unequal")``,
  OLS with ``cov_type="HC3"``) and the Satterthwaite (1946) df by formula.
* follow-up families over cells and over one factor's marginal means: Tukey–Kramer against
  ``scipy.stats.tukey_hsd`` / ``scipy.stats.studentized_range``, Dunnett against
  ``scipy.stats.dunnett`` (and ``scipy.stats.multivariate_t`` for marginal means) at the
  accuracy of those randomized integrals, Scheffé by its formula (Scheffé 1953) with
  ``scipy.stats.f``.

Data: seeded simulated samples, PlantGrowth (Dobson 1983) and ToothGrowth (Crampton 1947);
sources in tests/data/README.md.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.oneway import anova_oneway

import statsmodels.api as sm

from refcheck import (
    FAMILY_VALUES, Reference, assert_close, oriented, plantgrowth, run, simulated, toothgrowth,
)

# statsmodels' names of the methods the plan offers.
STATSMODELS_METHOD = {
    "holm": "holm",
    "hochberg": "simes-hochberg",
    "bonferroni": "bonferroni",
    "benjamini-hochberg": "fdr_bh",
}

FIVE = [("g", tuple("abcde"))]
PLANNED = [  # name, statement, weights over a..e, alternative
    ("b over a", "b > a", [-1, 1, 0, 0, 0], "greater"),
    ("c over a", "c > a", [-1, 0, 1, 0, 0], "greater"),
    ("d over a", "d > a", [-1, 0, 0, 1, 0], "greater"),
    ("e equals a", "e = a", [-1, 0, 0, 0, 1], "two-sided"),
    ("c equals b", "c = b", [0, -1, 1, 0, 0], "two-sided"),
]
EXPLORATORY = [
    ("d equals e", "d = e", [0, 0, 0, 1, -1], "two-sided"),
    ("e over b", "e > b", [0, -1, 0, 0, 1], "greater"),
]


def _five_groups():
    """Seed 18: raw p values .0004, .063, .011, .072, .065, so every method adjusts differently."""
    return simulated(FIVE, [10, 11.2, 11.4, 11.6, 11.0], [8, 9, 7, 8, 10], sd=1.5, seed=18)


def _raw_p(ref, table):
    return [ref.contrast(w, 0.0, alt)["p"] for _, _, w, alt in table]


def _adjusted(p, method):
    return list(p) if method == "none" else list(multipletests(p, method=STATSMODELS_METHOD[method])[1])


@pytest.fixture(scope="module")
def five_groups_runs(tmp_path_factory):
    project = _five_groups()
    hyps = [(n, "means", s, "planned") for n, s, *_ in PLANNED]
    hyps += [(n, "means", s, "exploratory") for n, s, *_ in EXPLORATORY]
    runs = {}
    for method in ("holm", "hochberg", "bonferroni", "benjamini-hochberg", "none"):
        runs[method] = run(tmp_path_factory.mktemp(method), project, hyps, {"correction": method})
    return project, Reference(project), runs


def test_the_reference_families_tell_the_methods_apart(five_groups_runs):
    """Sanity of the data: multipletests gives five different adjusted vectors, so a plan whose
    correction were ignored could not pass the next test."""
    _, ref, _ = five_groups_runs
    p = _raw_p(ref, PLANNED)
    vectors = [_adjusted(p, m) for m in ("holm", "hochberg", "bonferroni", "benjamini-hochberg", "none")]
    for i in range(5):
        for j in range(i + 1, 5):
            assert not np.allclose(vectors[i], vectors[j], rtol=1e-6), (i, j)


@pytest.mark.parametrize("method", ["holm", "hochberg", "bonferroni", "benjamini-hochberg", "none"])
def test_correction_is_the_one_the_plan_names(five_groups_runs, method):
    """results.json: ``p`` is the raw p (statsmodels OLS t_test; scipy.stats.t for one-sided),
    ``p_adjusted`` is multipletests(raw p, method) within the planned family, and separately
    within the exploratory family (reference library)."""
    _, ref, runs = five_groups_runs
    out = runs[method]
    assert out.results["analysis"]["correction"] == method
    for table in (PLANNED, EXPLORATORY):
        raw = _raw_p(ref, table)
        adjusted = _adjusted(raw, method)
        for (name, _, w, _), p, p_adj in zip(table, raw, adjusted):
            got = out.hypothesis(name)
            oriented(got["contrast"]["cells"][0], w)
            assert got["correction"] == method
            assert_close(got["p"], p, f"{name} raw p", rel=1e-9)
            assert_close(got["confirmatory"]["p"], p, f"{name} confirmatory p", rel=1e-9)
            assert_close(got["p_adjusted"], p_adj, f"{name} {method}-adjusted p", rel=1e-9)


def test_raw_and_adjusted_p_are_not_swapped_in_the_report(five_groups_runs):
    """The Markdown prints the raw p as 'p = …' and the adjusted one as 'Holm-adjusted p = …':
    for a hypothesis whose two values print differently, each text carries its own value."""
    from reporter.narrative.numbers import stat_p

    from refcheck import plain_markdown

    _, ref, runs = five_groups_runs
    md = plain_markdown(runs["holm"].markdown())
    raw = _raw_p(ref, PLANNED)
    adj = _adjusted(raw, "holm")
    name, p, p_adj = PLANNED[1][0], raw[1], adj[1]
    section = md.split(f". {name}\n", 1)[1].split("\n### ", 1)[0]
    assert f"{stat_p(p).plain()}, Holm-adjusted {stat_p(p_adj).plain()}" in section, section


# ---------------------------------------------------------------------------------------------
# Unequal-variance policies


def _welch_satterthwaite(project, w):
    """t and df of c'ȳ with SE² = Σ c²s²/n and Satterthwaite's (1946) df."""
    y, cell = project.y, project.cell
    parts = []
    est = 0.0
    for c, wc in enumerate(w):
        if wc == 0:
            continue
        yc = y[cell == c]
        est += wc * yc.mean()
        parts.append((wc * wc * yc.var(ddof=1) / yc.size, yc.size))
    v = sum(a for a, _ in parts)
    df = v * v / sum(a * a / (n - 1) for a, n in parts)
    return est / math.sqrt(v), df


HETERO_HYPS = [
    ("c over a", "means", "c > a", "planned"),
    ("average", "means", "(b + c)/2 > a", "planned"),
    ("groups differ", "effect", "g", "planned"),
]


@pytest.mark.parametrize("policy, sds, expect_fire", [
    ("classical", [1, 1, 1], None),
    ("always-robust", [1, 4, 8], None),
    ("robust-if-heterogeneous", [1, 4, 8], True),
    ("robust-if-heterogeneous", [1, 1.1, 0.9], False),
], ids=["classical", "always-robust", "if-heterogeneous-fires", "if-heterogeneous-quiet"])
def test_unequal_variance_policy_end_to_end(tmp_path, policy, sds, expect_fire):
    """Which test is confirmatory, its p (robust: Welch–Satterthwaite t against
    scipy.stats.ttest_ind(equal_var=False) and the Satterthwaite formula; Welch's ANOVA against
    statsmodels anova_oneway(use_var='unequal')), the Brown–Forsythe and Levene checks against
    scipy.stats.levene, and the Holm-adjusted confirmatory p against multipletests."""
    project = simulated([("g", ("a", "b", "c"))], [0.0, 0.6, 1.4], [20, 14, 25], sd=sds, seed=7)
    out = run(tmp_path, project, HETERO_HYPS, {"unequal_variances": policy, "correction": "holm"})
    ref = Reference(project)
    y, cell = project.y, project.cell
    samples = [y[cell == c] for c in range(3)]

    bf = stats.levene(*samples, center="median")
    lev = stats.levene(*samples, center="mean")
    checks = out.results["assumptions"]
    assert_close(checks["brown_forsythe"]["statistic"], bf.statistic, "Brown-Forsythe W")
    assert_close(checks["brown_forsythe"]["p"], bf.pvalue, "Brown-Forsythe p", rel=1e-9)
    assert_close(checks["levene"]["statistic"], lev.statistic, "Levene W")
    assert_close(checks["levene"]["p"], lev.pvalue, "Levene p", rel=1e-9)
    fires = bf.pvalue < 0.05
    assert checks["unequal_variances_indicated"] == fires
    if expect_fire is not None:
        assert fires == expect_fire  # the data do what the case says

    robust_wanted = policy == "always-robust" or (policy == "robust-if-heterogeneous" and fires)
    welch_c = stats.ttest_ind(samples[2], samples[0], equal_var=False, alternative="greater")
    t_avg, df_avg = _welch_satterthwaite(project, [-1, 0.5, 0.5])
    welch_f = anova_oneway(y, cell, use_var="unequal", welch_correction=True)
    robust_ref = {
        "c over a": (welch_c.statistic, [welch_c.df], welch_c.pvalue),
        "average": (t_avg, [df_avg], stats.t.sf(t_avg, df_avg)),
        "groups differ": (welch_f.statistic, list(welch_f.df), welch_f.pvalue),
    }
    classical_ref = {
        "c over a": ref.contrast([-1, 0, 1], 0.0, "greater")["p"],
        "average": ref.contrast([-1, 0.5, 0.5], 0.0, "greater")["p"],
        "groups differ": ref.f_test([[1, -1, 0], [0, 1, -1]])["p"],
    }
    confirm = []
    for name, *_ in HETERO_HYPS:
        got = out.hypothesis(name)
        stat, df, p = robust_ref[name]
        rob = got["robust"]
        assert_close(rob["statistic"], stat, f"{name} robust statistic", rel=1e-9)
        for g, e in zip(rob["df"], df):
            assert_close(g, e, f"{name} robust df", rel=1e-9)
        assert_close(rob["p"], p, f"{name} robust p", rel=1e-8)
        assert_close(got["p"], classical_ref[name], f"{name} classical p", rel=1e-9)
        assert got["confirmatory"]["test"] == ("robust" if robust_wanted else "classical")
        expected_p = p if robust_wanted else classical_ref[name]
        assert_close(got["confirmatory"]["p"], expected_p, f"{name} confirmatory p", rel=1e-8)
        confirm.append((got, expected_p))
    adjusted = multipletests([p for _, p in confirm], method="holm")[1]
    for (got, _), p_adj in zip(confirm, adjusted):
        assert_close(got["p_adjusted"], p_adj, f"{got['name']} adjusted p", rel=1e-8)


def test_always_robust_factorial_uses_hc3(tmp_path):
    """In a 2 × 3 design the robust test of an effect is the HC3 Wald F: statsmodels OLS on the
    cell-means model with cov_type='HC3', ``f_test`` of the unweighted-means contrasts
    (reference library), on (q, N − k) df."""
    project = toothgrowth()
    hyps = [("supp", "effect", "supp", "planned"), ("dose", "effect", "dose", "planned"),
            ("interaction", "effect", "supp x dose", "planned")]
    out = run(tmp_path, project, hyps, {"unequal_variances": "always-robust"})
    hc3 = sm.OLS(project.y, np.eye(6)[project.cell]).fit(cov_type="HC3")
    Cs = {
        "supp": np.kron([1, -1], [1, 1, 1]) / 3,
        "dose": np.kron([1, 1], [[1, -1, 0], [0, 1, -1]]) / 2,
        "interaction": np.kron([1, -1], [[1, -1, 0], [0, 1, -1]]),
    }
    confirm = []
    for name, C in Cs.items():
        ft = hc3.f_test(np.atleast_2d(C))
        got = out.hypothesis(name)
        rob = got["robust"]
        assert rob["method"] == "HC3 Wald F"
        assert_close(rob["statistic"], float(ft.fvalue), f"{name} HC3 F", rel=1e-9)
        assert rob["df"] == [float(ft.df_num), float(ft.df_denom)]
        assert_close(rob["p"], float(ft.pvalue), f"{name} HC3 p", rel=1e-8)
        assert got["confirmatory"]["test"] == "robust"
        confirm.append(float(ft.pvalue))
    # the ANOVA rows carry the same robust tests
    for row in out.results["anova"]["rows"]:
        if row.get("robust"):
            name = {"supp": "supp", "dose": "dose"}.get(row["source"], "interaction")
            assert_close(row["robust"]["statistic"], out.hypothesis(name)["robust"]["statistic"], row["source"])
    adjusted = multipletests(confirm, method="holm")[1]
    for name, p_adj in zip(Cs, adjusted):
        assert_close(out.hypothesis(name)["p_adjusted"], p_adj, f"{name} adjusted", rel=1e-8)


# ---------------------------------------------------------------------------------------------
# Follow-up families


def _four_unbalanced():
    return simulated([("g", ("w", "x", "y", "z"))], [5.0, 5.4, 6.3, 5.1], [7, 12, 5, 9], sd=1.0, seed=11)


ONEWAY_DATA = {"PlantGrowth": (plantgrowth, "ctrl"), "simulated-unbalanced": (_four_unbalanced, "x")}


def _family(out, key):
    (fam,) = [f for f in out.results["follow_up"] if f["family"] == FAMILY_VALUES[key]]
    return fam


@pytest.fixture(scope="module", params=list(ONEWAY_DATA))
def oneway_families(request, tmp_path_factory):
    make, control = ONEWAY_DATA[request.param]
    project = make()
    levels = project.factors[0][1]
    hyps = [("groups differ", "effect", project.factors[0][0], "planned")]
    out = run(tmp_path_factory.mktemp("families"), project, hyps,
              {"posthoc": list(FAMILY_VALUES.values()), "control": control, "alpha": 0.05})
    samples = [project.y[project.cell == c] for c in range(project.k)]
    return project, levels, samples, levels.index(control), out


def test_tukey_kramer_on_cells_matches_scipy(oneway_families):
    """Differences, adjusted p (to 1e-6) and simultaneous 95% limits equal scipy.stats.tukey_hsd."""
    project, levels, samples, _, out = oneway_families
    ref = stats.tukey_hsd(*samples)
    ci = ref.confidence_interval(0.95)
    fam = _family(out, "tukey")
    assert fam["on"] == "cells"
    k = len(levels)
    assert len(fam["comparisons"]) == k * (k - 1) // 2
    for comp in fam["comparisons"]:
        i, j = levels.index(comp["first"]), levels.index(comp["second"])
        assert_close(comp["difference"], ref.statistic[i, j], "difference")
        assert_close(comp["p_adjusted"], ref.pvalue[i, j], "Tukey p", rel=1e-6, abs_=1e-10)
        assert_close(comp["ci"][0], ci.low[i, j], "Tukey lower", rel=1e-8)
        assert_close(comp["ci"][1], ci.high[i, j], "Tukey upper", rel=1e-8)


def test_dunnett_on_cells_matches_scipy(oneway_families):
    """Every group against the control: differences exact, p and limits within the accuracy of
    scipy.stats.dunnett's randomized quasi-Monte Carlo integral (5e-4 on p, 0.2% of the
    half-width on the limits)."""
    project, levels, samples, ctrl, out = oneway_families
    others = [c for c in range(len(levels)) if c != ctrl]
    ref = stats.dunnett(*(samples[c] for c in others), control=samples[ctrl], rng=20261202)
    ci = ref.confidence_interval(0.95)
    fam = _family(out, "dunnett")
    assert fam["control"] == levels[ctrl]
    assert len(fam["comparisons"]) == len(others)
    for comp in fam["comparisons"]:
        i = others.index(levels.index(comp["first"]))
        assert comp["second"] == levels[ctrl]
        diff = samples[others[i]].mean() - samples[ctrl].mean()
        assert_close(comp["difference"], diff, "difference")
        assert comp["p_adjusted"] == pytest.approx(ref.pvalue[i], abs=5e-4)
        half = (ci.high[i] - ci.low[i]) / 2
        assert comp["ci"][0] == pytest.approx(ci.low[i], abs=2e-3 * half)
        assert comp["ci"][1] == pytest.approx(ci.high[i], abs=2e-3 * half)


def _scheffe_check(comp, diff, se, g, df, alpha=0.05):
    """Scheffé (1953): p = P(F(g − 1, df) ≥ t²/(g − 1)); limits diff ∓ √((g − 1)·F_{1−α}) · SE."""
    t = diff / se
    assert_close(comp["difference"], diff, "difference")
    assert_close(comp["se"], se, "SE")
    assert_close(comp["p_adjusted"], stats.f.sf(t * t / (g - 1), g - 1, df), "Scheffé p", rel=1e-9)
    crit = math.sqrt((g - 1) * stats.f.ppf(1 - alpha, g - 1, df))
    assert_close(comp["ci"][0], diff - crit * se, "Scheffé lower")
    assert_close(comp["ci"][1], diff + crit * se, "Scheffé upper")


def test_scheffe_on_cells_by_formula(oneway_families):
    """Scheffé pairs over the cells, with SE from statsmodels OLS ``t_test`` (reference library)."""
    project, levels, samples, _, out = oneway_families
    ref = Reference(project)
    fam = _family(out, "scheffe")
    k = len(levels)
    assert len(fam["comparisons"]) == k * (k - 1) // 2
    for comp in fam["comparisons"]:
        i, j = levels.index(comp["first"]), levels.index(comp["second"])
        w = np.zeros(k)
        w[i], w[j] = 1, -1
        c = ref.contrast(w)
        _scheffe_check(comp, c["estimate"], c["se"], k, ref.df)


@pytest.fixture(scope="module")
def marginal_families(tmp_path_factory):
    project = toothgrowth()
    out = run(tmp_path_factory.mktemp("marginal"), project, [("dose", "effect", "dose", "planned")],
              {"posthoc": list(FAMILY_VALUES.values()), "posthoc_on": "dose", "control": "0.5"})
    return project, Reference(project), out


def _marginal_pair(project, ref, first, second):
    w = project.marginal_weights("dose", first) - project.marginal_weights("dose", second)
    return ref.contrast(w)


def test_tukey_kramer_on_marginal_means(marginal_families):
    """Pairs of dose marginal means in an unbalanced 2 × 3 design: difference and SE from
    statsmodels OLS ``t_test`` of the averaging contrasts; p = scipy.stats.studentized_range.sf(
    |t|·√2, 3, df) to 1e-6; limits diff ∓ q_{1−α}/√2 · SE."""
    project, ref, out = marginal_families
    fam = _family(out, "tukey")
    assert fam["on"] == "dose"
    q = stats.studentized_range.ppf(0.95, 3, ref.df) / math.sqrt(2)
    assert len(fam["comparisons"]) == 3
    for comp in fam["comparisons"]:
        c = _marginal_pair(project, ref, comp["first"], comp["second"])
        assert_close(comp["difference"], c["estimate"], "difference")
        assert_close(comp["se"], c["se"], "SE")
        assert comp["df"] == ref.df
        p = stats.studentized_range.sf(abs(c["t"]) * math.sqrt(2), 3, ref.df)
        assert_close(comp["p_adjusted"], p, "Tukey p", rel=1e-6, abs_=1e-10)
        assert_close(comp["ci"][0], c["estimate"] - q * c["se"], "lower", rel=1e-8)
        assert_close(comp["ci"][1], c["estimate"] + q * c["se"], "upper", rel=1e-8)


def test_scheffe_on_marginal_means(marginal_families):
    """Scheffé pairs of dose marginal means: g − 1 = 2 (the factor's df), SE from statsmodels."""
    project, ref, out = marginal_families
    fam = _family(out, "scheffe")
    assert fam["on"] == "dose"
    for comp in fam["comparisons"]:
        c = _marginal_pair(project, ref, comp["first"], comp["second"])
        _scheffe_check(comp, c["estimate"], c["se"], 3, ref.df)


def test_dunnett_on_marginal_means(marginal_families):
    """Doses 1.0 and 2.0 against 0.5: p = 1 − P(max |T_j| < |t_i|) for the bivariate t whose
    correlation comes from statsmodels' covariance of the two differences; the probability by
    scipy.stats.multivariate_t.cdf (randomized, tolerance 1e-3)."""
    project, ref, out = marginal_families
    fam = _family(out, "dunnett")
    assert fam["control"] == "0.5"
    ws = [project.marginal_weights("dose", d) - project.marginal_weights("dose", "0.5") for d in ("1.0", "2.0")]
    L = np.array(ws)
    cov = L @ ref.fit.cov_params() @ L.T
    sd = np.sqrt(np.diag(cov))
    corr = cov / np.outer(sd, sd)
    mvt = stats.multivariate_t(shape=corr, df=ref.df, seed=20261202)
    for comp in fam["comparisons"]:
        i = ("1.0", "2.0").index(comp["first"])
        c = ref.contrast(ws[i])
        assert_close(comp["difference"], c["estimate"], "difference")
        assert_close(comp["se"], c["se"], "SE")
        b = abs(c["t"])
        inside = mvt.cdf(np.array([b, b]), lower_limit=np.array([-b, -b]))
        assert comp["p_adjusted"] == pytest.approx(1 - inside, abs=1e-3)
