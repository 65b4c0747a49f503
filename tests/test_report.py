"""The whole report on the demo project: PDF content and attachments, determinism, escaping,
and the HTML in a real browser."""

from __future__ import annotations

import io
import json
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import ONEWAY_DATA, ONEWAY_PLAN

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_project"
CHROMIUM = Path("/usr/bin/chromium")
EPOCH = {"SOURCE_DATE_EPOCH": "1767225600"}


def run(args, env_extra=None):
    env = dict(os.environ, **(env_extra or {}))
    return subprocess.run([sys.executable, "-m", "reporter", *args], capture_output=True, text=True, env=env)


def squash(text: str) -> str:
    return re.sub(r"\s+", " ", text).strip()


@pytest.fixture(scope="module")
def demo_report(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo")
    res = run(["run", str(DEMO / "oneway.toml"), "--out", str(out), "--format", "json,html,pdf,md"], EPOCH)
    assert res.returncode == 0, res.stderr
    return out


def test_pdf_holds_every_planned_result_and_both_attachments(demo_report):
    """The PDF contains the results sentence of each planned hypothesis and embeds plan.toml and results.json."""
    from pypdf import PdfReader

    reader = PdfReader(str(demo_report / "report.pdf"))
    text = squash(" ".join(page.extract_text() for page in reader.pages))
    results = json.loads((demo_report / "results.json").read_text(encoding="utf-8"))
    planned = [h for h in results["hypotheses"] if h["role"] == "planned"]
    assert len(planned) == 3
    for h in planned:
        # the opening of the results sentence names the hypothesis and its verdict
        assert re.search(re.escape(h["name"]) + r": the (directional hypothesis was supported|unweighted means differed)", text), h["name"]
    assert "t(110) = 2.29" in text and "F(3, 110) = 10.02" in text
    attachments = reader.attachments
    assert attachments["plan.toml"][0] == (DEMO / "oneway.toml").read_bytes()
    assert json.loads(attachments["results.json"][0])["provenance"]["data_sha256"] == results["provenance"]["data_sha256"]


def test_markdown_has_methods_and_results(demo_report):
    """report.md carries the methods and results prose and the tables."""
    md = (demo_report / "report.md").read_text(encoding="utf-8")
    assert "## Methods" in md and "## Results" in md
    assert "long spacing beats massing: the directional hypothesis was supported" in md
    assert re.search(r"^\|.*\|$", md, re.M)


def test_html_and_json_identical_across_processes(tmp_path):
    """With a fixed SOURCE_DATE_EPOCH two separate runs of the same command write byte-identical
    HTML and JSON."""
    outs = []
    out = tmp_path / "run"
    for _ in range(2):
        res = run(["run", str(DEMO / "factorial.toml"), "--out", str(out), "--format", "html,json"], EPOCH)
        assert res.returncode == 0, res.stderr
        outs.append(((out / "report.html").read_bytes(), (out / "results.json").read_bytes()))
    assert outs[0] == outs[1]
    assert b"2026-01-01T00:00:00Z" in outs[0][0]


HOSTILE = "<img src=x onerror=alert(1)>"


def test_hostile_level_is_text_everywhere(project, tmp_path):
    """A level named <img src=x onerror=alert(1)> appears as text in HTML, PDF and Markdown."""
    plan = ONEWAY_PLAN.replace('"soil"]', f'"{HOSTILE}"]').replace('means = "coir > bark"', f'means = "`{HOSTILE}` < coir"')
    data = ONEWAY_DATA.replace(",soil", f",{HOSTILE}")
    path = project(plan, {"heights.csv": data})
    out = tmp_path / "out"
    res = run(["run", str(path), "--out", str(out), "--format", "html,pdf,md,json"])
    assert res.returncode == 0, res.stderr
    html = (out / "report.html").read_text(encoding="utf-8")
    assert HOSTILE not in html and "&lt;img src=x onerror=alert(1)&gt;" in html
    assert "<img" not in html and "onerror=alert" not in html.replace("onerror=alert(1)&gt;", "")
    md = (out / "report.md").read_text(encoding="utf-8")
    assert HOSTILE not in md and "\\<img src=x onerror=alert(1)\\>" in md
    from pypdf import PdfReader

    pdf_text = " ".join(p.extract_text() for p in PdfReader(str(out / "report.pdf")).pages)
    assert HOSTILE in pdf_text  # shown literally, as text


def _require_browser():
    if CHROMIUM.exists():
        return
    if os.environ.get("CI"):
        pytest.fail(f"Chromium is missing at {CHROMIUM}; .ci/run installs Debian's chromium package")
    pytest.skip(f"Chromium is not installed at {CHROMIUM} (apt-get install chromium)")


def test_demo_report_in_a_real_browser(demo_report, tmp_path):
    """Headless Chromium opens report.html from disk: no network request, no console error; a screenshot is saved."""
    _require_browser()
    from playwright.sync_api import sync_playwright

    path = demo_report / "report.html"
    requests, errors = [], []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=str(CHROMIUM), args=[
            "--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
            "--no-first-run"])
        page = browser.new_page(viewport={"width": 1280, "height": 900})
        page.on("request", lambda r: requests.append(r.url))
        page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.route("**/*", lambda route: route.continue_() if route.request.url.startswith("file:") else route.abort())
        page.goto(path.as_uri(), wait_until="load")
        shot = tmp_path / "demo-report.png"
        page.screenshot(path=str(shot), full_page=True)
        browser.close()
    assert requests == [path.as_uri()]
    assert errors == []
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
