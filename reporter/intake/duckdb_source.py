"""Out-of-core intake: data files read by DuckDB, the rows never loaded into Python.

For large files (and for globs of many files) :func:`load_out_of_core` reads CSV, TSV or Parquet
with DuckDB and returns a :class:`~reporter.intake.data.Dataset` that carries the cell table
(:class:`~reporter.intake.cells.CellStats`) and a :class:`DuckRows`, the DuckDB answer to the
row-access questions (:mod:`reporter.intake.rows`); its per-row arrays are empty.

How the rows are read, in two scans of the files:

1. **Levels and outcome shape.** One ``GROUP BY`` over the factor columns gives every
   combination of raw factor values with its row count, its first row, its first valid outcome
   and the digit counts of its valid outcomes. The distinct values are matched to the plan's
   levels in Python by the same rules as the in-memory reader (``level_key``: ``1`` matches
   ``1.0``, text trimmed, missing tokens, excluded levels; unknown levels are listed with their
   counts and first row, in the same message).
2. **One compact table.** Each row is written once to a table in a temporary DuckDB database
   (on disk, so DuckDB may spill under its memory limit): its row number, the reason it was left
   out (0 for analysed rows), its design cell (row-major over the plan's level order, as
   ``numpy.ravel_multi_index``) and its outcome as an offset from the pivot.

**The exact-decimal route for text.** The outcome is read as text; only plain decimal numbers
count (optional sign, digits with one optional point, optional exponent; no ``1_000``, no
non-ASCII digits, nothing beyond the float64 range), else the row is "non-numeric". The pivot
(the first valid analysed value, as in the in-memory reader) is subtracted in DECIMAL arithmetic
at a scale wide enough for every value, and only the difference becomes DOUBLE. When the values
need more than 37 significant decimal places (rare: wildly different magnitudes or exponents),
the difference is taken in DOUBLE and ``exact_decimal`` is False. Parquet and other float64
input is subtracted in DOUBLE, as in the in-memory reader.

**Cell statistics** use the corrected two-pass algorithm in SQL (Chan, Golub & LeVeque 1983,
The American Statistician 37(3), 242-247, eq. 1.7): n and a compensated sum (DuckDB's ``fsum``,
Kahan-Babuska summation) of the offsets first, then Σ(d − m) and Σ(d − m)² around that mean.

**Row numbers.** As a person finds them: for one text file the line on which the record ends
(the header is line 1, blank lines and quoted line breaks counted), for one Parquet file the
1-based row. For a glob, rows are numbered 1, 2, ... through the matched files in sorted order
(headers not counted).

**Globs.** A ``[data] path`` whose file-name part holds ``*`` or ``?`` names every file it matches
(Python's :func:`glob.glob`, sorted); all must share the header (text) or the needed columns
(Parquet). The data hash is then SHA-256 over, for each matched file in sorted order, its name,
a NUL byte, its own SHA-256 in hex and a newline.

**Resources.** DuckDB runs with ``memory_limit`` = :data:`MEMORY_LIMIT` and at most
:data:`MAX_THREADS` threads, its temporary files in a private folder removed when the data set
is closed or collected.
"""

from __future__ import annotations

import codecs
import csv
import decimal
import glob as _glob
import hashlib
import io
import math
import os
import re
import shutil
import sys
import tempfile
import threading
import time
import weakref
from bisect import bisect_right
from dataclasses import dataclass
from fractions import Fraction
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from reporter.errors import DataError
from reporter.intake import defaults as D
from reporter.intake import numtext
from reporter.intake.cells import CellStats
from reporter.intake.rows import CellPoints, FlaggedRows, RankSums, sample_positions

MEMORY_LIMIT = "200MB"
MAX_THREADS = 4
_LEVEL_CAP = 100_000  # distinct factor-value combinations fetched into Python
# What str.strip() removes: every character whose str.isspace() is true (a test checks the list).
_WS = "\t\n\x0b\x0c\r\x1c\x1d\x1e\x1f \x85\xa0\u1680\u2000\u2001\u2002\u2003\u2004\u2005\u2006\u2007\u2008\u2009\u200a\u2028\u2029\u202f\u205f\u3000"
_NA_WORDS = ("nan", "+nan", "-nan")  # missing whatever the plan lists, as in the in-memory reader


def is_glob(path: Path | str) -> bool:
    """A data path names several files when its file-name part holds ``*`` or ``?``."""
    name = Path(path).name
    return "*" in name or "?" in name


def matched_files(path: Path) -> list[Path]:
    """The files a data path names (one, or every match of a glob in sorted order)."""
    if not is_glob(path):
        return [path]
    found = sorted(Path(p) for p in _glob.glob(str(path)) if Path(p).is_file())
    if not found:
        raise DataError(
            f"{path}: no file matches this pattern. Check [data] path in the plan (it is relative "
            "to the plan file; * matches any part of a file name)."
        )
    for p in found:
        if any(ch in p.name for ch in "*?[]"):
            raise DataError(
                f"{p}: a file matched by the pattern has *, ?, [ or ] in its name, which the "
                "reader would take as a pattern. Rename the file."
            )
    suffixes = {p.suffix.lower() for p in found}
    if len(suffixes) > 1:
        raise DataError(f"{path}: the pattern matches files of several kinds ({', '.join(sorted(suffixes))}); name one kind.")
    return found


def use_out_of_core(plan) -> bool:
    """Whether the plan's data go through this reader: ``[data] reader`` says so, or (when it is
    "automatic") the path is a glob or the file holds at least ``OUT_OF_CORE_BYTES``."""
    from reporter.intake.defaults import OUT_OF_CORE_BYTES

    reader = getattr(plan.data, "reader", "automatic")
    path = plan.data.path
    if reader == "in-memory":
        if is_glob(path):
            raise DataError(
                f"{path}: names several files (a pattern), which only the out-of-core reader reads. "
                'Set [data] reader = "out-of-core" or "automatic", or name one file.'
            )
        return False
    if reader == "out-of-core" or is_glob(path):
        return True
    try:
        return path.is_file() and path.stat().st_size >= OUT_OF_CORE_BYTES
    except OSError:
        return False


# ---------------------------------------------------------------------------------------------
# SQL helpers


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


# ---------------------------------------------------------------------------------------------
# Files: hash, header, line numbers


def _file_digest(path: Path, count_lines: bool) -> tuple[str, int, bool]:
    """SHA-256 of a file, its number of line feeds, and whether it ends with one."""
    h = hashlib.sha256()
    lines, last = 0, b""
    try:
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(1 << 22), b""):
                h.update(block)
                if count_lines:
                    lines += block.count(b"\n")
                last = block[-1:]
    except OSError as exc:
        raise DataError(f"{path}: cannot be read ({exc.strerror}).") from None
    return h.hexdigest(), lines, last == b"\n"


