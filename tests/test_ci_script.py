"""The CI script: a developer running .ci/run gets the run the CI system gets."""

from __future__ import annotations

from pathlib import Path

SCRIPT = Path(__file__).resolve().parents[1] / ".ci" / "run"


def test_ci_script_exports_ci_before_the_tests():
    """.ci/run exports CI (default true) before it runs the README's test command, so the browser
    tests fail instead of skipping when Chromium is missing, also when a developer runs it."""
    text = SCRIPT.read_text(encoding="utf-8")
    export = text.index('export CI="${CI:-true}"')
    assert export < text.index('bash -euo pipefail -c "$cmd"')


def test_ci_script_installs_chromium():
    """.ci/run installs Debian's chromium package when /usr/bin/chromium is missing."""
    text = SCRIPT.read_text(encoding="utf-8")
    assert "[ ! -x /usr/bin/chromium ]" in text
    install = [line for line in text.splitlines() if "apt-get install" in line]
    assert install and "chromium" in install[0]
