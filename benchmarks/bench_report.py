"""Wall time of a whole report against a bare statsmodels fit of the same model, for both demo plans.

For each demo plan it runs, alternately and each as a fresh process (imports included, as a user
meets them):

* ours: ``anova-report run demo_project/PLAN.toml --out TMP --format html,json``
  (every figure, every check, the permutation tests);
* reference: a script that imports ``statsmodels.formula.api``, reads the same CSV with pandas and
  fits the same model with ``ols(...).fit()`` and ``anova_lm``:

  - oneway: ``recalled ~ C(schedule)``;
  - factorial: ``recalled ~ C(schedule, Sum) * C(feedback, Sum)``, ``anova_lm(typ=3)`` (sum
    coding, as the plan's Type III tests need).

Prints, per plan, the median wall time of each over --repeat runs, the ratio of the medians, the
median of the ratios of neighbouring runs (ours against the reference run right after it, which
cancels most of the drift in a shared machine's load) and the same ratio in CPU time (user +
system of the child), which depends least on other processes. Target: ratio ≤ 1. Nothing is
asserted: timings on shared machines are noisy, so read the ratios, not the seconds.

    python benchmarks/bench_report.py [--repeat 7] [--plans oneway,factorial]
"""

from __future__ import annotations

import argparse
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_project"

REFERENCE = """
import pandas as pd
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm
df = pd.read_csv({data!r})
table = anova_lm(smf.ols({formula!r}, df).fit(), typ={typ})
assert table.shape[0] == {rows}
"""

#: plan name -> (data file, model formula, anova_lm type, rows of the ANOVA table incl. residual)
PLANS = {
    "oneway": ("recall_oneway.csv", "recalled ~ C(schedule)", 2, 2),
    "factorial": ("recall_factorial.csv", "recalled ~ C(schedule, Sum) * C(feedback, Sum)", 3, 5),
}


def timed(cmd: list[str]) -> tuple[float, float]:
    """Wall time and CPU time (user + system) of one child process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, capture_output=True)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu


def commands(plan: str, out: str) -> tuple[list[str], list[str]]:
    data, formula, typ, rows = PLANS[plan]
    ours = [sys.executable, "-m", "reporter", "run", str(DEMO / f"{plan}.toml"), "--out", out,
            "--format", "html,json"]
    script = REFERENCE.format(data=str(DEMO / data), formula=formula, typ=typ, rows=rows)
    return ours, [sys.executable, "-c", script]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    ap.add_argument("--plans", default=",".join(PLANS),
                    help=f"comma-separated, from {', '.join(PLANS)}")
    args = ap.parse_args()
    plans = [p.strip() for p in args.plans.split(",") if p.strip()]
    unknown = [p for p in plans if p not in PLANS]
    if unknown:
        ap.error(f"unknown plan(s) {', '.join(unknown)}; choose from {', '.join(PLANS)}")
    runs: dict[str, list[tuple[tuple[float, float], tuple[float, float]]]] = {p: [] for p in plans}
    with tempfile.TemporaryDirectory() as tmp:
        cmds = {p: commands(p, str(Path(tmp) / p)) for p in plans}
        for p in plans:  # warm the file cache for both
            timed(cmds[p][0]), timed(cmds[p][1])
        for _ in range(args.repeat):
            for p in plans:
                ours = timed(cmds[p][0])
                ref = timed(cmds[p][1])
                runs[p].append((ours, ref))
    print(f"median of {args.repeat} runs each, alternating ours / reference; target ratio <= 1")
    print(f"{'plan':<10} {'ours s':>8} {'ref s':>8} {'ratio':>7} {'paired':>7} {'cpu ratio':>10}")
    for p in plans:
        ours_wall = statistics.median(o[0] for o, _ in runs[p])
        ref_wall = statistics.median(r[0] for _, r in runs[p])
        paired = statistics.median(o[0] / r[0] for o, r in runs[p])
        cpu = statistics.median(o[1] / r[1] for o, r in runs[p] if r[1] > 0)
        print(f"{p:<10} {ours_wall:8.3f} {ref_wall:8.3f} {ours_wall / ref_wall:7.3f} "
              f"{paired:7.3f} {cpu:10.3f}")


if __name__ == "__main__":
    main()
