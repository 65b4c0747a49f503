"""A validated plan written back out: plan_mapping (plain values, plan-file names) and plan_toml.

Reference for the written text: the TOML v1.0.0 specification (https://toml.io/en/v1.0.0) as read by
Python's standard :mod:`tomllib`; every output here is parsed by it and must give back the mapping.
"""

from __future__ import annotations

import json
import shutil
import tomllib
from dataclasses import replace
from pathlib import Path

import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from reporter.errors import PlanError
from reporter.intake import defaults as D
from reporter.intake.canonical import plan_mapping, plan_toml
from reporter.intake.plan import load_plan, plan_from_dict

DEMO = Path(__file__).resolve().parents[2] / "demo_project"
DEMO_PLANS = sorted(p.name for p in DEMO.glob("*.toml"))


def _comparable(plan):
    """The plan without what names its source file: its path, hash, bytes and statement lines."""
    hyps = tuple(replace(h, line=None) for h in plan.hypotheses)
    return replace(plan, source=None, sha256=None, source_bytes=None, hypotheses=hyps)


def _plain(value) -> bool:
    """Only dict (with str keys), list, str, int, float and bool, all the way down."""
    if isinstance(value, dict):
        return all(isinstance(k, str) and _plain(v) for k, v in value.items())
    if isinstance(value, list):
        return all(_plain(v) for v in value)
    return type(value) in (str, int, float, bool)


def _round_trip(plan, folder: Path):
    text = plan_toml(plan)
    assert tomllib.loads(text) == plan_mapping(plan)  # tomllib (TOML v1.0.0) reads back the mapping
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "written.toml"
    path.write_text(text, encoding="utf-8")
    return load_plan(path)


@pytest.mark.parametrize("name", DEMO_PLANS, ids=DEMO_PLANS)
def test_demo_plans_round_trip(tmp_path, name):
    """Each demo plan, written by plan_toml beside its data, loads back to an equal Plan."""
    shutil.copytree(DEMO, tmp_path / "demo")
    plan = load_plan(tmp_path / "demo" / name)
    again = _round_trip(plan, tmp_path / "demo")
    assert _comparable(again) == _comparable(plan)
    assert plan_mapping(again) == plan_mapping(plan)


@pytest.mark.parametrize("name", DEMO_PLANS, ids=DEMO_PLANS)
def test_mapping_is_plain_and_json_ready(name):
    """The mapping holds only plain values and survives JSON unchanged (Python's json module)."""
    m = plan_mapping(load_plan(DEMO / name))
    assert _plain(m)
    assert json.loads(json.dumps(m)) == m
    expected = ["title", "summary", "data", "factors", "analysis", "hypotheses", "study", "planning"]
    if "covariates" in m:  # the baseline demo: covariates come after the factors
        expected.insert(4, "covariates")
    assert list(m) == expected


def test_every_default_filled_in_by_plan_names(tmp_path):
    """A minimal plan's mapping shows each [analysis] default of defaults.py under its plan name."""
    plan = plan_from_dict(
        {"title": "t", "data": {"path": "d.csv", "outcome": "y"}, "factors": [{"name": "g", "levels": ["a", "b"]}]},
        base_dir=tmp_path,
    )
    m = plan_mapping(plan)
    expected = {k: (list(v) if isinstance(v, tuple) else v) for k, v in D.ANALYSIS_DEFAULTS.items() if v is not None}
    assert m["analysis"] == expected
    assert list(m["analysis"]) == [k for k in D.ANALYSIS_DEFAULTS if k in expected]  # order of defaults.py
    assert m["data"]["missing"] == list(D.DATA_DEFAULTS["missing"])
    assert m["data"]["layout"] == D.DATA_DEFAULTS["layout"] and m["data"]["reader"] == D.DATA_DEFAULTS["reader"]
    assert "follow_up_control" not in m["analysis"] and "delimiter" not in m["data"]
    assert m["hypotheses"] == [] and m["study"] == {}
    assert tomllib.loads(plan_toml(plan)) == m


