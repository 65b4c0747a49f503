"""The [[covariates]] tables of a plan: defaults, exact reference values, every refusal with its
key path, line, rule, value and fix, the canonical mapping, and analyze(covariates=...)."""

from __future__ import annotations

from fractions import Fraction

import pytest

from conftest import ONEWAY_DATA, ONEWAY_PLAN
from reporter.errors import PlanError
from reporter.intake import defaults as D
from reporter.intake.canonical import plan_mapping, plan_toml
from reporter.intake.plan import CovariateSpec, load_plan, plan_from_dict

MINIMAL = {"title": "t", "data": {"path": "d.csv", "outcome": "y"}, "factors": [{"name": "g", "levels": ["a", "b"]}]}


def _plan(*covariates, **data):
    return plan_from_dict({**MINIMAL, "data": {**MINIMAL["data"], **data}, "covariates": list(covariates)})


def test_no_covariates_by_default():
    plan = plan_from_dict(MINIMAL)
    assert plan.covariates == ()
    assert "covariates" not in plan_mapping(plan)  # plans and locks without covariates keep their mapping


def test_defaults_and_exact_reference_values():
    plan = _plan({"name": "pre"}, {"name": "age", "adjust_to": 40, "slopes": "per-cell", "description": "years"},
                 {"name": "dose0", "adjust_to": 0.1})
    pre, age, dose0 = plan.covariates
    assert pre == CovariateSpec("pre", None, None, "common", None, index=1)
    assert (age.adjust_to, age.adjust_to_exact, age.slopes, age.description) == (40.0, Fraction(40), "per-cell", "years")
    # 0.1 as the plan wrote it, not the binary double nearest to it
    assert dose0.adjust_to == 0.1 and dose0.adjust_to_exact == Fraction(1, 10)
    assert [c.key_path for c in plan.covariates] == ["covariates[1]", "covariates[2]", "covariates[3]"]


def test_canonical_mapping_and_round_trip(tmp_path):
    plan = _plan({"name": "pre"}, {"name": "age", "adjust_to": 40.5, "slopes": "per-cell", "description": "years"},
                 {"name": "big", "adjust_to": 1e300}, {"name": "whole", "adjust_to": -7},
                 {"name": "lowest", "adjust_to": -(2**63)}, {"name": "highest", "adjust_to": 2**63 - 1})
    m = plan_mapping(plan)["covariates"]
    assert m == [{"name": "pre", "adjust_to": "mean", "slopes": "common"},
                 {"name": "age", "adjust_to": 40.5, "slopes": "per-cell", "description": "years"},
                 {"name": "big", "adjust_to": 1e300, "slopes": "common"},
                 {"name": "whole", "adjust_to": -7, "slopes": "common"},
                 {"name": "lowest", "adjust_to": -(2**63), "slopes": "common"},
                 {"name": "highest", "adjust_to": 2**63 - 1, "slopes": "common"}]
    (tmp_path / "plan.toml").write_text(plan_toml(plan), encoding="utf-8")
    again = load_plan(tmp_path / "plan.toml")
    assert again.covariates == plan.covariates


def test_lock_canonical_plan_carries_the_covariates(project):
    from reporter.trail.lock import canonical_json, sha256_hex

    text = ONEWAY_PLAN.replace("[[hypotheses]]", '[[covariates]]\nname = "pre"\nadjust_to = 3\n\n[[hypotheses]]', 1)
    plan = load_plan(project(text, {"heights.csv": ONEWAY_DATA}))
    mapping = plan_mapping(plan)
    assert mapping["covariates"] == [{"name": "pre", "adjust_to": 3, "slopes": "common"}]
    assert len(sha256_hex(canonical_json(mapping))) == 64


def _refused(project, table: str) -> str:
    text = ONEWAY_PLAN.replace("[[hypotheses]]", table + "\n[[hypotheses]]", 1)
    path = project(text)
    with pytest.raises(PlanError) as err:
        load_plan(path)
    message = str(err.value)
    assert str(path) in message and "\n" not in message
    return message


@pytest.mark.parametrize("table, expected", [
    ('[[covariates]]\nname = "pre"\nslope = "common"', "'covariates[1].slope' is not a known key. Did you mean 'slopes'?"),
    ('[[covariates]]\nadjust_to = 3', "'covariates[1].name' is required"),
    ('[[covariates]]\nname = ""', "'covariates[1].name' must not be empty"),
    ('[[covariates]]\nname = 5', "'covariates[1].name' must be text in quotes (got 5)"),
    ('[[covariates]]\nname = "pre"\n[[covariates]]\nname = "pre"',
     "'covariates[2].name' repeats the covariate \"pre\" of covariates[1]"),
    ('[[covariates]]\nname = "height_mm"', "which is the outcome column"),
    ('[[covariates]]\nname = "medium"', "which is the column of factor 'medium'"),
    ('[[covariates]]\nname = "pre"\nadjust_to = "median"', "'covariates[1].adjust_to' must be \"mean\""),
    ('[[covariates]]\nname = "pre"\nadjust_to = "Mean"', 'Did you mean "mean"?'),
    ('[[covariates]]\nname = "pre"\nadjust_to = "40"', "Write the number without quotes: adjust_to = 40."),
    ('[[covariates]]\nname = "pre"\nadjust_to = nan', "(got nan)"),
    ('[[covariates]]\nname = "pre"\nadjust_to = -inf', "(got -inf)"),
    ('[[covariates]]\nname = "pre"\nadjust_to = true', "(got true)"),
    ('[[covariates]]\nname = "pre"\nadjust_to = [1]', "(got a list)"),
    ('[[covariates]]\nname = "pre"\nslopes = "separate"', "'covariates[1].slopes' must be one of \"common\", \"per-cell\""),
    ('[[covariates]]\nname = "pre"\nslopes = "per cell"', 'Did you mean "per-cell"?'),
    ('[[covariates]]\nname = "pre"\nslopes = 2', "(got 2)"),
    ('[covariates]\nname = "pre"', "'covariates' must be written as [[covariates]] tables"),
], ids=["unknown-key", "no-name", "empty-name", "name-not-text", "duplicate", "outcome", "factor-column",
        "adjust-word", "adjust-case", "adjust-quoted", "adjust-nan", "adjust-inf", "adjust-bool", "adjust-list",
        "slopes-word", "slopes-spelling", "slopes-number", "single-table"])
