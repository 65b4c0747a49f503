"""Every number in results.json under y -> y + 1e9 and y -> 1000 y (text data, three decimals).

A between-subjects analysis is equivariant under an affine change of the outcome: statistics,
p values, degrees of freedom and effect sizes do not change; a location (a mean, a coefficient,
an interval end of a mean) moves with the shift (by 1e9 times the sum of its weights over the cell
means) and scales; spreads (SDs, SEs, differences of means) only scale; sums of squares scale
with the square. This is a mathematical identity (the invariance of the F and t statistics under
affine transformations; e.g. Lehmann & Romano (2005), *Testing Statistical Hypotheses*, 3rd ed.,
section 6.2), so it needs no reference library: any digit lost to the offset shows up here.

Each run goes through the public path (``reporter.report``) with the data written as text, so the
exact decimal intake and its pivot are exercised. Every numeric leaf of results.json must have a
rule below: a new field fails the test until it is classified.
"""

from __future__ import annotations

import json
import math
import re
import textwrap
from decimal import Decimal
from pathlib import Path

import pytest

import reporter

DEMO = Path(__file__).parents[1] / "demo_project"
SHIFT = Decimal(10) ** 9
SCALE = Decimal(1000)

ONEWAY_PLAN = """
title = "Offset and scale check, one factor"
[data]
path = "data.csv"
outcome = "recalled"
[[factors]]
name = "schedule"
levels = ["none", "massed", "spaced-short", "spaced-long"]
[analysis]
alpha = 0.05
coding = "cell-means"
unequal_variances = "always-robust"
follow_up = ["all-pairs-tukey", "versus-control-dunnett", "all-contrasts-scheffe"]
follow_up_control = "none"
permutations = 300
[[hypotheses]]
name = "long beats massed"
means = "`spaced-long` > massed"
[[hypotheses]]
name = "spacing on average"
means = "(`spaced-short` + `spaced-long`)/2 > massed"
[[hypotheses]]
name = "schedules differ"
effect = "schedule"
[[hypotheses]]
name = "short below long"
means = "`spaced-short` < `spaced-long`"
role = "exploratory"
[[hypotheses]]
name = "two equalities"
means = "none = massed = `spaced-short`"
role = "exploratory"
"""

FACTORIAL_PLAN = """
title = "Offset and scale check, two factors"
[data]
path = "data.csv"
outcome = "recalled"
[[factors]]
name = "schedule"
levels = ["massed", "spaced"]
[[factors]]
name = "feedback"
levels = ["none", "delayed", "immediate"]
[analysis]
alpha = 0.05
coding = "sum-to-zero"
unequal_variances = "classical"
follow_up = ["all-pairs-tukey", "versus-control-dunnett", "all-contrasts-scheffe"]
follow_up_compares = "feedback"
follow_up_control = "none"
permutations = 300
[[hypotheses]]
name = "schedules differ"
effect = "schedule"
[[hypotheses]]
name = "interaction"
effect = "schedule x feedback"
[[hypotheses]]
name = "spacing with immediate feedback"
means = "mean(schedule=spaced, feedback=immediate) > mean(schedule=massed, feedback=immediate)"
[[hypotheses]]
name = "any feedback beats none"
means = "(delayed + immediate)/2 > none"
role = "exploratory"
"""

CASES = {
    "one-way": (ONEWAY_PLAN, "recall_oneway.csv"),
    "factorial": (FACTORIAL_PLAN, "recall_factorial.csv"),
}

# Rules by path (list indices written as *). "free": unchanged; "loc": a location; "spread":
# scales by 1000; "square": scales by 1000^2. Paths not listed fail the test.
RULES = [
    (r"/cells/\*/(mean|ci/\*|ci_pooled/\*)", "loc"),
    (r"/design/coefficients/\*/estimate", "loc"),
    (r"/hypotheses/\*/(estimate|ci/\*|robust/estimate|robust/ci/\*)", "loc"),
    (r"/(anova/residual_sd|cells/\*/(sd|se)|design/coefficients/\*/se|hypotheses/\*/se)", "spread"),
    (r"/follow_up/\*/comparisons/\*/(difference|se|ci/\*)", "spread"),
    (r"/games_howell/comparisons/\*/(difference|se|ci/\*)", "spread"),
    (r"/assumptions/outliers/rows/\*/residual", "spread"),
    (r"/(anova/rows/\*/(ss|ms)|anova/total/ss|hypotheses/\*/ss)", "square"),
    (r"/analysis/.*|/data/.*|/design/(matrix|coefficients/\*/weights)/.*", "free"),
    (r"/cells/\*/n|/anova/(r_squared|total/df)|/anova/rows/\*/(F|p|df|effect_sizes/.*|permutation/.*"
     r"|robust/.*|sensitivity/.*)", "free"),
    (r"/hypotheses/\*/(df/\*|statistic|p|p_adjusted|ci_level|ci_sides|confirmatory/p|contrast/.*"
     r"|effect_sizes?/.*|permutation/.*|robust/(df/\*|p|statistic))", "free"),
    (r"/assumptions/(brown_forsythe|levene|shapiro_wilk|qq)/.*|/assumptions/outliers/(threshold|total|listed|rows/\*/"
     r"(row|studentized))", "free"),
    (r"/outlier_sensitivity/.*|/robust/.*", "free"),
    (r"/follow_up/\*/(alpha|comparisons/\*/(df|p_adjusted|statistic))", "free"),
    (r"/games_howell/(alpha|comparisons/\*/(df|p_adjusted|statistic))", "free"),
    (r"/provenance/(rows/.*|randomness/.*)", "free"),
    # the data file's size: the transformed values are written with more or fewer characters
    (r"/provenance/data_bytes", "input"),
]


