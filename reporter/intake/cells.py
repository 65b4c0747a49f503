"""Per-cell sufficient statistics: n, mean and the centred sum of squared deviations.

Every between-subjects test of the full model is a function of (n_c, mean_c, S_c) alone.
They are computed stably:

* values are grouped by cell with a stable sort; a cell's sums are exactly rounded (math.fsum)
  up to 16,384 values and use numpy's pairwise summation beyond (error growing like log2(n),
  Higham (2002), *Accuracy and Stability of Numerical Algorithms*, 2nd ed., section 4.2);
* the mean is refined by the corrected two-pass algorithm: m = m0 + sum(x - m0)/n, and
  S = sum((x - m)^2) - (sum(x - m))^2/n (Chan, Golub & LeVeque (1983), "Algorithms for
  computing the sample variance", The American Statistician 37(3), 242-247, eq. 1.7);
* sums across cells use math.fsum (exactly rounded, Shewchuk 1997, Discrete & Computational Geometry 18, 305-363).

Raw "sum of squares minus n times mean squared" formulas are never used. Values arrive as
offsets from a pivot (see :mod:`reporter.intake.data`), which the statistics carry along.

With covariates (:func:`describe_covariates`) each cell also carries the covariate means (offsets
from each covariate's own pivot) and the within-cell centred cross-products of the covariates with
each other and with the outcome, computed by the same rules; these are the sufficient statistics of
the analysis of covariance (Searle (1987), *Linear Models for Unbalanced Data*, section 9.2).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np


@dataclass(frozen=True)
class CovariateStats:
    """Per-cell covariate statistics of p covariates over k cells.

    ``offset_mean`` (k, p) are the cell means of each covariate minus its ``pivot`` (NaN rows for
    empty cells); ``sxx`` (k, p, p) the within-cell centred cross-products
    Σ (x_j − x̄_j)(x_l − x̄_l) and ``sxy`` (k, p) the within-cell Σ (x_j − x̄_j)(y − ȳ); both are
    zero for an empty cell (an empty sum).
    """

    names: tuple[str, ...]
    offset_mean: np.ndarray
    pivot: np.ndarray
    pivot_exact: tuple[Fraction, ...]
    sxx: np.ndarray
    sxy: np.ndarray

    @property
    def p(self) -> int:
        return len(self.names)

    @property
    def mean(self) -> np.ndarray:
        """Cell means of each covariate on the original scale (NaN rows for empty cells)."""
        return self.offset_mean + self.pivot

    def pooled_sxx(self, observed: np.ndarray) -> np.ndarray:
        """Σ over observed cells of the within-cell cross-products (p, p), each entry exactly rounded."""
        return _fsum_cells(self.sxx[observed])

    def pooled_sxy(self, observed: np.ndarray) -> np.ndarray:
        """Σ over observed cells of the within-cell covariate x outcome cross-products (p,)."""
        return _fsum_cells(self.sxy[observed])


def _fsum_cells(a: np.ndarray) -> np.ndarray:
    out = np.empty(a.shape[1:])
    flat = a.reshape(a.shape[0], -1)
    out.reshape(-1)[:] = [math.fsum(flat[:, j].tolist()) for j in range(flat.shape[1])]
    return out


@dataclass(frozen=True)
class CellStats:
    """Sufficient statistics of k cells; ``offset_mean`` is the mean minus ``pivot``."""

    n: np.ndarray
    offset_mean: np.ndarray
    ss: np.ndarray
    pivot: float
    pivot_exact: Fraction
    covariates: CovariateStats | None = None

    @property
    def k(self) -> int:
        return int(self.n.shape[0])

    @property
    def observed(self) -> np.ndarray:
        return self.n > 0

    @property
    def n_total(self) -> int:
        return int(self.n.sum())

    @property
    def mean(self) -> np.ndarray:
        """Cell means on the original scale (NaN for empty cells)."""
        return self.offset_mean + self.pivot

    @property
    def sd(self) -> np.ndarray:
        """Cell standard deviations (n - 1 denominator; NaN where n < 2)."""
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.where(self.n > 1, np.sqrt(self.ss / np.maximum(self.n - 1, 1)), np.nan)

    @property
    def ss_within(self) -> float:
        return math.fsum(self.ss[self.observed].tolist())

    @property
    def df_within(self) -> int:
        return self.n_total - int(self.observed.sum())

    @property
    def grand_offset_mean(self) -> float:
        """The n-weighted mean of all rows, minus the pivot."""
        o = self.observed
        return math.fsum((self.n[o] * self.offset_mean[o]).tolist()) / self.n_total

    @property
    def ss_between(self) -> float:
        """Sum over cells of n_c (mean_c - grand mean)^2: the full model's SS."""
        o = self.observed
        d = self.offset_mean[o] - self.grand_offset_mean
        return math.fsum((self.n[o] * d * d).tolist())

    @property
    def ss_total(self) -> float:
        return self.ss_between + self.ss_within


_FSUM_LIMIT = 1 << 14


def _sum_exact(x: np.ndarray) -> float:
    return math.fsum(x.tolist())


def _sum_pairwise(x: np.ndarray) -> float:
    return float(x.sum())


