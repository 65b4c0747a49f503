"""Fit speed and peak memory against pandas + statsmodels (ols + anova_lm), same Parquet file.

For each size (10^5, 10^6, 10^7 rows of a simulated 2 x 3 design) this script writes one Parquet
file, then runs, each in its own child process (peak memory only grows within a process):

* ours:       ``anova-report run PLAN --format json`` (the real command, imports included);
* reference:  pandas.read_parquet + statsmodels ols("y ~ C(a, Sum) * C(b, Sum)") + anova_lm(typ=3).

It prints the wall time and peak RSS of each (medians over --repeat runs) and the ratio
ours / reference. Target: time ratio ≤ 0.1 at 10^7 rows. Nothing here is asserted.

    python benchmarks/bench_fit.py [--sizes 100000,1000000,10000000] [--repeat 3]
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

CHILD_PREFIX = "import resource, sys, time\nt0 = time.perf_counter()\n"
CHILD_SUFFIX = (
    "\nelapsed = time.perf_counter() - t0\n"
    "print(elapsed, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)\n"
)

OURS = """
from reporter.cli import main
rc = main(["run", sys.argv[1], "--out", sys.argv[2], "--format", "json"])
assert rc == 0
"""

REFERENCE = """
import pandas as pd
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm
df = pd.read_parquet(sys.argv[1])
table = anova_lm(smf.ols("y ~ C(a, Sum) * C(b, Sum)", df).fit(), typ=3)
assert table.shape[0] == 5
"""

PLAN = """
title = "benchmark (simulated data)"
[data]
path = "data.parquet"
outcome = "y"
[[factors]]
name = "a"
levels = ["a1", "a2"]
[[factors]]
name = "b"
levels = ["b1", "b2", "b3"]
[[hypotheses]]
name = "a"
effect = "a"
[[hypotheses]]
name = "a x b"
effect = "a x b"
"""


def make_data(folder: Path, rows: int) -> None:
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(rows)
    a = rng.integers(0, 2, rows)
    b = rng.integers(0, 3, rows)
    y = 10 + 0.3 * a + 0.2 * b + 0.1 * a * b + rng.normal(size=rows)
    table = pa.table({
        "a": pa.DictionaryArray.from_arrays(pa.array(a.astype("int32")), pa.array(["a1", "a2"])).cast(pa.string()),
        "b": pa.DictionaryArray.from_arrays(pa.array(b.astype("int32")), pa.array(["b1", "b2", "b3"])).cast(pa.string()),
        "y": y,
    })
    pq.write_table(table, folder / "data.parquet")
    (folder / "plan.toml").write_text(textwrap.dedent(PLAN))


def child(code: str, *args: str) -> tuple[float, float]:
    out = subprocess.run(
        [sys.executable, "-c", CHILD_PREFIX + code + CHILD_SUFFIX, *args],
        capture_output=True, text=True, check=True,
    )
    elapsed, rss = out.stdout.strip().splitlines()[-1].split()
    return float(elapsed), float(rss)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="100000,1000000,10000000")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    print(f"{'rows':>10}  {'ours s':>8} {'ref s':>8} {'time ratio':>10}  {'ours MiB':>9} {'ref MiB':>9} {'mem ratio':>9}")
    for rows in (int(s) for s in args.sizes.split(",")):
        with tempfile.TemporaryDirectory() as tmp:
            folder = Path(tmp)
            make_data(folder, rows)
            ours, ref = [], []
            for _ in range(args.repeat):
                ours.append(child(OURS, str(folder / "plan.toml"), str(folder / "out")))
                ref.append(child(REFERENCE, str(folder / "data.parquet")))
            t_o = statistics.median(t for t, _ in ours)
            t_r = statistics.median(t for t, _ in ref)
            m_o = statistics.median(m for _, m in ours)
            m_r = statistics.median(m for _, m in ref)
            print(f"{rows:>10}  {t_o:8.2f} {t_r:8.2f} {t_o / t_r:10.3f}  {m_o:9.0f} {m_r:9.0f} {m_o / m_r:9.3f}", flush=True)


if __name__ == "__main__":
    main()
