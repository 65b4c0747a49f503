"""Time the permutation F test against scipy.stats.permutation_test and print the ratio.

Case: one-way design, 4 unbalanced cells, N = 1000 rows, 10,000 permutations (scipy: 9,999
resamples plus the observed arrangement), each timed as the median of several repeats in this run.
The reference is scipy.stats.permutation_test(permutation_type="independent", vectorized=True)
with two vectorized F statistics: a lean numpy one (the harder reference) and scipy.stats.f_oneway.
Repeats are interleaved so that changes in machine load affect all contenders alike.

Run from the repository root:

    python benchmarks/bench_permutation.py [--repeats 5] [--n 1000]

Target: ratio (ours / scipy) <= 0.5 against the lean numpy F.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

import numpy as np
from scipy import stats

try:
    from reporter.inference.permutation import permutation_f_test
except ImportError:  # run from a checkout without installing
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from reporter.inference.permutation import permutation_f_test


def vectorized_f(*groups, axis=-1):
    """One-way F for samples along ``axis``, for a batch of permutations at once."""
    groups = [np.moveaxis(g, axis, -1) for g in groups]
    sizes = np.array([g.shape[-1] for g in groups], dtype=float)
    total = sizes.sum()
    means = [g.mean(axis=-1) for g in groups]
    grand = sum(n * m for n, m in zip(sizes, means)) / total
    between = sum(n * (m - grand) ** 2 for n, m in zip(sizes, means))
    within = sum(((g - m[..., None]) ** 2).sum(axis=-1) for g, m in zip(groups, means))
    k = len(groups)
    return (between / (k - 1)) / (within / (total - k))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--n", type=int, default=1000, help="number of rows")
    args = parser.parse_args()

    rng = np.random.default_rng(20240611)
    shares = np.array([0.2, 0.3, 0.15, 0.35])
    sizes = np.round(shares * args.n).astype(int)
    sizes[-1] = args.n - sizes[:-1].sum()
    codes = np.repeat(np.arange(4), sizes)
    y = rng.normal(np.repeat([0.0, 0.05, 0.1, 0.0], sizes))
    samples = [y[codes == c] for c in range(4)]

    def ours():
        return permutation_f_test(y, codes, 4, n_permutations=10_000, seed=1)

    def scipy_with(statistic):
        def run():
            return stats.permutation_test(
                samples, statistic, vectorized=True, n_resamples=9999,
                permutation_type="independent", alternative="greater", rng=1,
            )
        return run

    def f_oneway_statistic(*groups, axis=-1):
        return stats.f_oneway(*groups, axis=axis).statistic

    contenders = {
        "permutation_f_test": ours,
        "scipy + numpy F": scipy_with(vectorized_f),
        "scipy + f_oneway": scipy_with(f_oneway_statistic),
    }
    for run in contenders.values():  # warm-up (imports, caches)
        run()
    times = {name: [] for name in contenders}
    results = {}
    for _ in range(args.repeats):  # interleaved, so that load changes hit every contender
        for name, run in contenders.items():
            start = time.perf_counter()
            results[name] = run()
            times[name].append(time.perf_counter() - start)
    med = {name: statistics.median(t) for name, t in times.items()}

    print(f"rows N = {y.size}, cells = 4 (sizes {sizes.tolist()}), repeats = {args.repeats}")
    for name, res in results.items():
        p = res.p if name == "permutation_f_test" else res.pvalue
        print(f"{name:<20} median {med[name]:8.3f} s   p = {p:.4f}")
    ours_t = med["permutation_f_test"]
    for name in ("scipy + numpy F", "scipy + f_oneway"):
        print(f"ratio permutation_f_test / {name:<17} = {ours_t / med[name]:.3f}   (target <= 0.5)")


if __name__ == "__main__":
    main()