def _read_header(path: Path, delimiter: str) -> tuple[list[str], int]:
    """The header fields of a text file (trimmed) and the line on which the header ends."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(1 << 20)
    except OSError as exc:
        raise DataError(f"{path}: cannot be read ({exc.strerror}).") from None
    if not head.strip():
        raise DataError(f"{path}: the file is empty. It needs a header row and data rows.")
    try:
        text = codecs.getincrementaldecoder("utf-8-sig")().decode(head, final=False)
    except UnicodeDecodeError as exc:
        line = head[: exc.start].count(b"\n") + 1
        raise DataError(
            f"{path}: is not UTF-8 text: line {line} holds the byte 0x{head[exc.start]:02x} "
            f"(file offset {exc.start}). Save the file as UTF-8 (for example 'CSV UTF-8' in a "
            "spreadsheet program) and run again."
        ) from None
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    try:
        header = next(reader)
    except (StopIteration, csv.Error) as exc:
        raise DataError(f"{path}, line 1: cannot be read as delimited text ({exc}).") from None
    return [h.strip() for h in header], reader.line_num


class _RowNumbers:
    """Maps the 1-based record index of the reader to the row number a person finds.

    One text file: the line on which the record ends (header = line 1). When the file has no
    blank line and no quoted line break, that is the index + header lines; otherwise the file is
    scanned once (lazily, only when a row number is shown) for the places where the two drift.
    Parquet: the index itself. Globs: the index through the files in sorted order.
    """

    def __init__(self, kind: str, files: Sequence[Path], delimiter: str, regular: bool, header_lines: int):
        self.kind, self.files, self.delimiter = kind, list(files), delimiter
        self.regular, self.header_lines = regular, header_lines
        self._breaks: tuple[list[int], list[int]] | None = None

    @property
    def word(self) -> str:
        return "line" if self.kind == "text" and len(self.files) == 1 else "row"

    def number(self, idx: int) -> int:
        if self.kind != "text" or len(self.files) > 1:
            return int(idx)
        if self.regular:
            return int(idx) + self.header_lines
        starts, offsets = self._scan()
        return int(idx) + offsets[bisect_right(starts, int(idx)) - 1]

    def _scan(self):
        if self._breaks is None:
            starts, offsets = [1], [self.header_lines]
            with open(self.files[0], encoding="utf-8-sig", newline="") as fh:
                reader = csv.reader(fh, delimiter=self.delimiter)
                next(reader, None)
                idx = 0
                for rec in reader:
                    if not rec or (len(rec) == 1 and not rec[0].strip()):
                        continue
                    idx += 1
                    off = reader.line_num - idx
                    if off != offsets[-1]:
                        starts.append(idx)
                        offsets.append(off)
            self._breaks = (starts, offsets)
        return self._breaks


# ---------------------------------------------------------------------------------------------
# The outcome and the factors as SQL

def _clean_number(raw: Any, plan) -> str | None:
    """The text of a valid outcome (trimmed, decimal comma and U+2212 minus replaced), else None:
    the rule of the in-memory reader (:mod:`reporter.intake.numtext`) that the SQL of
    :func:`_status_sql` applies to every row."""
    t = "" if raw is None else str(raw).strip()
    if t in plan.data.missing or t.lower() in _NA_WORDS:
        return None
    if plan.data.decimal == ",":
        t = t.replace(",", ".")
    t = t.replace("\u2212", "-")
    if numtext.is_plain(t) and len(t) <= D.MAX_NUMBER_CHARS and numtext.range_problem(decimal.Decimal(t)) is None:
        return t
    return None


def _status_sql(y: str, plan) -> tuple[str, str, str, str]:
    """SQL over the raw outcome text ``y``: (fast, trimmed, status, value).

    Each is computed as a column of its own query layer (``fast``, then ``t``, then ``st`` and
    ``yv``), so that DuckDB cannot hoist the costly string work out of its CASE and run it for
    every row. ``fast`` is a cheap test that most valid values pass: no exponent, at most
    ``MAX_NUMBER_CHARS`` characters and a finite DOUBLE cast (which accepts surrounding ASCII
    blanks, so no string is built; without an exponent and within 100 characters the value is
    inside float64's normal range). The other rows are trimmed of every Unicode space (``t``, as
    ``str.strip``) and tested by the regular expression of :mod:`reporter.intake.numtext` and the
    float64 range. ``status`` is 0 valid, 1 missing, 2 anything else (non-numeric, or a number
    the in-memory reader refuses: see :func:`load_out_of_core`). The tests check the SQL against
    :func:`_clean_number` on random texts."""
    fast_text = f"replace({y}, ',', '.')" if plan.data.decimal == "," else y
    numeric_tokens = [m for m in plan.data.missing if _clean_number(m, _NoMissing(plan)) is not None]
    d = f"TRY_CAST({fast_text} AS DOUBLE)"
    fast = (
        f"(strlen({y}) <= {D.MAX_NUMBER_CHARS} AND NOT contains({y}, 'e') AND NOT contains({y}, 'E') "
        f"AND NOT contains({y}, '_') AND NOT contains({y}, '+-') AND NOT contains({y}, '-+') AND isfinite({d}))"
    )
    if numeric_tokens:
        fast = f"({fast} AND trim({y}) NOT IN ({', '.join(map(_lit, numeric_tokens))}))"
    trimmed = f"(CASE WHEN fast THEN NULL ELSE trim(coalesce({y}, ''), {_lit(_WS)}) END)"
    clean = "replace(t, ',', '.')" if plan.data.decimal == "," else "t"
    clean = f"replace({clean}, '\u2212', '-')"
    x = f"TRY_CAST({clean} AS DOUBLE)"
    valid = (
        f"(regexp_full_match({clean}, {_lit(numtext.PLAIN_NUMBER.pattern)}) AND strlen({clean}) <= {D.MAX_NUMBER_CHARS} "
        f"AND isfinite({x}) AND (abs({x}) >= {sys.float_info.min!r} OR NOT regexp_matches(split_part(lower({clean}), 'e', 1), '[1-9]')))"
    )
    missing = ", ".join(_lit(m) for m in plan.data.missing) or "NULL"
    status = (
        f"(CASE WHEN fast THEN 0 WHEN t IN ({missing}) OR lower(t) IN ({', '.join(map(_lit, _NA_WORDS))}) "
        f"THEN 1 WHEN {valid} THEN 0 ELSE 2 END)"
    )
    value = f"(CASE WHEN fast THEN {fast_text} ELSE {clean} END)"
    return fast, trimmed, status, value


class _NoMissing:
    """A stand-in plan whose missing list is empty (to test whether a token is a number)."""

    def __init__(self, plan):
        self.data = type("D", (), {"missing": (), "decimal": plan.data.decimal})()


def _factor_text_sql(col: str, type_name: str | None) -> str:
    """A factor column as the text the in-memory reader matches (``_value_text``): text as is,
    floats through DOUBLE (NaN is missing), booleans as True/False."""
    if type_name is None or type_name.upper() == "VARCHAR":
        return col
    t = type_name.upper()
    if t == "BOOLEAN":
        return f"(CASE WHEN {col} THEN 'True' WHEN NOT {col} THEN 'False' END)"
    if t in ("FLOAT", "DOUBLE", "REAL"):
        return f"(CASE WHEN isnan(CAST({col} AS DOUBLE)) THEN NULL ELSE CAST(CAST({col} AS DOUBLE) AS VARCHAR) END)"
    return f"CAST({col} AS VARCHAR)"


def _level_codes(plan, factor, values: Sequence[str], source: str, line_of, counts=None) -> np.ndarray:
    """Codes of distinct factor texts by the in-memory rules: the level's index, -1 missing,
    -2 excluded; unknown levels raise the in-memory reader's message."""
    from reporter.intake.data import _Encoded, _match_levels

    uniq = np.empty(len(values), dtype=object)
    uniq[:] = list(values)
    codes, missing, excluded = _match_levels(plan, factor, _Encoded(uniq, np.arange(len(uniq))), source, line_of, counts=counts)
    return np.where(missing, -1, np.where(excluded, -2, codes))


