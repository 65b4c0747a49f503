"""anova-report run: results.json follows its published schema; failures leave no files."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import jsonschema
import pytest

from conftest import ONEWAY_DATA, ONEWAY_PLAN
from reporter.render.results_json import load_schema

DEMO = Path(__file__).resolve().parents[1] / "demo_project"


def run(args, env_extra=None, cwd=None):
    env = dict(os.environ, **(env_extra or {}))
    return subprocess.run([sys.executable, "-m", "reporter", *args], capture_output=True, text=True, env=env, cwd=cwd)


@pytest.mark.parametrize("plan", ["oneway.toml", "factorial.toml", "baseline.toml"])
def test_demo_results_validate_against_schema(plan, tmp_path):
    """Every demo plan gives a results.json that validates against the published schema."""
    res = run(["run", str(DEMO / plan), "--out", str(tmp_path), "--format", "json"])
    assert res.returncode == 0, res.stderr
    doc = json.loads((tmp_path / "results.json").read_text(encoding="utf-8"))
    jsonschema.validate(doc, load_schema())
    assert doc["schema"] == "anova-report/results/1"
    assert doc["anova"]["rows"][-1]["source"] == "residual"
    assert all(h["p_adjusted"] is not None for h in doc["hypotheses"])


def test_json_is_byte_identical_under_source_date_epoch(tmp_path):
    """Two separate processes running the same command with the same SOURCE_DATE_EPOCH write
    identical bytes (the command line is recorded, so both runs type the same one)."""
    outs = []
    out = tmp_path / "o"
    for _ in range(2):
        res = run(["run", str(DEMO / "oneway.toml"), "--out", str(out), "--format", "json"], {"SOURCE_DATE_EPOCH": "1767225600"})
        assert res.returncode == 0, res.stderr
        outs.append((out / "results.json").read_bytes())
    assert outs[0] == outs[1]
    assert json.loads(outs[0])["provenance"]["created"] == "2026-01-01T00:00:00Z"


def test_empty_cell_is_null_with_note(project, tmp_path):
    """An empty cell has null statistics with a note; no NaN reaches the JSON."""
    data = "".join(line + "\n" for line in ONEWAY_DATA.splitlines() if not line.endswith("soil"))
    plan = ONEWAY_PLAN.replace('effect = "medium"', 'means = "peat = coir = bark"')
    path = project(plan, {"heights.csv": data})
    res = run(["run", str(path), "--out", str(tmp_path / "out"), "--format", "json"])
    assert res.returncode == 0, res.stderr
    text = (tmp_path / "out" / "results.json").read_text()
    assert "NaN" not in text and "Infinity" not in text
    doc = json.loads(text)
    soil = doc["cells"][3]
    assert soil["n"] == 0 and soil["mean"] is None and "empty cell" in soil["note"]
    jsonschema.validate(doc, load_schema())


@pytest.mark.parametrize(
    "data, message",
    [
        ("height_mm,medium\n1,peat\n2,coir\n3,bark\n4,soil\n", "every cell has exactly one observation"),
        ("height_mm,medium\n1,peat\n1,peat\n2,coir\n2,coir\n3,bark\n3,bark\n4,soil\n4,soil\n", "zero residual variance"),
    ],
    ids=["no-residual-df", "zero-variance"],
)
def test_degenerate_data_exit_2_and_write_nothing(project, tmp_path, data, message):
    """Degenerate data end with exit code 2, one message, and no output folder contents."""
    path = project(ONEWAY_PLAN.replace('means = "coir > bark"', 'means = "coir = bark"'), {"heights.csv": data})
    out = tmp_path / "out"
    res = run(["run", str(path), "--out", str(out), "--format", "json"])
    assert res.returncode == 2 and message in res.stderr and "Traceback" not in res.stderr
    assert not out.exists() or not any(out.iterdir())


def test_out_must_be_a_folder_and_inputs_untouched(project, tmp_path):
    """--out naming a file is refused (exit 2); the plan and data files are never modified."""
    path = project(ONEWAY_PLAN, {"heights.csv": ONEWAY_DATA})
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    res = run(["run", str(path), "--out", str(tmp_path / "heights.csv"), "--format", "json"])
    assert res.returncode == 2 and "is not a folder" in res.stderr
    res = run(["run", str(path), "--out", str(tmp_path / "o"), "--format", "json"])
    assert res.returncode == 0
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir() if p.is_file()} == before
