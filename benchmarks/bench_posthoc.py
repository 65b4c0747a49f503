"""Time the post-hoc distributions against scipy.stats and print the ratios and the largest differences.

Cases: a Tukey–Kramer family of g = 6 means (15 pairs) with 87 error df, as in the factorial demo
on cells: ours computes the 15 upper tails in one quadrature plus the 0.95 quantile;
scipy.stats.studentized_range.sf is called once per pair plus .ppf once. Dunnett's family of
5 comparisons with a control (87 df, equal n): ours is the deterministic quadrature; scipy's
reference is scipy.stats.dunnett (randomized quasi-Monte Carlo) on simulated samples of that size.
Each timing is the median of several interleaved repeats in this run.

Run from the repository root:

    python benchmarks/bench_posthoc.py [--repeats 5]

Target: Tukey ratio (ours / scipy) < 1 with p values agreeing to 1e-8. Dunnett: deterministic and
accurate to about 1e-10, where scipy's randomized integral with 1000 points per dimension is
accurate to about 1e-4; ours may cost more time than that, but well under a second.
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
    from reporter.inference.posthoc import dunnett, studentized_range_isf, studentized_range_sf
except ImportError:  # run from a checkout without installing
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from reporter.inference.posthoc import dunnett, studentized_range_isf, studentized_range_sf


def _timed(fn):
    start = time.perf_counter()
    out = fn()
    return time.perf_counter() - start, out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    g, df = 6, 87.0
    q = np.linspace(0.4, 5.6, 15)

    def ours_tukey():
        return studentized_range_sf(q, g, df), studentized_range_isf(0.05, g, df)

    def scipy_tukey():
        return np.array([stats.studentized_range.sf(x, g, df) for x in q]), stats.studentized_range.ppf(0.95, g, df)

    rng = np.random.default_rng(1)
    samples = [rng.normal(loc=0.2 * i, size=16) for i in range(6)]
    means = np.array([s.mean() for s in samples])
    n = np.array([s.size for s in samples])
    mse = sum(((s - s.mean()) ** 2).sum() for s in samples) / (n.sum() - 6)

    def ours_dunnett():
        return dunnett(means, n, mse, n.sum() - 6, control=0)

    def scipy_dunnett():
        return stats.dunnett(*samples[1:], control=samples[0], rng=1)

    times = {k: [] for k in ("ours_tukey", "scipy_tukey", "ours_dunnett", "scipy_dunnett")}
    results = {}
    for _ in range(args.repeats):
        for name, fn in (("ours_tukey", ours_tukey), ("scipy_tukey", scipy_tukey),
                         ("ours_dunnett", ours_dunnett), ("scipy_dunnett", scipy_dunnett)):
            t, results[name] = _timed(fn)
            times[name].append(t)
    med = {k: statistics.median(v) for k, v in times.items()}
    dp_tukey = float(np.max(np.abs(results["ours_tukey"][0] - results["scipy_tukey"][0])))
    dq_tukey = abs(results["ours_tukey"][1] - results["scipy_tukey"][1])
    dp_dunnett = max(abs(c.p_adjusted - p) for c, p in zip(results["ours_dunnett"].comparisons,
                                                            results["scipy_dunnett"].pvalue))
    print(f"Tukey-Kramer, {g} means, {len(q)} pairs, df {df:g}: ours {med['ours_tukey']:.3f} s, "
          f"scipy {med['scipy_tukey']:.3f} s, ratio {med['ours_tukey'] / med['scipy_tukey']:.2f}; "
          f"max |dp| {dp_tukey:.1e}, |dq| {dq_tukey:.1e}")
    print(f"Dunnett, 5 comparisons, df {int(n.sum() - 6)}: ours {med['ours_dunnett']:.3f} s, "
          f"scipy {med['scipy_dunnett']:.3f} s, ratio {med['ours_dunnett'] / med['scipy_dunnett']:.2f}; "
          f"max |dp| {dp_dunnett:.1e} (scipy's integral is randomized)")


if __name__ == "__main__":
    main()
