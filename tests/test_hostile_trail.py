"""Hostile inputs for the commands that start and check a trail: ``init`` and ``verify``.

Each case runs the command in this process and checks the contract for bad input (exit code 2,
one stderr line starting with "anova-report: error:" that names the file and the key or option,
no traceback, no file written, inputs unchanged) or, for ``verify``, that a changed input or
results file is found (exit 1, naming what changed) and that a moved folder still verifies.
The rules checked are the project's own (common practice, no source); the data are the seeded,
simulated one-way demo of demo_project/ and small tables written here.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import shutil
from pathlib import Path

import pytest

from reporter.cli import main

DEMO = Path(__file__).resolve().parents[1] / "demo_project"


def _tree(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def _bad(argv, capsys, *names) -> str:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert code == 2, err
    assert err.startswith("anova-report: error:"), err
    assert "Traceback" not in err and "internal error" not in err
    assert out == ""
    for name in names:
        assert name in err, err
    return err


@pytest.fixture(scope="module")
def trail(tmp_path_factory):
    """The one-way demo run once into out/ (results.json and report.pdf)."""
    root = tmp_path_factory.mktemp("trail") / "project folder é"
    shutil.copytree(DEMO, root)
    assert main(["run", str(root / "oneway.toml"), "--out", str(root / "out"), "--format", "json,pdf", "-q"]) == 0
    return root


@pytest.fixture
def project(trail, tmp_path):
    root = tmp_path / "copy"
    shutil.copytree(trail, root)
    return root


# ---------------------------------------------------------------------------------------------
# verify: a results.json whose recorded paths are of the wrong shape


@pytest.mark.parametrize(("key", "value", "option"), [
    ("plan_path", 7, "--plan"),
    ("plan_path", ["a.toml"], "--plan"),
    ("plan_path", "", "--plan"),
    ("plan_path", "a\u0000b.toml", "--plan"),
    ("data_path", {"a": 1}, "--data"),
    ("data_path", True, "--data"),
    ("data_path", "a\u0000b.csv", "--data"),
])
def test_verify_recorded_path_of_wrong_type(project, capsys, key, value, option):
    results = project / "out" / "results.json"
    doc = json.loads(results.read_text(encoding="utf-8"))
    doc["provenance"][key] = value
    results.write_text(json.dumps(doc), encoding="utf-8")
    before = _tree(project)
    err = _bad(["verify", results], capsys, "results.json", f"provenance.{key}", option)
    assert _tree(project) == before


@pytest.mark.parametrize(("key", "value"), [
    ("plan_path", "a" * 5000 + ".toml"),  # longer than the system allows
    ("plan_path", "x/" * 3000 + "p.toml"),
    ("data_path", "d" * 300 + "/" + "e" * 300 + ".csv"),  # a name part too long
    ("data_path", "/*/*/nothing-here-*.csv"),
])
def test_verify_recorded_path_the_system_refuses(project, capsys, key, value):
    results = project / "out" / "results.json"
    doc = json.loads(results.read_text(encoding="utf-8"))
    doc["provenance"][key] = value
    results.write_text(json.dumps(doc), encoding="utf-8")
    err = _bad(["verify", results], capsys, "results.json", "not there", "--plan" if key == "plan_path" else "--data")
    assert "records the " in err


@pytest.mark.parametrize("value", [".", "..", "../oneway.toml", "../README.md"])
def test_verify_recorded_data_that_is_no_data_file(project, capsys, value):
    results = project / "out" / "results.json"
    doc = json.loads(results.read_text(encoding="utf-8"))
    doc["provenance"]["data_path"] = value
    results.write_text(json.dumps(doc), encoding="utf-8")
    err = _bad(["verify", results], capsys, "results.json", "the data it records", "--data FILE")
    assert not err.startswith("anova-report: error: --data")  # --data was not given


@pytest.mark.parametrize("name", ["missing.csv", "no folder/missing.csv", "sp ace é.parquet"])
def test_verify_missing_data_option_names_the_option(project, capsys, name):
    err = _bad(["verify", project / "out" / "results.json", "--data", project / name], capsys,
               "does not exist", "--data FILE")
    assert "[data] path" not in err  # the path came from the command line, not from a plan


@pytest.mark.parametrize("content", [b"", b"\x00\x01\xff", b"[1, 2]", b'{"schema": 3}', b"%PDF-1.7\n trailer",
                                     b"[" * 100_000 + b"]" * 100_000, b'{"a":' * 50_000 + b"1" + b"}" * 50_000])
@pytest.mark.parametrize("suffix", [".json", ".pdf"])
def test_verify_results_file_that_is_not_one(tmp_path, capsys, content, suffix):
    path = tmp_path / f"results{suffix}"
    path.write_bytes(content)
    _bad(["verify", path], capsys, f"results{suffix}")


def test_verify_truncated_pdf(trail, tmp_path, capsys):
    raw = (trail / "out" / "report.pdf").read_bytes()
    for n in (10, 2000, len(raw) // 2):
        path = tmp_path / f"cut {n}.pdf"
        path.write_bytes(raw[:n])
        _bad(["verify", path], capsys, f"cut {n}.pdf")


# ---------------------------------------------------------------------------------------------
# verify: one byte changed is found; a moved folder still verifies


def _verify(results, capsys, *extra):
    code = main(["verify", str(results), *map(str, extra)])
    out, err = capsys.readouterr()
    assert "Traceback" not in err and "internal error" not in err
    return code, out, err


def _flip_digit(text: str, start: int) -> str:
    i = next(j for j in range(start, len(text)) if text[j].isdigit())
    return text[:i] + str((int(text[i]) + 1) % 10) + text[i + 1:]


def test_verify_finds_one_changed_byte_of_the_data(project, capsys):
    data = project / "recall_oneway.csv"
    raw = data.read_text(encoding="utf-8")
    data.write_text(_flip_digit(raw, raw.rindex("\n", 0, len(raw) - 1)), encoding="utf-8")
    code, out, _ = _verify(project / "out" / "results.json", capsys)
    assert code == 1
    assert "input data" in out and "SHA-256" in out and "NOT verified" in out


def test_verify_finds_one_changed_character_of_the_plan(project, capsys):
    plan = project / "oneway.toml"
    text = plan.read_text(encoding="utf-8")
    plan.write_text(text.replace("plan", "plen", 1), encoding="utf-8")  # in a comment: no number moves
    code, out, _ = _verify(project / "out" / "results.json", capsys)
    assert code == 1
    assert "input plan" in out and "NOT verified" in out


@pytest.mark.parametrize("field", ['"F": ', '"df": ', '"p": '])
def test_verify_finds_one_changed_digit_of_the_results(project, capsys, field):
    results = project / "out" / "results.json"
    text = results.read_text(encoding="utf-8")
    results.write_text(_flip_digit(text, text.index(field) + len(field)), encoding="utf-8")
    code, out, _ = _verify(results, capsys)
    assert code == 1
    assert "results digest" in out and "NOT verified" in out
    assert re.search(r"anova\.rows\[\d+\]\.(F|df|p)", out) or "hypotheses" in out, out


def test_verify_finds_data_and_plan_changed_together(project, capsys):
    data = project / "recall_oneway.csv"
    raw = data.read_text(encoding="utf-8")
    data.write_text(_flip_digit(raw, raw.rindex("\n", 0, len(raw) - 1)), encoding="utf-8")
    plan = project / "oneway.toml"
    plan.write_text(plan.read_text(encoding="utf-8").replace("plan", "plen", 1), encoding="utf-8")
    code, out, _ = _verify(project / "out" / "report.pdf", capsys)
    assert code == 1
    assert "input data" in out and "input plan" in out


def test_verify_passes_after_the_folder_moves_and_from_another_folder(project, tmp_path, capsys, monkeypatch):
    moved = tmp_path / "elsewhere" / "moved sp ace ü"
    moved.parent.mkdir()
    shutil.move(project, moved)
    for cwd in (moved / "out", moved, tmp_path, Path("/")):
        monkeypatch.chdir(cwd)
        for results in (moved / "out" / "results.json", moved / "out" / "report.pdf"):
            target = os.path.relpath(results, cwd) if cwd != Path("/") else results
            code, out, err = _verify(target, capsys)
            assert code == 0, out + err
            assert "verified:" in out


# ---------------------------------------------------------------------------------------------
# init: names that a plan must escape, a data file it cannot name, a path from the command line


@pytest.mark.parametrize("name", ["ctl\x1b[31m.csv", "bell\x07.csv", "tab\tname.csv", "rtl\u202e.csv",
                                  "sp ace é.csv"])
def test_init_control_characters_in_the_file_name(tmp_path, capsys, name):
    data = tmp_path / name
    data.write_text("g,y\na,1\nb,2\na,3\nb,4\na,5\nb,7\n", encoding="utf-8")
    code = main(["init", str(data), "-q"])
    out, err = capsys.readouterr()
    assert code == 0, err
    plan = data.with_name(data.stem + ".toml")
    import tomllib

    assert tomllib.loads(plan.read_text(encoding="utf-8"))["data"]["path"] == name
    assert main(["check", str(plan), "-q"]) == 0


@pytest.mark.parametrize("header", ['"g\x1bx",y', '"g\nx",y', 'g,"y\x07\r"', '"gro\u202eup",y'])
def test_init_control_characters_in_column_names(tmp_path, capsys, header):
    data = tmp_path / "d.csv"
    data.write_text(header + "\na,1\nb,2\na,3\nb,4\na,5\nb,7\n", encoding="utf-8")
    code = main(["init", str(data), "-q"])
    _, err = capsys.readouterr()
    assert code == 0, err
    assert "internal error" not in err
    assert main(["check", str(tmp_path / "d.toml"), "-q"]) == 0


def test_init_file_name_that_is_not_utf8(tmp_path, capsys):
    folder = os.fsencode(tmp_path)
    path = os.path.join(folder, b"bad\xff.csv")
    with open(path, "wb") as fh:
        fh.write(b"g,y\na,1\nb,2\na,3\nb,4\n")
    _bad(["init", os.fsdecode(path)], capsys, "not UTF-8", "Rename")
    assert sorted(os.listdir(folder)) == [b"bad\xff.csv"]


@pytest.mark.parametrize("name", ["missing.csv", "no folder/missing.tsv", "ü.parquet"])
def test_init_missing_file_speaks_of_init(tmp_path, capsys, name):
    err = _bad(["init", tmp_path / name], capsys, "does not exist", "anova-report init")
    assert "[data] path" not in err
    assert list(tmp_path.iterdir()) == []


def test_init_guess_reads_a_sample_and_counts_every_level(tmp_path, capsys):
    """A level first seen after the sampled rows is still a level of the starter plan."""
    from reporter.starter import SAMPLE_ROWS

    rows = ["g,y"] + [f"{'ab'[i % 2]},{i % 7}.5" for i in range(SAMPLE_ROWS + 10)] + ["c,1.5", "c,2.5"]
    data = tmp_path / "late.csv"
    data.write_text("\n".join(rows) + "\n", encoding="utf-8")
    before = data.read_bytes()
    assert main(["init", str(data), "-q"]) == 0
    import tomllib

    plan = tomllib.loads((tmp_path / "late.toml").read_text(encoding="utf-8"))
    assert plan["factors"][0]["levels"] == ["a", "b", "c"]
    assert data.read_bytes() == before


@pytest.mark.parametrize("path", [".", "/", ""])
@pytest.mark.parametrize("command", ["init", "lock"])
def test_folder_without_a_name(tmp_path, capsys, monkeypatch, command, path):
    monkeypatch.chdir(tmp_path)
    _bad([command, path], capsys, "is a folder")
    assert list(tmp_path.iterdir()) == []


# ---------------------------------------------------------------------------------------------
# analyze() and Report: data of the wrong shape, paths the system refuses


@pytest.mark.parametrize(("data", "words"), [
    ({"g": list("aabbcc"), "y": [1.0, 2.0, 3.0]}, "different lengths"),
    ({"g": list("aabbcc"), "y": [1.0] * 7}, "different lengths"),
    ({"g": list("aabbcc"), "y": 5}, "sequence of values"),
    ({"g": list("aabbcc"), "y": None}, "sequence of values"),
])
def test_analyze_columns_of_unequal_length(data, words):
    import reporter
    from reporter.errors import DataError

    with pytest.raises(DataError, match=words) as info:
        reporter.analyze(data, outcome="y", factors=["g"])
    assert "'y'" in str(info.value)


@pytest.mark.parametrize(("g", "words"), [
    ([], "no rows"),
    (["a"] * 4, "only value is 'a'"),
    ([None] * 4, "every value is missing"),
    (["NA", "", "NA", ""], "every value is missing"),
])
def test_analyze_factor_with_fewer_than_two_levels(g, words):
    import reporter
    from reporter.errors import DataError

    y = [float(i) for i in range(len(g))]
    with pytest.raises(DataError, match=words) as info:
        reporter.analyze({"g": g, "y": y}, outcome="y", factors=["g"])
    assert "factors['g']" in str(info.value) and "at least 2" in str(info.value)


@pytest.mark.parametrize("name", ["x" * 5000 + ".html", "y" * 300 + ".html", "a file/sub.html"])
@pytest.mark.parametrize("method", ["to_html", "to_pdf"])
def test_report_path_the_system_refuses(tmp_path, monkeypatch, name, method):
    import reporter
    from reporter.errors import RenderError

    monkeypatch.chdir(tmp_path)
    (tmp_path / "a file").write_text("kept", encoding="utf-8")
    rows = {"g": list("aabbccaabbcc"), "y": [1.0, 2.0, 3.5, 4.0, 6.0, 7.5, 1.5, 2.5, 3.0, 4.5, 6.5, 7.0]}
    report = reporter.analyze(rows, outcome="y", factors=["g"])
    with pytest.raises(RenderError, match="cannot be written there"):
        getattr(report, method)(name)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a file"]
    assert (tmp_path / "a file").read_text(encoding="utf-8") == "kept"


@pytest.mark.parametrize("keywords", [
    {"hypotheses": {"x": "nope > massed"}},
    {"hypotheses": 3},
    {"alfa": 0.1},
    {"alpha": "high"},
])
def test_from_statsmodels_messages_name_the_function_called(keywords):
    """A bad argument to from_statsmodels is reported as from_statsmodels's (the fit: statsmodels
    OLS on the simulated one-way demo data)."""
    import pandas as pd
    import statsmodels.formula.api as smf

    import reporter
    from reporter.errors import ReporterError

    frame = pd.read_csv(DEMO / "recall_oneway.csv")
    fit = smf.ols("recalled ~ C(schedule)", frame).fit()
    with pytest.raises(ReporterError) as info:
        reporter.from_statsmodels(fit, **keywords)
    assert "analyze()" not in str(info.value)
