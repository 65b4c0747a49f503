"""The README's "When something is wrong" messages are the tool's own, word for word.

Each example is reproduced here: the demo plan and data are copied, the one mistake the README
describes is made, and `anova-report check` must print exactly the message the README quotes
and exit with code 2. Only the folder the plan was copied to is replaced by the README's
stand-in, /home/you/study.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_project"


def _quoted_messages() -> list[str]:
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## When something is wrong", 1)[1].split("\n## ", 1)[0]
    return [block.strip("\n") for block in re.findall(r"```\n(.*?)```", section, re.S)]


def _misspelled_key(folder: Path) -> None:
    plan = folder / "oneway.toml"
    plan.write_text(plan.read_text(encoding="utf-8").replace("\nalpha = 0.05", "\nalpah = 0.05", 1), encoding="utf-8")


def _unknown_level(folder: Path) -> None:
    data = folder / "recall_oneway.csv"
    lines = data.read_text(encoding="utf-8").split("\n")
    assert ",massed," in lines[2]
    lines[2] = lines[2].replace(",massed,", ",masssed,")
    data.write_text("\n".join(lines), encoding="utf-8")


def _unbalanced_parenthesis(folder: Path) -> None:
    plan = folder / "oneway.toml"
    text = plan.read_text(encoding="utf-8")
    assert "`spaced-long`)/2 > massed" in text
    plan.write_text(text.replace("`spaced-long`)/2 > massed", "`spaced-long`/2 > massed", 1), encoding="utf-8")


@pytest.mark.parametrize("index, mistake", [(0, _misspelled_key), (1, _unknown_level), (2, _unbalanced_parenthesis)])
def test_readme_quotes_the_tools_message(index, mistake, tmp_path):
    """The README's message number ``index`` is what the tool prints for that mistake."""
    quoted = _quoted_messages()
    assert len(quoted) == 3
    for name in ("oneway.toml", "recall_oneway.csv"):
        shutil.copy(DEMO / name, tmp_path / name)
    mistake(tmp_path)
    res = subprocess.run([sys.executable, "-m", "reporter", "check", "oneway.toml"], cwd=tmp_path,
                         capture_output=True, text=True)
    assert res.returncode == 2
    assert res.stdout == ""
    # The README shows the plan's folder as /home/you/study (a message may give the full path).
    shown = res.stderr.rstrip("\n").replace(str(tmp_path.resolve()), "/home/you/study")
    assert shown == quoted[index]
