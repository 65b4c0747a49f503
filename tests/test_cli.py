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
    """Every demo plan validates."""
    for plan in ("oneway.toml", "factorial.toml", "baseline.toml"):
        assert main(["check", str(DEMO / plan)]) == 0


@pytest.mark.parametrize(
    "plan_change, data, expected",
    [
        (("[data]", "[data]\nsheet = 1"), ONEWAY_DATA, "'data.sheet' is not a known key"),
        (('means = "coir > bark"', 'means = "coir > > bark"'), ONEWAY_DATA, "^"),
        (('means = "coir > bark"', 'means = "coir > sand"'), ONEWAY_DATA, "'sand' is not a level"),
        (('means = "coir > bark"', 'means = "coir > coir"'), ONEWAY_DATA, "compares a mean with itself"),
        (("", ""), ONEWAY_DATA + "x,peat\n", "non-numeric"),
        (('levels = ["peat", "coir", "bark", "soil"]', 'levels = ["peat", "coir", "bark", "<script>"]'),
         ONEWAY_DATA, 'holds levels that the plan does not list for factor \'medium\': "soil"'),
    ],
    ids=["unknown-key", "syntax-caret", "unknown-level", "self-compare", "non-numeric-ok", "markup-level"],
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


def test_every_command_help_has_an_example_and_the_message_options():
    """Each command's --help shows at least one command line, and --quiet/--verbose."""
    from reporter.cli import COMMANDS

    assert {c.name for c in COMMANDS} >= {"check", "run"}
    for cmd in COMMANDS:
        res = run([cmd.name, "--help"])
        assert res.returncode == 0, res.stderr
        assert re.search(r"examples?:\n  anova-report " + cmd.name + " ", res.stdout), res.stdout
        assert "--quiet" in res.stdout and "--verbose" in res.stdout


NO_SOIL = "height_mm,medium\n1,peat\n2,coir\n3,coir\n4,bark\n5,bark\n"


def test_check_exits_1_when_a_planned_hypothesis_needs_an_empty_cell(project, tmp_path):
    """A readable plan whose data leave a planned contrast without its cell: check exits 1 and
    names the check; run refuses the same data as bad input (exit 2). The rule (a contrast is
    estimable only if it puts no weight on an empty cell) is Searle (1987), Linear Models for
    Unbalanced Data, on estimable functions with empty cells."""
    path = project(ONEWAY_PLAN.replace('means = "coir > bark"', 'means = "coir > soil"', 1), {"heights.csv": NO_SOIL})
    res = run(["check", str(path)], cwd=tmp_path)
    assert res.returncode == 1, res.stderr
    assert "Traceback" not in res.stderr
    assert "anova-report: check failed: estimable: hypothesis \"coir beats bark\": is not estimable" in res.stderr
    assert "empty cell (soil)" in res.stderr and "2 data check(s) failed" in res.stderr
    assert "failed  estimable" in res.stdout and "note    empty cells: 1 of 4 cells" in res.stdout
    assert "Fix the failed data checks" in res.stdout
    # the planned omnibus effect of medium needs the empty cell too: both are named
    assert 'check failed: estimable: hypothesis "media differ"' in res.stderr
    assert res.stderr.count("check failed: estimable") == 2
    res = run(["run", str(path), "--out", str(tmp_path / "out")], cwd=tmp_path)
    assert res.returncode == 2 and "empty cell (soil)" in res.stderr
    assert not (tmp_path / "out").exists()


@pytest.mark.parametrize(
    "data, expected",
    [
        ("height_mm,medium\n1,peat\n2,coir\n3,bark\n4,soil\n", "no residual degrees of freedom"),
        ("height_mm,medium\n1,peat\n1,peat\n2,coir\n2,coir\n", "zero residual variance"),
    ],
    ids=["one-row-per-cell", "no-spread"],
)
def test_check_exits_1_when_the_model_cannot_be_fitted(project, tmp_path, data, expected):
    """Data that leave the residual no degrees of freedom or no variance fail the 'model' check
    (F = MS_effect / MS_residual needs MS_residual > 0 on df > 0: the definition of the F ratio,
    e.g. Maxwell, Delaney & Kelley 2018, Designing Experiments and Analyzing Data, ch. 3)."""
    plan = ONEWAY_PLAN.replace('means = "coir > bark"', 'means = "coir > peat"', 1)
    path = project(plan, {"heights.csv": data})
    res = run(["check", str(path), "--quiet"], cwd=tmp_path)
    assert res.returncode == 1, res.stderr
    assert "check failed: model: " in res.stderr and expected in res.stderr
    assert "Traceback" not in res.stderr


def test_check_notes_go_to_stderr_and_quiet_verbose_filter_them(project, tmp_path):
    """Results on stdout, messages on stderr: a left-out row is a note (exit 0); --quiet hides
    it, --verbose adds each step; stdout is the same in all three."""
    path = project(ONEWAY_PLAN, {"heights.csv": ONEWAY_DATA + "x,peat\n"})
    normal = run(["check", str(path)], cwd=tmp_path)
    quiet = run(["check", str(path), "--quiet"], cwd=tmp_path)
    verbose = run(["check", str(path), "-v"], cwd=tmp_path)
    assert normal.returncode == quiet.returncode == verbose.returncode == 0
    assert normal.stdout == quiet.stdout == verbose.stdout
    assert "warning: rows left out: 1 row(s) left out: non-numeric outcome" in normal.stderr
    assert quiet.stderr == ""
    assert "anova-report: plan: " in verbose.stderr and "check passed: model" in verbose.stderr
    assert "warning: rows left out" in verbose.stderr and "plan: " not in normal.stderr


def test_quiet_and_verbose_together_are_refused(tmp_path):
    res = run(["check", "x.toml", "--quiet", "--verbose"])
    assert res.returncode == 2 and "not allowed with argument" in res.stderr and "Traceback" not in res.stderr


def test_run_prints_paths_on_stdout_and_steps_only_when_verbose(project, tmp_path, monkeypatch):
    """run: the written paths are the result (stdout); --quiet leaves stderr empty; --verbose
    names each step; --quiet does not leak its setting into the process after the command."""
    path = project(ONEWAY_PLAN, {"heights.csv": ONEWAY_DATA})
    res = run(["run", str(path), "--out", "q", "--format", "json", "--quiet"], cwd=tmp_path)
    assert res.returncode == 0 and res.stderr == "" and res.stdout.strip() == "wrote q/results.json"
    res = run(["run", str(path), "--out", "v", "--format", "json", "--verbose"], cwd=tmp_path)
    assert res.returncode == 0 and res.stdout.strip() == "wrote v/results.json"
    assert "fitting the model" in res.stderr and "writing json into v" in res.stderr
    monkeypatch.delenv("ANOVA_REPORT_QUIET", raising=False)
    monkeypatch.chdir(tmp_path)
    assert main(["run", str(path), "--out", "m", "--format", "json", "-q"]) == 0
    assert "ANOVA_REPORT_QUIET" not in __import__("os").environ
