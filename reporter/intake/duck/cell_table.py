"""Per-cell n, mean and centred SS in SQL.

**Cell statistics** use the corrected two-pass algorithm in SQL (Chan, Golub & LeVeque 1983,
The American Statistician 37(3), 242-247, eq. 1.7): n and a compensated sum (DuckDB's ``fsum``,
Kahan-Babuska summation) of the offsets first, then Σ(d − m) and Σ(d − m)² around that mean.
"""

from __future__ import annotations

from fractions import Fraction
from typing import Sequence

import numpy as np

from reporter.intake.cells import CellStats
from reporter.intake.duck.connection import _doubles


def cell_stats(con, k: int, pivot: float, pivot_exact: Fraction) -> tuple[CellStats, np.ndarray, np.ndarray]:
    """Per-cell n, mean offset and centred SS by the corrected two-pass algorithm in SQL, and
    each cell's smallest and largest offset (from the same scans)."""
    [(n, mean, ss)], (lo, hi) = _moments(con, ["d"], "kept", k, extremes=True)
    for arr in (n, mean, ss):
        arr.setflags(write=False)
    return CellStats(n=n, offset_mean=mean, ss=ss, pivot=float(pivot), pivot_exact=pivot_exact), lo, hi


def _moments(con, values: Sequence[str], table: str, k: int, extremes: bool = False):
    """Per cell (n, mean, centred SS) of each expression in ``values``, all from the same two
    scans: first n and a compensated sum give a mean m0; then Σ(v − m0) and Σ(v − m0)² give
    S = Σ(v − m0)² − (Σ(v − m0))²/n and the refined mean m0 + Σ(v − m0)/n (Chan, Golub &
    LeVeque 1983, eq. 1.7). Returns the list of those triples and, with ``extremes``, the
    per-cell (min, max) of the first expression taken in the first scan (else None)."""
    cols = [f"fsum(v{j}) / count(*)" for j in range(len(values))]
    if extremes:
        cols += ["min(v0)", "max(v0)"]
    inner = ", ".join(f"{v} AS v{j}" for j, v in enumerate(values))
    first = con.execute(f"SELECT cell, count(*), {', '.join(cols)} FROM (SELECT cell, {inner} FROM {table}) GROUP BY cell").fetchall()
    n = np.zeros(k, dtype=np.int64)
    m0 = np.zeros((len(values), k))
    lo, hi = np.full(k, np.nan), np.full(k, np.nan)
    for row in first:
        c = row[0]
        n[c] = row[1]
        m0[:, c] = row[2 : 2 + len(values)]
        if extremes:
            lo[c], hi[c] = row[-2:]
    es = ", ".join(f"(v{j} - {_doubles(m0[j])}[cell + 1]) AS e{j}" for j in range(len(values)))
    sums = ", ".join(f"fsum(e{j}), fsum(e{j} * e{j})" for j in range(len(values)))
    second = con.execute(f"SELECT cell, {sums} FROM (SELECT cell, {es} FROM (SELECT cell, {inner} FROM {table})) GROUP BY cell").fetchall()
    out = []
    for j in range(len(values)):
        mean = np.full(k, np.nan)
        ss = np.full(k, np.nan)
        for row in second:
            c, s1, s2 = row[0], row[1 + 2 * j], row[2 + 2 * j]
            mean[c] = m0[j, c] + s1 / n[c]
            ss[c] = max(s2 - s1 * s1 / n[c], 0.0)
        out.append((n.copy(), mean, ss))
    return out, ((lo, hi) if extremes else None)
