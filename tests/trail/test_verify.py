"""anova-report verify: an untouched run verifies (JSON and PDF); a changed byte of the data, a
changed digit of results.json or a changed character of the plan fails with exit 1 and names what
changed; what cannot be checked is bad input (exit 2).

The reference for the digest is the standard library (hashlib.sha256 over json.dumps with sorted
keys and compact separators); the reference for "agree" is the rule itself, checked at values
just inside and just outside it."""

from __future__ import annotations

import json
import os
import shutil
from pathlib import Path

import pytest

from conftest import ONEWAY_DATA, ONEWAY_PLAN
from reporter.cli import main
from reporter.render.results_json import render_json


@pytest.fixture
def made(tmp_path, monkeypatch, request):
    """A project (plan + data in tmp_path/study) run into tmp_path/out as JSON (and as PDF for the
    tests that name a PDF)."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    formats = "json,pdf" if "pdf" in request.node.name else "json"
    study = tmp_path / "study"
    study.mkdir()
    (study / "heights.csv").write_text(ONEWAY_DATA, encoding="utf-8")
    (study / "plan.toml").write_text(ONEWAY_PLAN.lstrip(), encoding="utf-8")
    out = tmp_path / "out"
    assert main(["run", str(study / "plan.toml"), "--out", str(out), "--format", formats]) == 0
    return study, out


def verify(capsys, *args):
    capsys.readouterr()
    code = main(["verify", *map(str, args)])
    got = capsys.readouterr()
    return code, got.out, got.err


def reseal(path: Path, change) -> None:
    """Edit results.json and store a digest that matches the edit (a careful forgery)."""
    doc = json.loads(path.read_text(encoding="utf-8"))
    change(doc)
    path.write_bytes(render_json(doc))


@pytest.mark.parametrize("name", ["results.json", "report.pdf"])
def test_untouched_run_verifies(made, capsys, name):
    """Both the JSON and the PDF verify with exit 0, stating the largest difference and both versions."""
    _, out = made
    code, text, err = verify(capsys, out / name)
    assert code == 0, text + err
    assert "verified:" in text and "NOT verified" not in text
    assert "largest relative difference: no difference at all" in text
    assert "software recorded: python" in text and "software now:      python" in text
    assert "plan: " in text and "SHA-256 matches the recorded one" in text
    if name == "report.pdf":  # the PDF embeds the very bytes of results.json
        from pypdf import PdfReader

        assert PdfReader(str(out / name)).attachments["results.json"][0] == (out / "results.json").read_bytes()


@pytest.mark.parametrize("name", ["results.json", "report.pdf"])
def test_one_byte_of_the_data_changed_fails(made, capsys, name):
    """A changed digit of one outcome value: exit 1, the data's hash and the moved numbers named."""
    study, out = made
    data = study / "heights.csv"
    raw = data.read_bytes()
    data.write_bytes(raw.replace(b"14.2,coir", b"14.3,coir", 1))
    assert data.read_bytes() != raw
    code, text, _ = verify(capsys, out / name)
    assert code == 1
    assert "input data (" in text and "SHA-256" in text
    assert "cells[1].mean: recorded" in text  # coir is the second cell
    assert "results digest: matches" in text


def test_one_digit_of_results_json_changed_fails(made, capsys):
    """One digit of a number edited by hand (inputs unchanged): exit 1, the digest and the field named."""
    _, out = made
    path = out / "results.json"
    text = path.read_text(encoding="utf-8")
    doc = json.loads(text)
    candidates = {"hypotheses[0].p": doc["hypotheses"][0]["p"], "hypotheses[0].se": doc["hypotheses"][0]["se"],
                  "anova.r_squared": doc["anova"]["r_squared"]}
    field, value = next((k, v) for k, v in candidates.items() if text.count(json.dumps(v)) == 1)
    old = json.dumps(value)
    i = next(i for i in range(2, len(old)) if old[i].isdigit())  # a digit after the first two characters
    new = old[:i] + ("1" if old[i] != "1" else "2") + old[i + 1:]
    path.write_text(text.replace(old, new), encoding="utf-8")
    code, out_text, _ = verify(capsys, path)
    assert code == 1
    assert "results digest (results_sha256)" in out_text
    assert f"{field}: recorded {new}, recomputed {old}" in out_text
    assert "input plan" not in out_text and "input data" not in out_text


