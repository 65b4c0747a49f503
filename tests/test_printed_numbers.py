"""Every number the report prints is the fitted value it claims to be.

Two plans (a seeded one-way design with a planted outlier and every follow-up family; ToothGrowth,
unbalanced, 2 × 3, effects coding) run through ``reporter.report``. Then:

* results.json is walked leaf by leaf: every number in it must have been compared with a value
  computed in this file from the rows by a reference library (statsmodels, scipy.stats) or by a
  cited formula; a number nobody checked fails the walk, so a new field needs a reference too;
* the Markdown and the HTML are searched for the statistics they print (F, t, p, df, CI limits,
  means, SDs, effect sizes, post-hoc rows); each printed text must equal the APA-style formatting
  of the *reference* value. The project's number-style functions (reporter.narrative.numbers) are
  used only for the formatting rule, never as the source of a value.
"""

from __future__ import annotations

import html as html_lib
import math
import os
import re
from html.parser import HTMLParser

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.multitest import multipletests
from statsmodels.stats.oneway import anova_oneway

from refcheck import (
    FAMILY_VALUES, Reference, eta_interval, hedges_j, make_project, nct_interval, plain_html,
    plain_markdown, run, simulated, toothgrowth,
)
from reporter.narrative.numbers import (
    format_bounded, format_count, format_df, format_number, format_p_cell, stat_ci, stat_f, stat_p,
    stat_t, stat_value,
)

ALPHA = 0.05


# ---------------------------------------------------------------------------------------------
# A ledger of checked numbers


class Ledger:
    """Compares numbers of results.json with references and remembers which leaves were checked."""

    def __init__(self, doc):
        self.doc = doc
        self.checked: set[tuple] = set()
        self.exempt: dict[tuple, str] = {}

    def get(self, path):
        node = self.doc
        for key in path:
            node = node[key]
        return node

    def check(self, path, expected, rel=1e-10, abs_=1e-12):
        got = self.get(path)
        if isinstance(got, list):
            assert len(got) == len(expected), f"{path}: {got} vs {expected}"
            for i, e in enumerate(expected):
                self.check((*path, i), e, rel, abs_)
            return
        if expected is None or (isinstance(expected, float) and math.isinf(expected)):
            assert got is None, f"{path}: got {got!r}, expected null"
        else:
            assert got is not None and math.isclose(got, expected, rel_tol=rel, abs_tol=abs_), (
                f"results.json {'.'.join(map(str, path))}: got {got!r}, reference {expected!r}")
        self.checked.add(tuple(path))

    def skip(self, path, reason):
        """A number that is not a statistic of the data (a plan echo, a constant of a method)."""
        self.exempt[tuple(path)] = reason

    def unchecked(self):
        out = []

        def walk(node, path):
            if any(path[: len(p)] == p for p in self.exempt):
                return
            if isinstance(node, dict):
                for k, v in node.items():
                    walk(v, (*path, k))
            elif isinstance(node, list):
                for i, v in enumerate(node):
                    walk(v, (*path, i))
            elif isinstance(node, (int, float)) and not isinstance(node, bool):
                if path not in self.checked:
                    out.append(".".join(map(str, path)))

        walk(self.doc, ())
        return out


def _assert_all_checked(ledger):
    missing = ledger.unchecked()
    assert not missing, (
        "results.json has numbers that no reference check covers (add one in "
        f"tests/test_printed_numbers.py): {missing[:20]}")


# ---------------------------------------------------------------------------------------------
# Tables and text of the Markdown and HTML


class _Tables(HTMLParser):
    """Rows of every HTML table as lists of cell texts (inline markup dropped)."""

    def __init__(self):
        super().__init__()
        self.rows, self._row, self._cell = [], None, None

    def handle_starttag(self, tag, attrs):
        if tag == "tr":
            self._row = []
        elif tag in ("td", "th") and self._row is not None:
            self._cell = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self._row.append(re.sub(r"\s+", " ", "".join(self._cell)).strip())
            self._cell = None
        elif tag == "tr" and self._row is not None:
            self.rows.append(self._row)
            self._row = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)


def html_rows(html: str) -> list[list[str]]:
    parser = _Tables()
    parser.feed(html)
    return parser.rows


def markdown_rows(md: str) -> list[list[str]]:
    rows = []
    for line in md.splitlines():
        if line.startswith("|") and not re.match(r"^\|\s*:?-", line):
            cells = re.split(r"(?<!\\)\|", line.strip())[1:-1]
            rows.append([plain_markdown(c).strip() for c in cells])
    return rows


def _near(value):
    """The value and two neighbours 1e-11 apart: a reference may sit a rounding hair away."""
    if value is None or not math.isfinite(value):
        return [value]
    return [value, value * (1 + 1e-11), value * (1 - 1e-11)]


def formats(rule, *values):
    """Every text ``rule`` gives for the values and their neighbours (see :func:`_near`)."""
    import itertools

    return {rule(*combo) for combo in itertools.product(*(_near(v) for v in values))}


class Printed:
    """The Markdown and HTML of one report, as plain text and as table rows."""

    def __init__(self, out):
        md = out.markdown()
        html = out.html()
        self.texts = {"Markdown": re.sub(r"[ \t]+", " ", plain_markdown(md)), "HTML": plain_html(html)}
        self.rows = {"Markdown": markdown_rows(md), "HTML": html_rows(html)}

    def has_text(self, options, what):
        for fmt, text in self.texts.items():
            assert any(o in text for o in options), f"{fmt}: none of {sorted(options)} printed ({what})"

    def has_row(self, label, cells, what):
        """A table row that starts with ``label`` and continues with ``cells`` (sets of options)."""
        for fmt, rows in self.rows.items():
            candidates = [r for r in rows if r and r[0] == label and len(r) >= len(cells) + 1]
            ok = any(all(r[1 + i] in opts for i, opts in enumerate(cells)) for r in candidates)
            assert ok, f"{fmt}: no row {label!r} with {[sorted(c) for c in cells]} ({what}); rows: {candidates}"


