"""Checks of the assumptions behind the cell-means ANOVA: equal variances, normal errors, no
gross outliers.

The checks work with the residuals e_i = y_i - ybar_(cell of i) of the full cell-means model,
whose rows in cell c all have leverage h_i = 1/n_c. Rows of a cell with one row have leverage 1
and a residual of exactly zero: they carry no information about the errors and are left out of
the row diagnostics (and reported as such).

The report path asks a :class:`reporter.intake.rows.RowAccess` for what each check needs (per-cell
medians, absolute-deviation statistics, quantiles, a sample, the rows beyond a bound) and the
cell table for the rest, so each check costs at most one sort of the rows and its answer has a
size bounded independently of N. The functions that take row arrays ``(y, codes, k)`` run the
same code through :class:`reporter.intake.memory_rows.MemoryRows`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special

from reporter.errors import FitError
from reporter.numerics.distributions import f_sf, norm_cdf, norm_ppf
from reporter.inference.robust import _cell_stats_from_rows, _rows
from reporter.intake.cells import CellStats, describe_cells
from reporter.intake.memory_rows import MemoryRows
from reporter.intake.rows import FlaggedRows, RowAccess

__all__ = [
    "HomogeneityResult",
    "NormalityResult",
    "Outlier",
    "OutlierScan",
    "QQData",
    "StudentizedResiduals",
    "adjusted_cells",
    "brown_forsythe",
    "cells_without",
    "find_outliers",
    "homogeneity",
    "homogeneity_both",
    "levene",
    "normality",
    "outlier_bound",
    "qq_points",
    "qq_quantiles",
    "screen_outliers",
    "shapiro_wilk",
    "studentized_residuals",
]

SHAPIRO_MIN_N = 3
SHAPIRO_MAX_N = 5000
QQ_MAX_POINTS = 1000


@dataclass(frozen=True)
class HomogeneityResult:
    """A one-way F on absolute deviations from each cell's centre ("mean" or "median")."""

    method: str
    center: str
    statistic: float
    df1: int
    df2: int
    p: float
    n_groups: int


@dataclass(frozen=True)
class NormalityResult:
    """Shapiro-Wilk test of the residuals, or the reason it was not run.

    ``skipped`` is True when the test was not run; ``reason`` is then one of
    "too-few-rows" (fewer than 3 usable residuals), "no-spread" (all residuals equal) or a
    sentence starting "not available: " (no row-level data), and ``statistic`` and ``p`` are
    None. ``n`` counts the residuals tested; ``n_available`` the residuals there are. When
    there are more than 5,000 (the range of the p value approximation), the test runs on a
    seeded simple random sample of 5,000 rows: ``sampled`` is True and ``seed`` reproduces it.
    """

    method: str
    n: int
    skipped: bool
    reason: str | None
    statistic: float | None
    p: float | None
    n_available: int | None = None
    sampled: bool = False
    seed: int | None = None


@dataclass(frozen=True)
class QQData:
    """Points of a normal Q-Q plot: Blom quantiles against order statistics of the internally
    studentized residuals.

    ``n_residuals`` residuals enter; up to 1,000 of them every one is a point, beyond that the
    points are 1,000 order statistics at evenly spaced ranks from the smallest to the largest
    (``summarized`` is True).
    """

    theoretical: tuple[float, ...]
    sample: tuple[float, ...]
    n_residuals: int = 0
    summarized: bool = False


@dataclass(frozen=True, eq=False)
class StudentizedResiduals:
    """Row residuals of the cell-means model and their studentized forms (read-only arrays).

    ``internal`` r_i = e_i / sqrt(MSE (1 - h_i)); ``external`` t_i uses the MSE with row i left
    out. Rows with leverage 1 hold NaN in both.
    """

    residual: np.ndarray
    leverage: np.ndarray
    internal: np.ndarray
    external: np.ndarray
    mse: float
    df_error: int


@dataclass(frozen=True)
class Outlier:
    """One row whose externally studentized residual exceeds the threshold in absolute value.

    ``row`` is the row's number as the row access gives it (as a person finds it in the input).
    """

    row: int
    cell: int
    residual: float
    internal: float
    external: float