def test_one_character_of_the_plan_changed_fails(made, capsys):
    """One character of the plan's title: exit 1, the plan's hash and the title field named."""
    study, out = made
    plan = study / "plan.toml"
    plan.write_text(plan.read_text(encoding="utf-8").replace("Seedling", "Seedlinx", 1), encoding="utf-8")
    code, text, _ = verify(capsys, out / "results.json")
    assert code == 1
    assert "input plan (" in text
    assert 'title: recorded "Seedling height under four growing media", recomputed "Seedlinx' in text


def test_forged_digest_is_still_caught_by_recomputation(made, capsys):
    """A number changed beyond 1e-10 relative with a matching digest fails on that field alone; a
    change within 1e-10 relative passes and is reported as the largest difference."""
    _, out = made
    path = out / "results.json"
    original = path.read_bytes()
    reseal(path, lambda d: d["anova"]["rows"][0].__setitem__("F", d["anova"]["rows"][0]["F"] * (1 + 1e-8)))
    code, text, _ = verify(capsys, path)
    assert code == 1 and "anova.rows[0].F: recorded" in text and "results digest (" not in text
    path.write_bytes(original)
    reseal(path, lambda d: d["anova"]["rows"][0].__setitem__("F", d["anova"]["rows"][0]["F"] * (1 + 1e-12)))
    code, text, _ = verify(capsys, path)
    assert code == 0, text
    assert "largest relative difference: 1e-12 at anova.rows[0].F" in text


def test_whole_numbers_compare_exactly(made, capsys):
    """A cell count changed by one (with a matching digest) fails, whatever its relative size."""
    _, out = made
    path = out / "results.json"
    reseal(path, lambda d: d["cells"][0].__setitem__("n", d["cells"][0]["n"] + 1))
    code, text, _ = verify(capsys, path)
    assert code == 1 and "cells[0].n: recorded 5, recomputed 4" in text


def test_run_descriptions_are_reported_not_failed(made, capsys):
    """Software versions, created and argv that differ are listed but do not fail."""
    _, out = made
    path = out / "results.json"

    def change(d):
        d["provenance"]["software"]["numpy"] = "0.0.1"
        d["provenance"]["created"] = "2020-01-01T00:00:00Z"

    reseal(path, change)
    code, text, _ = verify(capsys, path)
    assert code == 0, text
    assert "reported, not failed" in text
    assert 'provenance.software: recorded {"anova-report"' in text and '"numpy": "0.0.1"' in text
    assert 'provenance.created: recorded "2020-01-01T00:00:00Z", now "2026-01-01T00:00:00Z"' in text


def test_inputs_moved_together_or_given(made, capsys, tmp_path):
    """Paths are relative to the results folder: moving everything together still verifies; a
    results file moved alone needs --plan and --data (exit 2 without, 0 with)."""
    study, out = made
    moved = tmp_path / "elsewhere"
    moved.mkdir()
    shutil.move(str(study), moved / "study")
    shutil.move(str(out), moved / "out")
    code, text, _ = verify(capsys, moved / "out" / "results.json")
    assert code == 0, text
    alone = tmp_path / "alone"
    alone.mkdir()
    shutil.copy(moved / "out" / "results.json", alone)
    code, _, err = verify(capsys, alone / "results.json")
    assert code == 2 and "which is not there; give the plan with --plan PLAN" in err
    code, _, err = verify(capsys, alone / "results.json", "--plan", moved / "study" / "plan.toml")
    assert code == 2 and "give the data file with --data FILE" in err
    code, text, _ = verify(capsys, alone / "results.json", "--plan", moved / "study" / "plan.toml",
                           "--data", moved / "study" / "heights.csv")
    assert code == 0, text


