"""The row-access questions (:mod:`reporter.intake.rows`) answered by SQL over the compact table
of :mod:`.reader`: medians, deviations, rank sums, order statistics and quantiles, the outlier
screen and the Shapiro-Wilk sample.

**Tied values.** When the analysed values take few distinct values (at most
:data:`_DISTINCT_SHARE` of the rows by DuckDB's HyperLogLog estimate, as data written with a few
decimals do), one hash aggregate gives each distinct value with its number of rows in each cell
(:class:`_Distinct`), fetched into numpy; medians, order statistics, quantiles, deviations and
rank sums are then exact answers from those counts instead of further scans of the rows (the
deviations by compensated sums over the distinct values, weighted by their counts). The
outlier screen and the sample need the rows themselves and always scan them."""

from __future__ import annotations

import itertools
import math
import threading
import weakref
from fractions import Fraction
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from reporter.intake.duck.cell_table import _moments
from reporter.intake.duck.connection import _close, _doubles
from reporter.intake.duck.files import _RowNumbers
from reporter.intake.rows import CellPoints, FlaggedRows, RankSums, sample_positions
from reporter.intake.sorted_cells import MAX_ROWS, SortedCells, first_true, slab_rank_sums, tie_term, type7_quantiles


class DuckRows:
    """The :class:`~reporter.intake.rows.RowAccess` questions answered by SQL over the compact
    table that :func:`load_out_of_core` wrote (values are offsets from the pivot).

    Quantiles are type 7 (DuckDB's ``quantile_cont``, linear interpolation between order
    statistics, Hyndman & Fan 1996, The American Statistician 50(4), 361-365). The sample is the
    rows at :func:`~reporter.intake.rows.sample_positions`, the rule the in-memory rows use too.
    """

    kind = "duckdb"

    def __init__(self, con, folder: str, k: int, rownum: _RowNumbers, files: Sequence[Path],
                 counts: np.ndarray | None = None, lo: np.ndarray | None = None, hi: np.ndarray | None = None,
                 covariates: int = 0, owner: bool = True):
        self._con, self._folder, self.k, self._rownum = con, folder, k, rownum
        self.covariates = int(covariates)  # covariate columns x0, x1, .. of the view kept
        self.files = tuple(files)
        if counts is None or lo is None or hi is None:
            [(counts, _, _)], (lo, hi) = _moments(con, ["d"], "kept", k, extremes=True)
        self._counts = np.asarray(counts, dtype=np.int64)
        self._lo, self._hi = np.asarray(lo, dtype=np.float64), np.asarray(hi, dtype=np.float64)
        self.n = int(self._counts.sum())
        self._n_obs = int(con.execute("SELECT count(*) FROM obs").fetchall()[0][0])
        # the rows of adjusted() share the owner's database through a connection of their own
        self._finalizer = weakref.finalize(self, _close, con, folder) if owner else weakref.finalize(self, con.close)
        self._lock = threading.Lock()
        self._medians: np.ndarray | None = None
        self._distinct_state: _Distinct | bool | None = None  # None: not yet decided; False: not used
        self._distinct_name = f"distinct_values_{next(_TABLES)}"
        self._sorted_state: SortedCells | bool | None = None  # None: not yet decided; False: not used

    def close(self) -> None:
        self._finalizer()

    def _q(self, sql: str, params: Sequence[Any] = ()):
        with self._lock:
            return self._con.execute(sql, list(params)).fetchall()

    def _np(self, sql: str) -> dict[str, np.ndarray]:
        with self._lock:
            return self._con.execute(sql).fetchnumpy()

    def _observed(self) -> dict[int, int]:
        return {c: int(m) for c, m in enumerate(self._counts.tolist()) if m > 0}

    def _distinct(self) -> _Distinct | None:
        """The distinct values with their counts per cell, when they are few (see the module
        docstring); decided and fetched once."""
        if self._distinct_state is None:
            self._distinct_state = False
            if 0 < self.n < (1 << 30) and self.k <= _WIDE_CELLS:
                est = self._q("SELECT approx_count_distinct(d) FROM kept")[0][0]
                if est is not None and est <= _DISTINCT_SHARE * self.n and est * (self.k + 1) <= _DISTINCT_CELLS:
                    counts = ", ".join(f"count(*) FILTER (WHERE cell = {j}) AS c{j}" for j in range(self.k))
                    with self._lock:
                        self._con.execute(f"CREATE TEMP TABLE {self._distinct_name} AS SELECT d, {counts} FROM kept GROUP BY d")
                    got = self._np(f"SELECT * FROM {self._distinct_name} ORDER BY d")
                    self._distinct_state = _Distinct(
                        np.asarray(got["d"], dtype=np.float64),
                        np.column_stack([np.asarray(got[f"c{j}"], dtype=np.int64) for j in range(self.k)]))
        return self._distinct_state or None

    def _sorted(self) -> SortedCells | None:
        """Each cell's values in increasing order, held in memory, for continuous data (when
        the distinct values are not few) up to :data:`~reporter.intake.sorted_cells.MAX_ROWS`
        rows; fetched once: up to :data:`_CELL_QUERIES` cells one query per cell (its values
        are sorted where they arrive), else in slices of row ids grouped by cell in numpy, so
        memory is the values plus a slice."""
        if self._sorted_state is None:
            self._sorted_state = False
            if 0 < self.n <= MAX_ROWS and self._distinct() is None:
                if self.k <= _CELL_QUERIES:
                    segs = []
                    for c in range(self.k):
                        got = self._np(f"SELECT d FROM kept WHERE cell = {c}")["d"] if self._counts[c] else np.empty(0)
                        segs.append(np.require(got, np.float64, ["C", "W"]))
                        if segs[-1].size != self._counts[c]:
                            raise RuntimeError(f"cell {c}: {segs[-1].size} values fetched for {self._counts[c]} rows")
                    self._sorted_state = SortedCells(segs)
                else:
                    step = _FETCH

                    def chunks():
                        for start in range(0, self._n_obs, step):
                            got = self._np(f"SELECT cell, d FROM kept WHERE id >= {start} AND id < {start + step}")
                            yield got["cell"], got["d"]

                    self._sorted_state = SortedCells.from_chunks(chunks(), self._counts)
        return self._sorted_state or None

    def _value_stats(self, source: str, bounds: dict[int, tuple[float, float]], counts: dict[int, int]):
        """Order statistics of the values: from the distinct values when fetched, else by the
        bucket search of :meth:`_order_stats` over ``source``."""
        dist = self._distinct()
        if dist is not None:
            return dist.order_stats
        return lambda positions: self._order_stats(source, positions, bounds, counts)

    def medians(self) -> np.ndarray:
        """Per-cell medians from exact order statistics (DuckDB's median aggregate would hold
        every value of a cell in memory); computed once."""
        if self._medians is None and self._sorted() is not None:
            self._medians = self._sorted().medians()
        if self._medians is None:
            out = np.full(self.k, np.nan)
            counts = self._observed()
            bounds = {c: (self._lo[c], self._hi[c]) for c in counts}
            stats = self._value_stats("SELECT cell, d AS v FROM kept", bounds, counts)
            for c, q in type7_quantiles(counts, [0.5], stats).items():
                out[c] = q[0]
            self._medians = out
        return self._medians.copy()

    def deviation_stats(self, centre: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        return self.deviation_stats_many([centre])[0]

    def deviation_stats_many(self, centres: Sequence[np.ndarray]) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
        """:meth:`deviation_stats` about each centre, all from the same two scans (or from the
        distinct values, see :meth:`_weighted_deviation_stats`)."""
        centres = [np.asarray(c, dtype=np.float64) for c in centres]
        if self._distinct() is not None:
            return self._weighted_deviation_stats(centres)
        if self._sorted() is not None:
            return [self._sorted().deviation_stats(c) for c in centres]
        with self._lock:
            return _moments(self._con, [f"abs(d - {_doubles(c)}[cell + 1])" for c in centres], "kept", self.k)[0]

    def _weighted_deviation_stats(self, centres: Sequence[np.ndarray]) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
        """Per cell (n, mean, centred SS) of |x − centre_c| by the corrected two-pass algorithm of
        :func:`~reporter.intake.duck.cell_table._moments` (Chan, Golub & LeVeque 1983, eq. 1.7),
        over the distinct values, each weighted by its rows in the cell: n_c = Σ w, m0 =
        Σ w·|x − centre_c| / n_c, then Σ w·e and Σ w·e² with e = |x − centre_c| − m0, all
        compensated sums (``fsum``) in two scans of the distinct values."""
        cells = [c for c in range(self.k) if self._counts[c] > 0]
        n = self._counts.copy()
        terms = [(i, c, f"abs(d - CAST('{float(centre[c])!r}' AS DOUBLE))") for i, centre in enumerate(centres) for c in cells]
        out = [(n.copy(), np.full(self.k, np.nan), np.full(self.k, np.nan)) for _ in centres]
        if not terms:
            return out
        first = self._q("SELECT " + ", ".join(f"fsum(c{c} * {v})" for _, c, v in terms) + f" FROM {self._distinct_name}")[0]
        m0 = [float(s) / int(n[c]) for s, (_, c, _) in zip(first, terms)]
        es = [f"({v} - CAST('{m!r}' AS DOUBLE))" for m, (_, _, v) in zip(m0, terms)]
        second = self._q("SELECT " + ", ".join(f"fsum(c{c} * {e}), fsum(c{c} * {e} * {e})"
                                               for e, (_, c, _) in zip(es, terms)) + f" FROM {self._distinct_name}")[0]
        for j, (i, c, _) in enumerate(terms):
            s1, s2 = second[2 * j], second[2 * j + 1]
            out[i][1][c] = m0[j] + s1 / n[c]
            out[i][2][c] = max(s2 - s1 * s1 / n[c], 0.0)
        return out

    def rank_sums(self) -> RankSums:
        """Rank sums with mid-ranks for ties, in exact integers (twice each sum): a value shared
        by t rows that has ``below`` rows under it gets rank (2·below + t + 1)/2; the tie term
        is Σ(t³ − t). From the distinct values when fetched, else from each cell's sorted values
        when held, else slab by slab out-of-core (:meth:`_rank_sums_by_slabs`)."""
        dist = self._distinct()
        if dist is not None:
            return dist.rank_sums()
        if self._sorted() is not None:
            return self._sorted().rank_sums()
        return self._rank_sums_by_slabs()

    def _rank_sums_by_slabs(self) -> RankSums:
        """Mid-rank sums out-of-core: a histogram of the pooled values in equal-width buckets
        (monotone in the value, so a bucket never splits a tie) groups consecutive buckets into
        slabs of at most :data:`_RANK_SLAB_ROWS` rows; each slab's rows are fetched and ranked in
        numpy (:func:`~reporter.intake.sorted_cells.slab_rank_sums`) after the rows of the slabs
        below it. A single bucket heavier than a slab (values crowded or tied) is ranked from its
        distinct values with their counts per cell. One scan per slab; memory one slab."""
        k = self.k
        cells = list(self._observed())
        if not cells:
            return RankSums(rank_sum=np.zeros(k), tie_term=0.0, n=0)
        lo = float(min(self._lo[c] for c in cells))
        hi = float(max(self._hi[c] for c in cells))
        nb = _RANK_BUCKETS
        step = nb / (hi - lo) if hi > lo else 0.0
        if not math.isfinite(step):
            step = 0.0  # a range below float64's resolution for the division: one bucket
        bucket = (f"greatest(least(CAST(floor((d - CAST('{lo!r}' AS DOUBLE)) * CAST('{step!r}' AS DOUBLE)) AS BIGINT), "
                  f"{nb - 1}), 0)")
        hist = self._np(f"SELECT {bucket} AS b, count(*) AS m FROM kept GROUP BY b")
        sizes = np.zeros(nb, dtype=np.int64)
        sizes[np.asarray(hist["b"], dtype=np.int64)] = np.asarray(hist["m"], dtype=np.int64)
        limit = max(1, min(_RANK_SLAB_ROWS, (1 << 51) // max(self.n, 1)))  # twice-rank sums stay exact in float64
        twice, tie, base, b = [0] * k, 0, 0, 0
        while b < nb:
            if sizes[b] == 0:
                b += 1
                continue
            e, total = b, 0
            while e < nb and (total == 0 or total + sizes[e] <= limit):
                total += int(sizes[e])
                e += 1
            if total <= limit:
                got = self._np(f"SELECT cell, d FROM kept WHERE {bucket} BETWEEN {b} AND {e - 1}")
                w, t = slab_rank_sums(np.asarray(got["d"], dtype=np.float64), np.asarray(got["cell"], dtype=np.int64), base, k)
                part = [int(x) for x in w.tolist()]
            else:
                part, t = self._heavy_bucket_ranks(f"{bucket} = {b}", base)
            twice = [x + y for x, y in zip(twice, part)]
            tie += t
            base += total
            b = e
        rank_sum = np.array([float(Fraction(x, 2)) for x in twice])
        return RankSums(rank_sum=rank_sum, tie_term=float(tie), n=self.n)

    def _heavy_bucket_ranks(self, where: str, base: int) -> tuple[list[int], int]:
        """Twice the mid-rank sum per cell and Σ(t³ − t) of the rows ``where`` selects, whose
        values lie above ``base`` other rows and below the rest, from their distinct values with
        the rows of each in each cell (exact integers)."""
        got = self._np(f"SELECT d, cell, count(*) AS m FROM kept WHERE {where} GROUP BY d, cell ORDER BY d, cell")
        d = np.asarray(got["d"], dtype=np.float64)
        cell = np.asarray(got["cell"], dtype=np.int64)
        m = np.asarray(got["m"], dtype=np.int64)
        new = np.empty(d.size, dtype=bool)
        new[:1] = True
        np.not_equal(d[1:], d[:-1], out=new[1:])
        starts = np.flatnonzero(new)
        t = np.add.reduceat(m, starts) if d.size else np.zeros(0, dtype=np.int64)
        below = base + np.cumsum(t) - t
        group = np.cumsum(new) - 1
        twice = np.zeros(self.k, dtype=np.int64)  # exact: the sums stay below 2^63 for n < 2^31
        np.add.at(twice, cell, m * (2 * below[group] + t[group] + 1))
        return [int(x) for x in twice.tolist()], tie_term(t)

    def _order_stats(self, source: str, positions: dict[int, list[int]], bounds: dict[int, tuple[float, float]],
                     counts: dict[int, int]) -> dict[tuple[int, int], float]:
        """Order statistics (0-based ranks within each cell) of ``v`` in ``source``, exactly and
        without a sort: a histogram of equal-width buckets per cell (between the cell's known
        smallest and largest value, ``bounds``) locates each rank's bucket (bucket numbers are
        monotone in the value, so buckets hold consecutive ranks); the values of those buckets
        are fetched and sorted when they number at most :data:`_FETCH`, and a larger bucket is
        refined the same way. Each step is one linear scan with memory bounded by the buckets,
        so it stays out-of-core (the selection algorithm of Floyd & Rivest 1975, CACM 18(3),
        165-172, by bucketing instead of sampling)."""
        result: dict[tuple[int, int], float] = {}
        wanted = {c: sorted({int(q) for q in qs}) for c, qs in positions.items() if qs}
        self._refine(source, "true", wanted, result, 0, bounds, counts)
        return result

    def _refine(self, source: str, where: str, wanted: dict[int, list[int]], result, depth: int,
                bounds: dict[int, tuple[float, float]] | None = None, counts: dict[int, int] | None = None) -> None:
        cells = ", ".join(map(str, sorted(wanted)))
        scope = f"FROM ({source}) WHERE {where} AND cell IN ({cells})"
        if bounds is None:
            bounds = {c: (a, b) for c, a, b in self._q(f"SELECT cell, min(v), max(v) {scope} GROUP BY cell")}
        # Buckets per cell: enough that the buckets holding the wanted ranks are small (about
        # half of _FETCH values in all for evenly spread values, so that one fetch usually ends
        # the search), and at most about 4 million in all (the histogram is fetched as an array).
        need = max(max(16 * len(q), 2 * len(q) * (counts or {}).get(c, 0) * len(wanted) // _FETCH)
                   for c, q in wanted.items())
        nb = min(_MAX_BUCKETS, max(1024, 1 << math.ceil(math.log2(need))))
        nb = max(1024, min(nb, 1 << int(math.log2(max((1 << 22) // len(wanted), 1)))))
        lo = np.zeros(self.k)
        scale = np.zeros(self.k)
        live = {}
        for c, (a, b) in bounds.items():
            if c not in wanted:
                continue
            if a == b:  # every value of the cell (in this bucket) is the same
                result.update({(c, q): float(a) for q in wanted[c]})
                continue
            step = nb / (b - a)
            if not math.isfinite(step):
                step = 0.0  # a range below float64's resolution for the division: one bucket
            lo[c], scale[c], live[c] = a, step, wanted[c]
        if not live:
            return
        bucket = (f"greatest(least(CAST(floor((v - {_doubles(lo)}[cell + 1]) * {_doubles(scale)}[cell + 1]) AS BIGINT), "
                  f"{nb - 1}), 0)")
        cells = ", ".join(map(str, sorted(live)))
        scope = f"FROM ({source}) WHERE {where} AND cell IN ({cells})"
        hist = self._np(f"SELECT key, count(*) AS m FROM (SELECT cell * {nb} + {bucket} AS key {scope}) GROUP BY key")
        key = np.asarray(hist["key"], dtype=np.int64)
        order = sorted(live)
        row = np.zeros(self.k, dtype=np.int64)
        row[order] = np.arange(len(order))
        sizes_arr = np.zeros((len(order), nb), dtype=np.int64)
        np.add.at(sizes_arr, (row[key // nb], key % nb), np.asarray(hist["m"], dtype=np.int64))
        sizes = {c: sizes_arr[row[c]] for c in order}
        targets: dict[tuple[int, int], list[tuple[int, int]]] = {}
        for c, ranks in live.items():
            ends = np.cumsum(sizes[c])
            for q in ranks:
                b = int(np.searchsorted(ends, q, side="right"))
                targets.setdefault((c, b), []).append((q, q - int(ends[b] - sizes[c][b])))
        fetch, total = [], 0
        for (c, b), items in sorted(targets.items(), key=lambda kv: sizes[kv[0][0]][kv[0][1]]):
            m = int(sizes[c][b])
            if total + m <= _FETCH or depth >= 6:
                fetch.append((c, b))
                total += m
            else:
                sub: dict[tuple[int, int], float] = {}
                self._refine(source, f"{where} AND cell = {c} AND {bucket} = {b}", {c: [w for _, w in items]}, sub, depth + 1)
                result.update({(c, q): sub[(c, w)] for q, w in items})
        if fetch:
            keys = [c * nb + b for c, b in fetch]
            with self._lock:
                got = self._con.execute(
                    f"SELECT key, v FROM (SELECT cell * {nb} + {bucket} AS key, v {scope}) "
                    "WHERE key IN (SELECT unnest($1::BIGINT[]))", [keys]).fetchnumpy()
            key = np.asarray(got["key"], dtype=np.int64)
            vals = np.asarray(got["v"], dtype=np.float64)
            order = np.lexsort((vals, key))
            key, vals = key[order], vals[order]
            for c, b in fetch:
                start = int(np.searchsorted(key, c * nb + b, side="left"))
                for q, w in targets[(c, b)]:
                    result[(c, q)] = float(vals[start + w])

    def residual_quantiles(self, means: np.ndarray, scale: np.ndarray, probs: Sequence[float]) -> np.ndarray:
        """Quantiles of (d − mean_c)/scale_c over the usable cells. Their count and range come
        from the cell table and each cell's smallest and largest value: the map is monotone
        increasing within a cell (a subtraction and a division by a positive number, each
        rounded monotonically), so no scan is needed for them."""
        probs = [float(p) for p in probs]
        if not probs:
            return np.empty(0)
        means = np.asarray(means, dtype=np.float64)
        scale = np.asarray(scale, dtype=np.float64)
        with np.errstate(invalid="ignore"):
            usable = np.isfinite(scale) & (scale > 0) & (self._counts > 0)
        n = int(self._counts[usable].sum())
        if n == 0:
            return np.full(len(probs), np.nan)
        dist = self._distinct()
        if dist is not None:
            return type7_quantiles({0: n}, probs, dist.pooled_stats(means, scale, np.flatnonzero(usable)))[0]
        if self._sorted() is not None:
            return self._sorted().pooled_quantiles(means, scale, probs)
        m, s = _doubles(means), _doubles(scale)
        source = (f"SELECT 0 AS cell, (d - {m}[cell + 1]) / {s}[cell + 1] AS v FROM kept "
                  f"WHERE isfinite({s}[cell + 1]) AND {s}[cell + 1] > 0")
        with np.errstate(invalid="ignore", divide="ignore"):
            lo = float(np.min(((self._lo - means) / scale)[usable]))
            hi = float(np.max(((self._hi - means) / scale)[usable]))
        return type7_quantiles({0: n}, probs, lambda positions: self._order_stats(source, positions, {0: (lo, hi)}, {0: n}))[0]

    def cell_points(self, max_points: int) -> tuple[CellPoints, ...]:
        """Small cells: every value in increasing order; large cells: ``max_points`` quantiles."""
        if self._distinct() is None and self._sorted() is not None:
            return self._sorted().cell_points(max_points)
        counts = self._observed()
        small = [c for c, n in counts.items() if n <= max_points]
        large = {c: n for c, n in counts.items() if n > max_points}
        values: dict[int, Sequence[float]] = {}
        dist = self._distinct()
        if small and dist is not None:
            values.update({c: dist.cell_values(c) for c in small})
        elif small:
            for c, vals in self._q(
                f"SELECT cell, list(d ORDER BY d) FROM kept WHERE cell IN ({', '.join(map(str, small))}) GROUP BY cell"
            ):
                values[c] = vals
        if large:
            listed = ", ".join(map(str, large))
            stats = self._value_stats(f"SELECT cell, d AS v FROM kept WHERE cell IN ({listed})",
                                      {c: (self._lo[c], self._hi[c]) for c in large}, large)
            values.update(type7_quantiles(large, np.linspace(0.0, 1.0, max_points), stats))
        return tuple(
            CellPoints(n=int(counts.get(c, 0)), values=tuple(float(v) for v in values.get(c, ())), summarized=c in large)
            for c in range(self.k)
        )

    def flagged(self, centre: np.ndarray, bound: np.ndarray, limit: int) -> FlaggedRows:
        """One scan writes the flagged rows (usually few) to a temporary table; their per-cell
        sums and the largest deviations are read from it. With the distinct values fetched, the
        sums come from them, and one scan fetches only the rows of the values that hold the
        largest deviations (none when nothing is flagged)."""
        held = self._distinct() or self._sorted()
        if held is not None:
            return self._flagged_held(held, np.asarray(centre, dtype=np.float64),
                                      np.asarray(bound, dtype=np.float64), int(max(limit, 0)))
        c, b = _doubles(centre), _doubles(bound)
        with self._lock:
            self._con.execute(
                f"CREATE OR REPLACE TEMP TABLE flagged AS SELECT r, cell, d, e FROM (SELECT r, cell, d, "
                f"d - {c}[cell + 1] AS e, {b}[cell + 1] AS b FROM kept) WHERE isfinite(b) AND abs(e) > b")
        try:
            agg = self._q("SELECT cell, count(*), fsum(e), fsum(e * e) FROM flagged GROUP BY cell")
            top = self._q(f"SELECT r, cell, d FROM flagged ORDER BY abs(e) DESC, r LIMIT {int(max(limit, 0))}")
        finally:
            self._q("DROP TABLE flagged")
        count = np.zeros(self.k, dtype=np.int64)
        sum_dev = np.zeros(self.k)
        sum_dev2 = np.zeros(self.k)
        for c, m, s1, s2 in agg:
            count[c], sum_dev[c], sum_dev2[c] = m, s1, s2
        rows = tuple((self._rownum.number(r), int(c), float(d)) for r, c, d in top)
        return FlaggedRows(total=int(count.sum()), rows=rows, count=count, sum_dev=sum_dev, sum_dev2=sum_dev2)

    def _flagged_held(self, held: "_Distinct | SortedCells", centre: np.ndarray, bound: np.ndarray, limit: int) -> FlaggedRows:
        """:meth:`flagged` from the values held in memory (the distinct values with their counts
        per cell, or each cell's sorted values): per cell, the values v with |v − centre_c| >
        bound_c (the same floating-point operations as the SQL), their rows counted and their
        deviations summed exactly rounded (``math.fsum`` of count × deviation); then the rows of
        the values with the largest |deviation|, enough to fill ``limit`` with every tie of the
        last one, ordered as :meth:`flagged` orders them."""
        count = np.zeros(self.k, dtype=np.int64)
        sum_dev, sum_dev2 = np.zeros(self.k), np.zeros(self.k)
        cand: list[tuple[float, int, float, int]] = []  # (|e|, cell, value, rows)
        for c in range(self.k):
            if not (math.isfinite(bound[c]) and self._counts[c] > 0):
                continue
            v, w = held.values_counts(c)
            # e = v − centre rounds monotonically in the sorted values, so the flagged values
            # (e < −bound or e > bound) are a head and a tail of them, found by bisection
            cen, b = centre[c], bound[c]
            head = int(first_true(v.size, lambda mid: v[mid] - cen >= -b, 1)[0])
            tail = int(first_true(v.size, lambda mid: v[mid] - cen > b, 1)[0])
            if head == 0 and tail == v.size:
                continue
            v = np.concatenate([v[:head], v[tail:]])
            w = np.concatenate([w[:head], w[tail:]])
            e = v - cen
            count[c] = int(w.sum())
            wf = w.astype(np.float64)
            sum_dev[c] = math.fsum((wf * e).tolist())
            sum_dev2[c] = math.fsum((wf * (e * e)).tolist())
            cand += zip(np.abs(e).tolist(), [c] * len(v), v.tolist(), w.tolist())
        rows: tuple[tuple[int, int, float], ...] = ()
        if cand and limit:
            cand.sort(key=lambda x: -x[0])
            got, cut = 0, len(cand)
            for i, (a, _, _, w) in enumerate(cand):
                got += w
                if got >= limit:
                    cut = i + 1
                    while cut < len(cand) and cand[cut][0] == a:
                        cut += 1
                    break
            least = cand[cut - 1][0]  # every row with |e| at least this is a candidate
            cs, bs = _doubles(centre), _doubles(np.where(np.isfinite(bound), bound, np.inf))
            top = self._q(f"SELECT r, cell, d FROM (SELECT r, cell, d, abs(d - {cs}[cell + 1]) AS a, {bs}[cell + 1] AS b "
                          f"FROM kept) WHERE a >= CAST('{least!r}' AS DOUBLE) AND a > b ORDER BY a DESC, r LIMIT {limit}")
            rows = tuple((self._rownum.number(r), int(c), float(d)) for r, c, d in top)
        return FlaggedRows(total=int(count.sum()), rows=rows, count=count, sum_dev=sum_dev, sum_dev2=sum_dev2)

    def sample(self, size: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
        """The rows at :func:`~reporter.intake.rows.sample_positions` (the in-memory reader's
        rule), fetched by position among the analysed rows: the row id itself when no row was
        left out, else the running row number of the analysed rows in table order."""
        if self.n <= size:
            got = self._np("SELECT d, cell FROM kept ORDER BY r")
        else:
            pos = sample_positions(self.n, size, seed).tolist()
            if self.n == self._n_obs:
                sql = "SELECT d, cell FROM kept WHERE id IN (SELECT unnest($1::BIGINT[])) ORDER BY r"  # row ids: fast
            else:
                sql = ("SELECT d, cell FROM (SELECT d, cell, r, row_number() OVER () - 1 AS p FROM kept) "
                       "WHERE p IN (SELECT unnest($1::BIGINT[])) ORDER BY r")
            with self._lock:
                got = self._con.execute(sql, [pos]).fetchnumpy()
        return np.asarray(got["d"], dtype=np.float64), np.asarray(got["cell"], dtype=np.int64)

    def arrays(self) -> None:
        return None

    def covariate_arrays(self) -> None:
        return None

    def adjusted(self, b: np.ndarray) -> "DuckRows":
        """The rows with outcome z = y − Σ_j b[c, j]·x_j (see :mod:`.covariates`)."""
        from reporter.intake.duck.covariates import adjusted_rows

        return adjusted_rows(self, b)

    def batches(self, size: int):
        """(cells, y offsets, x offsets) of at most ``size`` rows, in file order (see :mod:`.covariates`)."""
        from reporter.intake.duck.covariates import row_batches

        return row_batches(self, size)


_MAX_BUCKETS = 1 << 20  # histogram buckets per cell at most when locating order statistics
_FETCH = 1_000_000  # values fetched into Python at most per refinement step
_RANK_SLAB_ROWS = 1 << 22  # rows ranked at a time out-of-core
_RANK_BUCKETS = 1 << 16  # histogram buckets that cut the pooled values into slabs
_CELL_QUERIES = 8  # at most this many cells: the sorted values fetched by one query per cell
_WIDE_CELLS = 64  # at most this many cells: rank sums from one aggregate with a count column per cell
_TABLES = itertools.count()  # names of the temporary tables of distinct values
_DISTINCT_SHARE = 0.125  # distinct values at most this share of the rows: answers from _Distinct
_DISTINCT_CELLS = 4_000_000  # and distinct values x (cells + 1) at most this (about 32 MB fetched)


def pooled_order_stats(runs: Sequence[np.ndarray], cums: Sequence[np.ndarray], ranks: np.ndarray) -> np.ndarray:
    """The values at 0-based ``ranks`` of the multiset pooled from sorted runs of values, run i
    holding runs[i][j] with multiplicity cums[i][j] − cums[i][j − 1] (``cums`` the running
    counts). The value at rank r is the smallest x of any run with F(x) > r, F(x) being the rows
    at or below x in all runs together; each run's smallest such x is found by bisection on its
    positions (F is monotone along a run; :func:`~reporter.intake.sorted_cells.first_true`), for
    every rank at once, so nothing is merged."""
    ranks = np.asarray(ranks, dtype=np.int64)
    best = np.full(ranks.size, np.inf)

    def below_or_at(x: np.ndarray) -> np.ndarray:
        total = np.zeros(x.size, dtype=np.int64)
        for run, cum in zip(runs, cums):
            if run.size == 0:
                continue
            i = np.searchsorted(run, x, side="right")
            total += np.where(i > 0, cum[np.maximum(i - 1, 0)], 0)
        return total

    for run in runs:
        if run.size == 0:
            continue
        lo = first_true(run.size, lambda mid: below_or_at(run[mid]) > ranks, ranks.size)
        found = lo < run.size
        best[found] = np.minimum(best[found], run[lo[found]])
    return best


class _Distinct:
    """The analysed values as distinct values in increasing order (``values``), with the number
    of rows of each value in each cell (``counts``, shape (D, k)); every answer exact."""

    def __init__(self, values: np.ndarray, counts: np.ndarray):
        self.values, self.counts = values, counts
        self.cum = np.cumsum(counts, axis=0)  # rows of each cell at or below each value

    def order_stats(self, positions: dict[int, list[int]]) -> dict[tuple[int, int], float]:
        """The values at 0-based ranks within each cell: the first value whose running count
        exceeds the rank."""
        out = {}
        for c, ranks in positions.items():
            r = np.asarray(ranks, dtype=np.int64)
            got = self.values[np.searchsorted(self.cum[:, c], r, side="right")]
            out.update({(c, q): v for q, v in zip(r.tolist(), got.tolist())})
        return out

    def pooled_stats(self, means: np.ndarray, scale: np.ndarray, cells: np.ndarray):
        """Order statistics (key 0) of (value − means_c)/scale_c pooled over ``cells``, each
        value weighted by its rows in the cell (the same floating-point operations as the SQL
        of :meth:`DuckRows.residual_quantiles`)."""
        runs, cums = [], []
        for c in cells.tolist():
            m = self.counts[:, c] > 0
            runs.append((self.values[m] - means[c]) / scale[c])
            cums.append(np.cumsum(self.counts[m, c]))

        def stats(positions: dict[int, list[int]]) -> dict[tuple[int, int], float]:
            r = np.unique(np.asarray(positions[0], dtype=np.int64))
            got = pooled_order_stats(runs, cums, r)
            return dict(zip(((0, q) for q in r.tolist()), got.tolist()))

        return stats

    def values_counts(self, c: int) -> tuple[np.ndarray, np.ndarray]:
        """Cell c's distinct values in increasing order with the number of rows of each."""
        m = self.counts[:, c] > 0
        return self.values[m], self.counts[m, c]

    def cell_values(self, c: int) -> list[float]:
        """Every value of cell ``c`` in increasing order."""
        m = self.counts[:, c] > 0
        return np.repeat(self.values[m], self.counts[m, c]).tolist()

    def rank_sums(self) -> RankSums:
        """Mid-rank sums as in :meth:`DuckRows.rank_sums`, in exact integers (int64 holds them:
        the rows number under 2^30)."""
        t = self.counts.sum(axis=1)
        below = np.cumsum(t) - t
        twice = (self.counts * (2 * below + t + 1)[:, None]).sum(axis=0)
        tie = tie_term(t)
        rank_sum = np.array([float(Fraction(int(x), 2)) for x in twice.tolist()])
        return RankSums(rank_sum=rank_sum, tie_term=float(tie), n=int(t.sum()))