def num(v, d=2):
    return formats(lambda x: format_number(x, d), v)


def bounded(v, d=2):
    return formats(lambda x: format_bounded(x, d), v)


def bracket(lo, hi, rule=format_number):
    return formats(lambda a, b: f"[{rule(a)}, {rule(b)}]", lo, hi)


# ---------------------------------------------------------------------------------------------
# The one-way plan


LEVELS = ("a", "b", "c", "d")
OUTLIER_ROW = 11


def _oneway_project():
    """Four cells of 9, 12, 10, 11 rows; one value of cell b moved far out (row 11 of the data)."""
    p = simulated([("g", LEVELS)], [10.0, 11.0, 12.5, 10.5], [9, 12, 10, 11], sd=1.5, seed=5)
    text = list(p.text)
    assert p.cell[OUTLIER_ROW] == 1
    text[OUTLIER_ROW] = f"{float(text[OUTLIER_ROW]) + 9:.2f}"
    return make_project(p.factors, {lv: [t for t, c in zip(text, p.cell) if c == i] for i, lv in enumerate(LEVELS)})


HYPS = [
    ("c over a", "means", "c > a", "planned", [-1, 0, 1, 0], "greater"),
    ("d under c", "means", "d < c", "planned", [0, 0, -1, 1], "less"),
    ("groups differ", "effect", "g", "planned", None, None),
    ("a equals b", "means", "a = b", "exploratory", [1, -1, 0, 0], "two-sided"),
]
EFFECT_C = np.array([[1, -1, 0, 0], [0, 1, -1, 0], [0, 0, 1, -1]], float)


@pytest.fixture(scope="module")
def oneway(tmp_path_factory):
    project = _oneway_project()
    out = run(tmp_path_factory.mktemp("printed"), project, [h[:4] for h in HYPS],
              {"alpha": ALPHA, "correction": "holm", "posthoc": list(FAMILY_VALUES.values()), "control": "a"})
    return project, Reference(project), out


def _pairs_sample(project):
    return [project.y[project.cell == c] for c in range(project.k)]


def _oneway_reference(project, ref):
    """Every statistic of the one-way report, computed from the rows by reference libraries."""
    y, cell, k = project.y, project.cell, project.k
    samples = _pairs_sample(project)
    n = np.array([s.size for s in samples])
    N = y.size
    R = {}
    R["cells"] = []
    pooled = ref.fit.conf_int(alpha=ALPHA)
    for c, s in enumerate(samples):
        R["cells"].append({
            "n": s.size, "mean": s.mean(), "sd": s.std(ddof=1), "se": s.std(ddof=1) / math.sqrt(s.size),
            "ci": ref.cell_interval(c, ALPHA), "ci_pooled": tuple(pooled[c]),
        })
    ft = ref.f_test(EFFECT_C)
    F, (df1, df2) = ft["F"], ft["df"]
    ss_e = float(ref.fit.ssr)
    ss_t = float(((y - y.mean()) ** 2).sum())
    ss = ss_t - ss_e  # one-way: the between-cells SS (statsmodels centered_tss - ssr)
    mse = ref.mse
    (plo, phi), (flo, fhi) = eta_interval(F, df1, df2, 1 - 2 * ALPHA)
    R["effect"] = {
        "df": df1, "ss": ss, "ms": ss / df1, "F": F, "p": ft["p"],
        "eta_squared": ss / ss_t, "partial_eta_squared": ss / (ss + ss_e), "pes_ci": (plo, phi),
        "omega_squared": (ss - df1 * mse) / (ss_t + mse),
        "partial_omega_squared": (ss - df1 * mse) / (ss + (N - df1) * mse),
        "cohens_f": math.sqrt(ss / ss_e), "f_ci": (flo, fhi),
    }
    R["residual"] = {"df": df2, "ss": ss_e, "ms": mse}
    R["total"] = {"df": N - 1, "ss": ss_t}
    R["r_squared"] = float(ref.fit.rsquared)
    R["residual_sd"] = math.sqrt(mse)
    R["welch"] = anova_oneway(y, cell, use_var="unequal", welch_correction=True)
    # hypotheses: classical tests and effect sizes
    R["hyp"] = {}
    for name, _, _, role, w, alt in HYPS:
        if w is None:
            R["hyp"][name] = {"F": F, "df": (df1, df2), "p": ft["p"], "role": role,
                              "pes": ss / (ss + ss_e), "pes_ci": (plo, phi), "f": math.sqrt(ss / ss_e),
                              "f_ci": (flo, fhi), "ss": ss}
            continue
        c = ref.contrast(w, 0.0, alt, ALPHA)
        w_arr = np.asarray(w, float)
        s = 1.0 / w_arr[w_arr > 0].sum()
        spread = math.sqrt(float(np.sum((s * w_arr[w_arr != 0]) ** 2 / n[w_arr != 0])))
        d = s * c["estimate"] / math.sqrt(mse)
        dlo, dhi = nct_interval(d / spread, df2, 1 - ALPHA, alt)
        # Welch–Satterthwaite (Satterthwaite 1946) for the two-cell contrasts, by scipy.stats.ttest_ind
        i_pos, i_neg = int(np.flatnonzero(w_arr > 0)[0]), int(np.flatnonzero(w_arr < 0)[0])
        welch = stats.ttest_ind(samples[i_pos], samples[i_neg], equal_var=False, alternative=alt)
        v = samples[i_pos].var(ddof=1) / n[i_pos] + samples[i_neg].var(ddof=1) / n[i_neg]
        q = stats.t.ppf(1 - ALPHA / 2 if alt == "two-sided" else 1 - ALPHA, welch.df)
        est = c["estimate"]
        welch_ci = {"two-sided": (est - q * math.sqrt(v), est + q * math.sqrt(v)),
                    "greater": (est - q * math.sqrt(v), None), "less": (None, est + q * math.sqrt(v))}[alt]
        R["hyp"][name] = {**c, "role": role, "ss": c["t"] ** 2 * mse, "d": d,
                          "d_ci": (dlo * spread, dhi * spread), "g": hedges_j(df2) * d,
                          "welch": welch, "welch_ci": welch_ci}
    for role in ("planned", "exploratory"):
        names = [h[0] for h in HYPS if h[3] == role]
        adj = multipletests([R["hyp"][m]["p"] for m in names], method="holm")[1]
        for m, a in zip(names, adj):
            R["hyp"][m]["p_adjusted"] = float(a)
    # assumption checks
    resid = np.asarray(ref.fit.resid)
    R["bf"] = stats.levene(*samples, center="median")
    R["levene"] = stats.levene(*samples, center="mean")
    R["shapiro"] = stats.shapiro(resid)
    infl = ref.fit.get_influence()
    R["internal"] = infl.resid_studentized_internal
    R["external"] = infl.resid_studentized_external
    R["resid"] = resid
    R["kruskal"] = stats.kruskal(*samples)
    return R


