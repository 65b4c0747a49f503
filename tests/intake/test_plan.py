"""Plan-file intake: structure, defaults, key paths and hints in messages."""

from __future__ import annotations

import pytest

from conftest import ONEWAY_DATA, ONEWAY_PLAN
from reporter.errors import PlanError
from reporter.intake import defaults
from reporter.intake.plan import AnalysisSpec, load_plan


def test_minimum_plan_reads_with_defaults(project):
    """The design document's minimum plan loads, with every [analysis] default filled in."""
    path = project(ONEWAY_PLAN, {"heights.csv": ONEWAY_DATA})
    plan = load_plan(path)
    assert plan.title.startswith("Seedling")
    assert plan.factors[0].levels == ("peat", "coir", "bark", "soil")
    assert plan.data.path == path.parent / "heights.csv"
    assert plan.analysis == AnalysisSpec()
    assert plan.analysis.alpha == defaults.ANALYSIS_DEFAULTS["alpha"]
    assert plan.hypotheses[1].effect == "medium" and plan.hypotheses[1].means is None
    assert len(plan.sha256) == 64


def test_plan_is_frozen(project):
    """Plan objects cannot be changed after validation."""
    plan = load_plan(project(ONEWAY_PLAN))
    with pytest.raises(AttributeError):
        plan.title = "x"  # type: ignore[misc]


def test_numeric_levels_become_text(project):
    """Levels written as TOML numbers are kept as the text a person wrote."""
    text = ONEWAY_PLAN.replace('levels = ["peat", "coir", "bark", "soil"]', "levels = [0.5, 1, 2]")
    plan = load_plan(project(text))
    assert plan.factors[0].levels == ("0.5", "1", "2")


@pytest.mark.parametrize(
    "change, expected",
    [
        (("[data]", "[data]\nouctome = 1"), "'data.ouctome' is not a known key. Did you mean 'outcome'?"),
        (("title =", "titel = 'x'\ntitle ="), "'titel' is not a known key. Did you mean 'title'?"),
        (('name = "coir beats bark"', 'name = "coir beats bark"\nrole = "planed"'),
         "'hypotheses[1].role' must be one of \"planned\", \"exploratory\" (got \"planed\"). Did you mean \"planned\"?"),
        (('means = "coir > bark"', "means = 5"), "'hypotheses[1].means' must be text in quotes (got 5)."),
        (('effect = "medium"', 'effect = "medium"\nmeans = "a > b"'), "'hypotheses[2].effect' cannot stand beside 'means'"),
        (('levels = ["peat", "coir", "bark", "soil"]', 'levels = ["peat", "coir", "peat"]'),
         'lists the level "peat" twice (positions 1 and 3)'),
        (('levels = ["peat", "coir", "bark", "soil"]', 'levels = ["1", "coir", "1.0"]'), 'lists the level "1.0" twice'),
        (('outcome = "height_mm"', ""), "'data.outcome' is required"),
        (('path = "heights.csv"', 'path = "heights.xlsx"'), "must end in .csv, .tsv or .parquet"),
        (("[[hypotheses]]", "[analysis]\nalpha = 5\n[[hypotheses]]"), "'analysis.alpha' must be a number between 1e-9 and 0.5"),
        (("[[hypotheses]]", "[analysis]\nsums_of_squares = \"IV\"\n[[hypotheses]]"),
         "'analysis.sums_of_squares' must be one of"),
        (("[[hypotheses]]", "[analysis]\nfollow_up = [\"all-pairs-tukey\", \"versus-control-dunnett\"]\n[[hypotheses]]"),
         "'analysis.follow_up_control' is required by follow_up \"versus-control-dunnett\""),
        (("[[hypotheses]]", "[analysis]\nfollow_up = [\"versus-control-dunnett\"]\nfollow_up_control = \"pete\"\n[[hypotheses]]"),
         "'analysis.follow_up_control' must be one of the compared groups"),
    ],
    ids=["unknown-data-key", "unknown-top-key", "bad-role", "wrong-type", "means-and-effect", "duplicate-level",
         "duplicate-numeric-level", "missing-outcome", "bad-suffix", "alpha-range", "ss-type", "control-missing",
         "control-unknown"],
)
def test_bad_plans_name_the_key(project, change, expected):
    """Each broken rule is reported with its key path and the rule it broke."""
    old, new = change
    assert old in ONEWAY_PLAN
    path = project(ONEWAY_PLAN.replace(old, new, 1))
    with pytest.raises(PlanError) as err:
        load_plan(path)
    assert expected in str(err.value)
    assert str(path) in str(err.value)


def test_message_carries_the_line(project):
    """A bad key inside the second [[hypotheses]] table is located by its line number."""
    text = ONEWAY_PLAN.replace('effect = "medium"', 'effect = "medium"\nrole = "sure"')
    path = project(text)
    with pytest.raises(PlanError) as err:
        load_plan(path)
    line = text.lstrip().splitlines().index('role = "sure"') + 1
    assert f"line {line}:" in str(err.value)


def test_not_toml_and_not_found(project, tmp_path):
    """A syntax error and a missing plan file are both PlanErrors naming the file."""
    with pytest.raises(PlanError, match="is not valid TOML"):
        load_plan(project("title = \n"))
    with pytest.raises(PlanError, match="does not exist"):
        load_plan(tmp_path / "nope.toml")
