"""from_statsmodels gives the ANOVA table and the hypothesis tests of `anova-report run`, and the
tables of statsmodels' anova_lm on the same fit, for fits made with treatment, sum and default coding.

Sources of the checks:
* `anova-report run` on the demo plans (demo_project/*.toml, simulated data from a seeded script)
  and on a plan written here for the published dataset;
* statsmodels (reference library): ``anova_lm(fit, typ=1 | 2)`` on the user's fit, and
  ``typ=3`` on the same model refitted with sum coding (Type III sums of squares of unweighted
  means need sum-to-zero coding in anova_lm); ``fit.ssr`` and ``fit.params``;
* ToothGrowth: Crampton, E. W. (1947), The Journal of Nutrition 33(5), 491-504, data as given in
  Bliss, C. I. (1952), The Statistics of Bioassay, Academic Press (tests/data/README.md).
"""

from __future__ import annotations

import json
import math
import re
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm

import reporter
from reporter.cli import main
from reporter.intake.canonical import plan_mapping
from reporter.intake.plan import load_plan

DEMO = Path(__file__).resolve().parents[1] / "demo_project"
DATA = Path(__file__).resolve().parent / "data"
SS_TYPES = {"type-I": 1, "type-II": 2, "type-III": 3}
REL = 1e-9  # one tolerance for every number compared here


def _sum_coded(formula: str) -> str:
    """The same model with every factor in sum-to-zero coding (for anova_lm's Type III)."""
    rhs = formula.split("~", 1)[1]
    names = [n.strip() for n in re.split(r"\*", rhs)]
    bare = [re.sub(r"^C\(\s*([^,)]+).*\)$", r"\1", n) for n in names]
    return formula.split("~", 1)[0] + "~ " + " * ".join(f"C({b}, Sum)" for b in bare)


def _hypotheses(plan) -> dict:
    """The plan's hypotheses as from_statsmodels takes them (name -> keys of the table)."""
    out: dict = {}
    for h in plan.hypotheses:
        table = {"effect": h.effect} if h.effect is not None else {"means": h.means}
        out[h.name] = {**table, "role": h.role}
    return out


def _options(plan, sums_of_squares: str) -> dict:
    """The plan's [analysis] options as keyword arguments, the coding left to the fit."""
    options = dict(plan_mapping(plan)["analysis"])
    options.pop("coding")
    options["sums_of_squares"] = sums_of_squares
    return options


def _run(plan_path: Path, tmp_path: Path, sums_of_squares: str) -> dict:
    """results.json of `anova-report run` on a copy of the plan with the given sums of squares."""
    folder = tmp_path / f"run-{sums_of_squares}"
    folder.mkdir()
    text = plan_path.read_text(encoding="utf-8")
    text = re.sub(r'sums_of_squares = "[^"]*"', f'sums_of_squares = "{sums_of_squares}"', text)
    data = load_plan(plan_path).data.path
    shutil.copy(data, folder / Path(data).name)
    (folder / "plan.toml").write_text(text, encoding="utf-8")
    assert main(["run", str(folder / "plan.toml"), "--out", str(folder / "out"), "--format", "json", "--quiet"]) == 0
    return json.loads((folder / "out" / "results.json").read_text(encoding="utf-8"))


def _close(a, b) -> bool:
    if a is None or b is None:
        return a is b
    return math.isclose(a, b, rel_tol=REL, abs_tol=1e-12)


def _same_anova(ours: dict, theirs: dict) -> None:
    assert ours["sums_of_squares"] == theirs["sums_of_squares"]
    assert [r["source"] for r in ours["rows"]] == [r["source"] for r in theirs["rows"]]
    for a, b in zip(ours["rows"], theirs["rows"]):
        for key in ("df", "ss", "ms", "F", "p"):
            if key in b:
                assert _close(a[key], b[key]), (a["source"], key, a[key], b[key])


def _same_hypotheses(ours: list, theirs: list) -> None:
    by_name = {h["name"]: h for h in ours}
    assert set(by_name) == {h["name"] for h in theirs}
    for b in theirs:
        a = by_name[b["name"]]
        assert a["test"] == b["test"] and a["df"] == b["df"], b["name"]
        for key in ("statistic", "p", "p_adjusted", "estimate"):
            if key in b:
                assert _close(a[key], b[key]), (b["name"], key)
        if b.get("ci") is not None:
            assert all(_close(x, y) for x, y in zip(a["ci"], b["ci"])), b["name"]


def _same_as_anova_lm(report, fit, frame, formula, typ: int) -> None:
    """Each effect row equals anova_lm's (Type III on the sum-coded refit of the same rows)."""
    ref_fit = fit if typ != 3 else smf.ols(_sum_coded(formula), frame).fit()
    table = anova_lm(ref_fit, typ=typ)
    table = table.drop(index=[i for i in table.index if i in ("Intercept", "Residual")])
    rows = report.analysis.anova.rows
    assert len(rows) == len(table)
    for row, (_, ref) in zip(rows, table.iterrows()):
        assert row.df == ref["df"]
        assert math.isclose(row.ss, ref["sum_sq"], rel_tol=REL)
        assert math.isclose(row.F, ref["F"], rel_tol=REL)
        assert math.isclose(row.p, ref["PR(>F)"], rel_tol=1e-7)
    assert math.isclose(report.analysis.anova.ss_error, fit.ssr, rel_tol=1e-8)


