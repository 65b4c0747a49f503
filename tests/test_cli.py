"""The command: check prints the design and writes nothing; bad input exits 2 with one line."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import ONEWAY_DATA, ONEWAY_PLAN
from reporter.cli import main

DEMO = Path(__file__).resolve().parents[1] / "demo_project"


def run(args, cwd=None):
    return subprocess.run([sys.executable, "-m", "reporter", *args], capture_output=True, text=True, cwd=cwd)


def test_check_prints_design_and_writes_nothing(project, tmp_path):
    """check shows cells with n, the design matrix, beta meanings and compiled contrasts."""
    path = project(ONEWAY_PLAN.replace("[[hypotheses]]", '[analysis]\ncoding = "sum-to-zero"\n[[hypotheses]]', 1),
                   {"heights.csv": ONEWAY_DATA})
    before = sorted(p.name for p in tmp_path.iterdir())
    res = run(["check", str(path)], cwd=tmp_path)
    assert res.returncode == 0, res.stderr
    out = res.stdout
    assert "Cells (4)" in out and re.search(r"\n  coir +3\n", out)
    assert "β0 = μ̄" in out and "the average of the 4 cell means" in out
    assert "β1 = mean(peat) − μ̄" in out
    assert "H0: coir ≤ bark" in out and "L·β = h" in out
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_check_runs_on_both_demo_plans():
    """Both demo plans validate."""
    for plan in ("oneway.toml", "factorial.toml"):
        assert main(["check", str(DEMO / plan)]) == 0


@pytest.mark.parametrize(
    "plan_change, data, expected",
    [
        (("[data]", "[data]\nsheet = 1"), ONEWAY_DATA, "'data.sheet' is not a known key"),
        (('means = "coir > bark"', 'means = "coir > > bark"'), ONEWAY_DATA, "^"),
        (('means = "coir > bark"', 'means = "coir > sand"'), ONEWAY_DATA, "'sand' is not a level"),
        (('means = "coir > bark"', 'means = "coir > coir"'), ONEWAY_DATA, "compares a mean with itself"),
        (('means = "coir > bark"', 'means = "coir > soil"'), "height_mm,medium\n1,peat\n2,coir\n3,coir\n4,bark\n",
         "empty cell (soil)"),
        (("", ""), ONEWAY_DATA + "x,peat\n", "non-numeric"),
        (('levels = ["peat", "coir", "bark", "soil"]', 'levels = ["peat", "coir", "bark", "<script>"]'),
         ONEWAY_DATA, 'holds levels that the plan does not list for factor \'medium\': "soil"'),
    ],
    ids=["unknown-key", "syntax-caret", "unknown-level", "self-compare", "not-estimable", "non-numeric-ok", "markup-level"],
)
def test_bad_input_exits_2_without_traceback(project, tmp_path, plan_change, data, expected):
    """Bad input gives exit code 2 and one clear message (no traceback)."""
    old, new = plan_change
    path = project(ONEWAY_PLAN.replace(old, new, 1) if old else ONEWAY_PLAN, {"heights.csv": data})
    res = run(["check", str(path)], cwd=tmp_path)
    if expected == "non-numeric":  # counted and reported, not an error
        assert res.returncode == 0 and "non-numeric outcome" in res.stdout
        return
    assert res.returncode == 2, res.stdout
    assert "Traceback" not in res.stderr and expected in res.stderr
    assert res.stderr.startswith("anova-report: error: ")


def test_bad_options_exit_2(tmp_path):
    """Unknown options, commands and formats exit 2 with a hint; a missing plan names the file."""
    assert main(["chek", "x"]) == 2
    assert main(["run", "x.toml", "--format", "docx"]) == 2
    res = run(["check", str(tmp_path / "missing.toml")])
    assert res.returncode == 2 and "the plan file does not exist" in res.stderr and "Traceback" not in res.stderr


def test_help_lists_commands():
    """--help names the commands and the exit codes."""
    res = run(["--help"])
    assert res.returncode == 0 and "check" in res.stdout and "Exit codes" in res.stdout
