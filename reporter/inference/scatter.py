"""The points of the outcome-against-covariate figure, bounded whatever the number of rows.

For each covariate and each cell, :func:`covariate_points` returns what the figure draws: every
row of a cell of at most ``max_points`` rows, otherwise a binned scatter: the cell's covariate
range cut into ``max_points`` bins of equal width, each non-empty bin drawn at the mean
covariate and mean outcome of its rows (a binned scatter plot; Cattaneo, Crump, Farrell & Feng
2024, "On binscatter", American Economic Review 114(5), 1488-1514, who study it with bins of
equal count as well as of equal width). Equal-width bins need only each cell's minimum and
maximum, so two passes over :meth:`RowAccess.batches` give them in O(N) time and memory bounded
by the batch size plus k·p·max_points; the same code serves the in-memory and the out-of-core
rows. A bin mean shows the shape of the relation (the line the model assumes) but not the
scatter around it; the figure's caption says which cells were binned.

With several covariates the outcome drawn against covariate j is adjusted for the others:
y − Σ_{l≠j} b[c,l]·(x_l − r_l), with b the fitted slopes and r the reference values at which
adjusted means are taken, so the points scatter around the cell's fitted line in that figure
(a partial-residual view; Larsen & McCleary 1972, "The use of partial residual plots in
regression analysis", Technometrics 14(3), 781-790, from memory). With one covariate it is
the outcome itself.

Every value is an offset from its pivot (the outcome's pivot for y, each covariate's pivot for
x), as everywhere else in the row access.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

BATCH_ROWS = 65_536
"""Rows asked of :meth:`RowAccess.batches` at a time (bounds the memory of both passes)."""


@dataclass(frozen=True)
class CovariatePoints:
    """One cell's points against one covariate.

    ``n`` rows; ``x`` and ``y`` the points to draw (offsets), in file order when every row is
    drawn and in increasing covariate order when ``summarized`` (bin means);
    ``low``/``high`` the cell's smallest and largest covariate offset (None for an empty cell),
    the span of its fitted line."""

    n: int
    x: tuple[float, ...]
    y: tuple[float, ...]
    low: float | None
    high: float | None
    summarized: bool


def covariate_points(rows: Any, k: int, slopes: np.ndarray, reference: np.ndarray,
                     max_points: int = 200, batch_rows: int = BATCH_ROWS) -> tuple[tuple[CovariatePoints, ...], ...]:
    """Per covariate (outer tuple, plan order) and per cell (inner tuple), the points to draw.

    ``rows`` answers :meth:`batches` with ``(cell, y, x)`` chunks (x of shape (m, p));
    ``slopes`` is (k, p), each cell's slope for each covariate (the same row repeated for
    common slopes; rows of empty cells are not used); ``reference`` is (p,), the covariate
    values (offsets) at which adjusted means are taken."""
    b = np.asarray(slopes, dtype=np.float64)
    r = np.asarray(reference, dtype=np.float64)
    p = int(r.shape[0])
    if b.shape != (k, p):
        raise ValueError(f"slopes must have shape ({k}, {p}), got {b.shape}")
    max_points = int(max_points)
    if max_points < 1:
        raise ValueError(f"max_points must be at least 1, got {max_points}")

    # Pass 1: each cell's row count and covariate range.
    n = np.zeros(k, dtype=np.int64)
    low = np.full((k, p), np.inf)
    high = np.full((k, p), -np.inf)
    for cell, _, x in rows.batches(batch_rows):
        cell = np.asarray(cell, dtype=np.int64)
        if cell.size == 0:
            continue
        x = np.asarray(x, dtype=np.float64).reshape(cell.size, p)
        n += np.bincount(cell, minlength=k)
        order = np.argsort(cell, kind="stable")
        sorted_cells = cell[order]
        starts = np.flatnonzero(np.r_[True, sorted_cells[1:] != sorted_cells[:-1]])
        present = sorted_cells[starts]
        xs = x[order]
        low[present] = np.minimum(low[present], np.minimum.reduceat(xs, starts, axis=0))
        high[present] = np.maximum(high[present], np.maximum.reduceat(xs, starts, axis=0))

    big = n > max_points
    width = np.where(high > low, high - low, 1.0)
    # Pass 2: every row of the small cells; bin sums of the large ones.
    kept_cell, kept_x, kept_y = [], [], []
    count = np.zeros((p, k * max_points))
    sum_x = np.zeros((p, k * max_points))
    sum_y = np.zeros((p, k * max_points))
    for cell, y, x in rows.batches(batch_rows):
        cell = np.asarray(cell, dtype=np.int64)
        if cell.size == 0:
            continue
        y = np.asarray(y, dtype=np.float64)
        x = np.asarray(x, dtype=np.float64).reshape(cell.size, p)
        terms = (x - r) * b[cell]
        # Column j: y adjusted for every covariate but j (exactly y with one covariate).
        partial = y[:, None] - (terms.sum(axis=1, keepdims=True) - terms)
        small = ~big[cell]
        if small.any():
            kept_cell.append(cell[small])
            kept_x.append(x[small])
            kept_y.append(partial[small])
        if (~small).any():
            cb = cell[~small]
            xb = x[~small]
            bins = np.floor((xb - low[cb]) / width[cb] * max_points).astype(np.int64)
            bins = np.clip(bins, 0, max_points - 1)
            index = cb[:, None] * max_points + bins
            for j in range(p):
                count[j] += np.bincount(index[:, j], minlength=k * max_points)
                sum_x[j] += np.bincount(index[:, j], weights=xb[:, j], minlength=k * max_points)
                sum_y[j] += np.bincount(index[:, j], weights=partial[~small][:, j], minlength=k * max_points)

    if kept_cell:
        kc = np.concatenate(kept_cell)
        kx = np.concatenate(kept_x)
        ky = np.concatenate(kept_y)
        order = np.argsort(kc, kind="stable")  # grouped by cell, file order within a cell
        kc, kx, ky = kc[order], kx[order], ky[order]
        bounds = np.searchsorted(kc, np.arange(k + 1))
    out = []
    for j in range(p):
        per_cell = []
        for c in range(k):
            if n[c] == 0:
                per_cell.append(CovariatePoints(0, (), (), None, None, False))
                continue
            lo, hi = float(low[c, j]), float(high[c, j])
            if big[c]:
                part = slice(c * max_points, (c + 1) * max_points)
                used = count[j, part] > 0
                m = count[j, part][used]
                per_cell.append(CovariatePoints(int(n[c]), tuple((sum_x[j, part][used] / m).tolist()),
                                                tuple((sum_y[j, part][used] / m).tolist()), lo, hi, True))
            else:
                s = slice(bounds[c], bounds[c + 1])
                per_cell.append(CovariatePoints(int(n[c]), tuple(kx[s, j].tolist()), tuple(ky[s, j].tolist()),
                                                lo, hi, False))
        out.append(tuple(per_cell))
    return tuple(out)
