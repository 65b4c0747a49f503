"""`anova-report init`: a starter plan beside the data that `check` accepts, with every level in
order of first appearance (the reference is pandas.unique, which keeps the order of appearance),
odd level names written so that they read back as the same levels, and bad input refused."""

from __future__ import annotations

import csv
import io
import re
import shutil
import subprocess
import sys
import tomllib
from pathlib import Path

import pandas as pd
import pytest

from reporter import starter as S
from reporter.cli import main
from reporter.intake import defaults as D

DEMO = Path(__file__).resolve().parents[1] / "demo_project"


def run(args, cwd=None):
    return subprocess.run([sys.executable, "-m", "reporter", *args], capture_output=True, text=True, cwd=cwd)


def _uncomment_examples(text: str) -> str:
    """The plan with every commented directional example made live."""
    out = []
    for line in text.splitlines():
        if re.match(r"# (\[\[hypotheses\]\]|name = |means = |role = )", line):
            line = line[2:]
        out.append(line)
    return "\n".join(out) + "\n"


def _without_guesses(text: str) -> str:
    """The plan text without its comment lines about the guesses."""
    return "\n".join(line for line in text.splitlines() if not line.startswith("#   "))


def _first_appearance(path: Path, column: str) -> list[str]:
    """Levels by pandas.unique (order of appearance), missing values dropped, read as text."""
    frame = pd.read_csv(path, dtype=str, keep_default_na=False, sep="\t" if path.suffix == ".tsv" else ",")
    values = [v.strip() for v in frame[column]]
    return [v for v in pd.unique(pd.Series(values)) if v not in D.DATA_DEFAULTS["missing"]]


@pytest.mark.parametrize("name, outcome, factors", [
    ("recall_oneway.csv", "recalled", ["schedule"]),
    ("recall_factorial.csv", "recalled", ["schedule", "feedback"]),
])
def test_init_on_the_demo_data_writes_a_plan_that_check_accepts(tmp_path, name, outcome, factors):
    """The guesses on the demo files, the plan beside the data, and check exits 0 on it, also
    with every commented directional example switched on."""
    data = tmp_path / name
    shutil.copy(DEMO / name, data)
    before = data.read_bytes()
    res = run(["init", str(data)])
    assert res.returncode == 0, res.stderr
    plan = tmp_path / (data.stem + ".toml")
    assert res.stdout.strip() == str(plan)
    assert f"anova-report: outcome '{outcome}' (guessed): numeric with" in res.stderr
    for f in factors:
        assert f"anova-report: factor '{f}' (guessed): " in res.stderr
    doc = tomllib.loads(plan.read_text(encoding="utf-8"))
    assert doc["data"] == {"path": name, "outcome": outcome}
    assert [f["name"] for f in doc["factors"]] == factors
    for f in doc["factors"]:
        assert f["levels"] == _first_appearance(data, f["name"])
    effects = [h["effect"] for h in doc["hypotheses"]]
    assert effects == (["schedule"] if len(factors) == 1 else ["schedule", "feedback", "schedule x feedback"])
    assert main(["check", str(plan)]) == 0
    plan.write_text(_uncomment_examples(plan.read_text(encoding="utf-8")), encoding="utf-8")
    assert len(tomllib.loads(plan.read_text(encoding="utf-8"))["hypotheses"]) > len(effects)
    assert main(["check", str(plan), "--quiet"]) == 0
    assert data.read_bytes() == before  # the input is never modified


ODD = {
    "with spaces": ["high dose", "low dose", "no dose"],
    "quotes": ['say "hi"', "it's", "back\\slash"],
    "unicode": ["Zürich", "東京", "café"],
    "numbers": ["10", "2", "1"],
    "leading digit": ["2nd", "1st", "3rd"],
    "mean and hyphens": ["mean", "spaced-long", "x"],
}


