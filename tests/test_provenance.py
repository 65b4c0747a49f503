"""The provenance block: what it records in results.json and in the report, and the results digest."""

from __future__ import annotations

import hashlib
import html as html_lib
import json
import os
import re
import shlex
from pathlib import Path

import jsonschema
import numpy as np

from conftest import ONEWAY_DATA, ONEWAY_PLAN
from reporter.cli import main
from reporter.render.results_json import load_schema

EPOCH = "1767225600"


def _run(tmp_path, plan, out_name="out", formats="json,md,html"):
    argv = ["run", str(plan), "--out", str(tmp_path / out_name), "--format", formats]
    assert main(argv) == 0
    return argv, tmp_path / out_name


def test_results_json_records_inputs_rows_command_and_seeds(project, tmp_path, monkeypatch):
    """Size from os.stat, rows read/used/excluded as the file holds them, the command as typed,
    paths that lead back to the inputs from the results folder, the plan's seed and counts."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    data = ONEWAY_DATA + "NA,peat\n"  # one row without an outcome
    plan = project(ONEWAY_PLAN, {"heights.csv": data})
    argv, out = _run(tmp_path, plan)
    doc = json.loads((out / "results.json").read_text(encoding="utf-8"))
    jsonschema.validate(doc, load_schema())
    p = doc["provenance"]
    assert p["data_bytes"] == os.stat(tmp_path / "heights.csv").st_size == len(data.encode())
    n_rows = data.count("\n") - 1  # lines after the header
    assert p["rows"]["read"] == n_rows and p["rows"]["used"] == n_rows - 1
    assert [e["count"] for e in p["rows"]["excluded"]] == [1]
    assert p["argv"] == ["anova-report", *argv]
    assert p["paths_relative_to"] == "results-folder"
    assert (out / p["plan_path"]).resolve() == plan.resolve()
    assert (out / p["data_path"]).resolve() == (tmp_path / "heights.csv").resolve()
    assert p["platform"] and p["lock_sha256"] is None
    r = p["randomness"]
    assert r["seed"] == doc["analysis"]["seed"] and r["permutations"] == doc["analysis"]["permutations"]
    assert r["seed_used_by"] == ["permutation F"] and r["shapiro_wilk_sample"] is None
    perms = [row["permutation"]["n_permutations"] for row in doc["anova"]["rows"] if row.get("permutation")]
    perms += [h["permutation"]["n_permutations"] for h in doc["hypotheses"] if h.get("permutation")]
    assert sorted(x["permutations"] for x in r["permutations_run"]) == sorted(perms)


def test_digest_is_sha256_of_canonical_json(project, tmp_path):
    """results_sha256 is the SHA-256 of the other fields as sorted, compact UTF-8 JSON
    (hashlib and json of the standard library, independent of the writer)."""
    plan = project(ONEWAY_PLAN, {"heights.csv": ONEWAY_DATA})
    _, out = _run(tmp_path, plan, formats="json")
    text = (out / "results.json").read_text(encoding="utf-8")
    doc = json.loads(text)
    digest = doc.pop("results_sha256")
    canonical = json.dumps(doc, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode("utf-8")
    assert digest == hashlib.sha256(canonical).hexdigest()
    assert text.rstrip().endswith(f'"results_sha256": "{digest}"\n}}')


def test_same_command_twice_gives_identical_files_and_a_different_command_only_its_argv(project, tmp_path, monkeypatch):
    """Same command, same bytes in every format; another --format changes only the command line
    (and so the digest) in results.json."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", EPOCH)
    plan = project(ONEWAY_PLAN, {"heights.csv": ONEWAY_DATA})
    files = []
    for _ in range(2):
        _, out = _run(tmp_path, plan, formats="json,md,html,pdf")
        files.append({f: (out / f).read_bytes() for f in ("results.json", "report.md", "report.html", "report.pdf")})
    assert files[0] == files[1]
    _, out = _run(tmp_path, plan, formats="json,md")
    a, b = json.loads(files[0]["results.json"]), json.loads((out / "results.json").read_bytes())
    assert a["provenance"].pop("argv") != b["provenance"].pop("argv")
    del a["results_sha256"], b["results_sha256"]
    assert a == b


def test_report_prints_the_provenance_block(project, tmp_path):
    """The Markdown and HTML print size, rows, the command line, the platform, the seed and the
    digest of the results.json made with them."""
    plan = project(ONEWAY_PLAN, {"heights.csv": ONEWAY_DATA})
    argv, out = _run(tmp_path, plan)
    doc = json.loads((out / "results.json").read_text(encoding="utf-8"))
    p = doc["provenance"]
    md = (out / "report.md").read_text(encoding="utf-8").replace("\\", "")
    html = html_lib.unescape(re.sub(r"<[^>]+>", "", (out / "report.html").read_text(encoding="utf-8")))
    n = p["rows"]["read"]
    for text in (md, html):
        assert f"{p['data_bytes']} bytes" in text
        assert f"{n} read, {n} used, none excluded" in text
        assert p["platform"] in text
        assert f"seed {p['randomness']['seed']} (used by: permutation F)" in text
        assert re.search(rf"Results digest\W*{doc['results_sha256']}`? \(results_sha256 of the results.json", text)
    assert shlex.join(["anova-report", *argv]) in md


def test_python_call_records_no_command_line_and_paths_as_given(project):
    """From Python there is no command line (null, and the report says so); paths are as given."""
    import reporter

    plan = project(ONEWAY_PLAN, {"heights.csv": ONEWAY_DATA})
    rep = reporter.report(plan)
    p = json.loads(rep.render("json"))["provenance"]
    assert p["argv"] is None and p["paths_relative_to"] == "as-given"
    assert Path(p["plan_path"]) == plan.resolve()
    assert "none: made from Python" in rep.render("md").decode("utf-8")


def test_shapiro_sample_and_lock_hash_are_recorded(project, tmp_path):
    """Above 5,000 residuals the seeded Shapiro–Wilk sample is listed with its size; a lock hash
    given to the provenance reaches results.json and the report."""
    from reporter.api import prepare
    from reporter.narrative.build import build_document
    from reporter.provenance import collect_provenance
    from reporter.render.markdown import render_markdown
    from reporter.render.results_json import results_dict
    from reporter.run import analyse

    rng = np.random.default_rng(7)
    rows = "".join(f"{v:.3f},{g}\n" for g in ("peat", "coir", "bark", "soil") for v in rng.normal(10, 1, 1300))
    plan = project(ONEWAY_PLAN + "\n[analysis]\npermutations = 0\n", {"heights.csv": "height_mm,medium\n" + rows})
    prep = prepare(plan)
    analysis = analyse(prep, quiet=True)
    lock = hashlib.sha256(b"a lock").hexdigest()
    prov = collect_provenance(prep, analysis=analysis, lock_sha256=lock)
    r = results_dict(prep, analysis, prov)["provenance"]
    assert r["randomness"]["shapiro_wilk_sample"] == 5000
    assert r["randomness"]["seed_used_by"] == ["Shapiro-Wilk sample"] and r["randomness"]["permutations_run"] == []
    assert r["lock_sha256"] == lock
    md = render_markdown(build_document(prep, analysis, prov)).decode("utf-8")
    assert lock in md and "Shapiro–Wilk on a sample of 5,000 residuals" in md