def test_results_json_every_number_is_checked(oneway):
    """Walk results.json of the one-way plan: every number equals its reference (statsmodels OLS,
    scipy.stats, multipletests, noncentral inversions), and none is left unchecked."""
    project, ref, out = oneway
    doc = out.results
    R = _oneway_reference(project, ref)
    L = Ledger(doc)
    k, N = project.k, project.y.size
    samples = _pairs_sample(project)
    n = np.array([s.size for s in samples])

    # the plan, echoed
    L.check(("analysis", "alpha"), ALPHA)
    L.check(("analysis", "confidence_level"), 1 - ALPHA)
    L.check(("analysis", "permutations"), 0)
    L.skip(("analysis", "seed"), "the plan's default seed, echoed (no permutation ran)")
    L.skip(("analysis", "permutation_max_rows"), "a row limit from the plan's defaults, echoed")
    L.check(("data", "n_read"), N)
    L.check(("data", "n_analysed"), N)
    # provenance: the data file's size as the operating system reports it (os.stat), the rows of
    # the simulated project; seeds and counts are settings, echoed
    L.check(("provenance", "data_bytes"), os.stat(out.report.prepared.plan.data.path).st_size)
    L.check(("provenance", "rows", "read"), N)
    L.check(("provenance", "rows", "used"), N)
    for key in ("seed", "permutations", "permutation_max_rows"):
        L.skip(("provenance", "randomness", key), "the plan's setting, echoed")
    L.skip(("provenance", "randomness", "permutation_stop_after"),
           "Besag & Clifford's (1991) h of the sequential permutation test, a constant of the method")
    L.skip(("provenance", "randomness", "figure_jitter_seed"), "the figures' fixed jitter seed, a constant")
    # design: cell-means coding, β = the cell means (statsmodels params and bse)
    L.check(("design", "matrix"), np.eye(k).tolist())
    for c in range(k):
        L.check(("design", "coefficients", c, "weights"), np.eye(k)[c].tolist())
        L.check(("design", "coefficients", c, "estimate"), float(ref.fit.params[c]))
        L.check(("design", "coefficients", c, "se"), float(ref.fit.bse[c]))
    # cells
    for c, exp in enumerate(R["cells"]):
        for key in ("n", "mean", "sd", "se", "ci", "ci_pooled"):
            L.check(("cells", c, key), list(exp[key]) if key.startswith("ci") else exp[key])
    # ANOVA table
    rows = doc["anova"]["rows"]
    e = R["effect"]
    (ie,) = [i for i, r in enumerate(rows) if r["source"] == "g"]
    (ir,) = [i for i, r in enumerate(rows) if r["source"] == "residual"]
    for key in ("df", "ss", "ms", "F"):
        L.check(("anova", "rows", ie, key), e[key])
    L.check(("anova", "rows", ie, "p"), e["p"], rel=1e-9)
    for j, es in enumerate(rows[ie]["effect_sizes"]):
        name = es["name"]
        L.check(("anova", "rows", ie, "effect_sizes", j, "value"), e[name])
        if name in ("partial_eta_squared", "cohens_f"):
            L.check(("anova", "rows", ie, "effect_sizes", j, "ci"),
                    list(e["pes_ci" if name == "partial_eta_squared" else "f_ci"]), rel=1e-8)
            L.check(("anova", "rows", ie, "effect_sizes", j, "ci_level"), 1 - 2 * ALPHA)
    w = R["welch"]
    L.check(("anova", "rows", ie, "robust", "statistic"), float(w.statistic), rel=1e-9)
    L.check(("anova", "rows", ie, "robust", "df"), [float(x) for x in w.df], rel=1e-9)
    L.check(("anova", "rows", ie, "robust", "p"), float(w.pvalue), rel=1e-8)
    # sensitivity: the f at which the noncentral F (λ = f²N, Cohen 1988) has the stated power
    sens = rows[ie]["sensitivity"]
    L.check(("anova", "rows", ie, "sensitivity", "alpha"), ALPHA)
    crit = stats.f.ppf(1 - ALPHA, e["df"], R["residual"]["df"])
    for j, (power, f) in enumerate(zip(sens["powers"], sens["detectable_cohens_f"])):
        L.check(("anova", "rows", ie, "sensitivity", "powers", j), [0.8, 0.9][j])
        got_power = stats.ncf.sf(crit, e["df"], R["residual"]["df"], f * f * N)
        assert got_power == pytest.approx(power, abs=1e-8)
        L.checked.add(("anova", "rows", ie, "sensitivity", "detectable_cohens_f", j))
    for key in ("df", "ss", "ms"):
        L.check(("anova", "rows", ir, key), R["residual"][key])
    L.check(("anova", "total", "df"), R["total"]["df"])
    L.check(("anova", "total", "ss"), R["total"]["ss"])
    L.check(("anova", "r_squared"), R["r_squared"])
    L.check(("anova", "residual_sd"), R["residual_sd"])
    # hypotheses
    for i, h in enumerate(doc["hypotheses"]):
        r = R["hyp"][h["name"]]
        spec = [x for x in HYPS if x[0] == h["name"]][0]
        P = ("hypotheses", i)
        L.check((*P, "p"), r["p"], rel=1e-9)
        L.check((*P, "p_adjusted"), r["p_adjusted"], rel=1e-9)
        L.check((*P, "confirmatory", "p"), r["p"], rel=1e-9)
        L.check((*P, "ss"), r["ss"])
        if spec[4] is None:
            L.check((*P, "statistic"), r["F"])
            L.check((*P, "df"), list(r["df"]))
            L.check((*P, "contrast", "cells"), EFFECT_C.tolist())
            L.check((*P, "contrast", "coefficients"), EFFECT_C.tolist())  # cell-means coding: L = C
            L.check((*P, "contrast", "rhs"), [0.0, 0.0, 0.0])
            sizes = {"partial_eta_squared": (r["pes"], r["pes_ci"]), "cohens_f": (r["f"], r["f_ci"])}
            for key in ("effect_size", "effect_sizes"):
                entries = [h[key]] if key == "effect_size" else h[key]
                for j, es in enumerate(entries):
                    base = (*P, key) if key == "effect_size" else (*P, key, j)
                    value, ci = sizes[es["name"]]
                    L.check((*base, "value"), value)
                    L.check((*base, "ci"), list(ci), rel=1e-8)
                    L.check((*base, "ci_level"), 1 - 2 * ALPHA)
            wr = R["welch"]
            L.check((*P, "robust", "statistic"), float(wr.statistic), rel=1e-9)
            L.check((*P, "robust", "df"), [float(x) for x in wr.df], rel=1e-9)
            L.check((*P, "robust", "p"), float(wr.pvalue), rel=1e-8)
            continue
        L.check((*P, "statistic"), r["t"])
        L.check((*P, "df"), [r["df"]])
        L.check((*P, "estimate"), r["estimate"])
        L.check((*P, "se"), r["se"])
        L.check((*P, "ci"), list(r["ci"]))
        L.check((*P, "ci_level"), 1 - ALPHA)
        L.check((*P, "ci_sides"), 2 if spec[5] == "two-sided" else 1)
        L.check((*P, "contrast", "cells"), [list(map(float, spec[4]))])
        L.check((*P, "contrast", "coefficients"), [list(map(float, spec[4]))])
        L.check((*P, "contrast", "rhs"), [0.0])
        for key in ("effect_size", "effect_sizes"):
            entries = [h[key]] if key == "effect_size" else h[key]
            for j, es in enumerate(entries):
                base = (*P, key) if key == "effect_size" else (*P, key, j)
                if es["name"] == "standardized_contrast_d":
                    L.check((*base, "value"), r["d"])
                    L.check((*base, "ci"), list(r["d_ci"]), rel=1e-8, abs_=1e-10)
                    L.check((*base, "ci_level"), 1 - ALPHA)
                elif es["name"] == "hedges_g":
                    L.check((*base, "value"), r["g"])
                    if es.get("ci") is not None:  # the interval of g, J times that of d
                        L.check((*base, "ci"), [None if math.isinf(x) else hedges_j(r["df"]) * x
                                                for x in r["d_ci"]], rel=1e-8, abs_=1e-10)
                        L.check((*base, "ci_level"), 1 - ALPHA)
        wt = r["welch"]
        L.check((*P, "robust", "statistic"), float(wt.statistic), rel=1e-9)
        L.check((*P, "robust", "df"), [float(wt.df)], rel=1e-9)
        L.check((*P, "robust", "p"), float(wt.pvalue), rel=1e-8)
        L.check((*P, "robust", "estimate"), r["estimate"])
        L.check((*P, "robust", "ci"), list(r["welch_ci"]), rel=1e-9)
    # assumption checks
    A = ("assumptions",)
    for key, res in (("brown_forsythe", R["bf"]), ("levene", R["levene"])):
        L.check((*A, key, "statistic"), float(res.statistic))
        L.check((*A, key, "df"), [k - 1, N - k])
        L.check((*A, key, "p"), float(res.pvalue), rel=1e-8)
    L.check((*A, "shapiro_wilk", "n"), N)
    L.check((*A, "shapiro_wilk", "n_available"), N)
    L.check((*A, "qq", "n_residuals"), N)
    L.check((*A, "shapiro_wilk", "statistic"), float(R["shapiro"].statistic), rel=1e-6)
    L.check((*A, "shapiro_wilk", "p"), float(R["shapiro"].pvalue), rel=1e-5)
    probplot = sm.ProbPlot(R["internal"], a=3 / 8)  # Blom (1958) positions
    L.check((*A, "qq", "theoretical"), list(probplot.theoretical_quantiles), rel=1e-12)
    L.check((*A, "qq", "sample"), list(np.sort(R["internal"])), rel=1e-9)
    L.skip((*A, "outliers", "threshold"), "the rule's fixed cut-off (3), a constant of the method")
    flagged = [int(i) for i in np.flatnonzero(np.abs(R["external"]) > 3)]
    assert flagged == [OUTLIER_ROW]
    assert len(doc["assumptions"]["outliers"]["rows"]) == 1
    L.check((*A, "outliers", "total"), 1)
    L.check((*A, "outliers", "listed"), 1)
    L.check(("outlier_sensitivity", "n_removed"), 1)
    L.check((*A, "outliers", "rows", 0, "row"), OUTLIER_ROW + 2)  # the CSV line (header = line 1)
    L.check((*A, "outliers", "rows", 0, "residual"), float(R["resid"][OUTLIER_ROW]))
    L.check((*A, "outliers", "rows", 0, "studentized"), float(R["external"][OUTLIER_ROW]), rel=1e-9)
    # robust section
    kw = R["kruskal"]
    L.check(("robust", "kruskal_wallis", "statistic"), float(kw.statistic), rel=1e-10)
    L.check(("robust", "kruskal_wallis", "df"), k - 1)
    L.check(("robust", "kruskal_wallis", "p"), float(kw.pvalue), rel=1e-9)
    wr = R["welch"]
    L.check(("robust", "welch_anova", "statistic"), float(wr.statistic), rel=1e-9)
    L.check(("robust", "welch_anova", "df"), [float(x) for x in wr.df], rel=1e-9)
    L.check(("robust", "welch_anova", "p"), float(wr.pvalue), rel=1e-8)
    # follow-up families over the cells
    tukey = stats.tukey_hsd(*samples)
    tukey_ci = tukey.confidence_interval(1 - ALPHA)
    others = [1, 2, 3]
    dunnett = stats.dunnett(*(samples[c] for c in others), control=samples[0], rng=20261202)
    dunnett_ci = dunnett.confidence_interval(1 - ALPHA)
    for f, fam in enumerate(doc["follow_up"]):
        L.check(("follow_up", f, "alpha"), ALPHA)
        for j, comp in enumerate(fam["comparisons"]):
            P = ("follow_up", f, "comparisons", j)
            a, b = LEVELS.index(comp["first"]), LEVELS.index(comp["second"])
            w = np.zeros(k)
            w[a], w[b] = 1, -1
            c = ref.contrast(w)
            L.check((*P, "difference"), c["estimate"])
            L.check((*P, "se"), c["se"])
            L.check((*P, "statistic"), c["t"])
            L.check((*P, "df"), ref.df)
            if fam["family"] == FAMILY_VALUES["tukey"]:
                L.check((*P, "p_adjusted"), float(tukey.pvalue[a, b]), rel=1e-6, abs_=1e-10)
                L.check((*P, "ci"), [float(tukey_ci.low[a, b]), float(tukey_ci.high[a, b])], rel=1e-8)
            elif fam["family"] == FAMILY_VALUES["dunnett"]:
                assert b == 0
                i = others.index(a)
                assert comp["p_adjusted"] == pytest.approx(dunnett.pvalue[i], abs=5e-4)  # QMC accuracy
                L.checked.add((*P, "p_adjusted"))
                half = (dunnett_ci.high[i] - dunnett_ci.low[i]) / 2
                L.check((*P, "ci"), [float(dunnett_ci.low[i]), float(dunnett_ci.high[i])], rel=0, abs_=2e-3 * half)
            else:  # Scheffé (1953) by formula
                L.check((*P, "p_adjusted"), stats.f.sf(c["t"] ** 2 / (k - 1), k - 1, ref.df), rel=1e-9)
                crit = math.sqrt((k - 1) * stats.f.ppf(1 - ALPHA, k - 1, ref.df))
                L.check((*P, "ci"), [c["estimate"] - crit * c["se"], c["estimate"] + crit * c["se"]])
    # Games–Howell: scipy.stats.tukey_hsd(equal_var=False); SE and df by Welch's formulas
    gh = stats.tukey_hsd(*samples, equal_var=False)
    gh_ci = gh.confidence_interval(1 - ALPHA)
    L.check(("games_howell", "alpha"), ALPHA)
    for j, comp in enumerate(doc["games_howell"]["comparisons"]):
        P = ("games_howell", "comparisons", j)
        a, b = LEVELS.index(comp["first"]), LEVELS.index(comp["second"])
        va, vb = samples[a].var(ddof=1) / n[a], samples[b].var(ddof=1) / n[b]
        se = math.sqrt(va + vb)
        L.check((*P, "difference"), float(gh.statistic[a, b]))
        L.check((*P, "se"), se)
        L.check((*P, "statistic"), float(gh.statistic[a, b]) / se)
        L.check((*P, "df"), (va + vb) ** 2 / (va ** 2 / (n[a] - 1) + vb ** 2 / (n[b] - 1)))
        L.check((*P, "p_adjusted"), float(gh.pvalue[a, b]), rel=1e-6, abs_=1e-10)
        L.check((*P, "ci"), [float(gh_ci.low[a, b]), float(gh_ci.high[a, b])], rel=1e-8)
    # the planned tests rerun without the flagged row: statsmodels OLS on the remaining rows
    keep = np.arange(N) != OUTLIER_ROW
    fit2 = sm.OLS(project.y[keep], np.eye(k)[project.cell[keep]]).fit()
    L.check(("outlier_sensitivity", "rows_removed"), [OUTLIER_ROW + 2])  # CSV line numbers
    for j, t in enumerate(doc["outlier_sensitivity"]["tests"]):
        spec = [x for x in HYPS if x[0] == t["name"]][0]
        P = ("outlier_sensitivity", "tests", j)
        if spec[4] is None:
            ft2 = fit2.f_test(EFFECT_C)
            L.check((*P, "statistic"), float(ft2.fvalue))
            L.check((*P, "p"), float(ft2.pvalue), rel=1e-9)
            for key in ("df",):
                if key in t:
                    L.check((*P, key), [float(ft2.df_num), float(ft2.df_denom)])
            continue
        tt = fit2.t_test(np.asarray(spec[4], float)[None, :])
        tval = float(tt.tvalue[0, 0])
        L.check((*P, "statistic"), tval)
        p = stats.t.sf(tval, fit2.df_resid) if spec[5] == "greater" else stats.t.cdf(tval, fit2.df_resid)
        L.check((*P, "p"), float(p), rel=1e-9)
        for key, value in (("df", [float(fit2.df_resid)]), ("estimate", float(tt.effect[0])),
                           ("se", float(tt.sd[0, 0]))):
            if key in t:
                L.check((*P, key), value)
    _assert_all_checked(L)


