"""Each cell's values in increasing order, held in memory as float64, and the row-level answers
that follow from them: order statistics, medians, quantiles, deviations about a centre per cell,
mid-rank sums and quantiles of the pooled scaled residuals.

Both readers use it: the in-memory rows (:mod:`.memory_rows`) and, for continuous data up to
:data:`MAX_ROWS` rows, the DuckDB rows (:mod:`.duck.rows`), which fetch the analysed values
once. Every answer is then the same computation on the same numbers, whichever reader read them.

Cost for N rows in k cells: grouping by cell is a stable counting pass (numpy's radix sort of
small integer codes), each cell is sorted in place (O(N log N)), and the answers are linear
passes; the mid-ranks merge the k sorted runs slab by slab (:meth:`SortedCells.rank_sums`), so
the extra memory is the values themselves (8 bytes a row) plus a slab of about 2^18 rows.
"""

from __future__ import annotations

import math
from typing import Iterable, Sequence

import numpy as np

from reporter.intake.cells import code_type, group_by_cell, segment_moments
from reporter.intake.rows import CellPoints, RankSums

MAX_ROWS = 1 << 24  # the DuckDB rows hold the values in memory up to this many rows (128 MB)
_SLAB = 1 << 18  # rows per slab when the sorted runs are merged


def type7_quantiles(counts: dict[int, int], probs: Sequence[float], order_stats) -> dict[int, np.ndarray]:
    """Type 7 quantiles per cell (Hyndman & Fan 1996, The American Statistician 50(4), 361-365:
    h = (n − 1)p, linear interpolation between the order statistics at floor(h) and floor(h) + 1,
    written as numpy writes it), from the order statistics ``order_stats`` gives: a function of
    {cell: [0-based ranks]} returning {(cell, rank): value}."""
    p = np.asarray(probs, dtype=np.float64)
    plan = {}
    for c, n in counts.items():
        h = (n - 1) * p
        lo = np.floor(h).astype(np.int64)
        hi = np.minimum(lo + 1, n - 1)
        plan[c] = (lo, hi, h - lo)
    stats = order_stats({c: [*lo.tolist(), *hi.tolist()] for c, (lo, hi, _) in plan.items()})
    out = {}
    for c, (lo, hi, t) in plan.items():
        a = np.array([stats[(c, int(i))] for i in lo])
        b = np.array([stats[(c, int(i))] for i in hi])
        diff = b - a
        out[c] = np.where(t >= 0.5, b - diff * (1 - t), a + diff * t)
    return out


def slab_rank_sums(values: np.ndarray, labels: np.ndarray, base: int, k: int) -> tuple[np.ndarray, int]:
    """Twice the mid-rank sum per cell (labels 0 .. k − 1) of a slab of values, every other value
    of which lies entirely below (``base`` of them) or above the slab, and the slab's Σ(t³ − t).
    The sums are integers held exactly in float64 while (base + m) · m < 2^52 for m values."""
    m = values.size
    if m == 0:
        return np.zeros(k), 0
    order = np.argsort(values)
    sv = values[order]
    lab = labels[order]
    new = np.empty(m, dtype=bool)
    new[0] = True
    np.not_equal(sv[1:], sv[:-1], out=new[1:])
    if new.all():  # no ties in the slab: rank = position
        w = 2.0 * np.arange(base + 1, base + m + 1, dtype=np.float64)
        tie = 0
    else:
        starts = np.flatnonzero(new)
        t = np.diff(np.append(starts, m))
        w = np.repeat(2.0 * (base + starts) + t + 1, t)
        tie = tie_term(t)
    return np.bincount(lab, weights=w, minlength=k), tie


def tie_term(sizes: np.ndarray) -> int:
    """Σ(t³ − t) over tie groups of sizes t, exactly (Python integers when t³ would pass int64)."""
    tied = sizes[sizes > 1]
    if not tied.size:
        return 0
    if int(tied.max()) >= 1 << 21:
        return sum(x * x * x - x for x in tied.tolist())
    return int(((tied - 1) * tied * (tied + 1)).sum())


