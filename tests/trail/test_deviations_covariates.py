"""Covariates against the lock: the lock's canonical plan carries the [[covariates]] tables, and a
covariate added, removed, or read at another value or with other slopes is one deviation of its
kind; a changed description or a reworded plan is none."""

from __future__ import annotations

import json
import shutil

import pytest

from reporter.api import prepare
from reporter.trail.lock import lock_path, lock_plan
from trail_project import HEIGHTS, PLAN, write

COVARIATE = '[[covariates]]\nname = "seed_mg"\n'
LOCKED = PLAN + COVARIATE


def data_text() -> str:
    """The trail project's heights with two simulated covariate columns (seed mass, age)."""
    rows = ["height_mm,medium,seed_mg,age_d"]
    for level in ("peat", "coir", "bark", "soil"):
        for i, v in enumerate(HEIGHTS[level]):
            rows.append(f"{v},{level},{3.1 + 0.37 * ((i * 7 + len(level)) % 5)},{20 + (i * 3) % 4}")
    return "\n".join(rows) + "\n"


@pytest.fixture(scope="module")
def lock_file(tmp_path_factory):
    folder = tmp_path_factory.mktemp("lock")
    plan = write(folder, LOCKED)
    lock_plan(plan)
    return lock_path(plan)


def _deviations(tmp_path, lock_file, text):
    plan = write(tmp_path, text)
    (tmp_path / "heights.csv").write_text(data_text(), encoding="utf-8")
    shutil.copy(lock_file, lock_path(plan))
    return prepare(plan).lock.deviations


def test_lock_canonical_plan_holds_the_covariates(lock_file):
    doc = json.loads(lock_file.read_text(encoding="utf-8"))
    assert doc["canonical_plan"]["covariates"] == [{"name": "seed_mg", "adjust_to": "mean", "slopes": "common"}]


EDITS = {
    "unchanged": (LOCKED, []),
    "defaults written out, description added": (
        PLAN + COVARIATE + 'adjust_to = "mean"\nslopes = "common"\ndescription = "dry mass of the seed"\n', []),
    "covariate added": (LOCKED + '[[covariates]]\nname = "age_d"\n', [("covariate-added", "age_d")]),
    "covariate removed": (PLAN, [("covariate-removed", "seed_mg")]),
    "covariate replaced": (PLAN + '[[covariates]]\nname = "age_d"\n',
                           [("covariate-added", "age_d"), ("covariate-removed", "seed_mg")]),
    "reference value changed": (LOCKED + "adjust_to = 3.5\n", [("covariate-changed", "seed_mg")]),
    "slopes changed": (LOCKED + 'slopes = "per-cell"\n', [("covariate-changed", "seed_mg")]),
}


@pytest.mark.parametrize("name", list(EDITS))
def test_each_covariate_edit_is_one_deviation(name, tmp_path, lock_file):
    text, expected = EDITS[name]
    got = [(d.kind, d.subject) for d in _deviations(tmp_path, lock_file, text)]
    assert got == expected


def test_deviation_values_and_words(tmp_path, lock_file):
    (dev,) = _deviations(tmp_path, lock_file, LOCKED + "adjust_to = 3.5\n")
    assert dev.locked == 'adjust_to = "mean", slopes = "common"'
    assert dev.now == 'adjust_to = 3.5, slopes = "common"'
    assert dev.text == ('Covariate seed_mg changed: locked adjust_to = "mean", slopes = "common", '
                        'now adjust_to = 3.5, slopes = "common".')


def test_plan_locked_without_covariates_then_given_one(tmp_path):
    """A lock made from a plan without covariates (as every lock before them) lists one added."""
    folder = tmp_path / "old"
    folder.mkdir()
    plan = write(folder, PLAN)
    lock_plan(plan)
    assert "covariates" not in json.loads(lock_path(plan).read_text(encoding="utf-8"))["canonical_plan"]
    got = [(d.kind, d.subject) for d in _deviations(tmp_path, lock_path(plan), LOCKED)]
    assert got == [("covariate-added", "seed_mg")]


def test_analysis_plan_document_states_the_covariates(tmp_path):
    """The analysis-plan document of the lock names each covariate, its slopes and its reference value."""
    text = LOCKED + '[[covariates]]\nname = "age_d"\nadjust_to = 21\nslopes = "per-cell"\n'
    plan = write(tmp_path, text)
    lock_plan(plan)
    html = next(tmp_path.glob("*.analysis-plan.html")).read_text(encoding="utf-8")
    assert ("The model will adjust for the covariates seed_mg (one slope common to all cells; adjusted means at the "
            "mean of the rows analysed); age_d (a separate slope in each cell; adjusted means at the value 21)") in html
