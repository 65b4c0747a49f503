"""How the whole run scales with the number of rows, against bare pipelines on the same files.

One table, measured in one run. Every figure comes from its own child process, started as a user
starts it (imports included) and measured from outside: wall time around the process, CPU time
(user + system, all threads) and peak resident memory from ``os.wait4`` (the child's own
``ru_utime``, ``ru_stime`` and ``ru_maxrss``), and the sizes of the files it wrote. The package
is byte-compiled first (``compileall``), as an installed package is, so that no run pays for
compiling its sources (``PYTHONDONTWRITEBYTECODE`` would otherwise make every run do it).

Rows of the table:

* the default plan (one directional and one omnibus hypothesis over 4 groups, default
  ``[analysis]``), ``--format html,json``, on Parquet files of 10^3 … 10^7 rows;
* at 10^7 rows, ``--format json``, beside a bare DuckDB GROUP BY script (count, avg, var_samp)
  and pandas + statsmodels (ols + anova_lm) on the same files: Parquet and CSV with the outcome
  rounded to 3 decimals (few distinct values: the distinct-value answers apply), and Parquet at
  full float64 precision (nearly every value distinct: the sorted per-cell values apply). The
  label of each row says which data it ran on;
* 10^8 rows of Parquet (``--huge``; written by the script, never committed): peak memory.

Targets (read the ratios, not the seconds: these machines are noisy):

* 10^7 rows, Parquet and CSV (each kind of data), ``--format json``: ≤ 4× the bare DuckDB
  script on the same file, RSS ≤ 400 MB;
* 10^6 rows ``--format html,json``: ≤ 2× the same plan at 10^3 rows;
* 10^8 rows Parquet: RSS ≤ 1 GB;
* report.html ≤ 1.5 MB, results.json ≤ 1 MB, report.pdf ≤ 3 MB at every size.

The data are simulated (seeded) by ``make_scale_data.py`` beside this script.

    python benchmarks/bench_scale.py [--folder DIR] [--max-rows 10000000] [--huge] [--repeat 1] [--ratios]

The machine's load average is printed before and after (the ratios mean little on a busy machine).
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from make_scale_data import describe, write_plan, write_rows  # noqa: E402

BARE_DUCKDB = """
import sys, duckdb
path = sys.argv[1]
src = f"read_parquet('{path}')" if path.endswith('.parquet') else f"read_csv('{path}')"
rows = duckdb.sql(f"SELECT g, count(*), avg(y), var_samp(y) FROM {src} GROUP BY g ORDER BY g").fetchall()
assert len(rows) == 4
"""

PANDAS_STATSMODELS = """
import sys
import pandas as pd
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm
path = sys.argv[1]
df = pd.read_parquet(path) if path.endswith('.parquet') else pd.read_csv(path)
table = anova_lm(smf.ols("y ~ C(g)", df).fit(), typ=2)
assert table.shape[0] == 2
"""


def measure(cmd: list[str]) -> tuple[float, float, float]:
    """Wall seconds, peak RSS (MB) and CPU seconds (user + system) of one child process."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(proc.pid, 0)
    elapsed = time.perf_counter() - t0
    err = proc.stderr.read().decode(errors="replace") if proc.stderr else ""
    if status != 0:
        raise SystemExit(f"failed ({status}): {' '.join(cmd)}\n{err}")
    return elapsed, usage.ru_maxrss / 1024, usage.ru_utime + usage.ru_stime


def ours(plan: Path, out: Path, formats: str) -> list[str]:
    return [sys.executable, "-m", "reporter", "run", str(plan), "--out", str(out), "--format", formats, "--quiet"]


def size_mb(path: Path) -> str:
    return f"{path.stat().st_size / 1e6:.2f}" if path.exists() else "-"


