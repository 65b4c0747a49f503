"""Row access for rows held in memory as numpy arrays (see :mod:`reporter.intake.rows`).

The order-based answers (medians, deviations about them, mid-ranks, quantiles, figure points)
come from each cell's values sorted once, when first needed (:mod:`.sorted_cells`, shared with
the DuckDB rows); every method costs at most O(N log N) time and O(N) extra memory.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from reporter.intake.rows import CellPoints, FlaggedRows, RankSums, sample_positions
from reporter.intake.sorted_cells import SortedCells


def average_ranks(y: np.ndarray, order: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Mid-ranks 1..N of ``y`` and the sizes of the tie groups (in increasing value order).

    A tie group occupying sorted positions s+1 .. s+t gets the rank s + (t + 1)/2 (Kruskal &
    Wallis 1952, JASA 47, 583-621); equals ``scipy.stats.rankdata(y, method="average")``.
    ``order`` may pass a stable argsort of ``y`` already made.
    """
    if order is None:
        order = np.argsort(y, kind="stable")
    ys = y[order]
    starts_group = np.empty(ys.size, dtype=bool)
    starts_group[:1] = True
    np.not_equal(ys[1:], ys[:-1], out=starts_group[1:])
    group = np.cumsum(starts_group) - 1
    starts = np.flatnonzero(starts_group)
    sizes = np.diff(np.append(starts, ys.size))
    ranks = np.empty(ys.size)
    ranks[order] = (starts + (sizes + 1) / 2.0)[group]
    return ranks, sizes


class MemoryRows:
    """:class:`reporter.intake.rows.RowAccess` over numpy arrays.

    ``y`` holds the values as offsets from the pivot, ``cell`` each row's design cell (0 .. k-1)
    and ``row_numbers`` each row's number as a person finds it in the input (default 1..N);
    ``x`` (N, p), when given, the covariates as offsets from their pivots.
    The arrays are not copied; the caller must not change them.
    """

    kind = "memory"

    def __init__(self, y: np.ndarray, cell: np.ndarray, k: int, row_numbers: np.ndarray | None = None,
                 x: np.ndarray | None = None):
        self._y = np.asarray(y, dtype=np.float64)
        self._cell = np.asarray(cell)
        self.n = int(self._y.shape[0])
        self.k = int(k)
        if self._cell.shape != self._y.shape:
            raise ValueError(f"cell codes ({self._cell.shape}) and values ({self._y.shape}) differ in shape")
        self._x = None if x is None else np.asarray(x, dtype=np.float64).reshape(self.n, -1)
        self._rows = row_numbers
        self._by_cell: SortedCells | None = None
        self._ranks: RankSums | None = None

    # -----------------------------------------------------------------------------------------
    # RowAccess: the order-based answers come from each cell's sorted values

    def _sorted(self) -> SortedCells:
        """Each cell's values in increasing order (:mod:`.sorted_cells`), made once."""
        if self._by_cell is None:
            self._by_cell = SortedCells.from_rows(self._y, self._cell, self.k)
        return self._by_cell

    def medians(self) -> np.ndarray:
        return self._sorted().medians()

    def deviation_stats(self, centre: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        return self._sorted().deviation_stats(centre)

    def deviation_stats_many(self, centres: Sequence[np.ndarray]) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
        return [self.deviation_stats(c) for c in centres]

    def rank_sums(self) -> RankSums:
        if self._ranks is None:
            self._ranks = self._sorted().rank_sums()
        return self._ranks

    def residual_quantiles(self, means: np.ndarray, scale: np.ndarray, probs: Sequence[float]) -> np.ndarray:
        return self._sorted().pooled_quantiles(means, scale, probs)

    def cell_points(self, max_points: int) -> tuple[CellPoints, ...]:
        return self._sorted().cell_points(max_points)

    def flagged(self, centre: np.ndarray, bound: np.ndarray, limit: int) -> FlaggedRows:
        centre = np.asarray(centre, dtype=np.float64)
        bound = np.asarray(bound, dtype=np.float64)
        dev = self._y - centre[self._cell]
        with np.errstate(invalid="ignore"):
            finite = np.isfinite(bound)
            mask = finite[self._cell] & (np.abs(dev) > np.where(finite, bound, np.inf)[self._cell])
        idx = np.flatnonzero(mask)
        fc = self._cell[idx]
        fd = dev[idx]
        count = np.bincount(fc, minlength=self.k).astype(np.int64)
        sum_dev = np.bincount(fc, weights=fd, minlength=self.k)
        sum_dev2 = np.bincount(fc, weights=fd * fd, minlength=self.k)
        top = idx[np.argsort(-np.abs(fd), kind="stable")[: max(int(limit), 0)]]
        numbers = self._rows[top] if self._rows is not None else top + 1
        rows = tuple((int(r), int(self._cell[i]), float(self._y[i])) for r, i in zip(numbers, top))
        return FlaggedRows(total=int(idx.size), rows=rows, count=count, sum_dev=sum_dev, sum_dev2=sum_dev2)

    def sample(self, size: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
        if self.n <= size:
            return self._y.copy(), self._cell.copy()
        idx = sample_positions(self.n, size, seed)
        return self._y[idx], self._cell[idx]

    def arrays(self) -> tuple[np.ndarray, np.ndarray]:
        return self._y, self._cell

    # -----------------------------------------------------------------------------------------
    # covariates

    def covariate_arrays(self) -> np.ndarray | None:
        return self._x

    def adjusted(self, b: np.ndarray) -> "MemoryRows":
        """The rows with outcome z = y − Σ_j b[c, j]·x_j (offsets; see :func:`slope_matrix`)."""
        z = adjust(self._y, self._cell, self._x, slope_matrix(b, self.k, self._x))
        z.setflags(write=False)
        return MemoryRows(z, self._cell, self.k, self._rows, x=self._x)

    def batches(self, size: int):
        """(cell, y offsets, x offsets) of at most ``size`` rows at a time, in input order (views,
        no copy); x has 0 columns without covariates."""
        size = max(int(size), 1)
        x = self._x if self._x is not None else np.empty((self.n, 0))
        for start in range(0, self.n, size):
            stop = min(start + size, self.n)
            yield self._cell[start:stop], self._y[start:stop], x[start:stop]


def slope_matrix(b, k: int, x: np.ndarray | None) -> np.ndarray:
    """``b`` as a (k, p) float array: the slope of each covariate in each cell. A (p,) vector is
    one common slope per covariate (the same row in every cell)."""
    p = 0 if x is None else x.shape[1]
    b = np.asarray(b, dtype=np.float64)
    if b.ndim == 1:
        b = np.broadcast_to(b, (k, b.shape[0]))
    if b.shape != (k, p):
        raise ValueError(f"slopes of shape {b.shape} given for {k} cells and {p} covariates; expected ({k}, {p})")
    return b


def adjust(y: np.ndarray, cell: np.ndarray, x: np.ndarray | None, b: np.ndarray) -> np.ndarray:
    """z = y − Σ_j b[cell, j]·x_j, one chunk of rows (the rule both row sources use)."""
    z = np.array(y, dtype=np.float64, copy=True)
    if x is None:
        return z
    for j in range(x.shape[1]):
        z -= b[cell, j] * x[:, j]
    return z