def code_type(k: int):
    """The narrowest unsigned type for cell codes 0 .. k − 1 (numpy's stable sort of 8- and 16-bit
    integers is a radix sort)."""
    return np.uint8 if k <= 255 else np.uint16 if k <= 65535 else np.int64


def group_by_cell(cell: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Cell counts, a stable order grouping rows by cell, and each cell's start and end in it."""
    n = np.bincount(cell, minlength=k).astype(np.int64)
    order = np.argsort(cell.astype(code_type(k), copy=False), kind="stable")
    ends = np.cumsum(n)
    return n, order, ends - n, ends


def segment_moments(x: np.ndarray) -> tuple[float, float]:
    """Mean and centred SS of the values ``x`` (one cell) by the corrected two-pass algorithm
    (Chan, Golub & LeVeque 1983, The American Statistician 37(3), 242-247, eq. 1.7), with
    exactly rounded sums up to 16,384 values and pairwise sums beyond."""
    total = _sum_exact if x.size <= _FSUM_LIMIT else _sum_pairwise
    n = x.size
    m0 = total(x) / n
    d = x - m0  # one scratch array, reused: the same operations as _refined_deviations
    m = m0 + total(d) / n
    np.subtract(x, m, out=d)
    s1 = total(d)
    np.multiply(d, d, out=d)
    return m, max(total(d) - s1 * s1 / n, 0.0)


def _refined_deviations(x: np.ndarray, total) -> tuple[float, np.ndarray, float]:
    """The corrected two-pass mean m of x, the deviations x − m and their (tiny) sum."""
    m0 = total(x) / x.size
    m = m0 + total(x - m0) / x.size
    d = x - m
    return m, d, total(d)


def describe_cells(y: np.ndarray, cell: np.ndarray, k: int, pivot: float = 0.0, pivot_exact: Fraction | None = None) -> CellStats:
    """Per-cell n, mean and centred SS of ``y`` (offsets from ``pivot``) grouped by ``cell``."""
    y = np.asarray(y, dtype=np.float64)
    cell = np.asarray(cell)
    n, order, starts, ends = group_by_cell(cell, k)
    ys = y[order]
    mean = np.full(k, np.nan)
    ss = np.full(k, np.nan)
    for c in np.flatnonzero(n):
        mean[c], ss[c] = segment_moments(ys[starts[c] : ends[c]])
    for arr in (n, mean, ss):
        arr.setflags(write=False)
    exact = pivot_exact if pivot_exact is not None else Fraction(pivot)
    return CellStats(n=n, offset_mean=mean, ss=ss, pivot=float(pivot), pivot_exact=exact)



def describe_covariates(
    y: np.ndarray,
    x: np.ndarray,
    cell: np.ndarray,
    k: int,
    pivot: np.ndarray | None = None,
    pivot_exact: tuple[Fraction, ...] | None = None,
    names: tuple[str, ...] | None = None,
) -> CovariateStats:
    """Per-cell covariate means and within-cell cross-products.

    ``y`` (N,) are outcome offsets, ``x`` (N, p) covariate offsets from ``pivot`` (p,), ``cell``
    the cell code of each row. The accuracy rules of :func:`describe_cells` apply: a stable
    grouping, exactly rounded sums up to 16,384 values per cell (pairwise beyond), means refined by
    the corrected two-pass algorithm and cross-products as the corrected two-pass sums
    Σ d_j·d_l − (Σ d_j)(Σ d_l)/n (Chan, Golub & LeVeque (1983), The American Statistician 37(3),
    242-247, eq. 1.7, extended to cross-products).
    """
    y = np.asarray(y, dtype=np.float64)
    x = np.asarray(x, dtype=np.float64)
    if x.ndim == 1:
        x = x[:, None]
    cell = np.asarray(cell)
    p = x.shape[1]
    piv = np.zeros(p) if pivot is None else np.array(pivot, dtype=np.float64).reshape(p)
    exact = tuple(Fraction(float(v)) for v in piv) if pivot_exact is None else tuple(pivot_exact)
    labels = tuple(f"x{j + 1}" for j in range(p)) if names is None else tuple(names)
    n, order, starts, ends = group_by_cell(cell, k)
    ys = y[order]
    xs = x[order]
    mean = np.full((k, p), np.nan)
    sxx = np.zeros((k, p, p))
    sxy = np.zeros((k, p))
    for c in np.flatnonzero(n):
        sl = slice(starts[c], ends[c])
        total = _sum_exact if n[c] <= _FSUM_LIMIT else _sum_pairwise
        _, dy, sy = _refined_deviations(ys[sl], total)
        dev = []
        for j in range(p):
            m, d, s1 = _refined_deviations(np.ascontiguousarray(xs[sl, j]), total)
            mean[c, j] = m
            dev.append((d, s1))
        for j, (dj, sj) in enumerate(dev):
            sxy[c, j] = total(dj * dy) - sj * sy / n[c]
            for l in range(j + 1):
                dl, sl1 = dev[l]
                v = total(dj * dl) - sj * sl1 / n[c]
                if l == j:
                    v = max(v, 0.0)
                sxx[c, j, l] = sxx[c, l, j] = v
    for arr in (mean, piv, sxx, sxy):
        arr.setflags(write=False)
    return CovariateStats(names=labels, offset_mean=mean, pivot=piv, pivot_exact=exact, sxx=sxx, sxy=sxy)
