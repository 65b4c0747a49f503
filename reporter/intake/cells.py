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
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np


@dataclass(frozen=True)
class CellStats:
    """Sufficient statistics of k cells; ``offset_mean`` is the mean minus ``pivot``."""

    n: np.ndarray
    offset_mean: np.ndarray
    ss: np.ndarray
    pivot: float
    pivot_exact: Fraction

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


def describe_cells(y: np.ndarray, cell: np.ndarray, k: int, pivot: float = 0.0, pivot_exact: Fraction | None = None) -> CellStats:
    """Per-cell n, mean and centred SS of ``y`` (offsets from ``pivot``) grouped by ``cell``."""
    y = np.asarray(y, dtype=np.float64)
    cell = np.asarray(cell)
    n = np.bincount(cell, minlength=k).astype(np.int64)
    code_type = np.uint8 if k <= 255 else np.uint16 if k <= 65535 else np.int64
    order = np.argsort(cell.astype(code_type, copy=False), kind="stable")
    ys = y[order]
    ends = np.cumsum(n)
    starts = ends - n
    mean = np.full(k, np.nan)
    ss = np.full(k, np.nan)
    for c in np.flatnonzero(n):
        x = ys[starts[c] : ends[c]]
        total = _sum_exact if x.size <= _FSUM_LIMIT else _sum_pairwise
        m0 = total(x) / n[c]
        m = m0 + total(x - m0) / n[c]
        d = x - m
        s1 = total(d)
        mean[c] = m
        ss[c] = max(total(d * d) - s1 * s1 / n[c], 0.0)
    for arr in (n, mean, ss):
        arr.setflags(write=False)
    exact = pivot_exact if pivot_exact is not None else Fraction(pivot)
    return CellStats(n=n, offset_mean=mean, ss=ss, pivot=float(pivot), pivot_exact=exact)