def test_markdown_and_html_print_the_reference_values(oneway):
    """Cell table, ANOVA table, each hypothesis's test line, estimate, interval and effect size,
    the post-hoc tables and the assumption checks, in Markdown and HTML, equal the APA formatting
    (reporter.narrative.numbers, the rule only) of the reference values."""
    project, ref, out = oneway
    R = _oneway_reference(project, ref)
    pr = Printed(out)
    # cell summary table: n, M, SD, SE, 95% CI (the cell's own SD, n − 1 df)
    for c, exp in enumerate(R["cells"]):
        pr.has_row(LEVELS[c], [{format_count(exp["n"])}, num(exp["mean"]), num(exp["sd"]), num(exp["se"]),
                               bracket(*exp["ci"])], f"cell {LEVELS[c]}")
    # ANOVA table: df, SS, MS, F, p, partial η², its 90% CI, partial ω²
    e = R["effect"]
    pr.has_row("g", [{format_df(e["df"])}, num(e["ss"]), num(e["ms"]), num(e["F"]),
                     formats(format_p_cell, e["p"]), bounded(e["partial_eta_squared"]),
                     bracket(*e["pes_ci"], rule=format_bounded), bounded(e["partial_omega_squared"])],
               "ANOVA row")
    res = R["residual"]
    pr.has_row("residual", [{format_df(res["df"])}, num(res["ss"]), num(res["ms"])], "residual row")
    pr.has_row("total", [{format_df(R["total"]["df"])}, num(R["total"]["ss"])], "total row")
    pr.has_text(formats(lambda a, b: f"{stat_value('R²', a, leading_zero=False).plain()}; residual "
                        f"{stat_value('SD', b).plain()}", R["r_squared"], R["residual_sd"]), "R² and SD")
    # each hypothesis: test line with raw and Holm-adjusted p, estimate and interval, effect size
    for name, _, _, _, w, alt in HYPS:
        r = R["hyp"][name]
        if w is None:
            pr.has_text(formats(lambda F, p, pa: f"{stat_f(F, *r['df']).plain()}, {stat_p(p).plain()}, "
                                f"Holm-adjusted {stat_p(pa).plain()}", r["F"], r["p"], r["p_adjusted"]), name)
            pr.has_text(formats(lambda v, lo, hi: f"{stat_value('partial η²', v, leading_zero=False).plain()}, "
                                f"{stat_ci(lo, hi, 1 - 2 * ALPHA, leading_zero=False).plain()}",
                                r["pes"], *r["pes_ci"]), f"{name} effect size")
            continue
        pr.has_text(formats(lambda t, p, pa: f"{stat_t(t, r['df']).plain()}, {stat_p(p).plain()}, "
                            f"Holm-adjusted {stat_p(pa).plain()}", r["t"], r["p"], r["p_adjusted"]), name)
        lo, hi = (-math.inf if v is None and i == 0 else math.inf if v is None else v
                  for i, v in enumerate(r["ci"]))
        pr.has_text(formats(lambda est, a, b: f"{format_number(est)}, {stat_ci(a, b, 1 - ALPHA).plain()}",
                            r["estimate"], lo, hi), f"{name} estimate")
        pr.has_text(formats(lambda d, a, b: f"{stat_value('d', d).plain()}, {stat_ci(a, b, 1 - ALPHA).plain()}",
                            r["d"], *r["d_ci"]), f"{name} d")
    # post-hoc tables: "a − b" rows with estimate, SE, simultaneous CI, adjusted p
    samples = _pairs_sample(project)
    tukey = stats.tukey_hsd(*samples)
    tci = tukey.confidence_interval(1 - ALPHA)
    for a in range(4):
        for b in range(a + 1, 4):
            w = np.zeros(4)
            w[a], w[b] = 1, -1
            c = ref.contrast(w)
            pr.has_row(f"{LEVELS[a]} − {LEVELS[b]}",
                       [num(c["estimate"]), num(c["se"]), bracket(tci.low[a, b], tci.high[a, b]),
                        formats(format_p_cell, tukey.pvalue[a, b])], "Tukey–Kramer row")
    # assumption checks and the Kruskal–Wallis test
    for label, res in (("Brown", R["bf"]), ("Levene", R["levene"])):
        pr.has_text(formats(lambda s, p: f"{stat_f(s, 3, project.y.size - 4).plain()}, {stat_p(p).plain()}",
                            float(res.statistic), float(res.pvalue)), label)
    sw = R["shapiro"]
    pr.has_text(formats(lambda W, p: f"{stat_value('W', W, 3, leading_zero=False).plain()}, {stat_p(p).plain()}",
                        float(sw.statistic), float(sw.pvalue)), "Shapiro–Wilk")
    kw = R["kruskal"]
    pr.has_text(formats(lambda H, p: f"H(3) = {format_number(H)}, {stat_p(p).plain()}",
                        float(kw.statistic), float(kw.pvalue)), "Kruskal–Wallis")


