"""The one-way demo plan at more rows: wall time, peak memory and output sizes of a whole run.

Writes seeded simulated data in the demo's columns (``schedule``, ``recalled``; the demo's four
group means and SD, one decimal, invented like the demo itself) as Parquet (default) or CSV at
each size, points a copy of ``demo_project/oneway.toml`` at it, and runs
``anova-report run PLAN --format html,json`` in a child process under ``/usr/bin/time -v``.
Prints one line per size and the ratio of each to the smallest (target: 10^6 rows at most twice
the time of 10^3 rows). Nothing is asserted.

    python benchmarks/bench_rows.py [--rows 1000,1000000] [--format parquet] [--repeat 3]
"""

from __future__ import annotations

import argparse
import re
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
PLAN = ROOT / "demo_project" / "oneway.toml"
GROUPS = ("none", "massed", "spaced-short", "spaced-long")
MEANS = (14.0, 17.0, 19.0, 20.5)


def write_data(folder: Path, rows: int, fmt: str, seed: int = 20261202) -> Path:
    rng = np.random.default_rng(seed)
    g = rng.integers(0, 4, rows)
    y = np.clip(np.round(rng.normal(np.asarray(MEANS)[g], 5.0), 1), 0.0, 40.0)
    names = np.asarray(GROUPS)[g]
    path = folder / f"recall_{rows}.{fmt}"
    if fmt == "parquet":
        import pyarrow as pa
        import pyarrow.parquet as pq

        pq.write_table(pa.table({"schedule": names, "recalled": y}), path)
    else:
        with path.open("w", encoding="utf-8") as fh:
            fh.write("schedule,recalled\n")
            fh.writelines(f"{a},{b:.1f}\n" for a, b in zip(names.tolist(), y.tolist()))
    return path


def write_plan(folder: Path, data: Path) -> Path:
    text = PLAN.read_text(encoding="utf-8")
    text = re.sub(r'(?m)^path = "[^"]*"', f'path = "{data.name}"', text, count=1)
    plan = folder / f"plan_{data.stem}.toml"
    plan.write_text(text, encoding="utf-8")
    return plan


def run(plan: Path, out: Path) -> tuple[float, float]:
    """Wall seconds and peak RSS (MB) of one child process."""
    cmd = ["/usr/bin/time", "-v", sys.executable, "-m", "reporter", "run", str(plan), "--out", str(out),
           "--format", "html,json", "--quiet"]
    t0 = time.perf_counter()
    res = subprocess.run(cmd, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    if res.returncode != 0:
        raise SystemExit(res.stderr)
    rss = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", res.stderr).group(1)) / 1024
    return wall, rss


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", default="1000,1000000")
    ap.add_argument("--format", default="parquet", choices=("parquet", "csv"))
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    sizes = [int(s) for s in args.rows.split(",")]
    results = {}
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        plans = {n: write_plan(folder, write_data(folder, n, args.format)) for n in sizes}
        for n in sizes:
            runs = [run(plans[n], folder / f"out{n}") for _ in range(args.repeat)]
            out = folder / f"out{n}"
            results[n] = (statistics.median(w for w, _ in runs), max(r for _, r in runs),
                          (out / "report.html").stat().st_size / 1e6, (out / "results.json").stat().st_size / 1e6)
    base = results[sizes[0]][0]
    print(f"{'rows':>10} {'wall s':>8} {'peak MB':>8} {'html MB':>8} {'json MB':>8} {'time ratio':>10}")
    for n, (w, r, h, j) in results.items():
        print(f"{n:>10,} {w:>8.2f} {r:>8.0f} {h:>8.3f} {j:>8.3f} {w / base:>10.2f}")


if __name__ == "__main__":
    main()
