"""Helpers for end-to-end checks of results.json against reference libraries.

A project (plan + CSV) is written to a temporary folder and run through the public path,
``reporter.report(plan_path)``; the numbers in its results.json, Markdown and HTML are then
compared with values computed here from the same rows by statsmodels and scipy.

Every reference below is computed from the raw rows, never from the project's own results:

* contrasts: statsmodels OLS on the cell-means (one-hot) row-level model, ``t_test`` /
  ``f_test`` / ``conf_int``; one-sided bounds and p values with ``scipy.stats.t``;
* noncentral intervals: ``scipy.optimize.brentq`` on ``scipy.stats.nct`` / ``scipy.stats.ncf``;
* Hedges' J: the gamma-function formula of Hedges (1981), J = Γ(m/2) / (√(m/2) Γ((m−1)/2)).

Plan keys are written in one place (:func:`write_project`), so a renamed key changes one line.
"""

from __future__ import annotations

import itertools
import json
import math
import os
import re
import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import statsmodels.api as sm
from scipy import optimize, special, stats

import reporter

DATA_DIR = Path(__file__).parent / "data"

def report_scope(fixture_name, config) -> str:
    """Scope of a fixture that builds a report: the module normally; each test under a mutation
    run (mutmut), whose map of which test calls which function would otherwise credit a shared
    report only to the first test that built it."""
    under_mutation = "mutmut" in sys.modules or "MUTANT_UNDER_TEST" in os.environ
    return "function" if under_mutation else "module"


# Plan keys of the [analysis] table, in one place.
ANALYSIS_KEYS = {
    "alpha": "alpha",
    "correction": "correction",
    "unequal_variances": "unequal_variances",
    "posthoc": "follow_up",
    "posthoc_on": "follow_up_compares",
    "control": "follow_up_control",
    "ss_type": "sums_of_squares",
    "parameterization": "coding",
    "permutations": "permutations",
}
# Values of the follow-up families, as the plan and results.json spell them.
FAMILY_VALUES = {"tukey": "all-pairs-tukey", "dunnett": "versus-control-dunnett", "scheffe": "all-contrasts-scheffe"}
# Values of the coding, as the plan spells them.
CODING_VALUES = {"cell-means": "cell-means", "effects": "sum-to-zero", "reference": "reference-level"}


def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    return json.dumps(str(value))


@dataclass(frozen=True)
class Project:
    """A design (factors and levels), rows (one cell index and one outcome text per row)."""

    factors: tuple[tuple[str, tuple[str, ...]], ...]
    cell: np.ndarray  # cell index of each row, row-major (first factor slowest)
    text: tuple[str, ...]  # the outcome as written to the CSV

    @property
    def y(self) -> np.ndarray:
        return np.array([float(t) for t in self.text])

    @property
    def cells(self) -> list[tuple[str, ...]]:
        return list(itertools.product(*(levels for _, levels in self.factors)))

    @property
    def k(self) -> int:
        return len(self.cells)

    def cell_of(self, **levels) -> int:
        key = tuple(levels[name] for name, _ in self.factors)
        return self.cells.index(key)

    def marginal_weights(self, factor: str, level: str) -> np.ndarray:
        """Weights over the cells of the unweighted mean of the cells at factor = level."""
        pos = [name for name, _ in self.factors].index(factor)
        w = np.array([1.0 if c[pos] == level else 0.0 for c in self.cells])
        return w / w.sum()


def make_project(factors, groups: dict, decimals: int = 2) -> Project:
    """``groups`` maps a cell (tuple of levels, or a level for one factor) to its values."""
    factors = tuple((name, tuple(levels)) for name, levels in factors)
    cells = list(itertools.product(*(levels for _, levels in factors)))
    cell, text = [], []
    for key, values in groups.items():
        key = key if isinstance(key, tuple) else (key,)
        for v in values:
            cell.append(cells.index(key))
            text.append(f"{v:.{decimals}f}" if isinstance(v, float) else str(v))
    return Project(factors, np.array(cell), tuple(text))


def simulated(factors, means, sizes, sd=1.0, seed=0, decimals=2) -> Project:
    """Seeded normal data: ``means`` and ``sizes`` per cell (row-major order), ``sd`` scalar or per cell."""
    rng = np.random.default_rng(seed)
    factors = tuple((name, tuple(levels)) for name, levels in factors)
    cells = list(itertools.product(*(levels for _, levels in factors)))
    sds = np.broadcast_to(np.asarray(sd, float), (len(cells),))
    groups = {}
    for key, m, n, s in zip(cells, means, sizes, sds):
        groups[key] = [round(float(v), decimals) for v in rng.normal(m, s, n)]
    return make_project(factors, groups, decimals)