# ---------------------------------------------------------------------------------------------
# The factorial plan: coefficients of the effects coding, Type III rows, marginal means


@pytest.fixture(scope="module")
def factorial(tmp_path_factory):
    project = toothgrowth()
    hyps = [("supp", "effect", "supp", "planned"), ("dose", "effect", "dose", "planned"),
            ("interaction", "effect", "supp x dose", "planned")]
    out = run(tmp_path_factory.mktemp("factorial"), project, hyps, {"parameterization": "effects"})
    return project, Reference(project), out


def _sum_coded(project):
    """The row-level design of statsmodels/patsy's Sum coding (last level −1), in patsy's column order."""
    import pandas as pd
    from patsy import dmatrix

    frame = pd.DataFrame([dict(zip(("supp", "dose"), project.cells[c])) for c in project.cell])
    X = dmatrix("C(supp, Sum) * C(dose, Sum)", frame, return_type="dataframe")
    return np.asarray(X)


FACTORIAL_C = {
    "supp": np.kron([1, -1], [1, 1, 1]) / 3,
    "dose": np.kron([1, 1], [[1, -1, 0], [0, 1, -1]]) / 2,
    "supp × dose": np.kron([1, -1], [[1, -1, 0], [0, 1, -1]]),
}


def test_factorial_coefficients_and_type_iii_rows(factorial):
    """Effects-coded coefficients and SEs equal statsmodels OLS on patsy's Sum coding; Type III
    rows equal statsmodels ``f_test`` of the unweighted-means contrasts (SS = F·q·MSE)."""
    project, ref, out = factorial
    doc = out.results
    X = _sum_coded(project)
    fit = sm.OLS(project.y, X).fit()
    D = np.unique(X, axis=0, return_index=False)
    cell_rows = np.array([X[np.flatnonzero(project.cell == c)[0]] for c in range(project.k)])
    np.testing.assert_array_equal(np.array(doc["design"]["matrix"], float), cell_rows)
    assert D.shape[0] == project.k
    for j, coef in enumerate(doc["design"]["coefficients"]):
        assert coef["estimate"] == pytest.approx(float(fit.params[j]), rel=1e-10, abs=1e-12)
        assert coef["se"] == pytest.approx(float(fit.bse[j]), rel=1e-10)
    for row in doc["anova"]["rows"]:
        if row["source"] == "residual":
            assert row["ss"] == pytest.approx(float(ref.fit.ssr), rel=1e-10)
            continue
        ft = ref.f_test(FACTORIAL_C[row["source"]])
        assert row["F"] == pytest.approx(ft["F"], rel=1e-10)
        assert row["df"] == ft["df"][0]
        assert row["p"] == pytest.approx(ft["p"], rel=1e-9)
        assert row["ss"] == pytest.approx(ft["F"] * ft["df"][0] * ref.mse, rel=1e-10)