DEMO_FITS = {
    "oneway": ("oneway.toml", {
        "treatment": "recalled ~ C(schedule)",
        "sum": "recalled ~ C(schedule, Sum)",
        "default": "recalled ~ schedule",
    }),
    "factorial": ("factorial.toml", {
        "treatment": "recalled ~ C(schedule) * C(feedback)",
        "sum": "recalled ~ C(schedule, Sum) * C(feedback, Sum)",
        "default": "recalled ~ schedule * feedback",
    }),
}
CASES = [(demo, coding, ss) for demo in DEMO_FITS for coding in ("treatment", "sum", "default") for ss in SS_TYPES]


@pytest.mark.parametrize("demo, coding, ss", CASES, ids=[f"{d}-{c}-{s}" for d, c, s in CASES])
def test_demo_matches_run_and_anova_lm(tmp_path, monkeypatch, demo, coding, ss):
    """Demo data (simulated, seeded): the ANOVA table and every hypothesis test equal those of
    `anova-report run` on the demo plan, and the table equals statsmodels anova_lm."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    plan_file, formulas = DEMO_FITS[demo]
    plan = load_plan(DEMO / plan_file)
    frame = pd.read_csv(plan.data.path)
    fit = smf.ols(formulas[coding], frame).fit()
    report = reporter.from_statsmodels(fit, hypotheses=_hypotheses(plan), **_options(plan, ss))
    ours = json.loads(report.render("json"))
    theirs = _run(DEMO / plan_file, tmp_path, ss)
    _same_anova(ours["anova"], theirs["anova"])
    _same_hypotheses(ours["hypotheses"], theirs["hypotheses"])
    _same_as_anova_lm(report, fit, frame, formulas[coding], SS_TYPES[ss])


# ToothGrowth (Crampton 1947; Bliss 1952): 2 supplements x 3 doses, 10 per cell. Five outcomes
# are made missing (fixed rows) so that the fit drops them and Types I, II and III differ.
TOOTH_MISSING = (3, 17, 24, 25, 51)
TOOTH_FITS = {
    "treatment": "len ~ C(supp) * C(dose)",
    "sum": "len ~ C(supp, Sum) * C(dose, Sum)",
    "default": "len ~ supp * C(dose)",
}
TOOTH_PLAN = """
title = "Odontoblast length by supplement and dose"
[data]
path = "tooth.csv"
outcome = "len"
[[factors]]
name = "supp"
levels = ["OJ", "VC"]
[[factors]]
name = "dose"
levels = ["0.5", "1.0", "2.0"]
[analysis]
sums_of_squares = "{ss}"
permutations = 200
[[hypotheses]]
name = "supp"
effect = "supp"
[[hypotheses]]
name = "dose"
effect = "dose"
[[hypotheses]]
name = "supp x dose"
effect = "supp x dose"
[[hypotheses]]
name = "orange juice beats ascorbic acid at the lowest dose"
means = "mean(supp=OJ, dose=0.5) > mean(supp=VC, dose=0.5)"
"""


def _tooth() -> pd.DataFrame:
    frame = pd.read_csv(DATA / "ToothGrowth.csv")
    frame.loc[list(TOOTH_MISSING), "len"] = np.nan
    return frame


TOOTH_CASES = [(c, ss) for c in TOOTH_FITS for ss in SS_TYPES]


@pytest.mark.parametrize("coding, ss", TOOTH_CASES, ids=[f"{c}-{s}" for c, s in TOOTH_CASES])
def test_tooth_growth_matches_run_and_anova_lm(tmp_path, monkeypatch, coding, ss):
    """ToothGrowth (Crampton 1947, data of Bliss 1952) with five outcomes missing: the fit's rows
    are the rows used; table and tests equal `anova-report run` on the same CSV and anova_lm."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    frame = _tooth()
    fit = smf.ols(TOOTH_FITS[coding], frame).fit()
    assert fit.nobs == 55
    plan_text = TOOTH_PLAN.replace("{ss}", ss)
    (tmp_path / "tooth.csv").write_text(frame.to_csv(index=False), encoding="utf-8")
    (tmp_path / "plan.toml").write_text(plan_text, encoding="utf-8")
    plan = load_plan(tmp_path / "plan.toml")
    report = reporter.from_statsmodels(fit, hypotheses=_hypotheses(plan), **_options(plan, ss))
    assert report.analysis.cells.n_total == 55
    ours = json.loads(report.render("json"))
    assert main(["run", str(tmp_path / "plan.toml"), "--out", str(tmp_path / "out"), "--format", "json", "--quiet"]) == 0
    theirs = json.loads((tmp_path / "out" / "results.json").read_text(encoding="utf-8"))
    _same_anova(ours["anova"], theirs["anova"])
    _same_hypotheses(ours["hypotheses"], theirs["hypotheses"])
    _same_as_anova_lm(report, fit, frame, TOOTH_FITS[coding], SS_TYPES[ss])


def test_tooth_growth_published_values():
    """All 60 rows of ToothGrowth: supp F(1, 54) = 15.57, dose F(2, 54) = 92.00, supp x dose
    F(2, 54) = 4.11 (values from memory of published analyses, to the printed digits;
    tests/data/README.md), the binding check being anova_lm on the same fit."""
    frame = pd.read_csv(DATA / "ToothGrowth.csv")
    fit = smf.ols("len ~ C(supp) * C(dose)", frame).fit()
    report = reporter.from_statsmodels(fit, permutations=200)
    rows = report.analysis.anova.rows
    assert [round(r.F, 2) for r in rows] == [15.57, 92.00, 4.11]
    assert [r.df for r in rows] == [1, 2, 2] and report.analysis.anova.df_error == 54
    _same_as_anova_lm(report, fit, frame, "len ~ C(supp) * C(dose)", 3)
