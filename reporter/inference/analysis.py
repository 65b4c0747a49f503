"""One call that fits everything a report needs, from coded data and compiled hypotheses."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from fractions import Fraction
from typing import Callable, Sequence

import numpy as np

from reporter.errors import FitError
from reporter.fitting.anova import AnovaTable, fit_anova
from reporter.intake.cells import CellStats, describe_cells, describe_covariates
from reporter.intake.numtext import spread_limits
from reporter.numerics.distributions import t_ppf
from reporter.inference.collect import ROWS_UNAVAILABLE, HypothesisExtras, Inference, describe_inference
from reporter.inference.permutation import PERMUTATION_MAX_ROWS
from reporter.intake.memory_rows import MemoryRows
from reporter.intake.rows import CellPoints, PointsOnDemand, RowAccess
from reporter.fitting.linear import ContrastTest, ModelFit, contrast_variance, fit_contrast, fit_model
from reporter.inference.multiplicity import adjust_p
from reporter.fitting.rounding import RoundingBounds, bound_rounding
from reporter.model.design import Design
from reporter.model.hypotheses import Contrast, in_outcome_units
from reporter.fitting.equivalence import test_contrast


CELL_POINTS = 200


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
    # With covariates: the adjusted mean (the cell mean at the covariates' reference values), its
    # model-based SE √(MSE·V_cc) and 1 − α interval on the error df; None without covariates.
    adjusted_mean: float | None = None
    adjusted_se: float | None = None
    adjusted_ci: tuple[float, float] | None = None


@dataclass(frozen=True)
class MarginalMean:
    """The unweighted mean of the cell means at one level of one factor, with a model-based CI
    (SE² = MSE · Σ w_c²/n_c for the averaging weights w; Searle 1987, section 4.9). With
    covariates it is the unweighted mean of the adjusted cell means, SE² = MSE · w'Vw with V the
    adjusted means' covariance over σ² (Searle 1987, section 9.2)."""

    factor: str
    level: str
    mean: float | None
    se: float | None
    ci: tuple[float, float] | None
    cells: int
    note: str | None = None


@dataclass(frozen=True)
class HypothesisResult:
    """A compiled hypothesis with its test and its place in a multiplicity family."""

    contrast: Contrast
    test: ContrastTest
    family: str
    p_adjusted: float | None
    correction: str
    notes: tuple[str, ...] = ()
    extras: "HypothesisExtras | None" = None

    @property
    def effect_size(self):
        return None if self.extras is None else self.extras.effect_size


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
    marginal_means: tuple[MarginalMean, ...] = ()
    inference: "Inference | None" = None
    # Per cell, the values to draw (offsets from the pivot): every value up to CELL_POINTS per
    # cell, else CELL_POINTS evenly spaced quantiles; None without row access.
    points: tuple[CellPoints, ...] | None = None
    # How far the tests could move when the input's cell summaries were rounded
    # (reporter.fitting.rounding.RoundingBounds); None for rows or unrounded summaries.
    rounding: "RoundingBounds | None" = None


def describe_cell_summaries(cells: CellStats, fit: ModelFit, alpha: float) -> tuple[CellSummary, ...]:
    """Each cell's n, mean, SD, SE and two 1 − α intervals for its mean.

    ``ci`` is the one-sample t interval mean ± t(1 − α/2, n − 1)·SD/√n from the cell alone; the
    last field is the model-based interval mean ± t(1 − α/2, df_error)·√(MSE/n), which pools the
    variance over cells as the ANOVA does (Maxwell, Delaney & Kelley 2018, *Designing
    Experiments and Analyzing Data*, 3rd ed., Routledge).

    With covariates the model-based interval keeps its meaning for the unadjusted mean (MSE of the
    covariance model), and the adjusted mean comes with its own SE √(MSE·V_cc) and interval
    (Maxwell, Delaney & Kelley 2018, chapter 9, the standard error of an adjusted mean).
    """
    out = []
    q_pooled = float(t_ppf(1 - alpha / 2, fit.df_error))
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
            half = float(t_ppf(1 - alpha / 2, n - 1)) * se
            ci = (mean - half, mean + half)
        else:
            sd = se = None
            ci = None
        adjusted = {}
        if fit.has_covariates:
            a = float(fit.adjusted_offset_mean[c]) + cells.pivot
            a_se = math.sqrt(fit.mse * float(fit.unscaled_cov[c, c]))
            adjusted = dict(adjusted_mean=a, adjusted_se=a_se, adjusted_ci=(a - q_pooled * a_se, a + q_pooled * a_se))
        out.append(CellSummary(c, n, mean, sd, se, ci, (mean - half_pooled, mean + half_pooled), **adjusted))
    return tuple(out)