@dataclass(frozen=True)
class OutlierScan:
    """Rows flagged by |t_i| > threshold, and the rows that could not be checked.

    ``outliers`` lists at most the scan's limit of rows, largest |t_i| first; ``total`` counts
    every flagged row. ``skipped_rows`` are (at most the limit of) the rows of one-row cells
    (leverage 1: the residual is 0 by construction and cannot be studentized), ``n_skipped``
    counts them all; ``note`` says so in words when there are any.
    """

    threshold: float
    outliers: tuple[Outlier, ...]
    n_checked: int
    skipped_rows: tuple[int, ...]
    note: str | None
    total: int = 0
    n_skipped: int = 0


# ---------------------------------------------------------------------------------------------
# homogeneity of variance


def homogeneity(rows: RowAccess, cells: CellStats, center: str) -> HomogeneityResult:
    """One-way F on |y_i - centre of its cell| with centre "mean" (Levene) or "median"
    (Brown-Forsythe), from the row access's deviation statistics."""
    _check_groups(cells, "Levene" if center == "mean" else "Brown-Forsythe")
    centre = cells.offset_mean if center == "mean" else rows.medians()
    return _homogeneity_f(cells, center, *rows.deviation_stats(centre))


def homogeneity_both(rows: RowAccess, cells: CellStats) -> tuple[HomogeneityResult, HomogeneityResult]:
    """(Brown-Forsythe, Levene) as :func:`homogeneity` gives them, with the deviation
    statistics about both centres asked of the rows at once (one pass where the source can)."""
    _check_groups(cells, "Brown-Forsythe")
    medians = rows.medians()
    about_median, about_mean = rows.deviation_stats_many([medians, cells.offset_mean])
    return _homogeneity_f(cells, "median", *about_median), _homogeneity_f(cells, "mean", *about_mean)


def _check_groups(cells: CellStats, method: str) -> None:
    g = int(np.count_nonzero(cells.n))
    if g < 2:
        raise FitError(f"{method} compares the spread of at least 2 observed cells (got {g}).")
    if cells.n_total - g < 1:
        raise FitError(f"{method} needs more rows than cells (got {cells.n_total} rows in {g} cells).")


def _homogeneity_f(cells: CellStats, center: str, zn, zmean, zss) -> HomogeneityResult:
    method = "Levene" if center == "mean" else "Brown-Forsythe"
    g = int(np.count_nonzero(cells.n))
    big_n = cells.n_total
    obs = np.asarray(zn) > 0
    zn, zmean, zss = np.asarray(zn, np.float64)[obs], np.asarray(zmean)[obs], np.asarray(zss)[obs]
    grand = math.fsum((zn * zmean).tolist()) / big_n
    between = math.fsum((zn * (zmean - grand) ** 2).tolist())
    within = math.fsum(zss.tolist())
    if not within > 0.0:
        raise FitError(
            f"{method} is undefined here: within every cell the absolute deviations from the "
            f"cell {center} are all equal (for example, cells of 2 rows), so they have no "
            "spread to compare against; collect more rows per cell."
        )
    df1, df2 = g - 1, big_n - g
    f = (between / df1) / (within / df2)
    return HomogeneityResult(method=method, center=center, statistic=f, df1=df1, df2=df2,
                             p=float(f_sf(f, df1, df2)), n_groups=g)


def _memory(y, codes, k, numbered_from: int = 0):
    """Row arrays as (MemoryRows, CellStats); rows numbered from ``numbered_from``."""
    y, codes, k = _rows(y, codes, k)
    rows = MemoryRows(y, codes, k, np.arange(y.size, dtype=np.int64) + numbered_from)
    return rows, describe_cells(y, codes, k)


def levene(y, codes, k: int | None = None) -> HomogeneityResult:
    """Levene's test of equal variances: one-way F on |y_i - mean of its cell|.

    Levene (1960), in Olkin et al. (eds.), *Contributions to Probability and Statistics*,
    Stanford University Press, 278-292.
    """
    rows, cells = _memory(y, codes, k)
    return homogeneity(rows, cells, "mean")