def write_project(tmp_path: Path, project: Project, hypotheses, analysis=None, title="Reference check") -> Path:
    """Write data.csv and plan.toml; ``hypotheses`` are (name, kind, text, role) tuples."""
    names = [name for name, _ in project.factors]
    lines = [",".join(["y", *names])]
    cells = project.cells
    for c, t in zip(project.cell, project.text):
        lines.append(",".join([t, *cells[c]]))
    (tmp_path / "data.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    plan = [f"title = {json.dumps(title)}", "[data]", 'path = "data.csv"', 'outcome = "y"']
    for name, levels in project.factors:
        plan += ["[[factors]]", f"name = {json.dumps(name)}", f"levels = {_toml_value(list(levels))}"]
    plan.append("[analysis]")
    options = {"permutations": 0, **(analysis or {})}
    for key, value in options.items():
        if value is None:
            continue
        if key == "parameterization":
            value = CODING_VALUES[value]
        plan.append(f"{ANALYSIS_KEYS[key]} = {_toml_value(value)}")
    for name, kind, statement, role in hypotheses:
        plan += ["[[hypotheses]]", f"name = {json.dumps(name)}", f"{kind} = {json.dumps(statement)}",
                 f"role = {json.dumps(role)}"]
    path = tmp_path / "plan.toml"
    path.write_text("\n".join(plan) + "\n", encoding="utf-8")
    return path


@dataclass(frozen=True)
class Run:
    report: object
    results: dict

    def markdown(self) -> str:
        return self.report.render("md").decode("utf-8")

    def html(self) -> str:
        return self.report.render("html").decode("utf-8")

    def hypothesis(self, name: str) -> dict:
        (h,) = [h for h in self.results["hypotheses"] if h["name"] == name]
        return h


def run(tmp_path: Path, project: Project, hypotheses, analysis=None) -> Run:
    """Run the plan through ``reporter.report`` and parse its results.json."""
    path = write_project(tmp_path, project, hypotheses, analysis)
    rep = reporter.report(path)
    return Run(rep, json.loads(rep.render("json")))


def toothgrowth(drop=(0, 1, 2, 11, 25, 40, 41, 55)):
    """ToothGrowth (Crampton 1947, via R's datasets; tests/data/README.md), rows dropped to unbalance."""

    df = pd.read_csv(DATA_DIR / "ToothGrowth.csv").drop(index=list(drop))
    groups = {}
    for (s, d), part in df.groupby(["supp", "dose"], sort=False):
        groups[(s, f"{d:.1f}")] = [f"{v:g}" for v in part["len"]]
    factors = [("supp", ("OJ", "VC")), ("dose", ("0.5", "1.0", "2.0"))]
    groups = {key: groups[key] for key in [(s, d) for s in ("OJ", "VC") for d in ("0.5", "1.0", "2.0")]}
    return make_project(factors, groups)


def plantgrowth() -> Project:
    """PlantGrowth (Dobson 1983, via R's datasets; tests/data/README.md) as a one-way project."""

    df = pd.read_csv(DATA_DIR / "PlantGrowth.csv")
    groups = {g: [f"{v:g}" for v in df.weight[df.group == g]] for g in ("ctrl", "trt1", "trt2")}
    return make_project([("group", ("ctrl", "trt1", "trt2"))], groups)


# ---------------------------------------------------------------------------------------------
# Reference computations (statsmodels / scipy)


class Reference:
    """The cell-means OLS model of a project, fitted by statsmodels on the rows."""

    def __init__(self, project: Project):
        self.project = project
        self.X = np.eye(project.k)[project.cell]
        self.fit = sm.OLS(project.y, self.X).fit()
        self.df = float(self.fit.df_resid)
        self.mse = float(self.fit.mse_resid)

    def contrast(self, w, h: float = 0.0, alternative: str = "two-sided", alpha: float = 0.05) -> dict:
        """Estimate c'μ, SE, t, p and interval of H: c'μ = h, the way a textbook states them.

        Two-sided: statsmodels ``t_test`` p and ``conf_int(alpha)`` (quantile 1 − α/2).
        One-sided: p = P(T > t) for "greater", P(T < t) for "less" (scipy.stats.t), and the
        bound estimate ∓ t_{1−α} · SE with t_{1−α} = scipy.stats.t.ppf(1 − α, df).
        """
        w = np.asarray(w, float)
        tt = self.fit.t_test((w[None, :], np.array([h])))
        est = float(tt.effect[0])
        se = float(tt.sd[0, 0])
        t = float(tt.tvalue[0, 0])
        if alternative == "two-sided":
            p = float(tt.pvalue)
            low, high = (float(v) for v in tt.conf_int(alpha=alpha)[0])
        else:
            q = stats.t.ppf(1 - alpha, self.df)
            if alternative == "greater":
                p = float(stats.t.sf(t, self.df))
                low, high = est - q * se, None
            else:
                p = float(stats.t.cdf(t, self.df))
                low, high = None, est + q * se
        return {"estimate": est, "se": se, "t": t, "df": self.df, "p": p, "ci": (low, high)}

    def f_test(self, C, h=None) -> dict:
        C = np.atleast_2d(np.asarray(C, float))
        h = np.zeros(C.shape[0]) if h is None else np.asarray(h, float)
        ft = self.fit.f_test((C, h))
        return {"F": float(ft.fvalue), "df": (float(ft.df_num), float(ft.df_denom)), "p": float(ft.pvalue)}

    def cell_interval(self, c: int, alpha: float = 0.05):
        """The cell's own t interval: scipy.stats.t.interval on n − 1 df with SE = SD/√n."""
        y = self.project.y[self.project.cell == c]
        n = y.size
        return stats.t.interval(1 - alpha, n - 1, loc=y.mean(), scale=y.std(ddof=1) / math.sqrt(n))


def hedges_j(df: float) -> float:
    """Hedges (1981), Journal of Educational Statistics 6(2), 107-128, eq. 6b: the exact J."""
    return math.exp(special.gammaln(df / 2) - 0.5 * math.log(df / 2) - special.gammaln((df - 1) / 2))


def nct_interval(t: float, df: float, level: float, alternative: str = "two-sided"):
    """Noncentrality bounds of an observed t: roots of scipy.stats.nct.cdf(t; df, δ) = target."""

    def root(target):
        f = lambda delta: stats.nct.cdf(t, df, delta) - target  # noqa: E731
        step = 1.0
        while not (f(t - step) > 0 > f(t + step)):  # the cdf falls as δ grows
            step *= 1.5
        return optimize.brentq(f, t - step, t + step, xtol=1e-14, rtol=1e-14, maxiter=500)

    if alternative == "two-sided":
        a = (1 - level) / 2
        return root(1 - a), root(a)
    if alternative == "greater":
        return root(level), math.inf
    return -math.inf, root(1 - level)


def ncf_interval(F: float, df1: float, df2: float, level: float):
    """Noncentrality bounds of an observed F (Steiger 2004): roots of scipy.stats.ncf.cdf = 1 − a, a;
    a bound where even λ = 0 leaves the cdf at or below its target is 0."""
    a = (1 - level) / 2

    def root(target):
        if stats.f.cdf(F, df1, df2) <= target:
            return 0.0
        f = lambda lam: stats.ncf.cdf(F, df1, df2, lam) - target  # noqa: E731
        hi = 10.0
        while f(hi) > 0:
            hi *= 2
        return optimize.brentq(f, 1e-300, hi, xtol=1e-14, rtol=1e-14, maxiter=500)

    return root(1 - a), root(a)


def standardized_contrast(ref: Reference, w, h: float, alternative: str, level: float) -> dict:
    """d = s(c'ȳ − h)/√MSE with s = 1/Σ(positive weights), its noncentral-t interval and g = J·d."""
    w = np.asarray(w, float)
    s = 1.0 / w[w > 0].sum()
    c = ref.contrast(w, h)
    n = np.bincount(ref.project.cell, minlength=ref.project.k)
    used = w != 0
    spread = math.sqrt(float(np.sum((s * w[used]) ** 2 / n[used])))
    d = s * (c["estimate"] - h) / math.sqrt(ref.mse)
    lo, hi = nct_interval(d / spread, ref.df, level, alternative)
    return {"d": d, "ci": (lo * spread, hi * spread), "g": hedges_j(ref.df) * d}


def eta_interval(F: float, df1: float, df2: float, level: float):
    """Partial η² and Cohen's f bounds from the noncentral F (Steiger 2004, λ/(λ + df1 + df2 + 1))."""
    lo, hi = ncf_interval(F, df1, df2, level)
    m = df1 + df2 + 1
    return (lo / (lo + m), hi / (hi + m)), (math.sqrt(lo / m), math.sqrt(hi / m))


# ---------------------------------------------------------------------------------------------
# Comparing


def close(got, expected, rel=1e-10, abs_=1e-12) -> bool:
    if expected is None or (isinstance(expected, float) and math.isinf(expected)):
        return got is None or got == expected
    return got is not None and math.isclose(got, expected, rel_tol=rel, abs_tol=abs_)


def assert_close(got, expected, what: str, rel=1e-10, abs_=1e-12):
    assert close(got, expected, rel, abs_), f"{what}: got {got!r}, expected {expected!r} (rel {rel:g})"


def oriented(weights_json, w):
    """+1 when results.json's contrast row is ``w``, −1 when it is ``−w`` (a < b written as b − a > 0)."""
    got = np.asarray(weights_json, float)
    w = np.asarray(w, float)
    if np.allclose(got, w, rtol=0, atol=1e-12):
        return 1
    if np.allclose(got, -w, rtol=0, atol=1e-12):
        return -1
    raise AssertionError(f"contrast weights {got.tolist()} are neither {w.tolist()} nor their negative")


FLIP = {"greater": "less", "less": "greater", "two-sided": "two-sided"}


def plain_markdown(md: str) -> str:
    """Markdown text without emphasis markers and backslash escapes, for comparing printed values."""
    return re.sub(r"\\(.)", r"\1", md).replace("*", "")


def plain_html(html: str) -> str:
    """HTML text without tags, entities decoded, whitespace collapsed."""
    import html as html_lib

    body = re.sub(r"<(script|style)\b.*?</\1>", " ", html, flags=re.S)
    body = re.sub(r"<[^>]+>", "", body)
    return re.sub(r"\s+", " ", html_lib.unescape(body))