@pytest.mark.parametrize("kind", list(ODD), ids=list(ODD))
def test_odd_level_names_round_trip(tmp_path, kind):
    """Levels with spaces, quotes, backslashes, non-ASCII letters, numbers, a leading digit or a
    keyword-like name: the plan lists exactly the data's levels (pandas.unique as reference),
    check accepts it, and the directional examples (backticks where needed) compile."""
    levels = ODD[kind]
    buf = io.StringIO()
    w = csv.writer(buf)
    w.writerow(["score", "group name"])
    for i in range(24):
        w.writerow([f"{10 + (i * 7) % 17}.{i % 10}", levels[i % 3]])
    data = tmp_path / "odd.csv"
    data.write_text(buf.getvalue(), encoding="utf-8")
    res = run(["init", str(data)])
    assert res.returncode == 0, res.stderr
    plan = tmp_path / "odd.toml"
    doc = tomllib.loads(plan.read_text(encoding="utf-8"))
    assert doc["factors"][0]["name"] == "group name"
    assert doc["factors"][0]["levels"] == _first_appearance(data, "group name") == levels
    assert doc["hypotheses"] == [{"name": "main effect of group name", "effect": "`group name`"}]
    plan.write_text(_uncomment_examples(plan.read_text(encoding="utf-8")), encoding="utf-8")
    res = run(["check", str(plan)])
    assert res.returncode == 0, res.stderr
    assert "[2]" in res.stdout and "[3]" in res.stdout  # the two examples compiled


def test_levels_that_are_one_level_are_listed_once_and_missing_values_are_not_levels(tmp_path):
    """'1' and '1.0' (and ' 1 ') are one level for the intake, so one level here; NA and empty
    cells are missing, not levels."""
    rows = ["y,dose"] + [f"{v},{d}" for v, d in zip(range(30), ["1", "2", "1.0", " 1 ", "NA", "", "2.0", "3"] * 4)]
    data = tmp_path / "d.csv"
    data.write_text("\n".join(rows) + "\n", encoding="utf-8")
    assert main(["init", str(data), "--outcome", "y", "--factor", "dose", "-q"]) == 0
    doc = tomllib.loads((tmp_path / "d.toml").read_text(encoding="utf-8"))
    assert doc["factors"][0]["levels"] == ["1", "2", "3"]
    assert main(["check", str(tmp_path / "d.toml"), "-q"]) == 0


def test_a_row_counter_is_not_the_outcome_and_thresholds_pick_the_factors(tmp_path):
    """An id column 1..N (consecutive whole numbers, each once) is skipped; a numeric column
    with few values (dose 0/10/20) is a factor; a text column with many values is neither."""
    lines = ["id,subject,dose,site,y"]
    for i in range(1, 61):
        lines.append(f"{i},S{i:03d},{(i % 3) * 10},{'north' if i % 2 else 'south'},{(i * 37) % 101 / 3:.3f}")
    data = tmp_path / "study.csv"
    data.write_text("\n".join(lines) + "\n", encoding="utf-8")
    res = run(["init", str(data)])
    assert res.returncode == 0, res.stderr
    doc = tomllib.loads((tmp_path / "study.toml").read_text(encoding="utf-8"))
    assert doc["data"]["outcome"] == "y"
    assert [f["name"] for f in doc["factors"]] == ["dose", "site"]
    assert doc["factors"][0]["levels"] == ["10", "20", "0"]
    assert main(["check", str(tmp_path / "study.toml"), "-q"]) == 0


def test_parquet_and_tsv_give_the_same_plan_as_csv(tmp_path):
    """The same table as CSV, TSV and Parquet: the same outcome, factors and levels."""
    frame = pd.read_csv(DEMO / "recall_factorial.csv")
    frame.to_csv(tmp_path / "a.tsv", sep="\t", index=False)
    frame.to_parquet(tmp_path / "b.parquet", index=False)
    shutil.copy(DEMO / "recall_factorial.csv", tmp_path / "c.csv")
    docs = []
    for name in ("a.tsv", "b.parquet", "c.csv"):
        assert main(["init", str(tmp_path / name), "-q"]) == 0
        plan = tmp_path / (Path(name).stem + ".toml")
        assert main(["check", str(plan), "-q"]) == 0
        doc = tomllib.loads(plan.read_text(encoding="utf-8"))
        docs.append((doc["data"]["outcome"], doc["factors"], doc["hypotheses"]))
    assert docs[0] == docs[1] == docs[2]