def brown_forsythe(y, codes, k: int | None = None) -> HomogeneityResult:
    """Brown-Forsythe test of equal variances: one-way F on |y_i - median of its cell|.

    Brown & Forsythe (1974), JASA 69, 364-367; robust to skewed errors.
    """
    rows, cells = _memory(y, codes, k)
    return homogeneity(rows, cells, "median")


# ---------------------------------------------------------------------------------------------
# residuals


def studentized_residuals(y, codes, k: int | None = None) -> StudentizedResiduals:
    """Residuals and their internally and externally studentized forms (one per row; a library
    function, not used on the report path).

    With h_i = 1/n_c, r_i = e_i / sqrt(MSE (1 - h_i)) and
    t_i = r_i sqrt((df_e - 1) / (df_e - r_i^2)), df_e = N - g (Cook & Weisberg 1982,
    *Residuals and Influence in Regression*, Chapman & Hall). Rows of one-row cells
    (h_i = 1) get NaN.
    """
    y, codes, k = _rows(y, codes, k)
    n, mean, ss = _cell_stats_from_rows(y, codes, k)
    g = int(np.count_nonzero(n))
    mse, df_e = _mse(float(ss.sum()), y.size - g)
    e = y - mean[codes]
    lev = 1.0 / n[codes]
    ok = lev < 1.0
    e[~ok] = 0.0
    internal = np.full(y.size, np.nan)
    internal[ok] = e[ok] / np.sqrt(mse * (1.0 - lev[ok]))
    external = np.full(y.size, np.nan)
    external[ok] = _external(internal[ok], df_e)
    for arr in (e, lev, internal, external):
        arr.flags.writeable = False
    return StudentizedResiduals(
        residual=e, leverage=lev, internal=internal, external=external, mse=mse, df_error=df_e
    )


def _mse(sse: float, df_e: int) -> tuple[float, int]:
    if df_e < 2:
        raise FitError(
            f"studentized residuals need at least 2 residual degrees of freedom (N - cells = "
            f"{df_e}); collect more rows per cell."
        )
    if not sse > 0.0:
        raise FitError(
            "the residuals are all zero (every cell's values are equal), so they cannot be "
            "studentized."
        )
    return sse / df_e, df_e