def describe_marginal_means(design: Design, cells: CellStats, fit: ModelFit, alpha: float) -> tuple[MarginalMean, ...]:
    """Unweighted marginal means of every level of every factor, with CIs at 1 − α."""
    q = float(t_ppf(1 - alpha / 2, fit.df_error))
    out = []
    for f in design.factors:
        for level in f.levels:
            idx = [c.index for c in design.cells if c.as_dict()[f.name] == level]
            n = cells.n[idx]
            if np.any(n == 0):
                out.append(MarginalMean(f.name, level, None, None, None, len(idx),
                                        "not estimable as an unweighted mean: a cell at this level is empty"))
                continue
            w = 1.0 / len(idx)
            mean = math.fsum(fit.adjusted_offset_mean[idx].tolist()) * w + cells.pivot
            if fit.has_covariates:
                se = math.sqrt(fit.mse * contrast_variance(np.full(len(idx), w), fit.unscaled_cov[np.ix_(idx, idx)]))
            else:
                se = math.sqrt(fit.mse * math.fsum((w * w / n).tolist()))
            out.append(MarginalMean(f.name, level, mean, se, (mean - q * se, mean + q * se), len(idx)))
    return tuple(out)


def fit_analysis(
    design: Design,
    cells: CellStats,
    rows: RowAccess | None,
    contrasts: Sequence[Contrast],
    *,
    alpha: float = 0.05,
    ss_type: str = "III",
    correction: str = "holm",
    inference: bool = True,
    unequal_variances: str = "classical",
    posthoc: Sequence[str] = (),
    posthoc_on: str = "cells",
    control: str | None = None,
    permutations: int = 10_000,
    seed: int = 0,
    permutation_max_rows: int = PERMUTATION_MAX_ROWS,
    progress: bool = False,
    notify: Callable[[str], None] | None = None,
    rows_unavailable: str = ROWS_UNAVAILABLE,
    covariates: Sequence | None = None,
) -> Analysis:
    """The full-model fit from the cell table, the ANOVA table and a test of every hypothesis,
    with (unless ``inference=False``) effect sizes, checks, robust tests and post-hoc families.

    ``cells`` is the cell table (:class:`reporter.intake.cells.CellStats`); ``rows`` answers the
    row-level steps (:class:`reporter.intake.rows.RowAccess`), or is None when there are no rows
    (those steps are then skipped, saying ``rows_unavailable``). ``progress`` and ``notify``
    govern what the permutation F says on stderr (see :mod:`reporter.inference.permutation`).

    p-values are adjusted within two families: the planned hypotheses (the confirmatory family)
    and, separately, the exploratory ones, each with ``correction``. The p that enters the
    adjustment is that of the confirmatory test chosen by ``unequal_variances``.

    ``covariates`` are the plan's covariate specs (``Plan.covariates``) when ``cells.covariates``
    holds their statistics: the fit is then the analysis of covariance
    (:mod:`reporter.fitting.ancova`) and every mean, test and interval is about adjusted means.
    None with covariate statistics means common slopes at the covariates' means.
    """
    _check_float_range(cells)
    fit = fit_model(cells, design.matrix, covariates, tuple(c.label for c in design.cells))
    table = fit_anova(design, fit, ss_type)
    # Constants written in residual SDs become outcome units with the fitted residual SD.
    contrasts = [in_outcome_units(c, fit.residual_sd) for c in contrasts]
    tests = [test_contrast(fit, c, alpha) for c in contrasts]
    inf = None
    if inference:
        inf = describe_inference(design, cells, rows, fit, table, contrasts, tests, alpha=alpha,
                                 policy=unequal_variances, posthoc=posthoc, posthoc_on=posthoc_on,
                                 control=control, permutations=permutations, seed=seed,
                                 permutation_max_rows=permutation_max_rows, progress=progress, notify=notify,
                                 rows_unavailable=rows_unavailable)
    confirm_p = [t.p for t in tests] if inf is None else [e.confirmatory_p for e in inf.hypotheses]
    adjusted: dict[int, float | None] = {}
    for family in ("planned", "exploratory"):
        idx = [i for i, c in enumerate(contrasts) if c.role == family]
        if idx:
            res = adjust_p([confirm_p[i] for i in idx], correction)
            adjusted.update(zip(idx, res.p_adjusted))
    results = []
    for i, (c, t) in enumerate(zip(contrasts, tests)):
        notes = list(c.notes)
        if c.kind == "effect" and ss_type != "III" and not table.types_agree:
            notes.append(
                f"This effect is tested on unweighted means (Type III); the ANOVA table uses Type "
                f"{ss_type}, whose row for the same effect weights the cells by their n and can differ."
            )
        extra = inf.hypotheses[i] if inf else None
        if extra is not None and extra.confirmatory == "robust":
            notes.append(f"The confirmatory test is the {extra.robust.method}: {extra.reason}.")
        results.append(HypothesisResult(c, t, c.role, adjusted.get(i), correction, tuple(notes), extra))
    return Analysis(
        alpha=alpha,
        design=design,
        cells=cells,
        fit=fit,
        anova=table,
        summaries=describe_cell_summaries(cells, fit, alpha),
        hypotheses=tuple(results),
        marginal_means=describe_marginal_means(design, cells, fit, alpha),
        inference=inf,
        points=None if rows is None else PointsOnDemand(rows, CELL_POINTS),
    )