def test_internal_values_are_written_by_plan_names(tmp_path):
    """Internal option values (effects, II, versus-control) come out as the plan writes them."""
    plan = plan_from_dict(
        {
            "title": "t",
            "data": {"path": "d.csv", "outcome": "y"},
            "factors": [{"name": "g", "levels": ["a", "b", "c"]}],
            "analysis": {"coding": "sum-to-zero", "sums_of_squares": "type-II",
                         "follow_up": ["versus-control-dunnett"], "follow_up_compares": "g", "follow_up_control": "a"},
        },
        base_dir=tmp_path,
    )
    a = plan_mapping(plan)["analysis"]
    assert (a["coding"], a["sums_of_squares"], a["follow_up"]) == ("sum-to-zero", "type-II", ["versus-control-dunnett"])
    assert (a["follow_up_compares"], a["follow_up_control"]) == ("g", "a")


def test_data_path_of_a_plan_file_stays_relative(tmp_path):
    """A plan read from a file writes its data path relative to that file, whatever the working folder."""
    (tmp_path / "sub").mkdir()
    (tmp_path / "sub" / "plan.toml").write_text(
        'title = "t"\n[data]\npath = "../data/d.csv"\noutcome = "y"\n[[factors]]\nname = "g"\nlevels = ["a", "b"]\n',
        encoding="utf-8",
    )
    plan = load_plan(tmp_path / "sub" / "plan.toml")
    assert plan_mapping(plan)["data"]["path"] == "../data/d.csv"


def test_strings_are_escaped(tmp_path):
    """Quotes, backslashes, newlines and every control character survive (TOML basic strings)."""
    nasty = 'a "quoted" \\ back\tslash\nnew\rline \x00\x01\x1f\x7f é ∑ 🙂 """'
    plan = plan_from_dict(
        {
            "title": nasty,
            "summary": nasty,
            "data": {"path": "d.csv", "outcome": "y"},
            "factors": [{"name": "g\"'", "levels": ["a\\b", 'c"d']}],
            "hypotheses": [{"name": "h\n", "means": nasty, "description": nasty}],
            "study": {"allocation": nasty},
        },
        base_dir=tmp_path,
    )
    again = _round_trip(plan, tmp_path / "out")
    assert _comparable(again) == _comparable(plan)


# ---------------------------------------------------------------------------------------------
# Random plans covering every option

_text = st.text(
    alphabet=st.characters(blacklist_categories=("Cs",)), min_size=1, max_size=12
).filter(lambda s: s.strip() != "")
_name = st.text(
    alphabet=st.characters(blacklist_categories=("Cs", "Cc"), blacklist_characters="/`"), min_size=1, max_size=8
).filter(lambda s: s.strip() != "" and " x " not in s and s.strip().lower() != "mean")
_level = st.one_of(_name, st.integers(-1000, 1000), st.floats(-1e6, 1e6, allow_nan=False, allow_infinity=False))


