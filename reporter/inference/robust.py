"""Alternatives to the pooled-variance F and t tests for between-subjects designs.

When the cell variances differ, the pooled MSE misstates the variance of contrasts whose cells
have unequal sizes. The tests here estimate each cell's variance separately (Welch's one-way
ANOVA, the Welch-Satterthwaite t for one contrast, Games-Howell pairs, an HC3 sandwich Wald F),
or drop the normal model altogether (Kruskal-Wallis on ranks).

Inputs follow the fitting layer's conventions: per-cell sufficient statistics ``n`` (counts),
``mean`` and ``ss`` (centred sums of squares) over k cells, or row data ``y`` with ``codes``
(the cell index of each row).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from reporter.errors import FitError
from reporter.numerics.distributions import chi2_sf, f_sf, t_cdf, t_isf, t_sf
from reporter.intake.memory_rows import MemoryRows, average_ranks
from reporter.intake.rows import RankSums
from reporter.inference.posthoc import (
    Alternative, ComparisonFamily, _check_alpha, pairwise_comparison, studentized_range_isf, studentized_range_sf,
    two_sided_family,
)

__all__ = [
    "AdjustedCovariance",
    "KruskalWallisResult",
    "ContrastTResult",
    "RobustWaldResult",
    "WelchAnovaResult",
    "WelchContrastResult",
    "games_howell",
    "hc3_adjusted_covariance",
    "hc3_contrast_adjusted",
    "hc3_wald",
    "hc3_wald_adjusted",
    "kruskal_wallis",
    "welch_anova",
    "welch_contrast",
]

@dataclass(frozen=True)
class WelchAnovaResult:
    """Welch's heteroscedastic one-way F with fractional denominator degrees of freedom."""

    statistic: float
    df1: float
    df2: float
    p: float
    n_groups: int


@dataclass(frozen=True)
class ContrastTResult:
    """A t test of one contrast with a standard error that does not pool the cell variances
    (Welch-Satterthwaite, or HC3 with covariates).

    ``estimate`` is c'ybar, ``null_value`` the hypothesised h; ``statistic`` is
    (estimate - null_value) / se; the interval is for c'mu at ``confidence_level``, one-sided
    when ``alternative`` is.
    """

    estimate: float
    null_value: float
    se: float
    df: float
    statistic: float
    p: float
    alternative: str
    confidence_level: float
    ci_low: float
    ci_high: float


WelchContrastResult = ContrastTResult


@dataclass(frozen=True)
class KruskalWallisResult:
    """Kruskal-Wallis H (tie-corrected) with its chi-square p value."""

    statistic: float
    df: int
    p: float
    tie_correction: float
    n_groups: int


@dataclass(frozen=True)
class RobustWaldResult:
    """A Wald F of C mu = h with a heteroscedasticity-consistent covariance of the cell means."""

    statistic: float
    df1: int
    df2: int
    p: float
    method: str


# ---------------------------------------------------------------------------------------------
# shared input handling (also used by the assumptions and permutation modules)


def _rows(y, codes, k: int | None = None) -> tuple[np.ndarray, np.ndarray, int]:
    """Validate row data; return y as float64, codes as intp and the number of cells k."""
    yy = np.asarray(y, dtype=np.float64)
    cc = np.asarray(codes)
    if yy.ndim != 1:
        raise FitError(f"'y' must be a 1-D array of outcome values (got shape {yy.shape}).")
    if cc.shape != yy.shape:
        raise FitError(
            f"'codes' must give one cell index per row of 'y' (got {cc.size} codes for "
            f"{yy.size} rows)."
        )
    if yy.size and not np.issubdtype(cc.dtype, np.integer):
        if not np.issubdtype(cc.dtype, np.floating) or np.any(cc != np.round(cc)):
            raise FitError(
                f"'codes' must hold whole-number cell indices (got dtype {cc.dtype})."
            )
    cc = cc.astype(np.intp)
    if not np.all(np.isfinite(yy)):
        bad = int(np.flatnonzero(~np.isfinite(yy))[0])
        raise FitError(
            f"'y' must be finite (row {bad} is {yy[bad]!r}); missing values are removed at "
            "intake, before fitting."
        )
    if k is None:
        k = int(cc.max()) + 1 if cc.size else 0
    elif isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 1:
        raise FitError(f"'k' must be a positive whole number of cells (got {k!r}).")
    k = int(k)
    if cc.size and (cc.min() < 0 or cc.max() >= k):
        raise FitError(
            f"'codes' must lie between 0 and k - 1 = {k - 1} (got values from {cc.min()} to "
            f"{cc.max()})."
        )
    return yy, cc, k