def test_factorial_printed_tables(factorial):
    """The Markdown and HTML ANOVA rows and the marginal-means table print the reference values
    (statsmodels ``f_test`` / ``t_test``; partial η² interval from scipy.stats.ncf)."""
    project, ref, out = factorial
    pr = Printed(out)
    for source, C in FACTORIAL_C.items():
        ft = ref.f_test(C)
        F, (df1, df2) = ft["F"], ft["df"]
        ss = F * df1 * ref.mse
        (lo, hi), _ = eta_interval(F, df1, df2, 0.90)
        pr.has_row(source, [{format_df(df1)}, num(ss), num(ss / df1), num(F), formats(format_p_cell, ft["p"]),
                            bounded(ss / (ss + ref.fit.ssr)), bracket(lo, hi, rule=format_bounded)],
                   f"ANOVA row {source}")
    for factor, levels in project.factors:
        for level in levels:
            w = project.marginal_weights(factor, level)
            tt = ref.fit.t_test(w[None, :])
            low, high = tt.conf_int(alpha=0.05)[0]
            rows_ok = False
            for fmt, rows in pr.rows.items():
                cand = [r for r in rows if r[:2] == [factor, level]]
                assert any(r[2] in num(float(tt.effect[0])) and r[3] in num(float(tt.sd[0, 0]))
                           and r[4] in bracket(float(low), float(high)) for r in cand), (fmt, factor, level, cand)
                rows_ok = True
            assert rows_ok


