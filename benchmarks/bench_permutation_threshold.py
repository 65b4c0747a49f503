"""Where the permutation F stops paying for itself: accuracy of the F reference and the cost of
10,000 permutations, by number of rows.

For each N, one seeded simulated one-way data set under the null: 4 cells of unequal size
(10%, 20%, 30%, 40% of N) with strongly skewed errors (lognormal, sigma = 1; invented data).
For that data set the permutation distribution of F is drawn (``--perms`` permutations, the
report's own code) and compared with the F(3, N - 4) distribution at its upper 5% and 1% points:
the tail probabilities of the permutation distribution there, beside their Monte Carlo standard
errors. Where the two agree within that error, the F reference is as good as the permutations,
whose cost (measured here, per permutation, and scaled to 10,000) grows like N.

    python benchmarks/bench_permutation_threshold.py [--rows 1000,10000,100000,300000] [--perms 2000]

The default of ``[analysis] permutation_max_rows`` (reporter/intake/defaults.py) is chosen from
this table: the N beyond which 10,000 permutations take longer than the run budget
(``reporter.inference.permutation.TIME_BUDGET``) while the F reference matches them.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from pathlib import Path

import numpy as np

try:
    from reporter.numerics.distributions import f_isf
    from reporter.inference.permutation import TIME_BUDGET, _null_distribution
except ImportError:  # run from a checkout without installing
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from reporter.numerics.distributions import f_isf
    from reporter.inference.permutation import TIME_BUDGET, _null_distribution


def data(n: int, seed: int):
    rng = np.random.default_rng(seed)
    sizes = np.round(np.array([0.1, 0.2, 0.3, 0.4]) * n).astype(int)
    sizes[-1] = n - sizes[:-1].sum()
    codes = np.repeat(np.arange(4), sizes)
    y = rng.lognormal(0.0, 1.0, n)
    return y, codes


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", default="1000,10000,100000,300000")
    ap.add_argument("--perms", type=int, default=2000)
    ap.add_argument("--seed", type=int, default=7)
    args = ap.parse_args()
    m = args.perms
    print(f"F reference vs permutation distribution ({m} permutations; lognormal errors, cells 10/20/30/40%)")
    print(f"{'rows':>9} {'P(F*>F.05)':>11} {'P(F*>F.01)':>11} {'MC se .05':>10} {'s/perm':>9} {'10,000 perms s':>15}")
    se05 = math.sqrt(0.05 * 0.95 / m)
    for n in (int(s) for s in args.rows.split(",")):
        y, codes = data(n, args.seed)
        t0 = time.perf_counter()
        dist = _null_distribution(y, codes, 4, None, m, args.seed)
        per = (time.perf_counter() - t0) / m
        df2 = n - 4
        tail05 = float(np.mean(dist.null > f_isf(0.05, 3, df2)))
        tail01 = float(np.mean(dist.null > f_isf(0.01, 3, df2)))
        print(f"{n:>9,} {tail05:>11.4f} {tail01:>11.4f} {se05:>10.4f} {per:>9.2e} {per * 10_000:>15.1f}")
    print(f"run budget (TIME_BUDGET): {TIME_BUDGET:.0f} s")


if __name__ == "__main__":
    main()
