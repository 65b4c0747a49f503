"""The Python interface: the same steps as the command, with a DataFrame as input."""

from __future__ import annotations

import io
import json
import math
import subprocess
import sys
from pathlib import Path

import pandas as pd

import reporter
from conftest import ONEWAY_DATA, ONEWAY_PLAN

DEMO = Path(__file__).resolve().parents[1] / "demo_project"


def test_import_is_light():
    """import reporter loads neither scipy nor matplotlib (they load on first use)."""
    code = "import sys, reporter; print(any(m in sys.modules for m in ('scipy', 'matplotlib', 'weasyprint')))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_report_from_a_dataframe_equals_the_file(project):
    """A DataFrame gives the same F as the CSV it came from; the report renders and writes."""
    path = project(ONEWAY_PLAN, {"heights.csv": ONEWAY_DATA})
    from_file = reporter.report(path)
    frame = pd.read_csv(io.StringIO(ONEWAY_DATA))
    from_frame = reporter.report(path, data=frame)
    assert math.isclose(from_file.analysis.anova.rows[0].F, from_frame.analysis.anova.rows[0].F, rel_tol=1e-12)
    assert "<!DOCTYPE html>" in from_file._repr_html_()
    doc = json.loads(from_file.render("json"))
    assert doc["provenance"]["data_sha256"] == from_file.prepared.data.sha256


def test_write_matches_the_command(tmp_path, monkeypatch):
    """Report.write produces the same results.json as anova-report run (fixed SOURCE_DATE_EPOCH),
    except the command line, which only the command has (null from Python), and so the digest."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    r = reporter.report(DEMO / "oneway.toml")
    r.write(tmp_path / "api", formats=("json",))
    from reporter.cli import main

    assert main(["run", str(DEMO / "oneway.toml"), "--out", str(tmp_path / "cli"), "--format", "json"]) == 0
    api, cli = (json.loads((tmp_path / d / "results.json").read_bytes()) for d in ("api", "cli"))
    assert api["provenance"].pop("argv") is None
    assert cli["provenance"].pop("argv") == ["anova-report", "run", str(DEMO / "oneway.toml"), "--out",
                                             str(tmp_path / "cli"), "--format", "json"]
    del api["results_sha256"], cli["results_sha256"]
    assert api == cli
