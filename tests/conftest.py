"""Shared helpers: test data location and a factory for small plan + data projects."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest
from hypothesis import settings

# No timed assertions in tests: Hypothesis's per-example deadline fails tests on a busy machine.
settings.register_profile("untimed", deadline=None)
settings.load_profile("untimed")

DATA_DIR = Path(__file__).parent / "data"


def plant_growth_codes():
    """PlantGrowth (Dobson 1983) as (weights, group codes ctrl=0 trt1=1 trt2=2, number of groups)."""
    import numpy as np

    rows = [line.split(",") for line in (DATA_DIR / "PlantGrowth.csv").read_text().splitlines()[1:] if line]
    levels = ["ctrl", "trt1", "trt2"]
    return np.array([float(w) for w, _ in rows]), np.array([levels.index(g) for _, g in rows]), 3


@pytest.fixture
def data_dir() -> Path:
    return DATA_DIR


@pytest.fixture
def project(tmp_path):
    """Write a plan (TOML text) and optional data files into a temporary folder."""

    def make(plan: str, files: dict[str, str | bytes] | None = None, name: str = "plan.toml") -> Path:
        for fname, content in (files or {}).items():
            target = tmp_path / fname
            if isinstance(content, bytes):
                target.write_bytes(content)
            else:
                target.write_text(content, encoding="utf-8")
        path = tmp_path / name
        path.write_text(textwrap.dedent(plan).lstrip(), encoding="utf-8")
        return path

    return make


ONEWAY_PLAN = """
title = "Seedling height under four growing media"
[data]
path = "heights.csv"
outcome = "height_mm"
[[factors]]
name = "medium"
levels = ["peat", "coir", "bark", "soil"]
[[hypotheses]]
name = "coir beats bark"
means = "coir > bark"
[[hypotheses]]
name = "media differ"
effect = "medium"
"""

ONEWAY_DATA = "height_mm,medium\n" + "".join(
    f"{v},{m}\n"
    for m, vals in {
        "peat": [12.1, 13.4, 11.8, 12.9],
        "coir": [14.2, 15.1, 13.8],
        "bark": [10.2, 11.0, 9.7, 10.8, 10.1],
        "soil": [9.1, 8.7, 9.9, 9.4],
    }.items()
    for v in vals
)


def pytest_terminal_summary(terminalreporter):
    """Print the NIST StRD log-relative-error table when the NIST tests ran."""
    import sys

    module = next((m for name, m in sys.modules.items() if name.endswith("test_nist") and hasattr(m, "LRE_TABLE")), None)
    table = getattr(module, "LRE_TABLE", None)
    if not table:
        return
    keys = ["ss_between", "ss_within", "F", "r_squared", "residual_sd"]
    terminalreporter.section("NIST StRD ANOVA: log relative error (15 = all certified digits)")
    terminalreporter.write_line(f"{'dataset':<9}" + "".join(f"{k:>13}" for k in keys))
    for name, scores in table.items():
        terminalreporter.write_line(f"{name:<9}" + "".join(f"{scores[k]:>13.1f}" for k in keys))


def nist_anova(name: str):
    """Certified values and data rows (group, value as written) of one NIST StRD ANOVA .dat file
    (National Institute of Standards and Technology, Statistical Reference Datasets; tests/data/nist)."""
    import math
    import re

    text = (DATA_DIR / "nist" / f"{name}.dat").read_text()
    cert = {}
    m = re.search(r"^Between \w+\s+(\d+)\s+(\S+)\s+(\S+)\s+(\S+)", text, re.M)
    cert["df_between"], cert["ss_between"], cert["F"] = int(m[1]), float(m[2]), float(m[4])
    m = re.search(r"^Within \w+\s+(\d+)\s+(\S+)\s+(\S+)", text, re.M)
    cert["df_within"], cert["ss_within"] = int(m[1]), float(m[2])
    cert["r_squared"] = float(re.search(r"Certified R-Squared\s+(\S+)", text)[1])
    cert["residual_sd"] = float(re.search(r"Standard Deviation\s+(\S+)", text)[1])
    first, last = map(int, re.search(r"Data\s+\(lines (\d+) to (\d+)\)", text).groups())
    rows = [tuple(line.split()) for line in text.splitlines()[first - 1 : last] if line.strip()]
    assert all(math.isfinite(float(y)) for _, y in rows)
    return cert, rows


def lre(value: float, certified: float) -> float:
    """Log relative error, capped at the 15 certified digits (McCullough 1998, The American
    Statistician 52(4), 358-366)."""
    import math

    if value == certified:
        return 15.0
    return min(15.0, -math.log10(abs(value - certified) / abs(certified)))