def test_pdf_uses_its_embedded_plan_when_the_plan_is_gone(made, capsys):
    """A PDF whose plan file was removed is verified against the plan embedded in it."""
    study, out = made
    (study / "plan.toml").unlink()
    code, text, _ = verify(capsys, out / "report.pdf")
    assert code == 0, text
    assert "plan: the plan embedded in the PDF: SHA-256 matches" in text


def _pdf_without_results(path: Path) -> None:
    from pypdf import PdfWriter

    w = PdfWriter()
    w.add_blank_page(width=100, height=100)
    w.add_attachment("plan.toml", b"title = 'x'\n")
    with open(path, "wb") as fh:
        w.write(fh)


@pytest.mark.parametrize("case", ["missing", "folder", "fifo", "text", "other-json", "pdf-without-results",
                                  "broken-pdf", "bad-json", "nan", "deep"])
def test_what_cannot_be_checked_is_bad_input(made, capsys, tmp_path, case):
    """Exit 2, one line on stderr naming the file and the fix, nothing on stdout, no traceback."""
    target = tmp_path / "given"
    if case == "folder":
        target.mkdir()
    elif case == "text":
        target.write_text("not json at all\n", encoding="utf-8")
    elif case == "other-json":
        target.write_text('{"schema": "something/else", "provenance": {}}', encoding="utf-8")
    elif case == "pdf-without-results":
        _pdf_without_results(target)
    elif case == "broken-pdf":
        target.write_bytes(b"%PDF-1.7\n% nothing else follows\n")
    elif case == "bad-json":
        target.write_text('{"schema": "anova-report/results/1",', encoding="utf-8")
    elif case == "fifo":  # refused without blocking: nobody writes to it
        os.mkfifo(target)
    elif case == "deep":
        target.write_text('{"schema": "anova-report/results/1", "x": ' + "[" * 100_000 + "]" * 100_000 + "}",
                          encoding="utf-8")
    elif case == "nan":
        target.write_text('{"schema": "anova-report/results/1", "provenance": {}, "x": NaN}', encoding="utf-8")
    code, text, err = verify(capsys, target)
    assert code == 2
    assert text == ""
    assert err.startswith("anova-report: error: ") and str(target) in err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    if case == "pdf-without-results":
        assert "has no embedded results.json (it holds plan.toml)" in err


def test_inputs_are_not_modified_by_verifying_a_pdf(made, capsys):
    """verify reads its inputs and the results file only."""
    study, out = made
    files = [study / "plan.toml", study / "heights.csv", out / "results.json", out / "report.pdf"]
    before = [(f.read_bytes(), f.stat().st_mtime_ns) for f in files]
    assert verify(capsys, out / "report.pdf")[0] == 0
    assert [(f.read_bytes(), f.stat().st_mtime_ns) for f in files] == before


def test_data_changed_beyond_reading_still_names_the_change(made, capsys):
    """Data changed so that they can no longer be analysed: exit 1 with the data's hash, and a note
    that nothing was recomputed (not exit 2: the inputs were found, they differ)."""
    study, out = made
    data = study / "heights.csv"
    data.write_bytes(data.read_bytes().replace(b"14.2,coir", b"14.2,cork", 1))  # a level the plan does not list
    code, text, _ = verify(capsys, out / "results.json")
    assert code == 1
    assert "input data (" in text and "no number was recomputed" in text and "cork" in text


def test_a_run_checked_against_its_lock_verifies_also_from_the_pdf_alone(made, capsys, tmp_path):
    """lock, run, verify: the recomputation is compared with the same lock (beside the plan), and a
    PDF whose plan file is gone finds the lock beside the recorded plan."""
    from reporter.trail.lock import lock_plan

    study, _ = made
    lock_plan(study / "plan.toml")
    out = tmp_path / "locked"
    assert main(["run", str(study / "plan.toml"), "--out", str(out), "--format", "json,pdf"]) == 0
    doc = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert doc["provenance"]["lock_sha256"] == doc["lock"]["sha256"]
    code, text, _ = verify(capsys, out / "results.json")
    assert code == 0, text
    (study / "plan.toml").unlink()
    code, text, _ = verify(capsys, out / "report.pdf")
    assert code == 0, text