def _known_case(plan, factor, fv: str, source: str) -> str:
    """SQL giving the code of each text that is a plan level, an excluded level or a missing
    token as written in the plan; anything else is -9 (resolved in Python afterwards)."""
    from reporter.intake.plan import level_key

    spelled = []
    for lv in (*factor.levels, *factor.exclude):
        key = level_key(lv)
        spelled.append(lv)
        if key[0] == "number":  # how DuckDB and Python write the number: 1, 1.0
            x = key[1]
            spelled.append(repr(float(x)))
            if float(x).is_integer() and abs(x) < 1e16:
                spelled.append(str(int(x)))
    known = list(dict.fromkeys([*plan.data.missing, "", *spelled]))
    codes = _level_codes(plan, factor, known, source, lambda i: "")
    arms = " ".join(f"WHEN {_lit(v)} THEN {int(c)}" for v, c in zip(known, codes))
    return f"(CASE WHEN {fv} IS NULL THEN -1 ELSE (CASE {fv} {arms} ELSE -9 END) END)"


# ---------------------------------------------------------------------------------------------
# The data set


def _head_rows(con, path: Path, scan_sql: str, text: bool, delimiter: str, idx: dict[str, int], fexprs, yname):
    """The first rows of the (first) file as (factor values, outcome) for choosing the pivot."""
    if text:
        with open(path, "rb") as fh:
            head = fh.read(1 << 20)
        chunk = codecs.getincrementaldecoder("utf-8-sig")(errors="replace").decode(head, final=False)
        reader = csv.reader(io.StringIO(chunk, newline=""), delimiter=delimiter)
        next(reader, None)
        out = []
        try:
            for rec in reader:
                if len(out) >= 1000:
                    break
                if len(rec) != len(idx.get("__width__", [])) and "__width__" in idx:
                    continue
                out.append(([rec[i] if i < len(rec) else None for i in idx["__factors__"]],
                            rec[idx["__y__"]] if idx["__y__"] < len(rec) else None))
        except csv.Error:
            pass
        return out[:-1] if len(out) > 1 else out  # the last record may be cut by the chunk
    sel = ", ".join(fexprs)
    return [(list(r[:-1]), r[-1]) for r in con.execute(f"SELECT {sel}, {yname} FROM {scan_sql} LIMIT 1000").fetchall()]


