"""A run compared with its locked plan: an unchanged plan matches; each small edit of the plan text
is listed, exactly, as one deviation of its kind (with the deviations it implies, named here);
hypotheses added after the lock are exploratory everywhere; results.json and every report format
carry the comparison."""

from __future__ import annotations

import hashlib
import json
import shutil

import jsonschema
import pytest

from reporter.api import prepare
from reporter.cli import main
from reporter.render.results_json import load_schema
from reporter.trail.deviations import apply_lock
from reporter.trail.lock import read_lock
from reporter.trail.lock import lock_plan, lock_path
from trail_project import PLAN, data_text, write


@pytest.fixture(scope="module")
def lock_file(tmp_path_factory):
    """The lock of the unedited plan, made before any data exist."""
    folder = tmp_path_factory.mktemp("lock")
    plan = write(folder)
    lock_plan(plan)
    return lock_path(plan)


def _run(tmp_path, lock_file, plan_text, levels=("peat", "coir", "bark", "soil")):
    plan = write(tmp_path, plan_text)
    (tmp_path / "heights.csv").write_text(data_text(levels), encoding="utf-8")
    shutil.copy(lock_file, lock_path(plan))  # found beside the plan
    return prepare(plan)  # finds the lock beside the plan


def _edit(old: str, new: str) -> str:
    assert PLAN.count(old) == 1, old
    return PLAN.replace(old, new)


EDITS = {
    # name: (plan text, levels with data, the deviations expected as (kind, subject))
    "unchanged": (PLAN, None, []),
    "comments and spacing only": ("# checked twice\n" + _edit('name = "medium"', 'name  =  "medium"   # soil type'), None, []),
    "same contrast, other words": (_edit('means = "coir > bark"', 'means = "bark < coir"'), None, []),
    "same effect rows, other order": (_edit('effect = "medium"', 'means = "soil = bark = coir = peat"'), None, []),
    "hypothesis added": (PLAN + '[[hypotheses]]\nname = "peat beats soil"\nmeans = "peat > soil"\n', None,
                         [("hypothesis-added", "peat beats soil")]),
    "hypothesis removed": (_edit('[[hypotheses]]\nname = "media differ"\neffect = "medium"\n', ""), None,
                           [("hypothesis-removed", "media differ")]),
    "hypothesis changed": (_edit('means = "coir > bark"', 'means = "coir > soil"'), None,
                           [("hypothesis-changed", "coir beats bark")]),
    "direction reversed": (_edit('means = "coir > bark"', 'means = "coir < bark"'), None,
                           [("hypothesis-changed", "coir beats bark")]),
    "hypothesis renamed": (_edit('name = "coir beats bark"', 'name = "coir over bark"'), None,
                           [("hypothesis-renamed", "coir over bark")]),
    "role changed": (_edit('effect = "medium"\n', 'effect = "medium"\nrole = "exploratory"\n'), None,
                     [("hypothesis-role-changed", "media differ")]),
    "alpha": (PLAN + "[analysis]\nalpha = 0.01\n", None, [("analysis-option-changed", "analysis.alpha")]),
    "correction": (PLAN + '[analysis]\ncorrection = "bonferroni"\n', None,
                   [("analysis-option-changed", "analysis.correction")]),
    "sums of squares": (PLAN + '[analysis]\nsums_of_squares = "type-II"\n', None,
                        [("analysis-option-changed", "analysis.sums_of_squares")]),
    "coding": (PLAN + '[analysis]\ncoding = "sum-to-zero"\n', None, [("analysis-option-changed", "analysis.coding")]),
    "variance policy": (PLAN + '[analysis]\nunequal_variances = "always-robust"\n', None,
                        [("analysis-option-changed", "analysis.unequal_variances")]),
    "outcome": (_edit('outcome = "height_mm"', 'outcome = "height_cm"'), None, [("outcome-changed", "data.outcome")]),
    # a new level with data: the levels, the data, and the effect over five levels instead of four
    "level added": (_edit('"soil"]', '"soil", "sand"]'), ("peat", "coir", "bark", "soil", "sand"),
                    [("hypothesis-changed", "media differ"), ("levels-changed", "medium"),
                     ("data-level-not-locked", "medium=sand")]),
    "level dropped and excluded": (_edit('"bark", "soil"]', '"bark"]\nexclude = ["soil"]'), None,
                                   [("hypothesis-changed", "media differ"), ("levels-changed", "medium"),
                                    ("exclusion-rules-changed", "factors.medium.exclude")]),
    "missing markers": (_edit('outcome = "height_mm"', 'outcome = "height_mm"\nmissing = ["", "NA", "-99"]'), None,
                        [("exclusion-rules-changed", "data.missing")]),
    "exclusion rules text": (_edit("died before measurement", "died or broke before measurement"), None,
                             [("exclusion-rules-changed", "study.exclusion_rules")]),
    # a second factor: the contrasts are now over six cells of two factors
    "factor added": (_edit('[[hypotheses]]\nname = "coir beats bark"',
                           '[[factors]]\nname = "tray"\nlevels = ["a", "b"]\n[[hypotheses]]\nname = "coir beats bark"'),
                     None, [("hypothesis-changed", "coir beats bark"), ("hypothesis-changed", "media differ"),
                            ("factor-added", "tray")]),
}