@pytest.mark.parametrize("fmt", ["csv", "parquet"])
def test_a_large_file_reads_a_sample_then_the_factor_columns_in_full(tmp_path, monkeypatch, fmt):
    """Above OUT_OF_CORE_BYTES the roles come from the first SAMPLE_ROWS rows and the levels from
    a full read of the factor columns: a level first seen after the sample is still listed, in
    its place; the plan is the one the whole-file read gives."""
    lines = ["g,y,h,dose"] + [f"{'ab'[i % 2]},{(i * 13) % 97 / 7:.4f},{'pq'[i % 3 == 0]},{(0.5, 1.0, 2.0)[i // 2 % 3]}"
                              for i in range(400)]
    for r in range(300, 312):  # level c first appears at data row 300, beyond the sample
        lines[r] = "c," + lines[r].split(",", 1)[1]
    frame = pd.read_csv(io.StringIO("\n".join(lines)), dtype={"g": str, "h": str})
    small = tmp_path / "small"
    large = tmp_path / "large"
    small.mkdir(), large.mkdir()
    for folder in (small, large):
        if fmt == "csv":
            (folder / "d.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
        else:
            frame.to_parquet(folder / "d.parquet", index=False)
    plain = S.starter_plan(small / f"d.{fmt}").text
    monkeypatch.setattr(D, "OUT_OF_CORE_BYTES", 1)
    monkeypatch.setattr(S, "SAMPLE_ROWS", 100)
    big = S.starter_plan(large / f"d.{fmt}").text
    assert tomllib.loads(big) == tomllib.loads(plain)
    assert _without_guesses(big) == _without_guesses(plain)
    assert "factor 'g' (guessed): 3 distinct values in 400 rows" in big
    assert f"numeric with {frame['y'].head(100).nunique()} distinct values in the first 100 rows" in big
    doc = tomllib.loads(big)
    assert [f["levels"] for f in doc["factors"]] == [list(pd.unique(frame[c])) for c in ("g", "h")]
    assert "not used as factors, because crossed with the others some combinations of levels have no rows: 'dose'" in big
    named = S.starter_plan(large / f"d.{fmt}", factors=["g", "dose"]).text
    assert tomllib.loads(named)["factors"][1] == {"name": "dose", "levels": ["0.5", "1.0", "2.0"]}  # floats as Python writes them
    assert doc["factors"][0]["levels"] == ["a", "b", "c"]
    monkeypatch.undo()
    S.write_starter(S.starter_plan(large / f"d.{fmt}"))
    assert main(["check", str(large / "d.toml"), "-q"]) == 0


def test_an_existing_plan_is_kept_unless_force(tmp_path):
    data = tmp_path / "recall_oneway.csv"
    shutil.copy(DEMO / "recall_oneway.csv", data)
    plan = tmp_path / "recall_oneway.toml"
    plan.write_text("# mine\n", encoding="utf-8")
    res = run(["init", str(data)])
    assert res.returncode == 2 and "exists already" in res.stderr and "--force" in res.stderr
    assert "(guessed)" not in res.stderr and res.stdout == ""  # refused before reading the data
    assert plan.read_text(encoding="utf-8") == "# mine\n"
    res = run(["init", str(data), "--force", "--quiet"])
    assert res.returncode == 0 and res.stderr == ""
    assert "[[factors]]" in plan.read_text(encoding="utf-8")
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []  # no temporary file left


@pytest.mark.parametrize("content, args, expected", [
    ("a,b\nx,p\ny,q\nx,p\ny,q\n", [], "no column can be the outcome"),
    ("y,id\n" + "".join(f"{i * 1.5},{i}\n" for i in range(40)), [], "no column can be a factor"),
    ("recalled,schedule\n1,a\n2,b\n3,a\n4,b\n", ["--outcome", "recaled"], "Did you mean 'recalled'?"),
    ("recalled,schedule\n1,a\n2,b\n3,a\n4,b\n", ["--factor", "schedul"], "Did you mean 'schedule'?"),
    ("recalled,schedule\n1,a\n2,b\n3,a\n4,b\n", ["--outcome", "schedule"], "is not numeric"),
    ("recalled,schedule\n1,a\n2,b\n3,a\n4,b\n", ["--outcome", "recalled", "--factor", "recalled"], "is also the outcome"),
    ("y,g\n" + "".join(f"{i},{i}\n" for i in range(300)), ["--outcome", "y", "--factor", "g"], "more than 256 distinct"),
    (b"y,g\n1,\xff\n", [], "is not UTF-8"),
    ("", [], "the file is empty"),
], ids=["no-numeric", "no-factor", "outcome-typo", "factor-typo", "outcome-text", "factor-is-outcome",
        "too-many-levels", "not-utf8", "empty"])
def test_bad_input_exits_2_with_one_message_and_writes_nothing(tmp_path, content, args, expected):
    data = tmp_path / "d.csv"
    if isinstance(content, bytes):
        data.write_bytes(content)
    else:
        data.write_text(content, encoding="utf-8")
    res = run(["init", str(data), *args])
    assert res.returncode == 2, (res.stdout, res.stderr)
    assert "Traceback" not in res.stderr and expected in res.stderr
    assert res.stderr.count("anova-report: error: ") == 1
    assert "d.csv" in res.stderr or res.stderr.startswith(f"anova-report: error: {args[-2]} ")  # the file or the option
    assert sorted(p.name for p in tmp_path.iterdir()) == ["d.csv"]


def test_a_missing_or_unreadable_data_path_exits_2(tmp_path):
    res = run(["init", str(tmp_path / "nope.csv")])
    assert res.returncode == 2 and "does not exist" in res.stderr and "Traceback" not in res.stderr
    res = run(["init", str(tmp_path)])
    assert res.returncode == 2 and "Traceback" not in res.stderr
    (tmp_path / "x.xlsx").write_bytes(b"PK")
    res = run(["init", str(tmp_path / "x.xlsx")])
    assert res.returncode == 2 and ".csv, .tsv or .parquet" in res.stderr


def test_a_column_name_no_statement_can_hold_gets_a_factor_name_and_the_column_key(tmp_path):
    """A column named with a backtick (or ' x ', the interaction sign) cannot be written in a
    statement: the factor gets a plain name and reads the column through 'column'."""
    lines = ["y,`odd` name,a x b"] + [f"{i * 1.25},{'uv'[i % 2]},{'st'[i % 3 == 0]}" for i in range(24)]
    data = tmp_path / "d.csv"
    data.write_text("\n".join(lines) + "\n", encoding="utf-8")
    res = run(["init", str(data), "-v"])
    assert res.returncode == 0, res.stderr
    assert "read " in res.stderr and " whole" in res.stderr  # --verbose says how the file was read
    doc = tomllib.loads((tmp_path / "d.toml").read_text(encoding="utf-8"))
    assert [(f["name"], f["column"]) for f in doc["factors"]] == [("factor1", "`odd` name"), ("factor2", "a x b")]
    assert "named factor1 in the plan" in res.stderr
    plan = tmp_path / "d.toml"
    plan.write_text(_uncomment_examples(plan.read_text(encoding="utf-8")), encoding="utf-8")
    assert main(["check", str(plan), "-q"]) == 0


def test_named_factors_with_an_empty_combination_are_kept_and_said(tmp_path):
    """Factors named with --factor are used even when a combination of their levels has no rows;
    init says so on stderr, and check then exits 1 naming the effects that need the empty cell."""
    rows = ["y,a,b"] + [f"{i * 0.7:.1f},{a},{b}" for i, (a, b) in enumerate([("p", "u"), ("p", "v"), ("q", "u")] * 6)]
    data = tmp_path / "d.csv"
    data.write_text("\n".join(rows) + "\n", encoding="utf-8")
    res = run(["init", str(data), "--factor", "a", "--factor", "b"])
    assert res.returncode == 0, res.stderr
    assert "1 of the 4 combinations of the factors' levels have no rows" in res.stderr
    res = run(["check", str(tmp_path / "d.toml")])
    assert res.returncode == 1 and "check failed: estimable" in res.stderr and "(a=q, b=v)" in res.stderr