def row(label: str, n: int, t: float, rss: float, out: Path | None = None, ref: float | None = None,
        cpu: float | None = None) -> None:
    sizes = ["-", "-", "-"]
    if out is not None:
        sizes = [size_mb(out / name) for name in ("report.html", "results.json", "report.pdf")]
    ratio = f"{t / ref:6.2f}" if ref else "     -"
    cpu_s = f"{cpu:6.2f}" if cpu is not None else "     -"
    print(f"| {label:<60} | {n:>11,} | {t:8.2f} | {ratio} | {cpu_s} | {rss:8.0f} | {sizes[0]:>7} | {sizes[1]:>7} |",
          flush=True)


def median_measure(cmd: list[str], repeat: int) -> tuple[float, float, float]:
    """Median wall time, largest peak RSS and median CPU time over ``repeat`` runs."""
    runs = [measure(cmd) for _ in range(repeat)]
    return (statistics.median(t for t, _, _ in runs), max(m for _, m, _ in runs),
            statistics.median(c for _, _, c in runs))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--folder", type=Path, default=None, help="where to write the data (default: a temporary folder)")
    ap.add_argument("--max-rows", type=int, default=10**7)
    ap.add_argument("--huge", action="store_true", help="also 10^8 rows of Parquet (about 1 GB of disk)")
    ap.add_argument("--repeat", type=int, default=1, help="runs per figure (median time, max memory)")
    ap.add_argument("--ratios", action="store_true",
                    help="only the rows at --max-rows beside the bare DuckDB script (no size sweep, no pandas)")
    args = ap.parse_args()
    folder = args.folder or Path(tempfile.mkdtemp(prefix="anova-report-bench-"))
    folder.mkdir(parents=True, exist_ok=True)
    print(f"data in {folder}; python {sys.version.split()[0]}; {os.cpu_count()} cores; "
          f"load average before: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    subprocess.run([sys.executable, "-m", "compileall", "-q", str(HERE.parent / "reporter")], check=True,
                   stdout=subprocess.DEVNULL)
    print("| what | rows | wall s | ratio | CPU s | peak MB | html MB | json MB |")
    print("|---|---|---|---|---|---|---|---|")
    sizes = [n for n in (10**3, 10**4, 10**5, 10**6, 10**7) if n <= args.max_rows]
    base = None
    for n in [] if args.ratios else sizes:
        data = write_rows(folder, n, "parquet")
        plan = write_plan(folder, data)
        out = folder / f"out-{n}"
        t, m, c = median_measure(ours(plan, out, "html,json"), args.repeat)
        base = base or t
        row("default plan, parquet, 3 decimals, html,json (÷ 10^3 run)", n, t, m, out, base, c)
    big = sizes[-1]
    for fmt, decimals in (("parquet", 3), ("parquet", None), ("csv", 3)):
        data = write_rows(folder, big, fmt, decimals=decimals)
        plan = write_plan(folder, data)
        out = folder / f"out-json-{data.stem}-{fmt}"
        kind = f"{fmt}, {describe(decimals)}"
        t_bare, m_bare, c_bare = median_measure([sys.executable, "-c", BARE_DUCKDB, str(data)], args.repeat)
        t_ours, m_ours, c_ours = median_measure(ours(plan, out, "json"), args.repeat)
        row(f"bare DuckDB GROUP BY, {kind}", big, t_bare, m_bare, None, t_bare, c_bare)
        row(f"default plan, {kind}, json (÷ DuckDB)", big, t_ours, m_ours, out, t_bare, c_ours)
        if not args.ratios:
            t_sm, m_sm, c_sm = median_measure([sys.executable, "-c", PANDAS_STATSMODELS, str(data)], args.repeat)
            row(f"pandas + statsmodels, {kind} (÷ DuckDB)", big, t_sm, m_sm, None, t_bare, c_sm)
    if args.huge:
        n = 10**8
        data = write_rows(folder, n, "parquet")
        plan = write_plan(folder, data)
        out = folder / "out-huge"
        t, m, c = measure(ours(plan, out, "json"))
        row("default plan, parquet, 3 decimals, json (10^8)", n, t, m, out, cpu=c)
    print(f"load average after: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    if args.folder is None:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
