"""The DuckDB connection (memory limit, threads, spill folder), SQL literals, the progress bar of
long queries, and DuckDB's reading errors as one-line messages."""

from __future__ import annotations

import os
import re
import shutil
import sys
import threading
import time

import numpy as np

from reporter.errors import DataError

MEMORY_LIMIT = "200MB"
MAX_THREADS = 4


def _lit(text: str) -> str:
    """A SQL string literal."""
    return "'" + str(text).replace("'", "''") + "'"


def _ident(name: str) -> str:
    return '"' + str(name).replace('"', '""') + '"'


def _connect(folder: str):
    import duckdb

    threads = max(1, min(MAX_THREADS, os.cpu_count() or 1))
    # An in-memory database: its blocks spill to ``temp_directory`` beyond the memory limit, and
    # it writes three times faster than a database file (measured).
    con = duckdb.connect(
        ":memory:",
        config={"memory_limit": MEMORY_LIMIT, "threads": threads, "temp_directory": os.path.join(folder, "spill")},
    )
    con.execute("SET enable_progress_bar = true")
    con.execute("SET enable_progress_bar_print = false")
    return con


def _close(con, folder: str) -> None:
    try:
        con.close()
    except Exception:  # already closed or the interpreter is shutting down
        pass
    shutil.rmtree(folder, ignore_errors=True)


class _Progress:
    """A tqdm bar on stderr for a DuckDB query that runs longer than about a second.

    Silent when stderr is not a terminal or when ``quiet`` is set (``ANOVA_REPORT_QUIET=1``).
    """

    def __init__(self, con, label: str, quiet: bool):
        self.con, self.label = con, label
        self.enabled = not quiet and hasattr(sys.stderr, "isatty") and sys.stderr.isatty()
        self.done = threading.Event()
        self.thread = None

    def __enter__(self):
        if self.enabled:
            self.thread = threading.Thread(target=self._poll, daemon=True)
            self.thread.start()
        return self

    def _poll(self):
        from tqdm import tqdm

        start, bar = time.monotonic(), None
        while not self.done.wait(0.2):
            try:
                pct = float(self.con.query_progress())
            except Exception:
                return
            if bar is None and time.monotonic() - start > 1.0 and pct >= 0:
                bar = tqdm(total=100, desc=self.label, unit="%", file=sys.stderr, leave=False,
                           bar_format="{desc}: {percentage:3.0f}%|{bar}| {elapsed}")
            if bar is not None and pct >= 0:
                bar.n = min(100.0, pct)
                bar.refresh()
        if bar is not None:
            bar.close()

    def __exit__(self, *exc):
        self.done.set()
        if self.thread is not None:
            self.thread.join()


def _quiet() -> bool:
    return os.environ.get("ANOVA_REPORT_QUIET", "") not in ("", "0")


def _doubles(values) -> str:
    """A SQL list of DOUBLE constants (exact: DuckDB parses the shortest repr back to the same
    double), indexed by ``cell + 1`` to give per-cell parameters without a join."""
    return "[" + ", ".join(f"CAST('{float(v)!r}' AS DOUBLE)" for v in np.asarray(values, dtype=np.float64).tolist()) + "]"


_LINE = re.compile(r"CSV Error on Line: (\d+)")
_FILE = re.compile(r"^\s*file = (.+)$", re.M)


def _short_error(exc: Exception) -> str:
    return str(exc).strip().splitlines()[0][:300]


def _run(con, sql: str, source: str) -> None:
    """Run a reading query; DuckDB's reading errors become one-line messages."""
    import duckdb

    t0 = time.perf_counter()
    try:
        con.execute(sql)
        if os.environ.get("ANOVA_REPORT_TRACE"):
            with open(os.environ["ANOVA_REPORT_TRACE"], "a", encoding="utf-8") as fh:
                fh.write(f"-- {time.perf_counter() - t0:.2f} s\n{sql};\n")
    except duckdb.Error as exc:
        msg = str(exc)
        line = _LINE.search(msg)
        fm = _FILE.search(msg)
        where = (fm.group(1).strip() if fm else source) + (f", line {line.group(1)}" if line else "")
        m = re.search(r"Expected Number of Columns: (\d+) Found: (\d+)", msg)
        if m:
            raise DataError(
                f"{where}: has {m.group(2)} fields but the header has {m.group(1)}. "
                "Check for a stray separator or an unquoted text with the separator in it."
            ) from None
        if "Invalid unicode" in msg:
            raise DataError(
                f"{where}: is not UTF-8 text. Save the file as UTF-8 (for example 'CSV UTF-8' in a "
                "spreadsheet program) and run again."
            ) from None
        if "unterminated quote" in msg:
            raise DataError(f"{where}: cannot be read (a quoted value is not closed). Close the quote or remove it.") from None
        raise DataError(f"{where}: cannot be read ({_short_error(exc)}).") from None
