"""Wall time of a whole report against a bare statsmodels fit of the same model.

Runs, alternately and each as a fresh process (imports included, as a user meets them):

* ours: ``anova-report run demo_project/oneway.toml --out TMP --format html,json``
  (every figure, every check, the permutation tests);
* reference: a script that imports ``statsmodels.formula.api``, reads the same CSV with pandas and
  fits the same one-way model with ``ols(...).fit()`` and ``anova_lm``.

Prints both medians over --repeat runs and the ratio ours / reference (target ≤ 1.1). Nothing
is asserted: timings on shared machines are noisy, so read the ratio, not the seconds.

    python benchmarks/bench_report.py [--repeat 7]
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PLAN = ROOT / "demo_project" / "oneway.toml"
DATA = ROOT / "demo_project" / "recall_oneway.csv"

REFERENCE = f"""
import pandas as pd
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm
df = pd.read_csv({str(DATA)!r})
anova_lm(smf.ols("recalled ~ C(schedule)", df).fit(), typ=2)
"""


def wall(cmd: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, capture_output=True)
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args()
    ours, ref = [], []
    with tempfile.TemporaryDirectory() as tmp:
        ours_cmd = [sys.executable, "-m", "reporter", "run", str(PLAN), "--out", tmp, "--format", "html,json"]
        ref_cmd = [sys.executable, "-c", REFERENCE]
        wall(ours_cmd), wall(ref_cmd)  # warm the file cache for both
        for _ in range(args.repeat):
            ours.append(wall(ours_cmd))
            ref.append(wall(ref_cmd))
    mo, mr = statistics.median(ours), statistics.median(ref)
    print(f"anova-report run (html,json): median {mo:.3f} s over {args.repeat} runs")
    print(f"statsmodels ols + anova_lm:   median {mr:.3f} s over {args.repeat} runs")
    print(f"ratio ours / reference:       {mo / mr:.3f}  (target <= 1.1)")


if __name__ == "__main__":
    main()
