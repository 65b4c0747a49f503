"""Row access: what the row-level steps may ask of the data, whatever holds the rows.

Every classical test needs only the cell table (:class:`reporter.intake.cells.CellStats`). The
steps that need rows (medians for Brown–Forsythe, deviations for Levene, ranks for
Kruskal–Wallis, the outlier screen, Q–Q quantiles, the points drawn in figures, the Shapiro–Wilk
sample, the permutation F) ask a :class:`RowAccess` for exactly what they need. Each question is
answered in at most O(N log N) time and O(N) memory, and every answer has a size bounded
independently of N (except :meth:`RowAccess.arrays`, which only the in-memory source offers).

Three kinds of source:

* ``"memory"``: rows held as numpy arrays (small and medium data); answers computed with numpy;
* ``"duckdb"``: rows left in the files, answers computed by SQL queries over them (large data);
* no row access at all (``None``): the user gave a summary table with one row per cell; the
  row-level steps are skipped and the report says why.

All values are offsets from the data's pivot (``CellStats.pivot``), like the cell table's means.
Cells are numbered as in the design (row-major over the factors' levels); empty cells have no
rows. Row numbers are as a person finds them in the input (the line of a text file, the 1-based
row of a Parquet file or a DataFrame).
"""

from __future__ import annotations

from dataclasses import dataclass
from collections.abc import Sequence as SequenceABC
from typing import Iterator, Protocol, Sequence

import numpy as np


@dataclass(frozen=True)
class CellPoints:
    """The points of one cell to draw: every value while the cell is small, otherwise a
    deterministic summary (evenly spaced quantiles, type 7), with ``summarized`` set."""

    n: int
    values: tuple[float, ...]
    summarized: bool


class PointsOnDemand(SequenceABC):
    """The figures' points (:meth:`RowAccess.cell_points`), asked of the rows the first time
    they are read: an output without figures (JSON alone) never pays for them."""

    def __init__(self, rows: "RowAccess", max_points: int):
        self._rows, self._max = rows, int(max_points)
        self._points: tuple[CellPoints, ...] | None = None

    def _get(self) -> tuple[CellPoints, ...]:
        if self._points is None:
            self._points = tuple(self._rows.cell_points(self._max))
        return self._points

    def __getitem__(self, i):
        return self._get()[i]

    def __len__(self) -> int:
        return len(self._get())

    def __eq__(self, other) -> bool:
        return tuple(self) == (tuple(other) if isinstance(other, (tuple, SequenceABC)) else other)

    __hash__ = None  # type: ignore[assignment]


@dataclass(frozen=True)
class FlaggedRows:
    """Rows whose absolute deviation from their cell's centre exceeds the cell's bound.

    ``total`` counts every flagged row; ``rows`` lists at most ``limit`` of them, the largest
    absolute deviations first, as (row number, cell, value offset). ``count``, ``sum_dev`` and
    ``sum_dev2`` hold, per cell, the number of flagged rows and the sums of their deviations
    (value − centre) and squared deviations, so that cell statistics without the flagged rows
    can be updated without another pass: with d = x − mean, S' = S − Σd² − (Σd)²/(n − r).
    """

    total: int
    rows: tuple[tuple[int, int, float], ...]
    count: np.ndarray
    sum_dev: np.ndarray
    sum_dev2: np.ndarray


@dataclass(frozen=True)
class RankSums:
    """Mid-ranks over all rows, summed per cell, and the tie term Σ(t³ − t) over tie groups
    (Kruskal & Wallis 1952, JASA 47, 583-621)."""

    rank_sum: np.ndarray
    tie_term: float
    n: int