# ---------------------------------------------------------------------------------------------
# Robust tests confirmatory: the printed interval beside a Welch test is Welch's


@pytest.fixture(scope="module")
def robust_oneway(tmp_path_factory):
    project = simulated([("g", ("a", "b", "c"))], [0.0, 0.7, 1.6], [12, 9, 15], sd=[0.6, 1.5, 3.0], seed=21)
    hyps = [("c over a", "means", "c > a", "planned"), ("b under c", "means", "b < c", "planned")]
    out = run(tmp_path_factory.mktemp("robust"), project, hyps, {"unequal_variances": "always-robust"})
    return project, out


def _welch_reference(project, first, second, alternative):
    """Welch–Satterthwaite t of mean(first) − mean(second): scipy.stats.ttest_ind(equal_var=False)
    and its one-sided 95% bound est ∓ t_{.95, df}·SE (Satterthwaite 1946)."""
    a = project.y[project.cell == first]
    b = project.y[project.cell == second]
    res = stats.ttest_ind(a, b, equal_var=False, alternative=alternative)
    se = math.sqrt(a.var(ddof=1) / a.size + b.var(ddof=1) / b.size)
    est = a.mean() - b.mean()
    q = stats.t.ppf(0.95, res.df)
    ci = (est - q * se, math.inf) if alternative == "greater" else (-math.inf, est + q * se)
    return est, res, ci


ROBUST_CASES = [("c over a", 2, 0, "greater"), ("b under c", 1, 2, "less")]


@pytest.mark.parametrize("name, first, second, alternative", ROBUST_CASES, ids=["greater", "less"])
def test_robust_confirmatory_test_line_and_estimate(robust_oneway, name, first, second, alternative):
    """Under always-robust the confirmatory test line prints Welch's t, df and p, and the estimate
    bullet prints Welch's one-sided bound (scipy.stats.ttest_ind(equal_var=False), reference)."""
    project, out = robust_oneway
    est, res, ci = _welch_reference(project, first, second, alternative)
    pr = Printed(out)
    p_adj = out.hypothesis(name)["p_adjusted"]
    assert out.hypothesis(name)["confirmatory"]["test"] == "robust"
    pr.has_text(formats(lambda t, df, p: f"{stat_t(t, df).plain()}, {stat_p(p).plain()}",
                        float(res.statistic), float(res.df), float(res.pvalue)), f"{name} Welch test")
    pr.has_text(formats(lambda e, lo, hi: f"{format_number(e)}, {stat_ci(lo, hi, 0.95).plain()} (one-sided bound, Welch)",
                        est, *ci), f"{name} Welch estimate")
    holm = multipletests([_welch_reference(project, f, s, a)[1].pvalue for _, f, s, a in ROBUST_CASES],
                         method="holm")[1]
    assert p_adj == pytest.approx(holm[[c[0] for c in ROBUST_CASES].index(name)], rel=1e-8)


@pytest.mark.parametrize("name, first, second, alternative", ROBUST_CASES, ids=["greater", "less"])
def test_results_sentence_prints_the_confirmatory_interval(robust_oneway, name, first, second, alternative):
    """The Results sentence 'Welch–Satterthwaite test, t(df) = …, p = …, Holm-adjusted p = …;
    estimate …, 95% CI […]' carries Welch's interval (scipy.stats.ttest_ind(equal_var=False))."""
    project, out = robust_oneway
    est, res, ci = _welch_reference(project, first, second, alternative)
    p_adj = out.hypothesis(name)["p_adjusted"]
    pr = Printed(out)
    pr.has_text(formats(lambda t, df, p, e, lo, hi: f"{stat_t(t, df).plain()}, {stat_p(p).plain()}, "
                        f"Holm-adjusted {stat_p(p_adj).plain()}; estimate {format_number(e)}, "
                        f"{stat_ci(lo, hi, 0.95).plain()}",
                        float(res.statistic), float(res.df), float(res.pvalue), est, *ci), f"{name} Results sentence")


