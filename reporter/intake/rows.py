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
from typing import Protocol, Sequence

import numpy as np


@dataclass(frozen=True)
class CellPoints:
    """The points of one cell to draw: every value while the cell is small, otherwise a
    deterministic summary (evenly spaced quantiles, type 7), with ``summarized`` set."""

    n: int
    values: tuple[float, ...]
    summarized: bool


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
        """A seeded simple random sample of ``size`` rows without replacement (all rows when
        n ≤ size): (values, cells), in a deterministic order."""

    def arrays(self) -> tuple[np.ndarray, np.ndarray] | None:
        """(values, cells) of every row, or None when the rows are not held in memory."""