class RowAccess(Protocol):
    """What the row-level steps may ask of the rows (see the module docstring)."""

    kind: str  # "memory" or "duckdb"
    n: int  # rows analysed
    k: int  # cells in the design

    def medians(self) -> np.ndarray:
        """Per-cell medians (NaN for empty cells)."""

    def deviation_stats(self, centre: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Per cell, (n, mean, centred SS) of |x − centre_c|: what Levene (centre = means) and
        Brown–Forsythe (centre = medians) need."""

    def deviation_stats_many(self, centres: Sequence[np.ndarray]) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
        """:meth:`deviation_stats` about each of several centres (one pass over the rows for
        all of them where the source can)."""

    def rank_sums(self) -> RankSums:
        """Mid-rank sums per cell over all rows."""

    def residual_quantiles(self, means: np.ndarray, scale: np.ndarray, probs: Sequence[float]) -> np.ndarray:
        """Quantiles (type 7) at ``probs`` of (x − means_c) / scale_c over every row whose scale_c
        is finite and positive."""

    def cell_points(self, max_points: int) -> tuple[CellPoints, ...]:
        """Per cell, every value when n_c ≤ max_points, else ``max_points`` quantiles."""

    def flagged(self, centre: np.ndarray, bound: np.ndarray, limit: int) -> FlaggedRows:
        """Rows with |x − centre_c| > bound_c (cells with a non-finite bound are skipped)."""

    def sample(self, size: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
        """The rows at :func:`sample_positions` ``(n, size, seed)`` (all rows when n ≤ size):
        (values, cells), in the rows' order."""

    def arrays(self) -> tuple[np.ndarray, np.ndarray] | None:
        """(values, cells) of every row, or None when the rows are not held in memory."""

    def covariate_arrays(self) -> np.ndarray | None:
        """The covariates of every row as offsets from their pivots (N, p), or None without
        covariates or when the rows are not held in memory."""

    def adjusted(self, b: np.ndarray) -> "RowAccess":
        """The same rows with outcome z = y − Σ_j b[c, j]·x_j (offsets), ``b`` (k, p) the slope of
        each covariate in each cell (the same row repeated for common slopes; a (p,) vector is
        taken as such). Every question above then concerns z: residuals of the analysis of
        covariance for the residual-based steps. The terms are subtracted in covariate order,
        each product rounded once, so every source gives the same z."""

    def batches(self, size: int) -> Iterator[tuple[np.ndarray, np.ndarray, np.ndarray]]:
        """(cells, y offsets, x offsets (m, p)) of at most ``size`` rows at a time, in input
        order, in bounded memory: for any other row-level sum."""


# ---------------------------------------------------------------------------------------------
# The seeded sample: one rule, computed from (n, size, seed) alone


_WEYL = 2654435761  # odd, so p -> p * _WEYL + seed is a bijection of 32-bit numbers
_WEYL_INV = pow(_WEYL, -1, 1 << 32)
_FMIX = (0x85EBCA6B, 0xC2B2AE35)
_FMIX_INV = tuple(pow(m, -1, 1 << 32) for m in _FMIX)
_M32 = (1 << 32) - 1
# Positions or keys per step of the searches: whole blocks of 2^16 (see _inverse_block), small
# enough that the step's few uint32 buffers stay in the CPU cache and are reused, not reallocated.
_BLOCK = 1 << 16
_STEP = 4 * _BLOCK


def sample_key(position: np.ndarray, seed: int) -> np.ndarray:
    """The sampling key of each 0-based position: MurmurHash3's 32-bit finalizer fmix32
    (Appleby 2011, public domain) of (position · 2654435761 + seed) mod 2^32. Both steps are
    bijections of 32-bit numbers, so positions below 2^32 get distinct keys (uint32 arithmetic
    wraps modulo 2^32)."""
    h = np.asarray(position).astype(np.uint32) * np.uint32(_WEYL) + np.uint32(int(seed) & _M32)
    for shift, mult in ((16, _FMIX[0]), (13, _FMIX[1])):
        h = (h ^ (h >> np.uint32(shift))) * np.uint32(mult)
    return h ^ (h >> np.uint32(16))


def _key_inverse(key: np.ndarray, seed: int) -> np.ndarray:
    """The position in 0 .. 2^32 − 1 whose :func:`sample_key` is ``key`` (each step undone)."""
    h = np.asarray(key).astype(np.uint32)
    h = h ^ (h >> np.uint32(16))
    t = np.empty_like(h)
    _undo_middle(h, t)
    return (h - np.uint32(int(seed) & _M32)) * np.uint32(_WEYL_INV)


def _undo_middle(h: np.ndarray, t: np.ndarray) -> None:
    """In place, h <- the input of fmix32's steps 2-4 (multiply, xor-shift by 13, multiply)
    whose output is h; ``t`` is scratch space of h's shape. A xor-shift x ^ (x >> s) of 32-bit
    numbers is undone by h ^ (h >> s) ^ (h >> 2s) ^ ..., which for s = 13 stops at 2s and for
    s = 16 at s."""
    np.multiply(h, np.uint32(_FMIX_INV[1]), out=h)
    np.right_shift(h, np.uint32(13), out=t)
    np.bitwise_xor(h, t, out=h)
    np.right_shift(t, np.uint32(13), out=t)
    np.bitwise_xor(h, t, out=h)
    np.multiply(h, np.uint32(_FMIX_INV[0]), out=h)
    np.right_shift(h, np.uint32(16), out=t)
    np.bitwise_xor(h, t, out=h)


def _inverse_search(n: int, size: int, seed: int) -> np.ndarray:
    """The positions below n of the ``size`` smallest keys, found by undoing the hash of the keys
    0, 1, 2, … (in steps of whole 2^16 blocks) until ``size`` of them fall below n.

    fmix32's last step h -> h ^ (h >> 16) maps each aligned block of 2^16 numbers onto itself
    (h >> 16 is the same for the whole block), so the keys of a block are the outputs of its own
    numbers: undoing the other steps on the block's numbers, in any order, gives the positions of
    the block's keys. The positions found below n are then ranked by their keys, recomputed with
    :func:`sample_key`."""
    lo = np.arange(_STEP, dtype=np.uint32)
    h, t = np.empty_like(lo), np.empty_like(lo)
    last = np.uint32(n - 1)  # n <= 2^32: the test p <= n - 1 stays in uint32
    seed_term = np.uint32((-(int(seed) & _M32) * _WEYL_INV) & _M32)  # p = h·W⁻¹ − seed·W⁻¹
    found: list[np.ndarray] = []
    got = 0
    for start in range(0, 1 << 32, _STEP):
        np.add(lo, np.uint32(start), out=h)  # start is a multiple of 2^16 and of _STEP
        _undo_middle(h, t)
        np.multiply(h, np.uint32(_WEYL_INV), out=h)
        np.add(h, seed_term, out=h)
        hits = h[h <= last]
        found.append(hits)
        got += hits.size
        if got >= size:
            break
    pos = np.concatenate(found)
    if pos.size > size:  # distinct keys (n <= 2^32): the size smallest
        pos = pos[np.argpartition(sample_key(pos, seed), size - 1)[:size]]
    return np.sort(pos).astype(np.int64)


def _smallest(keys: np.ndarray, pos: np.ndarray, size: int) -> tuple[np.ndarray, np.ndarray]:
    """The ``size`` (key, position) pairs with the smallest keys, ties broken by position."""
    if keys.size <= size:
        return keys, pos
    v = np.partition(keys, size - 1)[size - 1]
    below = np.flatnonzero(keys < v)
    at = np.flatnonzero(keys == v)
    at = at[np.argsort(pos[at], kind="stable")[: size - below.size]]
    keep = np.concatenate([below, at])
    return keys[keep], pos[keep]


def _forward_search(n: int, size: int, seed: int) -> np.ndarray:
    """The positions of the ``size`` smallest keys among the keys of all n positions, computed in
    steps; after the first ``size`` keys only the keys below the largest kept one compete (a
    later position loses a tie, so strictly below)."""
    lo_w = np.arange(min(_STEP, n), dtype=np.uint32) * np.uint32(_WEYL)
    h, t = np.empty_like(lo_w), np.empty_like(lo_w)
    s32 = int(seed) & _M32
    best_key = np.empty(0, dtype=np.uint32)
    best_pos = np.empty(0, dtype=np.int64)
    for start in range(0, n, _STEP):
        m = min(_STEP, n - start)
        k, u = h[:m], t[:m]
        np.add(lo_w[:m], np.uint32((start * _WEYL + s32) & _M32), out=k)  # p·W + seed
        for shift, mult in ((16, _FMIX[0]), (13, _FMIX[1])):
            np.right_shift(k, np.uint32(shift), out=u)
            np.bitwise_xor(k, u, out=k)
            np.multiply(k, np.uint32(mult), out=k)
        np.right_shift(k, np.uint32(16), out=u)
        np.bitwise_xor(k, u, out=k)
        if best_key.size < size:
            key, pos = k.copy(), np.arange(start, start + m, dtype=np.int64)
        else:
            pos = np.flatnonzero(k < best_key.max())
            key, pos = k[pos], pos + start
        best_key, best_pos = _smallest(np.concatenate([best_key, key]), np.concatenate([best_pos, pos]), size)
    return np.sort(best_pos)


def sample_positions(n: int, size: int, seed: int) -> np.ndarray:
    """The 0-based positions, in increasing order, of the rows in the seeded sample.

    The rule: among the ``n`` analysed rows in input order, the ``size`` rows with the smallest
    :func:`sample_key` (ties, possible only beyond 2^32 rows, broken by position); every row when
    n ≤ size. For a hash that behaves as a random permutation this is a simple random sample
    without replacement. It depends on (n, size, seed) only, so every reader draws the same rows.

    Cost: the keys of all n positions in steps (O(n) time, O(size + step) memory), or, when
    size · 2^32 / n is smaller, the positions of the smallest keys found through the inverse of
    the hash until ``size`` of them fall below n (about size · 2^32 / n keys).
    """
    n, size = int(n), int(size)
    if n <= size:
        return np.arange(n, dtype=np.int64)
    if size <= 0:
        return np.empty(0, dtype=np.int64)
    if n <= (1 << 32) and size * ((1 << 32) / n) < n:
        return _inverse_search(n, size, seed)
    return _forward_search(n, size, seed)
