"""Simulated benchmark data of any size, written in chunks so that memory stays flat.

The scenario is invented: reaction times (ms) of four groups (``g`` = a, b, c, d) with means
400, 410, 415, 430 and SD 50, drawn by a seeded generator; no real measurement exists. Files are
written as Parquet (pyarrow, one row group per chunk) or CSV (three decimals), never committed.

    python benchmarks/make_scale_data.py FOLDER --rows 1000000 --format parquet,csv
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

GROUPS = ("a", "b", "c", "d")
MEANS = (400.0, 410.0, 415.0, 430.0)
SD = 50.0
CHUNK = 1_000_000

PLAN = """# Benchmark plan (simulated data, see benchmarks/make_scale_data.py): the default [analysis].
title = "Reaction time in four groups (simulated benchmark data)"
[data]
path = "{path}"
outcome = "y"
[[factors]]
name = "g"
levels = ["a", "b", "c", "d"]
[[hypotheses]]
name = "b is slower than a"
means = "b > a"
[[hypotheses]]
name = "groups differ"
effect = "g"
"""


def _chunks(rows: int, seed: int):
    rng = np.random.default_rng(seed)
    done = 0
    while done < rows:
        m = min(CHUNK, rows - done)
        g = rng.integers(0, len(GROUPS), m)
        y = np.asarray(MEANS)[g] + SD * rng.standard_normal(m)
        yield g, np.round(y, 3)
        done += m


def write_rows(folder: Path, rows: int, fmt: str, seed: int = 20261202) -> Path:
    """Write ``rows`` simulated rows as ``fmt`` ("parquet" or "csv"); reuse an existing file."""
    folder = Path(folder)
    path = folder / f"rt-{rows}.{fmt}"
    if path.exists():
        return path
    tmp = path.with_suffix(path.suffix + ".part")
    labels = np.asarray(GROUPS)
    if fmt == "parquet":
        import pyarrow as pa
        import pyarrow.parquet as pq

        schema = pa.schema([("g", pa.string()), ("y", pa.float64())])
        with pq.ParquetWriter(tmp, schema) as writer:
            for g, y in _chunks(rows, seed):
                writer.write_table(pa.table({"g": labels[g], "y": y}, schema=schema))
    elif fmt == "csv":
        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            fh.write("g,y\n")
            for g, y in _chunks(rows, seed):
                lines = np.char.add(np.char.add(labels[g], ","), np.char.mod("%.3f", y))
                fh.write("\n".join(lines.tolist()))
                fh.write("\n")
    else:
        raise ValueError(f"unknown format {fmt!r}")
    tmp.rename(path)
    return path


def write_plan(folder: Path, data: Path) -> Path:
    """A plan file beside ``data`` that reads it with the default analysis options."""
    plan = Path(folder) / f"plan-{Path(data).stem}-{Path(data).suffix.lstrip('.')}.toml"
    plan.write_text(PLAN.format(path=Path(data).name), encoding="utf-8")
    return plan


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("folder", type=Path)
    ap.add_argument("--rows", type=int, required=True)
    ap.add_argument("--format", default="parquet")
    args = ap.parse_args()
    args.folder.mkdir(parents=True, exist_ok=True)
    for fmt in args.format.split(","):
        data = write_rows(args.folder, args.rows, fmt)
        print(data, write_plan(args.folder, data))


if __name__ == "__main__":
    main()
