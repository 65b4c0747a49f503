"""Checks of the assumptions behind the cell-means ANOVA: equal variances, normal errors, no
gross outliers.

All functions take the row data ``y`` and ``codes`` (the cell index of each row) and work with
the residuals e_i = y_i - ybar_(cell of i) of the full cell-means model, whose rows in cell c all
have leverage h_i = 1/n_c. Rows of a cell with one row have leverage 1 and a residual of exactly
zero: they carry no information about the errors and are left out of the row diagnostics (and
reported as such).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special

from reporter.errors import FitError
from reporter.fitting.distributions import f_sf, norm_cdf, norm_ppf
from reporter.fitting.robust import _cell_stats_from_rows, _rows

__all__ = [
    "HomogeneityResult",
    "NormalityResult",
    "Outlier",
    "OutlierScan",
    "QQData",
    "StudentizedResiduals",
    "brown_forsythe",
    "find_outliers",
    "levene",
    "qq_points",
    "shapiro_wilk",
    "studentized_residuals",
]

SHAPIRO_MIN_N = 3
SHAPIRO_MAX_N = 5000


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
    "too-few-rows" (fewer than 3 usable residuals), "too-many-rows" (more than 5000, beyond the
    range of the p-value approximation) or "no-spread" (all residuals equal), and
    ``statistic`` and ``p`` are None. ``n`` counts the residuals used (or available).
    """

    method: str
    n: int
    skipped: bool
    reason: str | None
    statistic: float | None
    p: float | None


@dataclass(frozen=True)
class QQData:
    """Points of a normal Q-Q plot: Blom quantiles against sorted standardized residuals.

    ``rows`` gives, for each point, the 0-based index into ``y`` of the row it shows.
    """

    theoretical: tuple[float, ...]
    sample: tuple[float, ...]
    rows: tuple[int, ...]


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
    """One row whose externally studentized residual exceeds the threshold in absolute value."""

    row: int
    cell: int
    residual: float
    internal: float
    external: float


@dataclass(frozen=True)
class OutlierScan:
    """Rows flagged by |t_i| > threshold, and the rows that could not be checked.

    ``skipped_rows`` are rows of one-row cells (leverage 1: the residual is 0 by construction
    and cannot be studentized); ``note`` says so in words when there are any.
    """

    threshold: float
    outliers: tuple[Outlier, ...]
    n_checked: int
    skipped_rows: tuple[int, ...]
    note: str | None


# ---------------------------------------------------------------------------------------------
# homogeneity of variance


def _group_medians(y: np.ndarray, codes: np.ndarray, n: np.ndarray) -> np.ndarray:
    order = np.lexsort((y, codes))
    ys = y[order]
    starts = np.concatenate(([0], np.cumsum(n)[:-1]))
    med = np.zeros(n.size)
    obs = n > 0
    lo = starts[obs] + (n[obs] - 1) // 2
    hi = starts[obs] + n[obs] // 2
    med[obs] = (ys[lo] + ys[hi]) / 2.0
    return med


def _deviation_f(y, codes, k, center: str, method: str) -> HomogeneityResult:
    y, codes, k = _rows(y, codes, k)
    n, mean, _ = _cell_stats_from_rows(y, codes, k)
    g = int(np.count_nonzero(n))
    big_n = y.size
    if g < 2:
        raise FitError(
            f"{method} compares the spread of at least 2 observed cells (got {g})."
        )
    if big_n - g < 1:
        raise FitError(
            f"{method} needs more rows than cells (got {big_n} rows in {g} cells)."
        )
    centre = mean if center == "mean" else _group_medians(y, codes, n)
    z = np.abs(y - centre[codes])
    zn, zmean, zss = _cell_stats_from_rows(z, codes, k)
    obs = zn > 0
    grand = float(np.sum(zn[obs] * zmean[obs]) / big_n)
    between = float(np.sum(zn[obs] * (zmean[obs] - grand) ** 2))
    within = float(zss.sum())
    if not within > 0.0:
        raise FitError(
            f"{method} is undefined here: within every cell the absolute deviations from the "
            f"cell {center} are all equal (for example, cells of 2 rows), so they have no "
            "spread to compare against; collect more rows per cell."
        )
    df1, df2 = g - 1, big_n - g
    f = (between / df1) / (within / df2)
    return HomogeneityResult(
        method=method,
        center=center,
        statistic=f,
        df1=df1,
        df2=df2,
        p=float(f_sf(f, df1, df2)),
        n_groups=g,
    )


def levene(y, codes, k: int | None = None) -> HomogeneityResult:
    """Levene's test of equal variances: one-way F on |y_i - mean of its cell|.

    Levene (1960), in Olkin et al. (eds.), *Contributions to Probability and Statistics*,
    Stanford University Press, 278-292.
    """
    return _deviation_f(y, codes, k, "mean", "Levene")


def brown_forsythe(y, codes, k: int | None = None) -> HomogeneityResult:
    """Brown-Forsythe test of equal variances: one-way F on |y_i - median of its cell|.

    Brown & Forsythe (1974), JASA 69, 364-367; robust to skewed errors.
    """
    return _deviation_f(y, codes, k, "median", "Brown-Forsythe")


# ---------------------------------------------------------------------------------------------
# residuals