@pytest.mark.parametrize("name", list(EDITS))
def test_each_edit_is_listed_exactly(name, tmp_path, lock_file):
    text, levels, expected = EDITS[name]
    prep = _run(tmp_path, lock_file, text, levels or ("peat", "coir", "bark", "soil"))
    got = [(d.kind, d.subject) for d in prep.lock.deviations]
    assert got == expected
    assert prep.lock.matched == (expected == [])
    assert prep.lock.sha256 == hashlib.sha256(lock_file.read_bytes()).hexdigest()  # hashlib: reference digest


def test_deviation_values_and_words(tmp_path, lock_file):
    """A changed option names the key, the locked and the present value."""
    prep = _run(tmp_path, lock_file, PLAN + "[analysis]\nalpha = 0.01\n")
    (d,) = prep.lock.deviations
    assert (d.locked, d.now) == ("0.05", "0.01")
    assert d.text == "analysis.alpha was 0.05 in the locked plan and is now 0.01."


def test_added_hypothesis_is_exploratory_everywhere(tmp_path, lock_file):
    """A planned hypothesis added after the lock joins the exploratory family: its role in the
    contrasts, results.json and every report format, and its own family for the adjustment."""
    plan = write(tmp_path, PLAN + '[[hypotheses]]\nname = "peat beats soil"\nmeans = "peat > soil"\nrole = "planned"\n')
    (tmp_path / "heights.csv").write_text(data_text(), encoding="utf-8")
    shutil.copy(lock_file, lock_path(plan))
    out = tmp_path / "out"
    assert main(["run", str(plan), "--out", str(out), "--format", "json,md,html"]) == 0
    doc = json.loads((out / "results.json").read_bytes())
    jsonschema.validate(doc, load_schema())
    by_name = {h["name"]: h for h in doc["hypotheses"]}
    assert (by_name["peat beats soil"]["role"], by_name["peat beats soil"]["family"]) == ("exploratory", "exploratory")
    assert by_name["coir beats bark"]["family"] == "planned"
    # alone in the exploratory family, its Holm-adjusted p is its own p (Holm 1979 with one test)
    assert by_name["peat beats soil"]["p_adjusted"] == by_name["peat beats soil"]["p"]
    lock = doc["lock"]
    assert lock["sha256"] == hashlib.sha256(lock_path(plan).read_bytes()).hexdigest()
    assert lock["matched"] is False and lock["added_after_lock"] == ["peat beats soil"]
    assert [d["kind"] for d in lock["deviations"]] == ["hypothesis-added"]
    md = (out / "report.md").read_text(encoding="utf-8")
    html = (out / "report.html").read_text(encoding="utf-8")
    for text in (md, html):
        assert "Comparison with the locked plan" in text
        assert "was added after the lock; it is reported as exploratory" in text
        assert "Added after the plan was locked: tested as exploratory." in text
        assert "peat beats soil (exploratory;" in text


def test_unchanged_run_reports_a_match_in_every_format(tmp_path, lock_file):
    plan = write(tmp_path)
    (tmp_path / "heights.csv").write_text(data_text(), encoding="utf-8")
    shutil.copy(lock_file, lock_path(plan))
    out = tmp_path / "out"
    assert main(["run", str(plan), "--out", str(out), "--format", "json,md,html,pdf"]) == 0
    doc = json.loads((out / "results.json").read_bytes())
    assert doc["lock"]["matched"] is True and doc["lock"]["deviations"] == []
    for name in ("report.md", "report.html"):
        assert "The analysis matched the plan locked at" in (out / name).read_text(encoding="utf-8")
    from pypdf import PdfReader

    text = " ".join(" ".join(p.extract_text().split()) for p in PdfReader(out / "report.pdf").pages)
    assert "The analysis matched the plan locked at" in text


def test_run_without_a_lock_records_none(tmp_path):
    plan = write(tmp_path)
    (tmp_path / "heights.csv").write_text(data_text(), encoding="utf-8")
    assert main(["run", str(plan), "--out", str(tmp_path / "out"), "--format", "json,md"]) == 0
    assert json.loads((tmp_path / "out" / "results.json").read_bytes())["lock"] is None
    assert "locked plan" not in (tmp_path / "out" / "report.md").read_text(encoding="utf-8")


def test_missing_lock_given_is_bad_input(tmp_path, capsys):
    plan = write(tmp_path)
    (tmp_path / "heights.csv").write_text(data_text(), encoding="utf-8")
    assert main(["run", str(plan), "--lock", str(tmp_path / "nope.lock.json"), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert "nope.lock.json" in err and "Traceback" not in err
    assert not (tmp_path / "out").exists()


def test_a_given_lock_replaces_the_one_beside_the_plan(tmp_path, lock_file):
    """run --lock FILE compares with FILE, even when another lock lies beside the plan; roles come
    from the plan again before the comparison."""
    prep = _run(tmp_path, lock_file, PLAN + '[[hypotheses]]\nname = "peat beats soil"\nmeans = "peat > soil"\n')
    assert prep.lock.added == ("peat beats soil",)
    other = tmp_path / "other"
    other.mkdir()
    again = write(other, PLAN + '[[hypotheses]]\nname = "peat beats soil"\nmeans = "peat > soil"\n')
    lock_plan(again)
    replaced = apply_lock(prep, lock_path(again))
    assert replaced.lock.matched and replaced.lock.sha256 == read_lock(lock_path(again)).sha256
    assert [c.role for c in replaced.contrasts] == ["planned", "planned", "planned"]