def load_out_of_core(plan, quiet: bool | None = None):
    """Read the plan's data file(s) with DuckDB; see the module docstring."""
    from reporter.intake.data import Exclusion, _needed_columns, require_file, rowless_dataset

    quiet = _quiet() if quiet is None else quiet
    path = plan.data.path
    files = [require_file(f) for f in matched_files(path)]
    source = str(path)
    suffix = files[0].suffix.lower()
    text = suffix != ".parquet"
    fmt = suffix.lstrip(".")
    delimiter = plan.data.delimiter or ("\t" if suffix == ".tsv" else ",")
    nf = len(plan.factors)

    # Hash the files in a thread while DuckDB reads them.
    digests: list[Any] = [None] * len(files)

    def hash_all():
        for i, f in enumerate(files):
            try:
                digests[i] = _file_digest(f, count_lines=text)
            except DataError as exc:
                digests[i] = exc

    hasher = threading.Thread(target=hash_all, daemon=True)
    hasher.start()

    folder = tempfile.mkdtemp(prefix="anova-report-")
    con = _connect(folder)
    try:
        header_lines = 1
        file_list = "[" + ", ".join(_lit(f.as_posix()) for f in files) + "]"
        types: dict[str, str | None] = {}
        if text:
            header, header_lines = _read_header(files[0], delimiter)
            for f in files[1:]:
                other, _ = _read_header(f, delimiter)
                if other != header:
                    raise DataError(
                        f"{f}: its header ({', '.join(other[:10])}) differs from that of {files[0].name} "
                        f"({', '.join(header[:10])}). Every file matched by [data] path needs the same columns."
                    )
            columns = header
            names = [f"c{i}" for i in range(len(header))]
            spec = "{" + ", ".join(f"{_lit(n)}: 'VARCHAR'" for n in names) + "}"
            scan = (
                f"read_csv({file_list}, header = true, auto_detect = false, columns = {spec}, "
                f"delim = {_lit(delimiter)}, quote = '\"', escape = '\"', encoding = 'utf-8')"
            )
            col_of = {name: names[header.index(name)] for name in reversed(header)}
        else:
            try:
                rel = con.execute(f"DESCRIBE SELECT * FROM read_parquet({file_list})").fetchall()
            except Exception as exc:
                raise DataError(f"{source}: is not a readable Parquet file ({_short_error(exc)}).") from None
            columns = [r[0] for r in rel]
            types = {r[0]: r[1] for r in rel}
            for name in dict.fromkeys([plan.data.outcome] + [f.data_column for f in plan.factors]):
                kind = str(types.get(name, "")).upper()
                if kind.endswith("]") or kind.startswith(("STRUCT", "MAP", "UNION", "BLOB")) or kind.strip('"') == "NULL":
                    role = "outcome" if name == plan.data.outcome else "factor"
                    need = "a number" if role == "outcome" else "a text or a number"
                    raise DataError(
                        f"{source}: column '{name}' (the {role} named in the plan) has the Parquet type "
                        f"{types[name]}; the {role} needs {need} in every row. Write that column as plain values."
                    )
            col_of = {c: _ident(c) for c in columns}
            scan = f"read_parquet({file_list})"
        _needed_columns(plan, columns, source)
        ycol = col_of[plan.data.outcome]
        ytext = text or not _is_numeric_type(types[plan.data.outcome] or "")
        fexprs = [_factor_text_sql(col_of[f.data_column], types.get(f.data_column)) for f in plan.factors]

        # The pivot: the first valid outcome of an analysed row near the top of the file.
        if text:
            hidx = {"__factors__": [header.index(f.data_column) for f in plan.factors],
                    "__y__": header.index(plan.data.outcome), "__width__": header}
        else:
            hidx = {}
        yread = f"CAST({ycol} AS VARCHAR)" if ytext else f"CAST({ycol} AS DOUBLE)"
        pivot_raw = None
        head_texts: list[str] = []
        for fvals, yv in _head_rows(con, files[0], scan, text, delimiter, hidx, fexprs, yread):
            if ytext:
                cleaned = _clean_number(yv, plan)
            else:
                cleaned = yv if (yv is not None and math.isfinite(yv)) else None
            if cleaned is None or pivot_raw is not None:
                if cleaned is not None and ytext:
                    head_texts.append(cleaned)
                continue
            if ytext:
                head_texts.append(cleaned)
            try:
                ok = all(_level_codes(plan, f, [v if v is not None else ""], source, lambda i: "")[0] >= 0
                         for f, v in zip(plan.factors, fvals))
            except DataError:
                ok = False
            if ok:
                pivot_raw = cleaned

        # The outcome as SQL.
        if ytext:
            fast_sql, t_sql, st_sql, yv_sql = _status_sql("y", plan)
            layer0 = f"CAST({ycol} AS VARCHAR) AS y"
        else:
            fast_sql, t_sql = "isfinite(y)", "CAST(NULL AS VARCHAR)"
            st_sql = "(CASE WHEN y IS NULL OR isnan(y) THEN 1 WHEN NOT isfinite(y) THEN 2 ELSE 0 END)"
            yv_sql = "y"
            layer0 = f"CAST({ycol} AS DOUBLE) AS y"
        if pivot_raw is None:  # no analysed row near the top: any valid value serves as pivot
            got = con.execute(
                f"SELECT {yv_sql} FROM (SELECT *, {t_sql} AS t FROM (SELECT *, {fast_sql} AS fast FROM "
                f"(SELECT {layer0} FROM {scan}))) WHERE {st_sql} = 0 LIMIT 1"
            ).fetchall()
            pivot_raw = got[0][0] if got else None

        exact = ytext
        if pivot_raw is None:
            pivot, pivot_text, value_sql = 0.0, "0", "NULL::DOUBLE"
        elif ytext:
            pv = decimal.Decimal(pivot_raw)
            pivot, pivot_text = float(pv), str(pv)
            value_sql, exact = _offset_sql(pv, head_texts)
        else:
            pivot = float(pivot_raw)
            pivot_text = repr(pivot)
            value_sql = f"(yv - CAST({_lit(repr(pivot))} AS DOUBLE))"

        # One scan: the compact table (factor codes, outcome status, offset from the pivot).
        keep = [f"c{j}" for j in range(nf)] + [f"v{j}" for j in range(nf)]
        bad_sql = "t" if ytext else "CAST(y AS VARCHAR)"
        layers = [
            ", ".join([f"{fexprs[j]} AS v{j}" for j in range(nf)] + [layer0]),
            ", ".join([f"{_known_case(plan, f, f'v{j}', source)} AS c{j}" for j, f in enumerate(plan.factors)]
                      + [f"v{j}" for j in range(nf)] + ["y", f"{fast_sql} AS fast"]),
            ", ".join(keep + ["y", "fast", f"{t_sql} AS t"]),
            ", ".join(keep + ["y", "t", f"{st_sql} AS st", f"{yv_sql} AS yv"]),
        ]
        query = f"SELECT {layers[0]} FROM {scan}"
        for layer in layers[1:]:
            query = f"SELECT {layer} FROM ({query})"
        final = ", ".join([f"CAST(c{j} AS SMALLINT) AS c{j}" for j in range(nf)]
                          + ["CAST(st AS TINYINT) AS st", f"CASE WHEN st = 0 THEN {value_sql} END AS d"])
        with _Progress(con, "Reading the data", quiet):
            _run(con, f"CREATE TABLE obs AS SELECT {final} FROM ({query})", source)
        hasher.join()
        for d in digests:
            if isinstance(d, DataError):
                raise d
        unresolved = " OR ".join(f"c{j} = -9" for j in range(nf))
        n_read, n_odd = con.execute(
            f"SELECT count(*), count(*) FILTER (WHERE {unresolved} OR st = 2) FROM obs"
        ).fetchall()[0]
        n_read = int(n_read)
        regular = False
        if text and len(files) == 1:
            _, newlines, ends_nl = digests[0]
            regular = newlines + (0 if ends_nl else 1) == n_read + header_lines
        rownum = _RowNumbers("text" if text else "parquet", files, delimiter, regular, header_lines)
        if n_read == 0:
            if text:
                raise DataError(f"{source}: has a header but no data rows.")
            raise DataError(f"{source}: has no data rows.")

        # The texts of rows with a factor value not written as in the plan or a non-numeric
        # outcome, kept apart (text columns in the big table would cost 16 bytes a row).
        extra = ", ".join([f"CASE WHEN c{j} = -9 THEN v{j} END AS u{j}" for j in range(nf)]
                          + [f"CASE WHEN st = 2 THEN {bad_sql} END AS bad"])
        con.execute(
            f"CREATE TEMP TABLE extra AS SELECT r, {extra} FROM (SELECT row_number() OVER () AS r, * FROM ({query})) "
            + (f"WHERE {unresolved} OR st = 2" if n_odd else "WHERE false")
        )

        # Factor values not written as in the plan: matched by the in-memory rules.
        for j, f in enumerate(plan.factors):
            other = con.execute(
                f"SELECT u{j}, count(*), min(r) FROM extra WHERE u{j} IS NOT NULL GROUP BY u{j} ORDER BY u{j} "
                f"LIMIT {_LEVEL_CAP + 1}"
            ).fetchall()
            if not other:
                continue
            if len(other) > _LEVEL_CAP:
                raise DataError(
                    f"{source}: column '{f.data_column}' (factor '{f.name}') holds more than "
                    f"{_LEVEL_CAP:,} distinct values. Check that [[factors]] column names the right column."
                )
            firsts = [int(r) for _, _, r in other]
            codes = _level_codes(
                plan, f, [v for v, _, _ in other], source,
                lambda u, _firsts=firsts: f"{rownum.word} {rownum.number(_firsts[u])}",
                counts=np.array([int(c) for _, c, _ in other], dtype=np.int64),
            )
            con.execute("CREATE OR REPLACE TEMP TABLE lv (u VARCHAR, code SMALLINT)")
            con.executemany("INSERT INTO lv VALUES (?, ?)", [[v, int(c)] for (v, _, _), c in zip(other, codes)])
            con.execute(
                f"UPDATE obs SET c{j} = m.code FROM (SELECT e.r, lv.code FROM extra e JOIN lv ON e.u{j} = lv.u) m "
                "WHERE obs.rowid + 1 = m.r"
            )

        # Outcomes that read as numbers but break the plain-decimal rule or float64's range are
        # errors in analysed rows, as in the in-memory reader, whose check runs on each such text
        # (in the order of their first rows, so the first offending row is named).
        factor_kept = " AND ".join(f"c{j} >= 0" for j in range(nf))
        odd = con.execute(
            f"SELECT e.bad, min(e.r) AS first FROM extra e JOIN (SELECT rowid + 1 AS r FROM obs WHERE st = 2 AND "
            f"{factor_kept}) k USING (r) GROUP BY e.bad ORDER BY first"
        ).fetchall() if n_odd else []
        for value, first in odd:
            _refuse(plan, value, ytext, source, f"{rownum.word} {rownum.number(first)}")

        shape = tuple(len(f.levels) for f in plan.factors)
        strides = [int(np.prod(shape[j + 1 :])) for j in range(nf)]
        cell_sql = " + ".join(f"CAST(c{j} AS INTEGER) * {strides[j]}" for j in range(nf))
        reason_sql = "CASE " + " ".join(
            f"WHEN c{j} = -1 THEN {2 * j + 1} WHEN c{j} = -2 THEN {2 * j + 2}" for j in range(nf)
        ) + f" WHEN st = 1 THEN {2 * nf + 1} WHEN st = 2 THEN {2 * nf + 2} ELSE 0 END"
        levels_sql = ", ".join(f"c{j}" for j in range(nf))
        con.execute(
            f"CREATE VIEW rowinfo AS SELECT rowid + 1 AS r, {reason_sql} AS reason, {cell_sql} AS cell, "
            f"d, {levels_sql} FROM obs"
        )
        all_kept = " AND ".join([f"c{j} >= 0" for j in range(nf)] + ["st = 0"])
        con.execute(f"CREATE VIEW kept AS SELECT rowid + 1 AS r, rowid AS id, {cell_sql} AS cell, d FROM obs WHERE {all_kept}")

        # Exclusions by reason, with the first row numbers.
        reasons = []
        for j, f in enumerate(plan.factors):
            reasons.append((2 * j + 1, f"missing value of factor '{f.name}'", ""))
            listed = ", ".join(f'"{e}"' for e in f.exclude)
            reasons.append((2 * j + 2, f"level of '{f.name}' excluded by the plan", f"excluded: {listed}"))
        reasons.append((2 * nf + 1, f"missing outcome '{plan.data.outcome}'", ""))
        reasons.append((2 * nf + 2, f"non-numeric outcome '{plan.data.outcome}'", None))
        count_by = dict(con.execute("SELECT reason, count(*) FROM rowinfo WHERE reason > 0 GROUP BY reason").fetchall())
        exclusions = []
        for code, text_reason, detail in reasons:
            cnt = int(count_by.get(code, 0))
            if not cnt:
                continue
            first = con.execute(
                f"SELECT i.r, e.bad FROM (SELECT r FROM rowinfo WHERE reason = {code} ORDER BY r LIMIT 20) i "
                "LEFT JOIN extra e USING (r) ORDER BY i.r"
            ).fetchall()
            if detail is None:
                detail = "; ".join(f'{rownum.word} {rownum.number(r)}: "{b}"' for r, b in first[:5])
            exclusions.append(Exclusion(reason=text_reason, count=cnt, rows=tuple(rownum.number(r) for r, _ in first), detail=detail))

        dropped = con.execute(
            f"SELECT {levels_sql}, count(*) FROM rowinfo WHERE reason IN ({2 * nf + 1}, {2 * nf + 2}) GROUP BY ALL ORDER BY ALL"
        ).fetchall()
        if dropped:
            lv_arr = np.array([r[:nf] for r in dropped], dtype=np.int64).reshape(-1, nf)
            dropped_levels = np.repeat(lv_arr, [r[nf] for r in dropped], axis=0)
        else:
            dropped_levels = np.empty((0, nf), dtype=np.int64)

        k = int(np.prod(shape))
        pivot_exact = Fraction(pivot_text) if exact else Fraction(pivot)
        cells, d_lo, d_hi = cell_stats(con, k, pivot, pivot_exact)
        _check_spread(con, plan, pivot, source, rownum, cells, d_lo, d_hi)
        rows = DuckRows(con, folder, k, rownum, files, cells.n, d_lo, d_hi)
    except BaseException:
        _close(con, folder)
        raise

    sha = digests[0][0] if len(files) == 1 else _glob_digest(files, digests)
    return rowless_dataset(
        plan,
        source=source,
        sha256=sha,
        format=fmt,
        pivot=pivot,
        pivot_text=pivot_text,
        exact_decimal=exact,
        n_read=n_read,
        exclusions=tuple(exclusions),
        dropped_outcome_levels=dropped_levels,
        cells=cells,
        row_access=rows,
        reader="out-of-core",
    )