def test_bad_covariates_name_key_rule_value_and_fix(project, table, expected):
    assert expected in _refused(project, table)


@pytest.mark.parametrize("value", ["pre", ["pre"], 3, [{"name": "pre"}, "age"]])
def test_covariates_must_be_tables(value):
    with pytest.raises(PlanError, match=r"'covariates' must be written as \[\[covariates\]\] tables"):
        plan_from_dict({**MINIMAL, "covariates": value})


def test_message_names_the_line_of_the_key(project):
    table = '[[covariates]]\nname = "pre"\n\n[[covariates]]\nname = "age"\nslopes = "each"'
    message = _refused(project, table)
    text = ONEWAY_PLAN.replace("[[hypotheses]]", table + "\n[[hypotheses]]", 1).lstrip()
    line = text.splitlines().index('slopes = "each"') + 1
    assert f", line {line}: 'covariates[2].slopes'" in message and '(got "each")' in message


def test_factor_name_reading_another_column_is_taken_too():
    doc = {**MINIMAL, "factors": [{"name": "group", "column": "g", "levels": ["a", "b"]}]}
    for name in ("group", "g"):
        with pytest.raises(PlanError, match=f"'covariates\\[1\\].name' is \"{name}\", which is the"):
            plan_from_dict({**doc, "covariates": [{"name": name}]})


def test_too_many_covariates():
    covs = [{"name": f"x{i}"} for i in range(D.MAX_COVARIATES)]
    assert len(_plan(*covs).covariates) == D.MAX_COVARIATES
    with pytest.raises(PlanError, match=f"lists {D.MAX_COVARIATES + 1} covariates; the limit is {D.MAX_COVARIATES}"):
        _plan(*covs, {"name": "one more"})


def test_cell_summaries_cannot_carry_covariates():
    with pytest.raises(PlanError) as err:
        _plan({"name": "pre"}, layout="cell-summaries")
    message = str(err.value)
    assert 'layout = "cell-summaries"' in message and "within-cell covariances" in message
    assert "remove the [[covariates]] tables" in message


# ---------------------------------------------------------------------------------------------
# analyze(covariates=...)


def _frame():
    return {"y": [1.0, 2.0, 3.5, 4.0, 5.5, 6.0], "g": ["a", "a", "a", "b", "b", "b"],
            "pre": [1.0, 2.0, 2.5, 3.0, 4.0, 4.5], "age": [30, 41, 52, 33, 44, 58]}


@pytest.mark.parametrize("given, expected", [
    ("pre", ("pre",)),
    (["pre", "age"], ("pre", "age")),
    ([{"name": "pre", "slopes": "per-cell"}, "age"], ("pre", "age")),
])
def test_analyze_builds_the_covariates_tables(given, expected, monkeypatch):
    import reporter.api as api

    seen = {}

    def stop(plan, data):  # only the plan matters here
        seen["plan"] = plan
        raise RuntimeError("stop")

    monkeypatch.setattr(api, "prepare", stop)
    with pytest.raises(RuntimeError):
        api.analyze(_frame(), outcome="y", factors=["g"], covariates=given)
    plan = seen["plan"]
    assert tuple(c.name for c in plan.covariates) == expected
    assert "[[covariates]]" in plan_toml(plan)


@pytest.mark.parametrize("given, expected", [
    (5, "'covariates' must be a column name, a list of names or a list of mappings"),
    ([{"slopes": "common"}], "covariates[0] has no 'name'"),
    ([{"name": "pre", "slope": "common"}], "covariates[0] has the key 'slope', which is not known. Did you mean 'slopes'?"),
    ([{"name": "pre", "slopes": "each"}], "analyze(): covariates[0]['slopes'] must be one of \"common\", \"per-cell\""),
    (["y"], "analyze(): covariates[0] is \"y\", which is the outcome column"),
])
def test_analyze_refuses_bad_covariates(given, expected):
    from reporter.api import analyze

    with pytest.raises(PlanError) as err:
        analyze(_frame(), outcome="y", factors=["g"], covariates=given)
    assert expected in str(err.value)


def test_summary_reader_refuses_a_plan_with_covariates_built_in_python(tmp_path):
    """A Plan put together in Python (past the plan reader) meets the same refusal in summary.py."""
    from dataclasses import replace

    from reporter.errors import DataError
    from reporter.intake.plan import CovariateSpec
    from reporter.intake.summary import read_summary, summary_from_frame

    (tmp_path / "d.csv").write_text("g,n,mean,sd\na,3,1.5,0.5\nb,3,2.5,0.5\n", encoding="utf-8")
    plan = plan_from_dict({**MINIMAL, "data": {**MINIMAL["data"], "layout": "cell-summaries"}}, base_dir=tmp_path)
    plan = replace(plan, covariates=(CovariateSpec("pre", index=1),))
    for read in (lambda: read_summary(plan), lambda: summary_from_frame(plan, {"g": ["a"], "n": [3], "mean": [1.5],
                                                                               "sd": [0.5]})):
        with pytest.raises(DataError, match="cannot be adjusted for covariates \\('pre'\\).*within-cell covariances"):
            read()