@st.composite
def _plans(draw):
    doc: dict = {"title": draw(_text)}
    if draw(st.booleans()):
        doc["summary"] = draw(_text)
    layout = draw(st.sampled_from(D.LAYOUTS))
    suffix = draw(st.sampled_from([".csv", ".tsv", ".parquet", ".txt"]))
    data: dict = {"path": draw(st.sampled_from(["d", "sub/d e", "x\\y", "ü ñ", "../up/d"])) + suffix,
                  "outcome": draw(_name)}
    for key, strat in (
        ("delimiter", st.characters(blacklist_categories=("Cs",))),
        ("decimal", st.sampled_from([".", ","])),
        ("missing", st.lists(st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=4), max_size=4)),
        ("reader", st.sampled_from(D.READERS)),
    ):
        if draw(st.booleans()):
            data[key] = draw(strat)
    if layout != "rows" or draw(st.booleans()):
        data["layout"] = layout
    if layout == "cell-summaries":
        data["spread"] = draw(st.sampled_from(D.SPREADS))
        for key in ("n_column", "mean_column", "spread_column"):
            if draw(st.booleans()):
                data[key] = draw(_name)
        for key in ("mean_decimals", "spread_decimals"):
            if draw(st.booleans()):
                data[key] = draw(st.integers(0, D.MAX_DECIMALS))
    doc["data"] = data
    factors = []
    for _ in range(draw(st.integers(1, 3))):
        f: dict = {"name": draw(_name), "levels": draw(st.lists(_level, min_size=2, max_size=4))}
        if draw(st.booleans()):
            f["exclude"] = draw(st.lists(_level, max_size=2))
        if draw(st.booleans()):
            f["column"] = draw(_name)
        factors.append(f)
    doc["factors"] = factors
    analysis: dict = {}
    options = {
        "alpha": st.floats(D.MIN_ALPHA, 0.4999),
        "coding": st.sampled_from(list(D.CODINGS)),
        "sums_of_squares": st.sampled_from(list(D.SUMS_OF_SQUARES)),
        "correction": st.sampled_from(D.CORRECTIONS),
        "follow_up": st.lists(st.sampled_from(list(D.FOLLOW_UPS)), unique=True, max_size=3),
        "unequal_variances": st.sampled_from(D.UNEQUAL_VARIANCES),
        "permutations": st.integers(0, 10_000_000),
        "seed": st.integers(0, 2**63 - 1),
        "permutation_max_rows": st.integers(0, 10**12),
    }
    for key, strat in options.items():
        if draw(st.booleans()):
            analysis[key] = draw(strat)
    compares = draw(st.sampled_from(["cells", *[f["name"] for f in factors]]))
    if compares != "cells" or draw(st.booleans()):
        analysis["follow_up_compares"] = compares
    if "versus-control-dunnett" in analysis.get("follow_up", []) or draw(st.booleans()):
        if compares == "cells":
            analysis["follow_up_control"] = "/".join(str(draw(st.sampled_from(f["levels"]))) for f in factors)
        else:
            chosen = next(f for f in factors if f["name"] == compares)
            analysis["follow_up_control"] = draw(st.sampled_from(chosen["levels"]))
    doc["analysis"] = analysis
    hyps = []
    for i in range(draw(st.integers(0, 3))):
        h: dict = {"name": f"{draw(_name)} {i}"}
        if draw(st.booleans()):
            h["means"] = draw(_text)
        else:
            h["effect"] = " x ".join(draw(st.lists(st.sampled_from([f["name"] for f in factors]), min_size=1, max_size=2)))
        if draw(st.booleans()):
            h["role"] = draw(st.sampled_from(D.ROLES))
        if draw(st.booleans()):
            h["description"] = draw(_text)
        hyps.append(h)
    doc["hypotheses"] = hyps
    if layout == "rows" and draw(st.booleans()):
        covs = []
        for i in range(draw(st.integers(1, 3))):
            c: dict = {"name": f"{draw(_name)} cov{i}"}
            if draw(st.booleans()):
                c["adjust_to"] = draw(st.one_of(st.just("mean"), st.integers(-2**63, 2**63 - 1),
                                                st.floats(allow_nan=False, allow_infinity=False)))
            if draw(st.booleans()):
                c["slopes"] = draw(st.sampled_from(D.COVARIATE_SLOPES))
            if draw(st.booleans()):
                c["description"] = draw(_text)
            covs.append(c)
        doc["covariates"] = covs
    if draw(st.booleans()):
        doc["study"] = {k: draw(_text) for k in draw(st.lists(st.sampled_from(
            ["sample_size_rationale", "allocation", "blinding", "stopping_rule", "exclusion_rules"]), unique=True))}
    return doc


@settings(max_examples=150, suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(doc=_plans())
def test_random_plans_round_trip(tmp_path_factory, doc):
    """Any valid plan (every option drawn at random) written by plan_toml loads back to an equal Plan,
    its mapping is plain, and tomllib parses the text back to that mapping."""
    base = tmp_path_factory.mktemp("plan")
    try:
        plan = plan_from_dict(doc, base_dir=base)
    except PlanError:
        assume(False)
    assert _plain(plan_mapping(plan))
    again = _round_trip(plan, base / "elsewhere")
    assert _comparable(again) == _comparable(plan)
    assert plan_toml(_comparable(again)) == plan_toml(plan)  # deterministic: an equal plan writes the same text