def _cell_stats_from_rows(
    y: np.ndarray, codes: np.ndarray, k: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cell counts, means and centred sums of squares by two passes with a mean correction.

    The second pass centres every row on its cell's first-pass mean and adds the mean of those
    deviations back (the corrected two-pass algorithm of Chan, Golub & LeVeque 1983, The American
    Statistician 37, 242-247), so no raw sum of squares is ever formed.
    """
    n = np.bincount(codes, minlength=k)
    safe = np.maximum(n, 1)
    mean = np.bincount(codes, weights=y, minlength=k) / safe
    dev = y - mean[codes]
    shift = np.bincount(codes, weights=dev, minlength=k)
    mean = mean + shift / safe
    dev = y - mean[codes]
    ss = np.bincount(codes, weights=dev * dev, minlength=k)
    return n.astype(np.int64), mean, ss


def _cell_stats(n, mean, ss) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    nn = np.asarray(n)
    mm = np.asarray(mean, dtype=np.float64)
    sq = np.asarray(ss, dtype=np.float64)
    if nn.ndim != 1 or mm.shape != nn.shape or sq.shape != nn.shape:
        raise FitError(
            "'n', 'mean' and 'ss' must be 1-D arrays of the same length, one entry per cell "
            f"(got shapes {nn.shape}, {mm.shape}, {sq.shape})."
        )
    if np.any(nn < 0) or np.any(nn != np.round(nn)):
        raise FitError(f"'n' must hold non-negative whole numbers (got {nn.tolist()}).")
    observed = nn > 0
    if not np.all(np.isfinite(mm[observed])) or not np.all(np.isfinite(sq[observed])):
        raise FitError("'mean' and 'ss' must be finite in every observed cell.")
    if np.any(sq[observed] < 0):
        raise FitError(f"'ss' must be non-negative (got {sq.tolist()}).")
    return nn.astype(np.int64), mm, sq


def _reduce_rows(C, h, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Validate a contrast matrix and reduce it to independent rows with the same null space.

    Equivalent stacks of rows state the same hypothesis; the Wald F is invariant to an
    invertible transformation of the rows, so the rows are replaced by an orthonormal basis of
    their span (a consistent h is carried along).
    """
    cm = np.atleast_2d(np.asarray(C, dtype=np.float64))
    if cm.ndim != 2 or cm.shape[1] != k:
        raise FitError(
            f"'C' must have one column per cell ({k}) (got shape {np.shape(C)})."
        )
    if not np.all(np.isfinite(cm)):
        raise FitError("'C' must be finite (got NaN or infinity).")
    hv = np.zeros(cm.shape[0]) if h is None else np.atleast_1d(np.asarray(h, dtype=np.float64))
    if hv.shape != (cm.shape[0],):
        raise FitError(
            f"'h' must have one value per row of 'C' ({cm.shape[0]}) (got shape {hv.shape})."
        )
    u, s, vt = np.linalg.svd(cm, full_matrices=False)
    if s.size == 0 or s[0] == 0.0:
        raise FitError("'C' has no non-zero row, so it states no hypothesis.")
    rank = int(np.sum(s > s[0] * max(cm.shape) * np.finfo(float).eps * 16))
    if rank < cm.shape[0]:
        residual = hv - u[:, :rank] @ (u[:, :rank].T @ hv)
        if np.linalg.norm(residual) > 1e-9 * max(1.0, np.linalg.norm(hv)):
            raise FitError(
                f"the rows of 'C' are linearly dependent (rank {rank} of {cm.shape[0]}) and "
                "'h' contradicts that dependence, so the hypothesis is impossible; fix 'h'."
            )
    return u[:, :rank].T @ cm, u[:, :rank].T @ hv


def _check_alternative(alternative: str) -> str:
    if alternative not in ("two-sided", "greater", "less"):
        raise FitError(
            "'alternative' must be 'two-sided', 'greater' or 'less' "
            f"(got {alternative!r})."
        )
    return alternative


def name_cells(idx, labels=None) -> str:
    """'cell a' or 'cells a, b and c': cells by their labels (levels) when given, else by index."""
    names = [str(labels[i]) if labels is not None else str(int(i)) for i in np.asarray(idx).ravel()]
    if len(names) == 1:
        return f"cell {names[0]}"
    return "cells " + ", ".join(names[:-1]) + " and " + names[-1]


def _variances(n: np.ndarray, ss: np.ndarray, cells: np.ndarray, what: str, labels=None) -> np.ndarray:
    small = cells[n[cells] < 2]
    if small.size:
        one = "has one row" if small.size == 1 else "have one row each"
        raise FitError(
            f"{what} needs a variance from every cell it uses, but {name_cells(small, labels)} {one}, "
            "so no variance can be estimated there"
        )
    return ss[cells] / (n[cells] - 1)


# ---------------------------------------------------------------------------------------------
# Welch's ANOVA


def welch_anova(n, mean, ss, *, labels=None) -> WelchAnovaResult:
    """Welch's test of equal means without assuming equal variances, over the observed cells.

    With w_i = n_i / s_i^2, W = sum w_i, the weighted mean m = sum w_i ybar_i / W and
    L = sum (1 - w_i/W)^2 / (n_i - 1):
    F = [sum w_i (ybar_i - m)^2 / (g - 1)] / [1 + 2 (g - 2) L / (g^2 - 1)],
    df1 = g - 1, df2 = (g^2 - 1) / (3 L) (Welch 1951, Biometrika 38, 330-336).
    Empty cells are left out. ``mean`` may be offsets from any common pivot (only differences
    of means enter); ``labels`` name the cells in messages.
    """
    n, mean, ss = _cell_stats(n, mean, ss)
    cells = np.flatnonzero(n > 0)
    g = cells.size
    if g < 2:
        raise FitError(
            f"Welch's ANOVA compares at least 2 observed cells (got {g}); check the factor "
            "levels present in the data."
        )
    var = _variances(n, ss, cells, "Welch's ANOVA", labels)
    if np.any(var <= 0.0):
        zero = cells[var <= 0.0]
        verb = "has" if zero.size == 1 else "have"
        raise FitError(
            f"Welch's ANOVA weights each cell by n/variance, but {name_cells(zero, labels)} {verb} "
            "zero variance (all values equal)"
        )
    ni = n[cells].astype(np.float64)
    w = ni / var
    wsum = w.sum()
    ybar = mean[cells]
    m = float(np.sum(w * ybar) / wsum)
    a = float(np.sum(w * (ybar - m) ** 2) / (g - 1))
    lam = float(np.sum((1.0 - w / wsum) ** 2 / (ni - 1.0)))
    b = 1.0 + 2.0 * (g - 2) * lam / (g * g - 1.0)
    f = a / b
    df1 = float(g - 1)
    df2 = (g * g - 1.0) / (3.0 * lam)
    return WelchAnovaResult(
        statistic=f, df1=df1, df2=df2, p=float(f_sf(f, df1, df2)), n_groups=g
    )


# ---------------------------------------------------------------------------------------------
# Welch-Satterthwaite t for one contrast


def welch_contrast(
    c,
    n,
    mean,
    ss,
    *,
    h: float = 0.0,
    alternative: Alternative = "two-sided",
    alpha: float = 0.05,
    labels=None,
) -> WelchContrastResult:
    """t test of c'mu = h with each cell's own variance and Satterthwaite's degrees of freedom.

    se^2 = sum_c c_c^2 s_c^2 / n_c and df = (sum a_c)^2 / sum a_c^2 / (n_c - 1) with
    a_c = c_c^2 s_c^2 / n_c (Satterthwaite 1946, Biometrics Bulletin 2, 110-114; Welch 1947,
    Biometrika 34, 28-35, for two cells). Only cells with a non-zero coefficient enter; each of
    them needs at least 2 rows. ``mean`` may be offsets from a pivot p when ``h`` is given as
    h - p·sum(c) (computed exactly by the caller); the estimate and interval are then on the
    offset scale too. ``labels`` name the cells in messages.
    """
    alternative = _check_alternative(alternative)
    alpha = _check_alpha(alpha)
    n, mean, ss = _cell_stats(n, mean, ss)
    cv = np.asarray(c, dtype=np.float64)
    if cv.shape != n.shape:
        raise FitError(
            f"'c' needs one coefficient per cell ({n.size}) (got shape {cv.shape})."
        )
    if not np.all(np.isfinite(cv)) or not np.any(cv != 0.0):
        raise FitError(f"'c' must be finite and not all zero (got {cv.tolist()}).")
    cells = np.flatnonzero(cv != 0.0)
    empty = cells[n[cells] == 0]
    if empty.size:
        raise FitError(
            f"the contrast puts weight on empty cells {empty.tolist()}, so it is not "
            "estimable; give those cells zero weight."
        )
    var = _variances(n, ss, cells, "the Welch–Satterthwaite t", labels)
    a = cv[cells] ** 2 * var / n[cells]
    se2 = float(a.sum())
    if not se2 > 0.0:
        raise FitError(
            f"the Welch–Satterthwaite t needs a variance, but every cell the contrast uses "
            f"({name_cells(cells, labels)}) has zero variance (all values equal)"
        )
    df = se2**2 / float(np.sum(a**2 / (n[cells] - 1.0)))
    se = float(np.sqrt(se2))
    estimate = math.fsum((cv[cells] * mean[cells]).tolist())
    h = float(h)
    return _t_result(estimate, h, estimate - h, se, df, alternative, alpha)


def _t_result(estimate: float, h: float, d: float, se: float, df: float, alternative: str,
              alpha: float) -> ContrastTResult:
    """t = d / se (d = estimate − h as computed by the caller), its p under ``alternative`` and
    the 1 − alpha interval for the estimate (one-sided when the test is)."""
    t = d / se
    if alternative == "two-sided":
        p = float(2.0 * t_sf(abs(t), df))
        q = float(t_isf(alpha / 2.0, df))
        low, high = estimate - q * se, estimate + q * se
    elif alternative == "greater":
        p = float(t_sf(t, df))
        q = float(t_isf(alpha, df))
        low, high = estimate - q * se, np.inf
    else:
        p = float(t_cdf(t, df))
        q = float(t_isf(alpha, df))
        low, high = -np.inf, estimate + q * se
    return ContrastTResult(
        estimate=estimate,
        null_value=h,
        se=se,
        df=float(df),
        statistic=float(t),
        p=min(p, 1.0),
        alternative=alternative,
        confidence_level=1.0 - alpha,
        ci_low=float(low),
        ci_high=float(high),
    )


# ---------------------------------------------------------------------------------------------
# Games-Howell


def games_howell(n, mean, ss, *, alpha: float = 0.05, labels=None) -> ComparisonFamily:
    """All pairs of cells with separate variances: the Games-Howell procedure.

    For cells i < j: d = ybar_i - ybar_j, se = sqrt(s_i^2/n_i + s_j^2/n_j), Welch's df
    nu = se^4 / [(s_i^2/n_i)^2/(n_i - 1) + (s_j^2/n_j)^2/(n_j - 1)], adjusted p =
    P(Q_(g, nu) >= sqrt(2)|d|/se) from the studentized range, and the interval
    d -/+ q_(1-alpha; g, nu)/sqrt(2) * se (Games & Howell 1976, Journal of Educational
    Statistics 1, 113-125). Every cell must have at least 2 rows. ``mean`` may be offsets from
    any common pivot (only differences enter); ``labels`` name the cells in messages.
    """
    alpha = _check_alpha(alpha)
    n, mean, ss = _cell_stats(n, mean, ss)
    g = n.size
    if g < 2:
        raise FitError(f"Games-Howell compares at least 2 cells (got {g}).")
    if np.any(n == 0):
        raise FitError(
            f"Games-Howell compares the cells passed in, but cells "
            f"{np.flatnonzero(n == 0).tolist()} are empty; pass only observed cells."
        )
    var = _variances(n, ss, np.arange(g), "Games–Howell", labels)
    a = var / n
    out = []
    for i in range(g):
        for j in range(i + 1, g):
            se2 = float(a[i] + a[j])
            if not se2 > 0.0:
                raise FitError(
                    f"Games–Howell needs a standard error for every pair, but {name_cells([i, j], labels)} "
                    "both have zero variance (all values equal)"
                )
            df = se2**2 / float(a[i] ** 2 / (n[i] - 1) + a[j] ** 2 / (n[j] - 1))
            se = float(np.sqrt(se2))
            diff = float(mean[i] - mean[j])
            t = diff / se
            crit = studentized_range_isf(alpha, g, df) / np.sqrt(2.0)
            p = float(studentized_range_sf(abs(t) * np.sqrt(2.0), g, df)[0])
            out.append(pairwise_comparison(i, j, diff, se, df, p, crit))
    return two_sided_family("Games-Howell", alpha, out, g)


# ---------------------------------------------------------------------------------------------
# Kruskal-Wallis


def _average_ranks(y: np.ndarray) -> np.ndarray:
    """Ranks 1..N of ``y``, tied values sharing the mean of the ranks they occupy (mid-ranks);
    see :func:`reporter.intake.memory_rows.average_ranks`."""
    return average_ranks(y)[0]


def kruskal_wallis(y, codes, k: int | None = None) -> KruskalWallisResult:
    """:func:`kruskal_wallis_ranked` on row arrays (mid-ranks from one sort of ``y``)."""
    y, codes, k = _rows(y, codes, k)
    return kruskal_wallis_ranked(MemoryRows(y, codes, k).rank_sums(), np.bincount(codes, minlength=k))


def kruskal_wallis_ranked(ranks: RankSums, n) -> KruskalWallisResult:
    """Kruskal-Wallis rank test over the observed cells, corrected for ties, from the per-cell
    sums of mid-ranks and the tie term.

    With mid-ranks R, H = 12 / (N (N + 1)) sum_c R_c^2 / n_c - 3 (N + 1), divided by
    1 - sum (t^3 - t) / (N^3 - N) over tie groups of size t; p from chi-square with g - 1 df
    (Kruskal & Wallis 1952, JASA 47, 583-621). ``n`` gives the rows per cell.
    """
    n = np.asarray(n)
    rank_sums = np.asarray(ranks.rank_sum, dtype=np.float64)
    g = int(np.count_nonzero(n))
    big_n = int(ranks.n)
    if g < 2:
        raise FitError(
            f"Kruskal-Wallis compares at least 2 observed cells (got {g}); check the factor "
            "levels present in the data."
        )
    obs = n > 0
    h = 12.0 / (big_n * (big_n + 1.0)) * float(np.sum(rank_sums[obs] ** 2 / n[obs])) - 3.0 * (
        big_n + 1.0
    )
    correction = 1.0 - float(ranks.tie_term) / (big_n**3 - float(big_n))
    if correction <= 0.0:
        raise FitError(
            "Kruskal-Wallis needs at least two distinct values of 'y' (all values are equal)."
        )
    h /= correction
    df = g - 1
    return KruskalWallisResult(
        statistic=float(h),
        df=df,
        p=float(chi2_sf(h, df)),
        tie_correction=correction,
        n_groups=g,
    )


# ---------------------------------------------------------------------------------------------
# HC3 Wald F


def hc3_wald(C, n, mean, ss, *, h=None, labels=None) -> RobustWaldResult:
    """Wald F of C mu = h on the full cell-means model with the HC3 covariance.

    In the cell-means model every row of cell c has leverage 1/n_c, so the HC3 sandwich
    (MacKinnon & White 1985, Journal of Econometrics 29, 305-325; recommended by Long & Ervin
    2000, The American Statistician 54, 217-224) is diagonal with
    V_c = sum_(i in c) e_i^2 / (1 - 1/n_c)^2 / n_c^2 = ss_c / (n_c - 1)^2.
    F = (C ybar - h)' (C V C')^-1 (C ybar - h) / q with df (q, N - g), q the rank of C and g the
    number of observed cells.

    A cell with one row has leverage 1 and no HC3 variance: a contrast that uses such a cell
    raises FitError; such cells that C does not use are harmless. ``mean`` may be offsets from a
    pivot p when ``h`` is given as h - p·(row sums of C), computed exactly by the caller;
    ``labels`` name the cells in messages.
    """
    n, mean, ss = _cell_stats(n, mean, ss)
    k = n.size
    cm, hv = _reduce_rows(C, h, k)
    used = np.any(cm != 0.0, axis=0)
    empty = np.flatnonzero(used & (n == 0))
    if empty.size:
        raise FitError(
            f"'C' puts weight on empty cells {empty.tolist()}, so the hypothesis is not "
            "estimable; give those cells zero weight."
        )
    single = np.flatnonzero(used & (n == 1))
    if single.size:
        raise FitError(
            f"the HC3 Wald F needs 1 - leverage > 0, but {name_cells(single, labels)} "
            f"{'has' if single.size == 1 else 'have'} one row (leverage 1), so no variance can "
            "be estimated there"
        )
    big_n = int(n.sum())
    g = int(np.count_nonzero(n))
    df2 = big_n - g
    if df2 < 1:
        raise FitError(
            f"the HC3 F needs residual degrees of freedom (N - cells = {df2}); collect more "
            "than one row per cell."
        )
    v = np.zeros(k)
    obs = n > 1
    v[obs] = ss[obs] / (n[obs] - 1.0) ** 2
    m = (cm * v) @ cm.T
    diff = cm @ np.where(n > 0, mean, 0.0) - hv
    try:
        chol = np.linalg.cholesky(m)
    except np.linalg.LinAlgError:
        chol = None
    if chol is None or np.min(np.diag(chol)) <= 1e-12 * np.sqrt(np.max(np.diag(m))):
        flat = np.flatnonzero(used & (n > 0) & (v == 0.0))
        why = (f"{name_cells(flat, labels)} {'has' if flat.size == 1 else 'have'} zero variance "
               "(all values equal)") if flat.size else "the cells it uses have too little spread"
        raise FitError(f"the HC3 Wald F is undefined: its covariance of the contrasts is singular because {why}")
    z = np.linalg.solve(chol, diff)
    q = cm.shape[0]
    f = float(z @ z) / q
    return RobustWaldResult(
        statistic=f, df1=q, df2=df2, p=float(f_sf(f, q, df2)), method="HC3"
    )


# ---------------------------------------------------------------------------------------------
# HC3 with covariates


@dataclass(frozen=True, eq=False)
class AdjustedCovariance:
    """The HC3 covariance of the covariate-adjusted cell means (k, k; zero rows and columns for
    empty cells) and the error df of the adjusted model. ``unusable`` marks cells whose adjusted
    mean has no HC3 variance because a row it depends on has leverage 1."""

    cov: np.ndarray
    df: int
    unusable: np.ndarray


def hc3_adjusted_covariance(model, offset_mean, batches, df_error: int) -> AdjustedCovariance:
    """HC3 covariance of the adjusted cell means of an analysis of covariance, from row batches.

    With the within-cell-centred parameters theta of :mod:`reporter.inference.covariate_model`
    (G = (X'X)^-1, block diagonal) and A the map to adjusted means, the sandwich is
    A G [sum_i e_i^2 / (1 - h_i)^2 z_i z_i'] G A' (MacKinnon & White 1985, Journal of
    Econometrics 29, 305-325; Long & Ervin 2000, The American Statistician 54, 217-224), z_i the
    row of X (cell indicator, centred covariates), e_i the residual and h_i the leverage of row i.
    The middle matrix needs, per cell, sum u^2, sum u^2 d and sum u^2 d d' (u = e/(1 - h),
    d = x - xbar_c): one pass over ``batches`` of (cell, y offsets, x offsets), O(N p^2) time,
    memory bounded by the batch size. The estimator does not depend on the parameterization, so it
    equals the HC3 covariance of any other coding of the same model.

    ``offset_mean`` (k,) are the cell means of the outcome (offsets); ``model`` a
    :class:`reporter.inference.covariate_model.CovariateModel`.
    """
    k, p = model.xbar.shape
    s0 = np.zeros(k)
    s1 = np.zeros((k, p))
    s2 = np.zeros((k, p, p))
    unusable = np.zeros(k, dtype=bool)
    slope_row_alone = False
    blocks = model.cell_blocks()
    means = np.where(model.observed, np.nan_to_num(np.asarray(offset_mean, dtype=float)), 0.0)
    for cell, y, x in batches:
        cell = np.asarray(cell).astype(np.intp)
        if cell.size == 0:
            continue
        d = np.asarray(x, dtype=np.float64).reshape(cell.size, p) - model.xbar[cell]
        e = (np.asarray(y, dtype=np.float64) - means[cell]) - np.einsum("ij,ij->i", d, model.slopes[cell])
        h = model.leverage(cell, d, blocks)
        one = h >= 1.0 - 1e-10
        if np.any(one):
            unusable[cell[one]] = True
            slope_row_alone = slope_row_alone or bool(np.any(np.abs(h[one] - 1.0 / model.n[cell[one]]) > 1e-10))
        with np.errstate(divide="ignore", invalid="ignore"):
            u2 = np.where(one, 0.0, (e / (1.0 - h)) ** 2)
        s0 += np.bincount(cell, weights=u2, minlength=k)
        for j in range(p):
            wj = u2 * d[:, j]
            s1[:, j] += np.bincount(cell, weights=wj, minlength=k)
            for l in range(j + 1):
                s2[:, j, l] += np.bincount(cell, weights=wj * d[:, l], minlength=k)
    s2 = np.tril(s2) + np.transpose(np.tril(s2, -1), (0, 2, 1))
    if slope_row_alone:  # a row alone determines a slope: no HC3 variance for what uses it
        unusable[:] = True
    g, m = model.g, model.m
    obs = np.flatnonzero(model.observed)
    middle = np.zeros((g + m, g + m))
    middle[np.arange(g), np.arange(g)] = s0[obs]
    for s, c in enumerate(obs):
        cols = g + model.index[c]
        middle[s, cols] += s1[c]
        middle[cols, s] += s1[c]
        middle[np.ix_(cols, cols)] += s2[c]
    b = model.adjusting_matrix() @ model.gram_inverse()
    cov = b @ middle @ b.T
    cov = (cov + cov.T) / 2.0
    return AdjustedCovariance(cov=cov, df=int(df_error), unusable=unusable & model.observed)


def _check_hc3_cells(cm: np.ndarray, hc: AdjustedCovariance, labels) -> None:
    used = np.any(cm != 0.0, axis=0)
    bad = np.flatnonzero(used & hc.unusable)
    if bad.size:
        raise FitError(
            f"the HC3 test needs 1 - leverage > 0 for every row it uses, but {name_cells(bad, labels)} "
            f"{'has' if bad.size == 1 else 'have'} a row of leverage 1 (a row that alone determines a "
            "parameter), so no HC3 variance can be estimated there"
        )


def hc3_wald_adjusted(C, d, hc: AdjustedCovariance, *, labels=None) -> RobustWaldResult:
    """Wald F of C·mu_adj = h with the HC3 covariance of the adjusted cell means.

    ``d`` is C·mu_adj − h (one value per row of C, as the fit computed it);
    F = d' (C V C')^-1 d / q with df (q, error df of the adjusted model), q the rank of C
    (MacKinnon & White 1985; Long & Ervin 2000).
    """
    k = hc.cov.shape[0]
    cm, dv = _reduce_rows(C, d, k)
    _check_hc3_cells(cm, hc, labels)
    m = cm @ hc.cov @ cm.T
    try:
        chol = np.linalg.cholesky(m)
    except np.linalg.LinAlgError:
        chol = None
    if chol is None or np.min(np.diag(chol)) <= 1e-12 * np.sqrt(np.max(np.diag(m))):
        raise FitError("the HC3 Wald F is undefined: its covariance of the contrasts is singular "
                       "(the cells it uses have too little spread)")
    z = np.linalg.solve(chol, dv)
    q = cm.shape[0]
    f = float(z @ z) / q
    return RobustWaldResult(statistic=f, df1=q, df2=hc.df, p=float(f_sf(f, q, hc.df)), method="HC3")


def hc3_contrast_adjusted(c, d: float, h: float, hc: AdjustedCovariance, *, alternative: Alternative = "two-sided",
                          alpha: float = 0.05, labels=None) -> ContrastTResult:
    """t test of c'mu_adj = h with the HC3 standard error sqrt(c' V c) on the error df of the
    adjusted model (MacKinnon & White 1985; Long & Ervin 2000); ``d`` = c'mu_adj − h as fitted.
    The estimate and interval are c'mu_adj = d + h."""
    alternative = _check_alternative(alternative)
    alpha = _check_alpha(alpha)
    cv = np.asarray(c, dtype=np.float64)
    _check_hc3_cells(cv[None, :], hc, labels)
    var = float(cv @ hc.cov @ cv)
    if not var > 0.0:
        raise FitError("the HC3 t is undefined: the contrast has no HC3 variance (the cells it uses "
                       "have too little spread)")
    return _t_result(float(d) + float(h), float(h), float(d), math.sqrt(var), float(hc.df), alternative, alpha)


def welch_tost(c, n, mean, ss, bounds, *, alpha: float = 0.05, labels=None, shift: float = 0.0,
               bounds_shown: tuple[float, float] | None = None):
    """Welch-type two one-sided tests of ``LOW < c'mu < HIGH``: each side is the
    Welch–Satterthwaite t of :func:`welch_contrast` (separate cell variances, Satterthwaite df)
    against its bound, the p is the larger one-sided p and the interval the 1 − 2α Welch interval
    (Schuirmann 1987, Journal of Pharmacokinetics and Biopharmaceutics 15, 657-680, with the
    unequal-variance t of Welch 1947, Biometrika 34, 28-35).

    ``mean`` and ``bounds`` may be offsets from a pivot; ``shift`` (pivot times the sum of c) is
    then added back to the estimate, the interval and the bounds reported (the decision is made on
    the offsets). Returns a :class:`reporter.fitting.equivalence.EquivalenceTest`.
    """
    from reporter.fitting.equivalence import EquivalenceTest, OneSided, decide

    low, high = (float(b) for b in bounds)
    lower = welch_contrast(c, n, mean, ss, h=low, alternative="greater", alpha=alpha, labels=labels)
    upper = welch_contrast(c, n, mean, ss, h=high, alternative="less", alpha=alpha, labels=labels)
    middle = welch_contrast(c, n, mean, ss, h=0.0, alternative="two-sided", alpha=2 * alpha, labels=labels)
    deciding = lower if lower.p >= upper.p else upper
    shown = (low + shift, high + shift) if bounds_shown is None else tuple(bounds_shown)
    return EquivalenceTest(
        test="t",
        alternative="equivalence",
        df=(middle.df,),
        statistic=deciding.statistic,
        p=max(lower.p, upper.p),
        ss=float("nan"),
        q=1,
        row_estimates=(middle.estimate + shift,),
        estimate=middle.estimate + shift,
        se=middle.se,
        ci=(middle.ci_low + shift, middle.ci_high + shift),
        ci_sides=2,
        ci_level=1.0 - 2 * alpha,
        rhs=0.0,
        lower=OneSided(shown[0], lower.statistic, lower.p),
        upper=OneSided(shown[1], upper.statistic, upper.p),
        bounds=shown,
        decision=decide((middle.ci_low, middle.ci_high), (low, high)),
    )
