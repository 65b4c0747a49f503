"""What covariates cost the out-of-core reader: the intake of the same simulated file with and
without covariates (``[data] reader = "out-of-core"``), each timed in its own child process.

The scenario is invented (seeded): reaction times of four groups with a pretest score and an age
as covariates; the file is written once in chunks and never committed. Prints the time of
reading the file and building the cell table (intake only: plan, data, cell table with the
covariates' cross-products), with 0, 1 and 2 covariates, and the ratios to 0.

    python benchmarks/bench_covariates.py FOLDER --rows 1000000 --format csv
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np

CHUNK = 1_000_000
PLAN = """
title = "Reaction time in four groups with covariates (simulated benchmark data)"
[data]
path = "{path}"
outcome = "y"
reader = "out-of-core"
[[factors]]
name = "g"
levels = ["a", "b", "c", "d"]
{covariates}
"""


def write_rows(folder: Path, rows: int, fmt: str, seed: int = 20261202) -> Path:
    path = folder / f"rt-cov-{rows}.{fmt}"
    if path.exists():
        return path
    rng = np.random.default_rng(seed)
    labels = np.asarray(["a", "b", "c", "d"])
    tmp = path.with_suffix(path.suffix + ".part")
    writer = None
    with open(tmp, "w", encoding="utf-8", newline="") if fmt == "csv" else open(tmp, "wb") as fh:
        if fmt == "csv":
            fh.write("g,y,pre,age\n")
        done = 0
        while done < rows:
            m = min(CHUNK, rows - done)
            g = rng.integers(0, 4, m)
            pre = np.round(rng.normal(50, 10, m), 2)
            age = np.round(rng.uniform(18, 70, m), 1)
            y = np.round(400 + 10 * g + 2.0 * pre + rng.normal(0, 50, m), 3)
            if fmt == "csv":
                cols = [labels[g], np.char.mod("%.3f", y), np.char.mod("%.2f", pre), np.char.mod("%.1f", age)]
                lines = cols[0]
                for c in cols[1:]:
                    lines = np.char.add(np.char.add(lines, ","), c)
                fh.write("\n".join(lines.tolist()) + "\n")
            else:
                import pyarrow as pa
                import pyarrow.parquet as pq

                table = pa.table({"g": labels[g], "y": y, "pre": pre, "age": age})
                if writer is None:
                    writer = pq.ParquetWriter(fh, table.schema)
                writer.write_table(table)
            done += m
        if writer is not None:
            writer.close()
    tmp.rename(path)
    return path


CHILD = """
import json, resource, sys, time
from reporter.api import prepare
def cpu():
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime
t0, c0 = time.perf_counter(), cpu()
prep = prepare(sys.argv[1])
t1, c1 = time.perf_counter(), cpu()
print(json.dumps({"seconds": t1 - t0, "cpu": c1 - c0, "n": prep.cells.n_total,
                  "peak_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
"""


def run_once(plan: Path) -> dict:
    out = subprocess.run([sys.executable, "-c", CHILD, str(plan)], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("folder", type=Path)
    ap.add_argument("--rows", type=int, default=1_000_000)
    ap.add_argument("--format", default="csv", choices=["csv", "parquet"])
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    args.folder.mkdir(parents=True, exist_ok=True)
    data = write_rows(args.folder, args.rows, args.format)
    covs = {0: "", 1: '[[covariates]]\nname = "pre"\n',
            2: '[[covariates]]\nname = "pre"\n[[covariates]]\nname = "age"\n'}
    plans = {}
    for p, text in covs.items():
        plans[p] = args.folder / f"plan-{args.format}-{p}.toml"
        plans[p].write_text(textwrap.dedent(PLAN).format(path=data.name, covariates=text), encoding="utf-8")
    runs: dict[int, list[dict]] = {p: [] for p in covs}
    for _ in range(args.repeat):  # interleaved, so that a change of the machine's load hits all alike
        for p in covs:
            runs[p].append(run_once(plans[p]))
    print(f"{args.rows:,} rows, {args.format}, median of {args.repeat} interleaved runs (intake and cell table only; "
          "CPU = user + system time of all threads)")
    base = base_cpu = None
    for p in covs:
        sec = statistics.median(r["seconds"] for r in runs[p])
        cpu = statistics.median(r["cpu"] for r in runs[p])
        mib = statistics.median(r["peak_mib"] for r in runs[p])
        base, base_cpu = base or sec, base_cpu or cpu
        print(f"  {p} covariates: {sec:6.2f} s wall ({sec / base:4.2f}x), {cpu:6.2f} s CPU ({cpu / base_cpu:4.2f}x), "
              f"peak {mib:5.0f} MiB, n = {runs[p][0]['n']:,}")


if __name__ == "__main__":
    main()