class SortedCells:
    """The values of each cell in increasing order: ``segment(c)`` is cell c's (a float64 array
    each, sorted in place here, then read-only)."""

    def __init__(self, segments: Sequence[np.ndarray]):
        self._segs = list(segments)
        self.k = len(self._segs)
        self.counts = np.array([seg.size for seg in self._segs], dtype=np.int64)
        self.n = int(self.counts.sum())
        for seg in self._segs:
            seg.sort()
            seg.setflags(write=False)

    @classmethod
    def from_rows(cls, y: np.ndarray, cell: np.ndarray, k: int) -> "SortedCells":
        """From each row's value ``y`` and cell code ``cell`` (0 .. k − 1); ``y`` is not changed."""
        _, order, starts, ends = group_by_cell(np.asarray(cell), k)
        values = np.asarray(y, dtype=np.float64)[order]
        return cls([values[a:b] for a, b in zip(starts.tolist(), ends.tolist())])

    @classmethod
    def from_chunks(cls, chunks: Iterable[tuple[np.ndarray, np.ndarray]], counts: np.ndarray) -> "SortedCells":
        """From (cell codes, values) chunks whose cell counts add up to ``counts``; each chunk is
        grouped by cell and copied into its cells' places, so memory is the values plus a chunk."""
        counts = np.asarray(counts, dtype=np.int64)
        k = counts.size
        values = np.empty(int(counts.sum()), dtype=np.float64)
        fill = np.cumsum(counts) - counts
        stop = fill + counts
        first = fill.copy()
        wanted = np.arange(k + 1)
        for cell, y in chunks:
            codes = np.asarray(cell).astype(code_type(k), copy=False)
            order = np.argsort(codes, kind="stable")
            bounds = np.searchsorted(codes[order], wanted).tolist()  # each cell's run in the grouped chunk
            if bounds[k] != codes.size:
                raise ValueError(f"a cell code outside 0 .. {k - 1}")
            y = np.asarray(y, dtype=np.float64)[order]
            for c in range(k):
                a, b = bounds[c], bounds[c + 1]
                if b == a:
                    continue
                if fill[c] + (b - a) > stop[c]:
                    raise ValueError(f"cell {c} got more rows than its count {int(counts[c])}")
                values[fill[c] : fill[c] + (b - a)] = y[a:b]
                fill[c] += b - a
        if not np.array_equal(fill, stop):
            raise ValueError("the chunks hold fewer rows than the cell counts")
        return cls([values[a:b] for a, b in zip(first.tolist(), stop.tolist())])

    def segment(self, c: int) -> np.ndarray:
        return self._segs[c]

    def observed(self) -> dict[int, int]:
        return {c: int(m) for c, m in enumerate(self.counts.tolist()) if m > 0}

    def order_stats(self, positions: dict[int, list[int]]) -> dict[tuple[int, int], float]:
        """The values at 0-based ranks within each cell."""
        out = {}
        for c, ranks in positions.items():
            r = np.asarray(ranks, dtype=np.int64)
            out.update(zip(((c, q) for q in r.tolist()), self._segs[c][r].tolist()))
        return out

    def quantiles(self, counts: dict[int, int], probs: Sequence[float]) -> dict[int, np.ndarray]:
        return type7_quantiles(counts, probs, self.order_stats)

    def medians(self) -> np.ndarray:
        out = np.full(self.k, np.nan)
        for c, q in self.quantiles(self.observed(), [0.5]).items():
            out[c] = q[0]
        return out

    def deviation_stats(self, centre: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Per cell (n, mean, centred SS) of |x − centre_c|, by :func:`~reporter.intake.cells.segment_moments`."""
        centre = np.asarray(centre, dtype=np.float64)
        mean, ss = np.full(self.k, np.nan), np.full(self.k, np.nan)
        for c in self.observed():  # one cell at a time: two scratch arrays of a cell's size
            z = np.subtract(self.segment(c), centre[c])
            mean[c], ss[c] = segment_moments(np.abs(z, out=z))
        return self.counts.copy(), mean, ss

    def cell_points(self, max_points: int) -> tuple[CellPoints, ...]:
        """Small cells: every value in increasing order; large cells: ``max_points`` quantiles."""
        large = {c: int(m) for c, m in enumerate(self.counts.tolist()) if m > max_points}
        q = self.quantiles(large, np.linspace(0.0, 1.0, max_points)) if large else {}
        return tuple(
            CellPoints(int(self.counts[c]), tuple((q[c] if c in large else self.segment(c)).tolist()), c in large)
            for c in range(self.k)
        )

    def values_counts(self, c: int) -> tuple[np.ndarray, np.ndarray]:
        """Cell c's values in increasing order with the number of rows of each (all ones here,
        a read-only view that takes no memory)."""
        seg = self.segment(c)
        return seg, np.broadcast_to(np.int64(1), seg.shape)

    # -----------------------------------------------------------------------------------------
    # merging the sorted runs

    def _slabs(self, runs: Sequence[np.ndarray], maps: Sequence[tuple[float, float]] | None = None):
        """The sorted runs cut by common values into slabs of about :data:`_SLAB` rows: yields,
        per slab, the parts of the runs (views) with values in [p_s, p_s+1), in the order of
        ``runs``. With ``maps``, run i stands for the values (x − a_i)/b_i (b_i > 0, so still
        sorted; :func:`_mapped` computes them a slab at a time). A value never straddles two
        slabs: every run is cut at its first position holding p_s or more."""
        if maps is None:
            maps = [None] * len(runs)

        def value(i, x):
            return _mapped(x, maps[i])

        total = sum(r.size for r in runs)
        nslab = max(1, math.ceil(total / _SLAB))
        cuts = np.empty(0)
        if nslab > 1:  # cut values: evenly spaced order statistics of every run, pooled
            picks = [value(i, r[np.linspace(0, r.size - 1, nslab + 1).astype(np.int64)[1:-1]])
                     for i, r in enumerate(runs) if r.size > 1]
            if picks:
                pooled = np.sort(np.concatenate(picks))
                cuts = np.unique(pooled[np.linspace(0, pooled.size - 1, nslab + 1).astype(np.int64)[1:-1]])
        bounds = [np.concatenate([[0], first_true(r.size, lambda mid, i=i, r=r: value(i, r[mid]) >= cuts, cuts.size),
                                  [r.size]])
                  for i, r in enumerate(runs)]
        for s in range(cuts.size + 1):
            yield [r[b[s] : b[s + 1]] for r, b in zip(runs, bounds)]

    def rank_sums(self) -> RankSums:
        """Mid-rank sums per cell (Kruskal & Wallis 1952, JASA 47, 583-621: a tie group at sorted
        positions s+1 .. s+t gets rank s + (t + 1)/2) and Σ(t³ − t), exactly: twice each rank is
        an integer, summed in float64 within a slab (below 2^53) and in Python integers across
        slabs. The runs are merged one slab at a time (an argsort of the slab's k sorted parts)."""
        labels_all = np.arange(self.k, dtype=code_type(self.k))
        twice, tie, base = [0] * self.k, 0, 0
        for parts in self._slabs([self.segment(c) for c in range(self.k)]):
            sizes = np.array([p.size for p in parts], dtype=np.int64)
            got, t = slab_rank_sums(np.concatenate(parts), np.repeat(labels_all, sizes), base, self.k)
            twice = [a + int(x) for a, x in zip(twice, got.tolist())]
            tie += t
            base += int(sizes.sum())
        rank_sum = np.array([t / 2 for t in twice], dtype=np.float64)
        return RankSums(rank_sum=rank_sum, tie_term=float(tie), n=self.n)

    def pooled_quantiles(self, means: np.ndarray, scale: np.ndarray, probs: Sequence[float]) -> np.ndarray:
        """Type 7 quantiles of (x − means_c)/scale_c pooled over the cells with a finite positive
        scale. Within a cell the map is monotone, so each cell stays a sorted run; the order
        statistics are read from the merged runs slab by slab."""
        means = np.asarray(means, dtype=np.float64)
        scale = np.asarray(scale, dtype=np.float64)
        with np.errstate(invalid="ignore"):
            usable = np.isfinite(scale) & (scale > 0) & (self.counts > 0)
        n = int(self.counts[usable].sum())
        if not len(probs):
            return np.empty(0)
        if n == 0:
            return np.full(len(probs), np.nan)
        cells = np.flatnonzero(usable).tolist()
        runs = [self.segment(c) for c in cells]
        maps = [(means[c], scale[c]) for c in cells]

        def pick(parts: list[np.ndarray], at: np.ndarray) -> list[float]:
            sv = np.sort(np.concatenate([_mapped(p, mp) for p, mp in zip(parts, maps)]))
            return sv[at].tolist()

        def order_stats(positions: dict[int, list[int]]) -> dict[tuple[int, int], float]:
            want = np.unique(np.asarray(positions[0], dtype=np.int64))
            jobs, base, i = [], 0, 0
            for parts in self._slabs(runs, maps):
                m = sum(p.size for p in parts)
                j = int(np.searchsorted(want, base + m, side="left"))
                if j > i:
                    jobs.append((parts, want[i:j] - base))
                    i = j
                base += m
            return dict(zip(((0, q) for q in want.tolist()), (v for job in jobs for v in pick(*job))))

        return type7_quantiles({0: n}, probs, order_stats)[0]


def _mapped(x: np.ndarray, ab: tuple[float, float] | None) -> np.ndarray:
    return x if ab is None else (x - ab[0]) / ab[1]


def first_true(size: int, test, count: int) -> np.ndarray:
    """For each of ``count`` questions, the first position i in 0 .. size − 1 where the test
    holds, for a test that is false and then true along the positions; ``size`` where it never
    holds. A bisection on every question at once: ``test(positions)`` gets one position per
    question and returns one truth value per question."""
    lo = np.zeros(count, dtype=np.int64)
    hi = np.full(count, size, dtype=np.int64)
    while True:
        open_ = lo < hi
        if not open_.any():
            return lo
        mid = (lo + hi) // 2
        holds = np.asarray(test(np.minimum(mid, size - 1)), dtype=bool)
        lo = np.where(open_ & ~holds, mid + 1, lo)
        hi = np.where(open_ & holds, mid, hi)
