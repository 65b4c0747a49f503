"""A small seeded, simulated study with a covariate (an invented scenario: reading scores after three
teaching methods, with a pretest taken before allocation), and its statsmodels reference fits.

Used by the covariate tests of the narrative, the renderers and the printed numbers. The reference
is statsmodels OLS on the rows (Seabold & Perktold 2010), with the covariate centred at the value
the adjusted means are taken at, so the cell coefficients of ``y ~ C(g) + xc - 1`` are the adjusted
means themselves (Maxwell, Delaney & Kelley 2018, *Designing Experiments and Analyzing Data*, 3rd
ed., chapter 9).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import statsmodels.formula.api as smf

LEVELS = ("control", "tutor", "app")


@dataclass(frozen=True)
class AncovaProject:
    plan: Path
    rows: pd.DataFrame  # the rows the analysis uses (the row with a missing pretest left out)
    reference: float  # the pretest value the adjusted means are taken at
    slopes: str


def write_ancova_project(folder: Path, slopes: str = "common", adjust_to: float | None = None,
                         cell_slopes=(0.7, 0.7, 0.7), seed: int = 2026, extra_plan: str = "") -> AncovaProject:
    """Write scores.csv (one row with a missing pretest) and plan.toml into ``folder``."""
    rng = np.random.default_rng(seed)
    lines, kept = ["pupil,method,pretest,score"], []
    i = 0
    for g, effect, n, b in zip(LEVELS, (0.0, 4.0, 2.0), (21, 18, 24), cell_slopes):
        for _ in range(n):
            i += 1
            pre = round(float(rng.normal(50, 10)), 1)
            y = round(12 + b * pre + (50 - 50 * b) * (b != 0.7) + effect + float(rng.normal(0, 5)), 1)
            lines.append(f"P{i:03d},{g},{pre:.1f},{y:.1f}")
            kept.append((g, pre, y))
    lines.insert(7, "P900,tutor,,55.0")
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "scores.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    cov = f'[[covariates]]\nname = "pretest"\ndescription = "reading score before allocation"\nslopes = "{slopes}"\n'
    if adjust_to is not None:
        cov += f"adjust_to = {adjust_to}\n"
    (folder / "plan.toml").write_text(
        'title = "Reading after three teaching methods (simulated)"\n'
        '[data]\npath = "scores.csv"\noutcome = "score"\n'
        f'[[factors]]\nname = "method"\nlevels = {list(LEVELS)!r}\n'.replace("'", '"')
        + cov + '[analysis]\npermutations = 0\n' + extra_plan
        + '[[hypotheses]]\nname = "tutor beats control"\nmeans = "tutor > control"\n'
        '[[hypotheses]]\nname = "methods differ"\neffect = "method"\n', encoding="utf-8")
    rows = pd.DataFrame(kept, columns=["g", "x", "y"])
    rows["g"] = pd.Categorical(rows["g"], categories=LEVELS)
    reference = float(rows["x"].mean()) if adjust_to is None else float(adjust_to)
    return AncovaProject(folder / "plan.toml", rows, reference, slopes)


def reference_fit(project: AncovaProject, per_cell: bool | None = None):
    """statsmodels OLS with the covariate centred at the reference: the C(g) coefficients are the
    adjusted means; per-cell slopes as ``C(g):xc``."""
    df = project.rows.assign(xc=project.rows["x"] - project.reference)
    per_cell = project.slopes == "per-cell" if per_cell is None else per_cell
    formula = "y ~ C(g) + C(g):xc - 1" if per_cell else "y ~ C(g) + xc - 1"
    return smf.ols(formula, data=df).fit()
