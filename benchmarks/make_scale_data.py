"""Simulated benchmark data of any size, written in chunks so that memory stays flat.

The scenario is invented: reaction times (ms) of four groups (``g`` = a, b, c, d) with means
400, 410, 415, 430 and SD 50, drawn by a seeded generator; no real measurement exists. Files are
written as Parquet (pyarrow, one row group per chunk) or CSV, never committed. The outcome is
rounded to three decimals (``rt-ROWS.FORMAT``: few distinct values, as measured data often are)
or kept at full float64 precision (``--decimals full``, ``rt-ROWS-full.FORMAT``: nearly every
value distinct; the same draws unrounded).

    python benchmarks/make_scale_data.py FOLDER --rows 1000000 --format parquet,csv [--decimals 3|full]
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


def _chunks(rows: int, seed: int, decimals: int | None):
    rng = np.random.default_rng(seed)
    done = 0
    while done < rows:
        m = min(CHUNK, rows - done)
        g = rng.integers(0, len(GROUPS), m)
        y = np.asarray(MEANS)[g] + SD * rng.standard_normal(m)
        yield g, (y if decimals is None else np.round(y, decimals))
        done += m


def data_name(rows: int, fmt: str, decimals: int | None = 3) -> str:
    """The file name: ``rt-ROWS.FORMAT`` for three decimals (the names of existing files),
    ``rt-ROWS-dDECIMALS.FORMAT`` for other roundings, ``rt-ROWS-full.FORMAT`` unrounded."""
    tag = "" if decimals == 3 else "-full" if decimals is None else f"-d{decimals}"
    return f"rt-{rows}{tag}.{fmt}"


def describe(decimals: int | None) -> str:
    """How the outcome is written, for tables."""
    return "full precision" if decimals is None else f"{decimals} decimals"


def write_rows(folder: Path, rows: int, fmt: str, seed: int = 20261202, decimals: int | None = 3) -> Path:
    """Write ``rows`` simulated rows as ``fmt`` ("parquet" or "csv"), the outcome rounded to
    ``decimals`` places (None: full float64 precision, written in CSV as the shortest text that
    reads back to the same double); reuse an existing file."""
    folder = Path(folder)
    path = folder / data_name(rows, fmt, decimals)
    if path.exists():
        return path
    tmp = path.with_suffix(path.suffix + ".part")
    labels = np.asarray(GROUPS)
    if fmt == "parquet":
        import pyarrow as pa
        import pyarrow.parquet as pq

        schema = pa.schema([("g", pa.string()), ("y", pa.float64())])
        with pq.ParquetWriter(tmp, schema) as writer:
            for g, y in _chunks(rows, seed, decimals):
                writer.write_table(pa.table({"g": labels[g], "y": y}, schema=schema))
    elif fmt == "csv":
        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            fh.write("g,y\n")
            for g, y in _chunks(rows, seed, decimals):
                texts = np.char.mod(f"%.{decimals}f", y) if decimals is not None else np.array([repr(v) for v in y.tolist()])
                lines = np.char.add(np.char.add(labels[g], ","), texts)
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
    ap.add_argument("--decimals", default="3", help="decimals of the outcome, or 'full' for unrounded float64")
    args = ap.parse_args()
    decimals = None if args.decimals == "full" else int(args.decimals)
    args.folder.mkdir(parents=True, exist_ok=True)
    for fmt in args.format.split(","):
        data = write_rows(args.folder, args.rows, fmt, decimals=decimals)
        print(data, write_plan(args.folder, data))


if __name__ == "__main__":
    main()