def _rule(path: str) -> str:
    generic = re.sub(r"/\d+", "/*", path)
    for pattern, rule in RULES:
        if re.fullmatch(pattern, generic):
            return rule
    raise AssertionError(
        f"results.json has a number at {path} that no offset/scale rule covers; add it to RULES in "
        "tests/test_offset_scale.py (is it a location, a spread, a square, or scale-free?)"
    )


def _leaves(x, path=""):
    if isinstance(x, dict):
        for k, v in x.items():
            yield from _leaves(v, f"{path}/{k}")
    elif isinstance(x, list):
        for i, v in enumerate(x):
            yield from _leaves(v, f"{path}/{i}")
    elif isinstance(x, (int, float)) and not isinstance(x, bool):
        yield path, x


def _location_weight(doc: dict, path: str) -> float:
    """The sum of the weights over cell means of the location at ``path`` (1 for a cell)."""
    parts = path.strip("/").split("/")
    if parts[0] == "cells":
        return 1.0
    if parts[0] == "design":
        return math.fsum(doc["design"]["coefficients"][int(parts[2])]["weights"])
    return math.fsum(doc["hypotheses"][int(parts[1])]["contrast"]["cells"][0])


def _run(tmp_path: Path, case: str, transform, tag: str) -> dict:
    plan_text, csv_name = CASES[case]
    folder = tmp_path / f"{case}-{tag}"
    folder.mkdir()
    lines = (DEMO / csv_name).read_text(encoding="utf-8").splitlines()
    column = lines[0].split(",").index("recalled")
    out = [lines[0]]
    for line in lines[1:]:
        cells = line.split(",")
        cells[column] = f"{transform(Decimal(cells[column])):.3f}"
        out.append(",".join(cells))
    (folder / "data.csv").write_text("\n".join(out) + "\n", encoding="utf-8")
    plan = folder / "plan.toml"
    plan.write_text(textwrap.dedent(plan_text).lstrip(), encoding="utf-8")
    return json.loads(reporter.report(plan).render("json"))


def _ulp_slack(x: float) -> float:
    return 4.0 * math.ulp(max(abs(x), 1.0))


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("offset-scale")
    out = {}
    for case in CASES:
        out[case] = (
            _run(tmp, case, lambda v: v, "base"),
            _run(tmp, case, lambda v: v + SHIFT, "shift"),
            _run(tmp, case, lambda v: v * SCALE, "scale"),
        )
    return out


@pytest.mark.parametrize("case", list(CASES))
def test_every_number_is_equivariant_under_offset_and_scale(runs, case):
    base, shifted, scaled = runs[case]
    base_leaves = dict(_leaves(base))
    shifted_leaves = dict(_leaves(shifted))
    scaled_leaves = dict(_leaves(scaled))
    assert base_leaves.keys() == shifted_leaves.keys() == scaled_leaves.keys()
    residual_sd = base["anova"]["residual_sd"]
    failures = []
    for path, x in base_leaves.items():
        rule = _rule(path)
        if rule == "input":  # describes the input file, not a statistic
            continue
        xs, xm = shifted_leaves[path], scaled_leaves[path]
        if rule == "loc":
            move = 1e9 * _location_weight(base, path)
            ok_shift = abs(xs - (x + move)) <= _ulp_slack(x + move) + 1e-10 * abs(x)
            ok_scale = math.isclose(xm, 1000 * x, rel_tol=1e-10, abs_tol=1e-9 * residual_sd * 1000)
        else:
            factor = {"free": 1.0, "spread": 1000.0, "square": 1e6}[rule]
            floor = {"free": 1e-300, "spread": 1e-12 * residual_sd, "square": 1e-12 * residual_sd**2}[rule]
            ok_shift = math.isclose(xs, x, rel_tol=1e-10, abs_tol=floor)
            ok_scale = math.isclose(xm, factor * x, rel_tol=1e-10, abs_tol=floor * factor)
        if not (ok_shift and ok_scale):
            failures.append(f"{path} ({rule}): base {x!r}, +1e9 {xs!r}, x1000 {xm!r}")
    assert not failures, "\n".join(failures)


def test_the_shifted_runs_hold_large_locations(runs):
    """The shifted data really are near 1e9 (the check above is not vacuous)."""
    for base, shifted, _ in runs.values():
        assert shifted["cells"][0]["mean"] == pytest.approx(base["cells"][0]["mean"] + 1e9, rel=1e-15)