def _frac_digits(d: decimal.Decimal) -> int:
    return max(-d.as_tuple().exponent, 0) if d.is_finite() else 0


def _offset_sql(pv: decimal.Decimal, head: Sequence[str]) -> tuple[str, bool]:
    """SQL for the outcome text ``yv`` minus the pivot ``pv``, exact before the conversion to
    DOUBLE; and whether the route is exact.

    Three routes, tried in turn per row:

    1. ``DECIMAL(18, s)`` (64-bit, fast) for values written without an exponent and with at most
       ``s`` decimals, ``s`` being the most decimals among the first rows (when they and the
       pivot fit in 18 digits);
    2. ``DECIMAL(37, 34 − t)`` for the rest, ``t`` being the pivot's digits before the point:
       exact for every value below 10^(t+3) with at most 34 − t decimals (the rest rounded at
       that place, 34 digits below the pivot's first, far below float64's 16);
    3. DOUBLE subtraction for values 1000 times the pivot or more, where no cancellation can
       occur, so float64 is as accurate as the value's own rounding.

    When the pivot itself needs more than 34 − t decimals (values spanning wild magnitudes),
    every row takes route 3 and the intake is not exact-decimal.
    """
    pivot_text = str(pv)
    top = max(pv.adjusted() + 1, 1) if pv != 0 else 1
    scale = 34 - top
    as_double = f"(TRY_CAST(yv AS DOUBLE) - CAST({_lit(repr(float(pv)))} AS DOUBLE))"
    if scale < 0 or _frac_digits(pv) > scale:
        return as_double, False
    dec = f"DECIMAL(37, {scale})"
    routes = [f"CAST(TRY_CAST(yv AS {dec}) - CAST({_lit(pivot_text)} AS {dec}) AS DOUBLE)", as_double]
    decs = [decimal.Decimal(t) for t in head if "e" not in t.lower()]
    s18 = max([_frac_digits(d) for d in decs] + [_frac_digits(pv)])
    if "e" not in pivot_text.lower() and top + 2 + s18 <= 18:
        d18 = f"DECIMAL(18, {s18})"
        fits = (
            "(NOT contains(yv, 'e') AND NOT contains(yv, 'E') AND "
            f"(CASE WHEN instr(yv, '.') > 0 THEN strlen(yv) - instr(yv, '.') ELSE 0 END) <= {s18})"
        )
        routes.insert(0, f"(CASE WHEN {fits} THEN CAST(TRY_CAST(yv AS {d18}) - CAST({_lit(pivot_text)} AS {d18}) AS DOUBLE) END)")
    return f"coalesce({', '.join(routes)})", True


def _refuse(plan, value: str, text: bool, source: str, where: str) -> None:
    """Raise the in-memory reader's error for one outcome value of an analysed row, if it has one
    (a non-numeric text that is no number at all is only left out)."""
    from reporter.intake.data import _exact_from_text, _read_outcome

    keep = np.ones(1, dtype=bool)
    if text:
        _exact_from_text(np.array([value], dtype=object), plan, keep, np.zeros(1, dtype=np.int8), source, lambda i: where)
    else:
        _read_outcome(np.array([float(value)]), plan, keep, source, lambda i: where)


