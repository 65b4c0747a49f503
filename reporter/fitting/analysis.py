"""One call that fits everything a report needs, from coded data and compiled hypotheses."""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction
from typing import Sequence

import numpy as np
from scipy import stats

from reporter.fitting.anova import AnovaTable, fit_anova
from reporter.fitting.cellstats import CellStats, describe_cells
from reporter.fitting.linear import ContrastTest, ModelFit, fit_contrast, fit_model
from reporter.fitting.multiplicity import adjust_p
from reporter.model.design import Design
from reporter.model.hypotheses import Contrast


@dataclass(frozen=True)
class CellSummary:
    """Descriptive statistics of one cell; CIs use the cell's own SD (t on n − 1 df)
    and, separately, the pooled residual SD of the model (t on the error df)."""

    index: int
    n: int
    mean: float | None
    sd: float | None
    se: float | None
    ci: tuple[float, float] | None
    ci_pooled: tuple[float, float] | None


@dataclass(frozen=True)
class HypothesisResult:
    """A compiled hypothesis with its test and its place in a multiplicity family."""

    contrast: Contrast
    test: ContrastTest
    family: str
    p_adjusted: float | None
    correction: str
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class Analysis:
    """Everything fitted for one plan."""

    alpha: float
    design: Design
    cells: CellStats
    fit: ModelFit
    anova: AnovaTable
    summaries: tuple[CellSummary, ...]
    hypotheses: tuple[HypothesisResult, ...]


def describe_cell_summaries(cells: CellStats, fit: ModelFit, alpha: float) -> tuple[CellSummary, ...]:
    out = []
    q_pooled = float(stats.t.ppf(1 - alpha / 2, fit.df_error))
    for c in range(cells.k):
        n = int(cells.n[c])
        if n == 0:
            out.append(CellSummary(c, 0, None, None, None, None, None))
            continue
        mean = float(cells.mean[c])
        half_pooled = q_pooled * math.sqrt(fit.mse / n)
        if n > 1:
            sd = float(cells.sd[c])
            se = sd / math.sqrt(n)
            half = float(stats.t.ppf(1 - alpha / 2, n - 1)) * se
            ci = (mean - half, mean + half)
        else:
            sd = se = None
            ci = None
        out.append(CellSummary(c, n, mean, sd, se, ci, (mean - half_pooled, mean + half_pooled)))
    return tuple(out)


def fit_analysis(
    design: Design,
    y: np.ndarray,
    cell: np.ndarray,
    contrasts: Sequence[Contrast],
    *,
    alpha: float = 0.05,
    ss_type: str = "III",
    correction: str = "holm",
    pivot: float = 0.0,
    pivot_exact: Fraction | None = None,
) -> Analysis:
    """Cell statistics, the full-model fit, the ANOVA table and a test of every hypothesis.

    p-values are adjusted within two families: the planned hypotheses (the confirmatory family)
    and, separately, the exploratory ones, each with ``correction``.
    """
    cells = describe_cells(y, cell, design.k, pivot, pivot_exact)
    fit = fit_model(cells, design.matrix)
    table = fit_anova(design, fit, ss_type)
    tests = [fit_contrast(fit, c.weights, c.rhs, c.alternative, alpha, c.test) for c in contrasts]
    adjusted: dict[int, float | None] = {}
    for family in ("planned", "exploratory"):
        idx = [i for i, c in enumerate(contrasts) if c.role == family]
        if idx:
            res = adjust_p([tests[i].p for i in idx], correction)
            adjusted.update(zip(idx, res.p_adjusted))
    results = []
    for i, (c, t) in enumerate(zip(contrasts, tests)):
        notes = list(c.notes)
        if c.kind == "effect" and ss_type != "III" and not table.types_agree:
            notes.append(
                f"This effect is tested on unweighted means (Type III); the ANOVA table uses Type "
                f"{ss_type}, whose row for the same effect weights the cells by their n and can differ."
            )
        results.append(HypothesisResult(c, t, c.role, adjusted.get(i), correction, tuple(notes)))
    return Analysis(
        alpha=alpha,
        design=design,
        cells=cells,
        fit=fit,
        anova=table,
        summaries=describe_cell_summaries(cells, fit, alpha),
        hypotheses=tuple(results),
    )
