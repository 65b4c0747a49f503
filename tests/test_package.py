"""Packaging: the templates and the JSON Schema travel with the package."""

from __future__ import annotations

import tomllib
from importlib import resources
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_templates_are_package_data():
    """templates/ (top level) is the package reporter.templates, and its files are declared as package data."""
    conf = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    tool = conf["tool"]["setuptools"]
    assert tool["package-dir"]["reporter.templates"] == "templates"
    assert "reporter.templates" in tool["packages"]
    patterns = tool["package-data"]["reporter.templates"]
    shipped = {p.name for p in (ROOT / "templates").iterdir() if p.is_file() and p.suffix != ".py"}
    for name in shipped:
        assert any(Path(name).match(pat) for pat in patterns), name
    installed = {p.name for p in resources.files("reporter.templates").iterdir()}
    assert {"report.html.j2", "report.css", "report.md.j2"} <= installed


def test_schema_is_package_data():
    """The results schema is readable through importlib.resources."""
    assert resources.files("reporter.schema").joinpath("results-1.schema.json").is_file()


def test_every_python_package_is_declared():
    """Every folder under reporter/ that holds Python modules is in pyproject's package list, so a
    non-editable install (README command 1) ships it; a missing entry installs without error and fails
    only at run time."""
    conf = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    declared = set(conf["tool"]["setuptools"]["packages"])
    found = set()
    for init in (ROOT / "reporter").rglob("__init__.py"):
        if "__pycache__" in init.parts:
            continue
        found.add(".".join(init.parent.relative_to(ROOT).parts))
    for folder in (ROOT / "reporter").rglob("*.py"):
        if "__pycache__" not in folder.parts:
            found.add(".".join(folder.parent.relative_to(ROOT).parts))
    assert found <= declared, sorted(found - declared)
