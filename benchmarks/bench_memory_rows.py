"""Time and peak extra memory of each MemoryRows method at N rows (default 10^6).

Seeded simulated data (invented): 4 cells of unequal size, normal values rounded to one
decimal (so there are ties), as the report path asks for them. Each method is timed on a fresh
object (so the sorts it needs are included) and, for the methods that reuse a sort, again on a
warm one. Peak memory is tracemalloc's peak of numpy allocations during the call.

    python benchmarks/bench_memory_rows.py [--rows 1000000]
"""

from __future__ import annotations

import argparse
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

try:
    from reporter.intake.memory_rows import MemoryRows
except ImportError:  # run from a checkout without installing
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from reporter.intake.memory_rows import MemoryRows


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=1_000_000)
    args = ap.parse_args()
    n, k = args.rows, 4
    rng = np.random.default_rng(1)
    cell = rng.choice(k, n, p=[0.1, 0.2, 0.3, 0.4])
    y = np.round(rng.normal(cell * 0.5, 1.0), 1)
    rows = np.arange(1, n + 1)
    means = np.array([y[cell == c].mean() for c in range(k)])
    scale = np.full(k, 1.0)
    bound = np.full(k, 3.2)
    probs = np.linspace(0, 1, 1000).tolist()
    calls = {
        "medians": lambda m: m.medians(),
        "deviation_stats": lambda m: m.deviation_stats(means),
        "rank_sums": lambda m: m.rank_sums(),
        "residual_quantiles": lambda m: m.residual_quantiles(means, scale, probs),
        "cell_points(200)": lambda m: m.cell_points(200),
        "flagged": lambda m: m.flagged(means, bound, 100),
        "sample(5000)": lambda m: m.sample(5000, 3),
        "arrays": lambda m: m.arrays(),
    }
    print(f"MemoryRows at N = {n:,} rows, {k} cells (input arrays: {(y.nbytes + cell.nbytes + rows.nbytes) / 1e6:.0f} MB)")
    print(f"{'method':<20} {'cold s':>8} {'warm s':>8} {'peak MB':>8}")
    for name, call in calls.items():
        m = MemoryRows(y, cell, k, rows)
        tracemalloc.start()
        t0 = time.perf_counter()
        call(m)
        cold = time.perf_counter() - t0
        peak = tracemalloc.get_traced_memory()[1] / 1e6
        tracemalloc.stop()
        t0 = time.perf_counter()
        call(m)
        warm = time.perf_counter() - t0
        print(f"{name:<20} {cold:>8.3f} {warm:>8.3f} {peak:>8.0f}")


if __name__ == "__main__":
    main()