def _external(r, df_e: int):
    """t_i = r_i sqrt((df_e - 1) / (df_e - r_i^2)) (Cook & Weisberg 1982, section 2.2)."""
    r = np.asarray(r, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        return r * np.sqrt((df_e - 1.0) / np.maximum(df_e - r * r, 0.0))


def _internal_scale(cells: CellStats, mse: float, leverage: np.ndarray | None = None) -> np.ndarray:
    """sqrt(MSE (1 - h_c)) per cell with h_c = 1/n_c (or the given per-cell leverage); NaN for
    cells of fewer than 2 rows or with h_c >= 1."""
    n = cells.n.astype(np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        if leverage is None:
            return np.where(cells.n > 1, np.sqrt(mse * (1.0 - 1.0 / np.maximum(n, 1.0))), np.nan)
        h = np.asarray(leverage, dtype=np.float64)
        return np.where((cells.n > 1) & (h < 1.0 - 1e-12), np.sqrt(mse * np.maximum(1.0 - h, 0.0)), np.nan)


def adjusted_cells(cells: CellStats, slopes: np.ndarray) -> CellStats:
    """The cell table of z = y - sum_j b[c, j] x_j (offsets), whose within-cell deviations are
    the residuals of the covariance analysis with slopes ``slopes`` (k, p): the cell means
    ybar_c - b_c'xbar_c and the within-cell SS S_yy - 2 b_c'S_xy + b_c'S_xx b_c (the residual SS
    of cell c; Searle 1987, section 9.2). Row-level checks run on this table and on
    ``rows.adjusted(slopes)`` unchanged."""
    cov = cells.covariates
    b = np.asarray(slopes, dtype=np.float64)
    o = cells.observed
    mean = np.full(cells.k, np.nan)
    ss = np.full(cells.k, np.nan)
    for c in np.flatnonzero(o):
        mean[c] = math.fsum([float(cells.offset_mean[c]), *(-(b[c] * cov.offset_mean[c])).tolist()])
        quad = float(b[c] @ cov.sxx[c] @ b[c])
        ss[c] = max(math.fsum([float(cells.ss[c]), -2.0 * float(b[c] @ cov.sxy[c]), quad]), 0.0)
    for arr in (mean, ss):
        arr.setflags(write=False)
    return CellStats(n=cells.n, offset_mean=mean, ss=ss, pivot=cells.pivot, pivot_exact=cells.pivot_exact)


def normality(rows: RowAccess, cells: CellStats, *, seed: int = 0, max_n: int = SHAPIRO_MAX_N) -> NormalityResult:
    """Shapiro-Wilk test of the residuals (rows of one-row cells left out).

    Shapiro & Wilk (1965), Biometrika 52, 591-611, computed by Royston's (1995) algorithm
    AS R94 (see :func:`_royston_shapiro_wilk`), whose p value approximation holds for
    3 <= n <= 5000. Up to 5,000 residuals every one is tested; beyond that a simple random
    sample of 5,000 rows drawn with ``seed`` (the residuals still use the cell means of all rows),
    and the result says so. The sample is the rule of :func:`reporter.intake.rows.sample_positions`
    (the 5,000 analysed rows whose position in input order has the smallest fmix32 hash with the
    seed), which every reader applies alike, so the in-memory and out-of-core paths test the same rows.
    """
    usable = cells.n > 1
    m = int(cells.n[usable].sum())
    if m < SHAPIRO_MIN_N:
        return NormalityResult("Shapiro-Wilk", m, True, "too-few-rows", None, None, m)
    sampled = m > max_n
    y, cc = rows.sample(max_n if sampled else rows.n, seed)
    cc = np.asarray(cc)
    keep = usable[cc]
    e = (np.asarray(y, np.float64) - cells.offset_mean[cc])[keep]
    used = int(e.size)
    if used < SHAPIRO_MIN_N:
        return NormalityResult("Shapiro-Wilk", used, True, "too-few-rows", None, None, m, sampled, seed if sampled else None)
    scale = max(1.0, float(np.max(np.abs(cells.offset_mean[usable]))), float(np.max(np.abs(e))))
    if not np.ptp(e) > 1e-12 * scale:
        return NormalityResult("Shapiro-Wilk", used, True, "no-spread", None, None, m, sampled, seed if sampled else None)
    w, p = _royston_shapiro_wilk(e)
    return NormalityResult("Shapiro-Wilk", used, False, None, w, p, m, sampled, seed if sampled else None)


def shapiro_wilk(y, codes, k: int | None = None, *, seed: int = 0) -> NormalityResult:
    """:func:`normality` on row arrays."""
    rows, cells = _memory(y, codes, k)
    return normality(rows, cells, seed=seed)


# Polynomial coefficients of Royston (1995), AS R94, lowest power first: corrections of the last
# two coefficients in u = 1/sqrt(n) (C1, C2); mean and log-sd of the normalized statistic for
# 4 <= n <= 11 in n (C3, C4, with the bound G) and for n >= 12 in log(n) (C5, C6).
_SW_C1 = (0.0, 0.221157, -0.147981, -2.071190, 4.434685, -2.706056)
_SW_C2 = (0.0, 0.042981, -0.293762, -1.752461, 5.682633, -3.582633)
_SW_C3 = (0.5440, -0.39978, 0.025054, -6.714e-4)
_SW_C4 = (1.3822, -0.77857, 0.062767, -2.0322e-3)
_SW_C5 = (-1.5861, -0.31082, -0.083751, 3.8915e-3)
_SW_C6 = (-0.4803, -0.082676, 3.0302e-3)
_SW_G = (-2.273, 0.459)


def _poly(coefficients: tuple[float, ...], x: float) -> float:
    """sum_j coefficients[j] x^j, by Horner's rule."""
    value = 0.0
    for c in reversed(coefficients):
        value = value * x + c
    return value


def _shapiro_wilk_coefficients(n: int) -> np.ndarray:
    """The n // 2 largest Shapiro-Wilk coefficients a_n, a_(n-1), ... (positive), n >= 3.

    Royston (1995), AS R94: m_i = Phi^-1((i - 3/8) / (n + 1/4)); the two extreme coefficients
    (one when n <= 5) are the polynomial approximations in u = 1/sqrt(n), and the others are
    -m_i / phi with phi chosen so that the full antisymmetric vector has unit length. For n = 3
    the coefficient is sqrt(1/2) exactly.
    """
    if n == 3:
        return np.array([math.sqrt(0.5)])
    i = np.arange(1, n // 2 + 1)
    m = special.ndtri((i - 0.375) / (n + 0.25))
    summ2 = 2.0 * math.fsum((m * m).tolist())
    rsn = 1.0 / math.sqrt(n)
    a1 = _poly(_SW_C1, rsn) - m[0] / math.sqrt(summ2)
    if n > 5:
        a2 = _poly(_SW_C2, rsn) - m[1] / math.sqrt(summ2)
        phi = (summ2 - 2.0 * m[0] ** 2 - 2.0 * m[1] ** 2) / (1.0 - 2.0 * a1**2 - 2.0 * a2**2)
        a = -m / math.sqrt(phi)
        a[0], a[1] = a1, a2
    else:
        phi = (summ2 - 2.0 * m[0] ** 2) / (1.0 - 2.0 * a1**2)
        a = -m / math.sqrt(phi)
        a[0] = a1
    return a


def _royston_shapiro_wilk(x: np.ndarray) -> tuple[float, float]:
    """Shapiro-Wilk W and its p value for 3 <= n <= 5000 values with some spread.

    Royston (1995), "Remark AS R94: A remark on algorithm AS 181: The W-test for normality",
    Applied Statistics 44(4), 547-551. W is the squared correlation of the sorted values with
    the antisymmetric coefficient vector; 1 - W is formed directly so that log(1 - W) keeps its
    precision near W = 1. p values: for n = 3 the exact
    (6/pi)(asin(sqrt(W)) - asin(sqrt(3/4))); for 4 <= n <= 11, -log(gamma - log(1 - W)) with
    gamma = -2.273 + 0.459 n is taken as normal with mean C3(n) and sd exp(C4(n)); for n >= 12,
    log(1 - W) is taken as normal with mean C5(log n) and sd exp(C6(log n)).
    """
    xs = np.sort(np.asarray(x, dtype=np.float64))
    n = xs.size
    xs = xs - xs[n // 2]
    xs = xs / (xs[-1] - xs[0])
    a = _shapiro_wilk_coefficients(n)
    coef = np.zeros(n)
    coef[: a.size] = -a
    coef[n - a.size :] = a[::-1]
    xc = xs - xs.mean()
    ssa = float(coef @ coef)
    ssx = float(xc @ xc)
    sax = float(coef @ xc)
    root = math.sqrt(ssa * ssx)
    one_minus_w = (root - sax) * (root + sax) / (ssa * ssx)
    if not one_minus_w > 0.0:  # the values lie exactly on the coefficients (up to rounding)
        return 1.0, 1.0
    w = 1.0 - one_minus_w
    if n == 3:
        p = 6.0 / math.pi * (math.asin(math.sqrt(w)) - math.pi / 3.0)
        return w, min(max(p, 0.0), 1.0)
    y = math.log(one_minus_w)
    if n <= 11:
        gamma = _poly(_SW_G, n)
        if y >= gamma:  # beyond the range of the transformation: far in the lower tail
            return w, 0.0
        y = -math.log(gamma - y)
        mean, sd = _poly(_SW_C3, n), math.exp(_poly(_SW_C4, n))
    else:
        log_n = math.log(n)
        mean, sd = _poly(_SW_C5, log_n), math.exp(_poly(_SW_C6, log_n))
    return w, float(norm_cdf(-(y - mean) / sd))


def qq_quantiles(rows: RowAccess, cells: CellStats, mse: float, *, max_points: int = QQ_MAX_POINTS,
                 leverage: np.ndarray | None = None) -> QQData:
    """Normal Q-Q points: Blom positions against order statistics of the internally studentized
    residuals r_i = e_i / sqrt(MSE (1 - 1/n_c)) (rows of one-row cells left out).

    The i-th smallest of m residuals is paired with the normal quantile at (i - 3/8)/(m + 1/4)
    (Blom 1958, *Statistical Estimates and Transformed Beta-Variables*, Wiley). With m above
    ``max_points`` only the order statistics at ``max_points`` evenly spaced ranks i (the first
    and the last included) are drawn; the i-th order statistic is the type 7 sample quantile at
    (i - 1)/(m - 1) (Hyndman & Fan 1996, The American Statistician 50, 361-365), which the row
    access returns. ``leverage`` replaces 1/n_c by a per-cell leverage (with covariates: the
    cell's average leverage, see :func:`reporter.inference.covariate_model.CovariateModel`).
    """
    m = int(cells.n[cells.n > 1].sum())
    if m == 0:
        return QQData((), (), 0, False)
    if m <= max_points:
        ranks = np.arange(1, m + 1, dtype=np.float64)
    else:
        # Distinct without np.unique: the spacing (m - 1)/(max_points - 1) exceeds 1.
        ranks = np.round(np.linspace(1.0, float(m), max_points))
    probs = (ranks - 1.0) / (m - 1.0) if m > 1 else np.array([0.5])
    sample = np.asarray(rows.residual_quantiles(cells.offset_mean, _internal_scale(cells, mse, leverage),
                                                probs.tolist()))
    theoretical = norm_ppf((ranks - 0.375) / (m + 0.25))
    return QQData(tuple(float(v) for v in theoretical), tuple(float(v) for v in sample), m, m > max_points)


def qq_points(y, codes, k: int | None = None) -> QQData:
    """:func:`qq_quantiles` on row arrays, with the MSE of the cell-means model."""
    rows, cells = _memory(y, codes, k)
    mse, _ = _mse(cells.ss_within, cells.df_within)
    return qq_quantiles(rows, cells, mse)


def outlier_bound(cells: CellStats, mse: float, df_e: int, threshold: float,
                  leverage: np.ndarray | None = None) -> np.ndarray:
    """Per cell, the bound on |e_i| equivalent to |t_i| > ``threshold``.

    With r_i = e_i / sqrt(MSE (1 - 1/n_c)) and t_i^2 = r_i^2 (df_e - 1) / (df_e - r_i^2)
    (Cook & Weisberg 1982, section 2.2; r_i^2 <= df_e always), t_i^2 increases with r_i^2, and
    t_i^2 > c^2  <=>  r_i^2 (df_e - 1 + c^2) > c^2 df_e, so
    |t_i| > c  <=>  |e_i| > c sqrt(MSE (1 - 1/n_c)) sqrt(df_e / (df_e - 1 + c^2)).
    Cells of one row get NaN (leverage 1: not checked).
    """
    c = float(threshold)
    return c * _internal_scale(cells, mse, leverage) * math.sqrt(df_e / (df_e - 1.0 + c * c))


def screen_outliers(rows: RowAccess, cells: CellStats, *, threshold: float = 3.0, limit: int = 100,
                    mse: float | None = None, df_e: int | None = None,
                    leverage: np.ndarray | None = None) -> tuple[OutlierScan, FlaggedRows]:
    """Rows whose externally studentized residual exceeds ``threshold`` in absolute value, found
    in one pass through the per-cell bound of :func:`outlier_bound`.

    Under normal errors each t_i follows a t distribution with df_e - 1 degrees of freedom
    (Cook & Weisberg 1982); the cut-off |t_i| > 3 is common practice, no source. At most
    ``limit`` rows are listed (largest |t_i| first), ``total`` counts them all; the returned
    :class:`FlaggedRows` carries the per-cell sums that :func:`cells_without` needs.

    With covariates the caller passes the adjusted model's ``mse`` and ``df_e`` (which count the
    slopes), rows and cells of z = y - b'x (:func:`adjusted_cells`) and a per-cell ``leverage``:
    the cell's average leverage (1 + tr(Q_c S_xx,c))/n_c stands for each row's
    1/n_c + d_i'Q_c d_i, a documented choice (the row access screens by a bound per cell). A row
    far from its cell's covariate mean has a larger leverage than the average, so its |t_i| is
    understated by the factor sqrt((1 - h_i)/(1 - h_c)) at most.
    """
    threshold = float(threshold)
    if not (np.isfinite(threshold) and threshold > 0.0):
        raise FitError(f"'threshold' must be a positive number (got {threshold!r}).")
    g = int(np.count_nonzero(cells.n))
    if mse is None:
        mse, df_e = _mse(cells.ss_within, cells.n_total - g)
    else:
        _mse(mse * df_e, df_e)  # the same checks of the df and the spread
    flagged = rows.flagged(cells.offset_mean, outlier_bound(cells, mse, df_e, threshold, leverage), limit)
    scale = _internal_scale(cells, mse, leverage)
    outliers = []
    for row, c, value in flagged.rows:
        e = float(value - cells.offset_mean[c])
        r = e / float(scale[c])
        outliers.append(Outlier(row=int(row), cell=int(c), residual=e, internal=r, external=float(_external(r, df_e))))
    single = cells.n == 1 if leverage is None else (cells.n > 0) & ~np.isfinite(scale)
    skipped: tuple[int, ...] = ()
    n_skipped = int(cells.n[single].sum())
    note = None
    if n_skipped:
        # every row of such a cell: |x - mean| >= 0 > -1
        lone = rows.flagged(cells.offset_mean, np.where(single, -1.0, np.nan), limit)
        skipped = tuple(sorted(r for r, _, _ in lone.rows))
        note = (
            f"{n_skipped} row(s) are alone in their cell; such a row has leverage 1 and a "
            "residual of zero by construction, so it cannot be checked."
        ) if leverage is None else (
            f"{n_skipped} row(s) are in cells with too few rows for their own slopes; their residuals are zero "
            "or nearly so by construction, so they cannot be checked."
        )
    scan = OutlierScan(threshold=threshold, outliers=tuple(outliers), n_checked=cells.n_total - n_skipped,
                       skipped_rows=skipped, note=note, total=flagged.total, n_skipped=n_skipped)
    return scan, flagged


def find_outliers(y, codes, k: int | None = None, *, threshold: float = 3.0, limit: int = 100) -> OutlierScan:
    """:func:`screen_outliers` on row arrays; rows are 0-based indices into ``y``."""
    rows, cells = _memory(y, codes, k)
    return screen_outliers(rows, cells, threshold=threshold, limit=limit)[0]


def cells_without(cells: CellStats, flagged: FlaggedRows) -> CellStats:
    """The cell table without the flagged rows, updated from their per-cell sums (no pass over
    the rows).

    With r_c rows removed from cell c, d = x - mean_c their deviations, and n' = n_c - r_c:
    the remaining deviations sum to -sum d (all n_c deviations sum to 0), so
    mean' = mean_c - sum d / n' and S' = (S_c - sum d^2) - (sum d)^2 / n' (the centred sum of
    squares of the remaining rows about their own mean; Chan, Golub & LeVeque 1983, The American
    Statistician 37, 242-247, eq. 1.7 applied to the remaining rows). The subtraction
    S_c - sum d^2 loses about log10(S_c / S') digits when the removed rows dominate S_c.
    """
    count = np.asarray(flagged.count, dtype=np.int64)
    n2 = cells.n - count
    mean = cells.offset_mean.copy()
    ss = cells.ss.copy()
    for c in np.flatnonzero(count):
        if n2[c] == 0:
            mean[c] = ss[c] = np.nan
            continue
        sd, sd2 = float(flagged.sum_dev[c]), float(flagged.sum_dev2[c])
        mean[c] = cells.offset_mean[c] - sd / n2[c]
        ss[c] = max(math.fsum((float(cells.ss[c]), -sd2, -sd * sd / n2[c])), 0.0)
    for arr in (n2, mean, ss):
        arr.setflags(write=False)
    return CellStats(n=n2, offset_mean=mean, ss=ss, pivot=cells.pivot, pivot_exact=cells.pivot_exact)