def with_rounding_bounds(analysis: Analysis, summary) -> Analysis:
    """The analysis with bounds on every F, t and p over the rounding intervals of the cell
    summaries it came from (``summary``: :class:`reporter.intake.summary.SummaryInput`), when they
    were rounded; unchanged otherwise."""
    if summary is None or not summary.rounded:
        return analysis
    bounds = bound_rounding(analysis.design, analysis.cells, summary.spread_values, summary.spread,
                            summary.mean_rounding.half_unit, summary.spread_rounding.half_unit, analysis.anova,
                            [h.contrast for h in analysis.hypotheses], [h.test for h in analysis.hypotheses])
    return replace(analysis, rounding=bounds)


def _check_float_range(cells: CellStats) -> None:
    """Refuse a cell table whose sums would overflow or underflow float64 in the fit.

    The limits are :func:`reporter.intake.numtext.spread_limits`. The data reader refuses such
    outcomes with their lines; this guard also covers cell tables and arrays given from Python.
    """
    o = cells.observed
    means, ss, n = cells.offset_mean[o], cells.ss[o], cells.n[o]
    if not (np.isfinite(means).all() and np.isfinite(ss).all()):
        raise FitError(
            "a cell mean or sum of squares is beyond what float64 can hold (about 1.8e308) after "
            "centring; rescale the outcome (for example use larger units)."
        )
    with np.errstate(all="ignore"):
        sd = np.sqrt(ss / np.maximum(n - 1, 1))
    spread = max(float(np.ptp(means)) if means.size else 0.0, float(sd.max()) if sd.size else 0.0)
    total = max(cells.n_total, 1)
    lower, upper = spread_limits(total)
    if spread > upper:
        raise FitError(
            f"the outcome's spread (about {spread:.3g}) makes the fit's sums of squares overflow float64 "
            f"(the limit is {upper:.3g} for {total} values); rescale the outcome (for example use larger units)."
        )
    if 0 < spread < lower:
        raise FitError(
            f"the outcome's spread (about {spread:.3g}) makes the fit's sums of squares underflow float64 "
            f"(below {lower:g}); rescale the outcome (for example use smaller units)."
        )


def fit_analysis_on_rows(design: Design, y, cell, contrasts: Sequence[Contrast], *, pivot: float = 0.0,
                         pivot_exact: Fraction | None = None, row_numbers=None, x=None, covariate_pivot=None,
                         covariate_pivot_exact=None, **options) -> Analysis:
    """:func:`fit_analysis` on row arrays (offsets ``y`` from ``pivot``, the cell of each row),
    held in memory; rows are numbered 0..N-1 unless ``row_numbers`` are given. ``x`` (N, p) are
    covariate offsets from ``covariate_pivot`` in the order of ``options["covariates"]``."""
    y = np.asarray(y, dtype=np.float64)
    cell = np.asarray(cell)
    with np.errstate(over="ignore", invalid="ignore"):  # overflow is refused by fit_analysis, in words
        cells = describe_cells(y, cell, design.k, pivot, pivot_exact)
        if x is not None:
            specs = options.get("covariates")
            names = None if specs is None else tuple(s.name for s in specs)
            cells = replace(cells, covariates=describe_covariates(y, x, cell, design.k, covariate_pivot,
                                                                  covariate_pivot_exact, names))
    numbers = np.arange(y.size, dtype=np.int64) if row_numbers is None else np.asarray(row_numbers)
    return fit_analysis(design, cells, MemoryRows(y, cell, design.k, numbers), contrasts, **options)
