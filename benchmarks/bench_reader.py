"""Where the out-of-core reader (DuckDB) starts to pay: both readers on the same files.

For each size, the default plan runs as ``anova-report run --format json --quiet`` in a child
process, once with ``[data] reader = "in-memory"`` and once with ``"out-of-core"``, on Parquet and
CSV files of simulated data (``make_scale_data.py``); wall time and peak RSS come from outside
(``os.wait4``). The last lines print, per format, the smallest file size at which the
out-of-core run was faster, the figure behind ``OUT_OF_CORE_BYTES`` in
``reporter/intake/defaults.py`` (read the ratios, not the seconds: these machines are noisy).
With ``--reader-only`` only the reading is timed (``reporter.intake.data.load_data``), beside the
bare DuckDB GROUP BY script of ``bench_scale.py``.

    python benchmarks/bench_reader.py [--folder DIR] [--rows 10000,100000,1000000,10000000] [--repeat 1]
"""

from __future__ import annotations

import argparse
import re
import shutil
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from bench_scale import BARE_DUCKDB, median_measure, ours  # noqa: E402
from make_scale_data import write_plan, write_rows  # noqa: E402

READ_ONLY = """
import sys
from reporter.intake.data import load_data
from reporter.intake.plan import load_plan
data = load_data(load_plan(sys.argv[1]))
assert data.n > 0 and data.reader == sys.argv[2]
"""


def with_reader(plan: Path, reader: str) -> Path:
    """A copy of ``plan`` beside it that names the reader."""
    text = plan.read_text(encoding="utf-8")
    text = re.sub(r'^outcome = "y"$', f'outcome = "y"\nreader = "{reader}"', text, count=1, flags=re.M)
    target = plan.with_name(f"{plan.stem}-{reader}.toml")
    target.write_text(text, encoding="utf-8")
    return target


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--folder", type=Path, default=None, help="where to write the data (default: a temporary folder)")
    ap.add_argument("--rows", default="10000,100000,1000000,10000000")
    ap.add_argument("--repeat", type=int, default=1, help="runs per figure (median time, max memory)")
    ap.add_argument("--reader-only", action="store_true", help="time the reading alone, beside a bare DuckDB GROUP BY")
    args = ap.parse_args()
    folder = args.folder or Path(tempfile.mkdtemp(prefix="anova-report-bench-"))
    folder.mkdir(parents=True, exist_ok=True)
    sizes = [int(float(x)) for x in args.rows.split(",")]
    print(f"data in {folder}")
    print("| format | rows | file MB | in-memory s | MB | out-of-core s | MB | ratio |")
    print("|---|---|---|---|---|---|---|---|")
    crossover: dict[str, float | None] = {"parquet": None, "csv": None}
    for fmt in ("parquet", "csv"):
        for n in sizes:
            data = write_rows(folder, n, fmt)
            plan = write_plan(folder, data)
            mb = data.stat().st_size / 1e6
            runs = {}
            for reader in ("in-memory", "out-of-core"):
                p = with_reader(plan, reader)
                if args.reader_only:
                    cmd = [sys.executable, "-c", READ_ONLY, str(p), reader]
                else:
                    cmd = ours(p, folder / f"out-{fmt}-{n}-{reader}", "json")
                runs[reader] = median_measure(cmd, args.repeat)
            (t_mem, m_mem, _), (t_ooc, m_ooc, _) = runs["in-memory"], runs["out-of-core"]
            print(f"| {fmt} | {n:,} | {mb:.1f} | {t_mem:.2f} | {m_mem:.0f} | {t_ooc:.2f} | {m_ooc:.0f} | "
                  f"{t_ooc / t_mem:.2f} |", flush=True)
            if t_ooc < t_mem and crossover[fmt] is None:
                crossover[fmt] = mb
            if args.reader_only and n == sizes[-1]:
                t_bare, m_bare, _ = median_measure([sys.executable, "-c", BARE_DUCKDB, str(data)], args.repeat)
                print(f"| {fmt} bare DuckDB GROUP BY | {n:,} | {mb:.1f} | | | {t_bare:.2f} | {m_bare:.0f} | "
                      f"reader ÷ bare {t_ooc / t_bare:.2f} |", flush=True)
    for fmt, mb in crossover.items():
        print(f"{fmt}: out-of-core faster from {mb:.1f} MB" if mb else f"{fmt}: in-memory faster at every size tried")
    if args.folder is None:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