def _check_spread(con, plan, pivot: float, source: str, rownum: "_RowNumbers", cells: CellStats,
                  d_lo: np.ndarray, d_hi: np.ndarray) -> None:
    """The in-memory reader's check that the outcome's spread keeps the sums within float64,
    on the smallest and largest analysed values (their rows are looked up only for a message)."""
    from reporter.intake.data import _check_spread as check

    n = int(cells.n.sum())
    if not n:
        return
    ends = [float(np.nanmin(d_lo)), float(np.nanmax(d_hi))]
    lower, upper = numtext.spread_limits(n)
    if math.isfinite(ends[0]) and math.isfinite(ends[1]) and ends[1] - ends[0] <= upper and not 0 < ends[1] - ends[0] < lower:
        return  # within the limits: the check below would pass (its message names rows, looked up)

    def where(i: int) -> str:
        r = con.execute(f"SELECT min(r) FROM kept WHERE d = CAST('{ends[i]!r}' AS DOUBLE)").fetchall()[0][0]
        return f"{rownum.word} {rownum.number(r)}"

    check(np.array(ends), np.ones(2, dtype=bool), 0, pivot, plan, source, where, n_values=n)


def _glob_digest(files: Sequence[Path], digests) -> str:
    h = hashlib.sha256()
    for f, d in zip(files, digests):
        h.update(f.name.encode("utf-8") + b"\0" + d[0].encode("ascii") + b"\n")
    return h.hexdigest()


def _is_numeric_type(type_name: str) -> bool:
    t = type_name.upper()
    return t.startswith(("TINYINT", "SMALLINT", "INTEGER", "BIGINT", "HUGEINT", "UTINYINT", "USMALLINT",
                         "UINTEGER", "UBIGINT", "UHUGEINT", "FLOAT", "DOUBLE", "DECIMAL", "REAL"))


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


# ---------------------------------------------------------------------------------------------
# Cell statistics in SQL


def cell_stats(con, k: int, pivot: float, pivot_exact: Fraction) -> tuple[CellStats, np.ndarray, np.ndarray]:
    """Per-cell n, mean offset and centred SS by the corrected two-pass algorithm in SQL, and
    each cell's smallest and largest offset (from the same scans)."""
    [(n, mean, ss)], (lo, hi) = _moments(con, ["d"], "kept", k, extremes=True)
    for arr in (n, mean, ss):
        arr.setflags(write=False)
    return CellStats(n=n, offset_mean=mean, ss=ss, pivot=float(pivot), pivot_exact=pivot_exact), lo, hi


def _doubles(values) -> str:
    """A SQL list of DOUBLE constants (exact: DuckDB parses the shortest repr back to the same
    double), indexed by ``cell + 1`` to give per-cell parameters without a join."""
    return "[" + ", ".join(f"CAST('{float(v)!r}' AS DOUBLE)" for v in np.asarray(values, dtype=np.float64).tolist()) + "]"


def _moments(con, values: Sequence[str], table: str, k: int, extremes: bool = False):
    """Per cell (n, mean, centred SS) of each expression in ``values``, all from the same two
    scans: first n and a compensated sum give a mean m0; then Σ(v − m0) and Σ(v − m0)² give
    S = Σ(v − m0)² − (Σ(v − m0))²/n and the refined mean m0 + Σ(v − m0)/n (Chan, Golub &
    LeVeque 1983, eq. 1.7). Returns the list of those triples and, with ``extremes``, the
    per-cell (min, max) of the first expression taken in the first scan (else None)."""
    cols = [f"fsum(v{j}) / count(*)" for j in range(len(values))]
    if extremes:
        cols += ["min(v0)", "max(v0)"]
    inner = ", ".join(f"{v} AS v{j}" for j, v in enumerate(values))
    first = con.execute(f"SELECT cell, count(*), {', '.join(cols)} FROM (SELECT cell, {inner} FROM {table}) GROUP BY cell").fetchall()
    n = np.zeros(k, dtype=np.int64)
    m0 = np.zeros((len(values), k))
    lo, hi = np.full(k, np.nan), np.full(k, np.nan)
    for row in first:
        c = row[0]
        n[c] = row[1]
        m0[:, c] = row[2 : 2 + len(values)]
        if extremes:
            lo[c], hi[c] = row[-2:]
    es = ", ".join(f"(v{j} - {_doubles(m0[j])}[cell + 1]) AS e{j}" for j in range(len(values)))
    sums = ", ".join(f"fsum(e{j}), fsum(e{j} * e{j})" for j in range(len(values)))
    second = con.execute(f"SELECT cell, {sums} FROM (SELECT cell, {es} FROM (SELECT cell, {inner} FROM {table})) GROUP BY cell").fetchall()
    out = []
    for j in range(len(values)):
        mean = np.full(k, np.nan)
        ss = np.full(k, np.nan)
        for row in second:
            c, s1, s2 = row[0], row[1 + 2 * j], row[2 + 2 * j]
            mean[c] = m0[j, c] + s1 / n[c]
            ss[c] = max(s2 - s1 * s1 / n[c], 0.0)
        out.append((n.copy(), mean, ss))
    return out, ((lo, hi) if extremes else None)


# ---------------------------------------------------------------------------------------------
# Row access through SQL