def studentized_residuals(y, codes, k: int | None = None) -> StudentizedResiduals:
    """Residuals and their internally and externally studentized forms.

    With h_i = 1/n_c, r_i = e_i / sqrt(MSE (1 - h_i)) and
    t_i = r_i sqrt((df_e - 1) / (df_e - r_i^2)), df_e = N - g (Cook & Weisberg 1982,
    *Residuals and Influence in Regression*, Chapman & Hall). Rows of one-row cells
    (h_i = 1) get NaN.
    """
    y, codes, k = _rows(y, codes, k)
    n, mean, ss = _cell_stats_from_rows(y, codes, k)
    g = int(np.count_nonzero(n))
    df_e = y.size - g
    if df_e < 2:
        raise FitError(
            f"studentized residuals need at least 2 residual degrees of freedom (N - cells = "
            f"{df_e}); collect more rows per cell."
        )
    sse = float(ss.sum())
    if not sse > 0.0:
        raise FitError(
            "the residuals are all zero (every cell's values are equal), so they cannot be "
            "studentized."
        )
    mse = sse / df_e
    e = y - mean[codes]
    lev = 1.0 / n[codes]
    ok = lev < 1.0
    e[~ok] = 0.0
    internal = np.full(y.size, np.nan)
    internal[ok] = e[ok] / np.sqrt(mse * (1.0 - lev[ok]))
    external = np.full(y.size, np.nan)
    r = internal[ok]
    denom = df_e - r * r
    with np.errstate(divide="ignore", invalid="ignore"):
        t = r * np.sqrt((df_e - 1.0) / np.maximum(denom, 0.0))
    external[ok] = t
    for arr in (e, lev, internal, external):
        arr.flags.writeable = False
    return StudentizedResiduals(
        residual=e, leverage=lev, internal=internal, external=external, mse=mse, df_error=df_e
    )


def shapiro_wilk(y, codes, k: int | None = None) -> NormalityResult:
    """Shapiro-Wilk test of the residuals (rows of one-row cells left out).

    Shapiro & Wilk (1965), Biometrika 52, 591-611, computed by Royston's (1995) algorithm
    AS R94 (see :func:`_royston_shapiro_wilk`); the p value approximation holds for
    3 <= n <= 5000, so outside that range the test is skipped.
    """
    y, codes, k = _rows(y, codes, k)
    n, mean, _ = _cell_stats_from_rows(y, codes, k)
    keep = n[codes] > 1
    e = (y - mean[codes])[keep]
    m = int(e.size)
    if m < SHAPIRO_MIN_N:
        return NormalityResult("Shapiro-Wilk", m, True, "too-few-rows", None, None)
    if m > SHAPIRO_MAX_N:
        return NormalityResult("Shapiro-Wilk", m, True, "too-many-rows", None, None)
    if not np.ptp(e) > 1e-12 * max(1.0, float(np.max(np.abs(y)))):
        return NormalityResult("Shapiro-Wilk", m, True, "no-spread", None, None)
    w, p = _royston_shapiro_wilk(e)
    return NormalityResult("Shapiro-Wilk", m, False, None, w, p)


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


def qq_points(y, codes, k: int | None = None) -> QQData:
    """Normal Q-Q points: Blom positions against sorted internally studentized residuals.

    The i-th smallest of m residuals is paired with the normal quantile at (i - 3/8)/(m + 1/4)
    (Blom 1958, *Statistical Estimates and Transformed Beta-Variables*, Wiley). Rows of one-row
    cells are left out.
    """
    res = studentized_residuals(y, codes, k)
    usable = np.flatnonzero(np.isfinite(res.internal))
    order = usable[np.argsort(res.internal[usable], kind="stable")]
    m = order.size
    positions = (np.arange(1, m + 1) - 0.375) / (m + 0.25)
    theoretical = norm_ppf(positions)
    return QQData(
        theoretical=tuple(float(v) for v in theoretical),
        sample=tuple(float(v) for v in res.internal[order]),
        rows=tuple(int(i) for i in order),
    )


def find_outliers(
    y, codes, k: int | None = None, *, threshold: float = 3.0
) -> OutlierScan:
    """Rows whose externally studentized residual exceeds ``threshold`` in absolute value.

    Under normal errors each t_i follows a t distribution with df_e - 1 degrees of freedom
    (Cook & Weisberg 1982); the cut-off |t_i| > 3 is common practice, no source.
    Rows are 0-based indices into ``y``.
    """
    threshold = float(threshold)
    if not (np.isfinite(threshold) and threshold > 0.0):
        raise FitError(f"'threshold' must be a positive number (got {threshold!r}).")
    y, codes, k = _rows(y, codes, k)
    res = studentized_residuals(y, codes, k)
    skipped = np.flatnonzero(~(res.leverage < 1.0))
    flagged = np.flatnonzero(np.abs(np.nan_to_num(res.external, nan=0.0)) > threshold)
    outliers = tuple(
        Outlier(
            row=int(i),
            cell=int(codes[i]),
            residual=float(res.residual[i]),
            internal=float(res.internal[i]),
            external=float(res.external[i]),
        )
        for i in flagged
    )
    note = None
    if skipped.size:
        note = (
            f"{skipped.size} row(s) are alone in their cell; such a row has leverage 1 and a "
            "residual of zero by construction, so it cannot be checked."
        )
    return OutlierScan(
        threshold=threshold,
        outliers=outliers,
        n_checked=int(y.size - skipped.size),
        skipped_rows=tuple(int(i) for i in skipped),
        note=note,
    )