# ---------------------------------------------------------------------------------------------
# Covariates: the numbers the analysis of covariance adds


COVARIATE_PATHS = ("covariates", "slopes", "adjusted_marginal_means", "assumptions.slopes_homogeneity")
CELL_ADJUSTED = ("adjusted_mean", "adjusted_se", "adjusted_ci")


@pytest.fixture(scope="module")
def ancova(tmp_path_factory):
    import json

    from ancova_project import write_ancova_project
    from refcheck import Run
    from reporter import report

    project = write_ancova_project(tmp_path_factory.mktemp("ancova-printed"))
    rep = report(project.plan)
    return project, Run(rep, json.loads(rep.render("json")))


def test_covariate_numbers_are_checked_and_printed(ancova):
    """Every number of the covariate fields of results.json (covariates, slopes, adjusted cell and
    marginal means, the slopes check, the covariate's ANOVA row) is checked against statsmodels OLS
    (y ~ C(g) + (x − x̄) − 1, and y ~ C(g) * x for the slopes check) or the rows' mean (numpy), and the
    Markdown and HTML print those values in the adjusted-means, slopes and ANOVA tables."""
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    from ancova_project import LEVELS, reference_fit

    project, out = ancova
    doc = out.results
    fit = reference_fit(project)
    ci = fit.conf_int(0.05)
    ledger = Ledger(doc)
    ledger.check(("covariates", 0, "reference"), float(np.mean(project.rows["x"])), rel=1e-12)
    cells = {g: f"C(g)[{g}]" for g in LEVELS}
    for i, g in enumerate(LEVELS):
        ledger.check(("cells", i, "adjusted_mean"), fit.params[cells[g]], rel=1e-9)
        ledger.check(("cells", i, "adjusted_se"), fit.bse[cells[g]], rel=1e-9)
        ledger.check(("cells", i, "adjusted_ci"), list(ci.loc[cells[g]]), rel=1e-9)
        ledger.check(("adjusted_marginal_means", i, "mean"), fit.params[cells[g]], rel=1e-9)
        ledger.check(("adjusted_marginal_means", i, "se"), fit.bse[cells[g]], rel=1e-9)
        ledger.check(("adjusted_marginal_means", i, "ci"), list(ci.loc[cells[g]]), rel=1e-9)
    for key, ref in (("estimate", fit.params["xc"]), ("se", fit.bse["xc"]), ("t", fit.tvalues["xc"]),
                     ("df", fit.df_resid), ("p", fit.pvalues["xc"])):
        ledger.check(("slopes", 0, key), float(ref), rel=1e-9)
    small = smf.ols("y ~ C(g) + x", data=project.rows).fit()
    large = smf.ols("y ~ C(g) * x", data=project.rows).fit()
    cmp = anova_lm(small, large)
    check = ("assumptions", "slopes_homogeneity")
    ledger.check((*check, "F"), float(cmp["F"].iloc[1]), rel=1e-9)
    ledger.check((*check, "p"), float(cmp["Pr(>F)"].iloc[1]), rel=1e-9)
    ledger.check((*check, "df"), [float(cmp["df_diff"].iloc[1]), float(large.df_resid)])
    ledger.check((*check, "ss_error_common"), float(small.ssr), rel=1e-9)
    ledger.check((*check, "ss_error_per_cell"), float(large.ssr), rel=1e-9)
    row = ("anova", "rows", 0)
    assert doc["anova"]["rows"][0]["covariate"] == "pretest"
    F = float(fit.tvalues["xc"]) ** 2
    ledger.check((*row, "df"), 1)
    ledger.check((*row, "F"), F, rel=1e-9)
    ledger.check((*row, "ss"), F * fit.mse_resid, rel=1e-9)
    ledger.check((*row, "ms"), F * fit.mse_resid, rel=1e-9)
    ledger.check((*row, "p"), float(fit.pvalues["xc"]), rel=1e-8)
    unchecked = [p for p in ledger.unchecked()
                 if p.startswith(COVARIATE_PATHS) or any(f".{k}" in p for k in CELL_ADJUSTED)
                 or (p.startswith("anova.rows.0.") and p.split(".")[3] in ("df", "ss", "ms", "F", "p"))]
    assert not unchecked, f"covariate numbers with no reference check: {unchecked}"

    pr = Printed(out)
    for g in LEVELS:
        c = cells[g]
        ys = project.rows.loc[project.rows["g"] == g, "y"]
        pr.has_row(g, [{str(len(ys))}, num(float(ys.mean())), num(fit.params[c]),
                       num(fit.bse[c]), bracket(*ci.loc[c])], f"adjusted mean of {g}")
    pr.has_row("pretest", [num(fit.params["xc"]), num(fit.bse["xc"]), num(fit.tvalues["xc"]),
                           {format_df(fit.df_resid)}, formats(format_p_cell, fit.pvalues["xc"])], "slope")
    pr.has_row("pretest", [{"1"}, num(F * fit.mse_resid), num(F * fit.mse_resid), num(F),
                           formats(format_p_cell, fit.pvalues["xc"])], "ANOVA covariate row")
    pr.has_text(formats(lambda F, p: f"{stat_f(F, int(cmp['df_diff'].iloc[1]), int(large.df_resid)).plain()}, "
                                     f"{stat_p(p).plain()}", float(cmp["F"].iloc[1]), float(cmp["Pr(>F)"].iloc[1])),
                "slopes check")
    pr.has_text(num(float(np.mean(project.rows["x"]))), "reference value")
