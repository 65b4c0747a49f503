"""A small one-way project for the lock tests: a plan (locked before any data exist) and data
written afterwards, each test editing the plan text a little."""

from __future__ import annotations

from pathlib import Path

from conftest import ONEWAY_PLAN

PLAN = ONEWAY_PLAN.lstrip() + '''[study]
exclusion_rules = "Seedlings that died before measurement are left out."
[planning]
smallest_effect_f = 0.4
smallest_effect_d = 0.8
'''

HEIGHTS = {
    "peat": [12.1, 13.4, 11.8, 12.9],
    "coir": [14.2, 15.1, 13.8],
    "bark": [10.2, 11.0, 9.7, 10.8, 10.1],
    "soil": [9.1, 8.7, 9.9, 9.4],
    "sand": [8.1, 8.9, 7.7],
}


def data_text(levels=("peat", "coir", "bark", "soil")) -> str:
    """CSV rows at ``levels``; a second outcome column (height_cm) and a second factor (tray)."""
    rows = ["height_mm,height_cm,medium,tray"]
    for level in levels:
        for i, v in enumerate(HEIGHTS[level]):
            rows.append(f"{v},{v / 10:.2f},{level},{'ab'[i % 2]}")
    return "\n".join(rows) + "\n"


def write(folder: Path, plan: str = PLAN, name: str = "plan.toml") -> Path:
    path = folder / name
    path.write_text(plan, encoding="utf-8")
    return path