class DuckRows:
    """The :class:`~reporter.intake.rows.RowAccess` questions answered by SQL over the compact
    table that :func:`load_out_of_core` wrote (values are offsets from the pivot).

    Quantiles are type 7 (DuckDB's ``quantile_cont``, linear interpolation between order
    statistics, Hyndman & Fan 1996, The American Statistician 50(4), 361-365). The sample is the
    rows at :func:`~reporter.intake.rows.sample_positions`, the rule the in-memory rows use too.
    """

    kind = "duckdb"

    def __init__(self, con, folder: str, k: int, rownum: _RowNumbers, files: Sequence[Path],
                 counts: np.ndarray | None = None, lo: np.ndarray | None = None, hi: np.ndarray | None = None):
        self._con, self._folder, self.k, self._rownum = con, folder, k, rownum
        self.files = tuple(files)
        if counts is None or lo is None or hi is None:
            [(counts, _, _)], (lo, hi) = _moments(con, ["d"], "kept", k, extremes=True)
        self._counts = np.asarray(counts, dtype=np.int64)
        self._lo, self._hi = np.asarray(lo, dtype=np.float64), np.asarray(hi, dtype=np.float64)
        self.n = int(self._counts.sum())
        self._n_obs = int(con.execute("SELECT count(*) FROM obs").fetchall()[0][0])
        self._finalizer = weakref.finalize(self, _close, con, folder)
        self._lock = threading.Lock()
        self._medians: np.ndarray | None = None

    def close(self) -> None:
        self._finalizer()

    def _q(self, sql: str, params: Sequence[Any] = ()):
        with self._lock:
            return self._con.execute(sql, list(params)).fetchall()

    def _np(self, sql: str) -> dict[str, np.ndarray]:
        with self._lock:
            return self._con.execute(sql).fetchnumpy()

    def _observed(self) -> dict[int, int]:
        return {c: int(m) for c, m in enumerate(self._counts.tolist()) if m > 0}

    def medians(self) -> np.ndarray:
        """Per-cell medians from exact order statistics (DuckDB's median aggregate would hold
        every value of a cell in memory); computed once."""
        if self._medians is None:
            out = np.full(self.k, np.nan)
            counts = self._observed()
            bounds = {c: (self._lo[c], self._hi[c]) for c in counts}
            for c, q in self._quantiles(counts, "SELECT cell, d AS v FROM kept", [0.5], bounds).items():
                out[c] = q[0]
            self._medians = out
        return self._medians.copy()

    def deviation_stats(self, centre: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        return self.deviation_stats_many([centre])[0]

    def deviation_stats_many(self, centres: Sequence[np.ndarray]) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
        """:meth:`deviation_stats` about each centre, all from the same two scans."""
        with self._lock:
            return _moments(self._con, [f"abs(d - {_doubles(c)}[cell + 1])" for c in centres], "kept", self.k)[0]

    def rank_sums(self) -> RankSums:
        """Rank sums with mid-ranks for ties, in exact integers (twice each sum): a value shared
        by t rows that has ``below`` rows under it gets rank (2·below + t + 1)/2; the tie term
        is Σ(t³ − t). Up to :data:`_WIDE_CELLS` cells this is one hash aggregate of the rows by
        value (with a count per cell) and one running sum over the distinct values."""
        if self.k <= _WIDE_CELLS:
            counts = ", ".join(f"count(*) FILTER (WHERE cell = {j}) AS c{j}" for j in range(self.k))
            sums = ", ".join(f"sum(CAST(c{j} AS HUGEINT) * (2 * CAST(below AS HUGEINT) + t + 1))" for j in range(self.k))
            got = self._q(
                f"WITH v AS (SELECT d, count(*) AS t, {counts} FROM kept GROUP BY d), "
                "r AS (SELECT *, sum(t) OVER (ORDER BY d ROWS UNBOUNDED PRECEDING) - t AS below FROM v) "
                f"SELECT sum(CAST(t AS HUGEINT) * t * t - t), {sums} FROM r"
            )[0]
            tie, rows = got[0], list(enumerate(got[1:]))
        else:
            rows = self._q(
                "WITH g AS (SELECT d, cell, count(*) AS m FROM kept GROUP BY d, cell), "
                "v AS (SELECT d, sum(m) AS t FROM g GROUP BY d), "
                "r AS (SELECT d, t, sum(t) OVER (ORDER BY d ROWS UNBOUNDED PRECEDING) - t AS below FROM v) "
                "SELECT g.cell, sum(CAST(g.m AS HUGEINT) * (2 * CAST(r.below AS HUGEINT) + CAST(r.t AS HUGEINT) + 1)) "
                "FROM g JOIN r USING (d) GROUP BY g.cell"
            )
            tie = self._q("SELECT sum(t * t * t - t) FROM (SELECT CAST(count(*) AS HUGEINT) AS t FROM kept GROUP BY d)")[0][0]
        rank_sum = np.zeros(self.k)
        for c, twice in rows:
            rank_sum[c] = float(Fraction(int(twice or 0), 2))
        return RankSums(rank_sum=rank_sum, tie_term=float(int(tie or 0)), n=self.n)

    def _order_stats(self, source: str, positions: dict[int, list[int]], bounds: dict[int, tuple[float, float]],
                     counts: dict[int, int]) -> dict[tuple[int, int], float]:
        """Order statistics (0-based ranks within each cell) of ``v`` in ``source``, exactly and
        without a sort: a histogram of equal-width buckets per cell (between the cell's known
        smallest and largest value, ``bounds``) locates each rank's bucket (bucket numbers are
        monotone in the value, so buckets hold consecutive ranks); the values of those buckets
        are fetched and sorted when they number at most :data:`_FETCH`, and a larger bucket is
        refined the same way. Each step is one linear scan with memory bounded by the buckets,
        so it stays out-of-core (the selection algorithm of Floyd & Rivest 1975, CACM 18(3),
        165-172, by bucketing instead of sampling)."""
        result: dict[tuple[int, int], float] = {}
        wanted = {c: sorted({int(q) for q in qs}) for c, qs in positions.items() if qs}
        self._refine(source, "true", wanted, result, 0, bounds, counts)
        return result

    def _refine(self, source: str, where: str, wanted: dict[int, list[int]], result, depth: int,
                bounds: dict[int, tuple[float, float]] | None = None, counts: dict[int, int] | None = None) -> None:
        cells = ", ".join(map(str, sorted(wanted)))
        scope = f"FROM ({source}) WHERE {where} AND cell IN ({cells})"
        if bounds is None:
            bounds = {c: (a, b) for c, a, b in self._q(f"SELECT cell, min(v), max(v) {scope} GROUP BY cell")}
        # Buckets per cell: enough that the buckets holding the wanted ranks are small (about
        # half of _FETCH values in all for evenly spread values, so that one fetch usually ends
        # the search), and at most about 4 million in all (the histogram is fetched as an array).
        need = max(max(16 * len(q), 2 * len(q) * (counts or {}).get(c, 0) * len(wanted) // _FETCH)
                   for c, q in wanted.items())
        nb = min(_MAX_BUCKETS, max(1024, 1 << math.ceil(math.log2(need))))
        nb = max(1024, min(nb, 1 << int(math.log2(max((1 << 22) // len(wanted), 1)))))
        lo = np.zeros(self.k)
        scale = np.zeros(self.k)
        live = {}
        for c, (a, b) in bounds.items():
            if c not in wanted:
                continue
            if a == b:  # every value of the cell (in this bucket) is the same
                result.update({(c, q): float(a) for q in wanted[c]})
                continue
            step = nb / (b - a)
            if not math.isfinite(step):
                step = 0.0  # a range below float64's resolution for the division: one bucket
            lo[c], scale[c], live[c] = a, step, wanted[c]
        if not live:
            return
        bucket = (f"greatest(least(CAST(floor((v - {_doubles(lo)}[cell + 1]) * {_doubles(scale)}[cell + 1]) AS BIGINT), "
                  f"{nb - 1}), 0)")
        cells = ", ".join(map(str, sorted(live)))
        scope = f"FROM ({source}) WHERE {where} AND cell IN ({cells})"
        hist = self._np(f"SELECT key, count(*) AS m FROM (SELECT cell * {nb} + {bucket} AS key {scope}) GROUP BY key")
        key = np.asarray(hist["key"], dtype=np.int64)
        order = sorted(live)
        row = np.zeros(self.k, dtype=np.int64)
        row[order] = np.arange(len(order))
        sizes_arr = np.zeros((len(order), nb), dtype=np.int64)
        np.add.at(sizes_arr, (row[key // nb], key % nb), np.asarray(hist["m"], dtype=np.int64))
        sizes = {c: sizes_arr[row[c]] for c in order}
        targets: dict[tuple[int, int], list[tuple[int, int]]] = {}
        for c, ranks in live.items():
            ends = np.cumsum(sizes[c])
            for q in ranks:
                b = int(np.searchsorted(ends, q, side="right"))
                targets.setdefault((c, b), []).append((q, q - int(ends[b] - sizes[c][b])))
        fetch, total = [], 0
        for (c, b), items in sorted(targets.items(), key=lambda kv: sizes[kv[0][0]][kv[0][1]]):
            m = int(sizes[c][b])
            if total + m <= _FETCH or depth >= 6:
                fetch.append((c, b))
                total += m
            else:
                sub: dict[tuple[int, int], float] = {}
                self._refine(source, f"{where} AND cell = {c} AND {bucket} = {b}", {c: [w for _, w in items]}, sub, depth + 1)
                result.update({(c, q): sub[(c, w)] for q, w in items})
        if fetch:
            keys = [c * nb + b for c, b in fetch]
            with self._lock:
                got = self._con.execute(
                    f"SELECT key, v FROM (SELECT cell * {nb} + {bucket} AS key, v {scope}) "
                    "WHERE key IN (SELECT unnest($1::BIGINT[]))", [keys]).fetchnumpy()
            key = np.asarray(got["key"], dtype=np.int64)
            vals = np.asarray(got["v"], dtype=np.float64)
            order = np.lexsort((vals, key))
            key, vals = key[order], vals[order]
            for c, b in fetch:
                start = int(np.searchsorted(key, c * nb + b, side="left"))
                for q, w in targets[(c, b)]:
                    result[(c, q)] = float(vals[start + w])

    def _quantiles(self, counts: dict[int, int], source: str, probs: Sequence[float],
                   bounds: dict[int, tuple[float, float]]) -> dict[int, np.ndarray]:
        """Type 7 quantiles per cell (numpy's default: h = (n − 1)p, linear interpolation written
        as numpy writes it), from the order statistics of one sort."""
        p = np.asarray(probs, dtype=np.float64)
        plan = {}
        for c, n in counts.items():
            h = (n - 1) * p
            lo = np.floor(h).astype(np.int64)
            hi = np.minimum(lo + 1, n - 1)
            plan[c] = (lo, hi, h - lo)
        stats = self._order_stats(source, {c: [*lo.tolist(), *hi.tolist()] for c, (lo, hi, _) in plan.items()}, bounds, counts)
        out = {}
        for c, (lo, hi, t) in plan.items():
            a = np.array([stats[(c, int(i))] for i in lo])
            b = np.array([stats[(c, int(i))] for i in hi])
            diff = b - a
            out[c] = np.where(t >= 0.5, b - diff * (1 - t), a + diff * t)
        return out

    def residual_quantiles(self, means: np.ndarray, scale: np.ndarray, probs: Sequence[float]) -> np.ndarray:
        """Quantiles of (d − mean_c)/scale_c over the usable cells. Their count and range come
        from the cell table and each cell's smallest and largest value: the map is monotone
        increasing within a cell (a subtraction and a division by a positive number, each
        rounded monotonically), so no scan is needed for them."""
        probs = [float(p) for p in probs]
        if not probs:
            return np.empty(0)
        means = np.asarray(means, dtype=np.float64)
        scale = np.asarray(scale, dtype=np.float64)
        with np.errstate(invalid="ignore"):
            usable = np.isfinite(scale) & (scale > 0) & (self._counts > 0)
        n = int(self._counts[usable].sum())
        if n == 0:
            return np.full(len(probs), np.nan)
        m, s = _doubles(means), _doubles(scale)
        source = (f"SELECT 0 AS cell, (d - {m}[cell + 1]) / {s}[cell + 1] AS v FROM kept "
                  f"WHERE isfinite({s}[cell + 1]) AND {s}[cell + 1] > 0")
        with np.errstate(invalid="ignore", divide="ignore"):
            lo = float(np.min(((self._lo - means) / scale)[usable]))
            hi = float(np.max(((self._hi - means) / scale)[usable]))
        return self._quantiles({0: n}, source, probs, {0: (lo, hi)})[0]

    def cell_points(self, max_points: int) -> tuple[CellPoints, ...]:
        """Small cells: every value in increasing order; large cells: ``max_points`` quantiles."""
        counts = self._observed()
        small = [c for c, n in counts.items() if n <= max_points]
        large = {c: n for c, n in counts.items() if n > max_points}
        values: dict[int, Sequence[float]] = {}
        if small:
            for c, vals in self._q(
                f"SELECT cell, list(d ORDER BY d) FROM kept WHERE cell IN ({', '.join(map(str, small))}) GROUP BY cell"
            ):
                values[c] = vals
        if large:
            listed = ", ".join(map(str, large))
            values.update(self._quantiles(large, f"SELECT cell, d AS v FROM kept WHERE cell IN ({listed})",
                                          np.linspace(0.0, 1.0, max_points),
                                          {c: (self._lo[c], self._hi[c]) for c in large}))
        return tuple(
            CellPoints(n=int(counts.get(c, 0)), values=tuple(float(v) for v in values.get(c, ())), summarized=c in large)
            for c in range(self.k)
        )

    def flagged(self, centre: np.ndarray, bound: np.ndarray, limit: int) -> FlaggedRows:
        """One scan writes the flagged rows (usually few) to a temporary table; their per-cell
        sums and the largest deviations are read from it."""
        c, b = _doubles(centre), _doubles(bound)
        with self._lock:
            self._con.execute(
                f"CREATE OR REPLACE TEMP TABLE flagged AS SELECT r, cell, d, e FROM (SELECT r, cell, d, "
                f"d - {c}[cell + 1] AS e, {b}[cell + 1] AS b FROM kept) WHERE isfinite(b) AND abs(e) > b")
        try:
            agg = self._q("SELECT cell, count(*), fsum(e), fsum(e * e) FROM flagged GROUP BY cell")
            top = self._q(f"SELECT r, cell, d FROM flagged ORDER BY abs(e) DESC, r LIMIT {int(max(limit, 0))}")
        finally:
            self._q("DROP TABLE flagged")
        count = np.zeros(self.k, dtype=np.int64)
        sum_dev = np.zeros(self.k)
        sum_dev2 = np.zeros(self.k)
        for c, m, s1, s2 in agg:
            count[c], sum_dev[c], sum_dev2[c] = m, s1, s2
        rows = tuple((self._rownum.number(r), int(c), float(d)) for r, c, d in top)
        return FlaggedRows(total=int(count.sum()), rows=rows, count=count, sum_dev=sum_dev, sum_dev2=sum_dev2)

    def sample(self, size: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
        """The rows at :func:`~reporter.intake.rows.sample_positions` (the in-memory reader's
        rule), fetched by position among the analysed rows: the row id itself when no row was
        left out, else the running row number of the analysed rows in table order."""
        if self.n <= size:
            got = self._np("SELECT d, cell FROM kept ORDER BY r")
        else:
            pos = sample_positions(self.n, size, seed).tolist()
            if self.n == self._n_obs:
                sql = "SELECT d, cell FROM kept WHERE id IN (SELECT unnest($1::BIGINT[])) ORDER BY r"  # row ids: fast
            else:
                sql = ("SELECT d, cell FROM (SELECT d, cell, r, row_number() OVER () - 1 AS p FROM kept) "
                       "WHERE p IN (SELECT unnest($1::BIGINT[])) ORDER BY r")
            with self._lock:
                got = self._con.execute(sql, [pos]).fetchnumpy()
        return np.asarray(got["d"], dtype=np.float64), np.asarray(got["cell"], dtype=np.int64)

    def arrays(self) -> None:
        return None


_MAX_BUCKETS = 1 << 20  # histogram buckets per cell at most when locating order statistics
_FETCH = 1_000_000  # values fetched into Python at most per refinement step
_WIDE_CELLS = 64  # at most this many cells: rank sums from one aggregate with a count column per cell
