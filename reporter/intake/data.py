"""The data table: read, matched to the plan's factors, and counted.

Formats: CSV and TSV (by extension, UTF-8 with or without a byte-order mark; ``;`` with decimal
commas via ``[data] delimiter = ";"`` and ``decimal = ","``), Parquet (pyarrow), and a pandas
DataFrame from Python.

Two promises:

* **Nothing is dropped silently.** Rows with a missing or non-numeric outcome, a missing factor
  value or an explicitly excluded level are counted by reason, with their row numbers.
* **Decimal-exact intake of text.** A value such as ``1000000000000.4`` has no exact float64;
  converting it first and centring later loses about 4 of its 16 digits. For text files the
  outcome is therefore read as decimal digits, a pivot (the first valid value) is subtracted in
  exact decimal arithmetic, and only the difference becomes float64. Input that is already float64
  (Parquet, a DataFrame) cannot be repaired this way: its accuracy is capped by the float64
  values it arrives as. See McCullough (1998), The American Statistician 52(4), 358-366, on why
  such "constant leading digits" data (NIST StRD SmLs07-09) defeat naive software.

Input files are opened for reading only.
"""

from __future__ import annotations

import csv
import decimal
import difflib
import hashlib
import io
import math
from dataclasses import dataclass, replace
from fractions import Fraction
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from reporter.errors import DataError
from reporter.intake.cells import CellStats
from reporter.intake.rows import RowAccess
from reporter.intake import defaults as D
from reporter.intake import numtext
from reporter.intake.files import decode_utf8, describe_path, open_regular
from reporter.intake.plan import Plan, level_key

_CTX = decimal.Context(prec=60, traps=[decimal.InvalidOperation])


@dataclass(frozen=True)
class Exclusion:
    """Rows left out for one reason, with the first few row numbers as the file counts them."""

    reason: str
    count: int
    rows: tuple[int, ...]
    detail: str = ""


@dataclass(frozen=True)
class Dataset:
    """The analysable rows, coded against the plan's factor levels.

    ``y`` holds the outcome minus ``pivot`` (float64): add ``pivot`` back for reporting.
    ``levels`` holds, per factor, the index of each row's level in the plan's list.
    ``rows`` are the rows' numbers as a person finds them: the line number in a text file
    (the header is line 1), the 1-based row number in a Parquet file or a DataFrame.
    ``excluded_levels`` holds the level indices of rows dropped for their outcome (-1 where
    unknown), so that missing outcomes can be counted by cell.
    ``cells`` and ``row_access``, when a reader provides them, replace the cell table and the
    row access that :func:`reporter.api.prepare` would otherwise build from ``y`` and ``levels``.
    """

    source: str
    sha256: str | None
    format: str
    outcome: str
    factor_names: tuple[str, ...]
    y: np.ndarray
    pivot: float
    pivot_text: str
    exact_decimal: bool
    levels: np.ndarray
    rows: np.ndarray
    n_read: int
    exclusions: tuple[Exclusion, ...]
    dropped_outcome_levels: np.ndarray
    # Optional, for sources that compute these themselves (an out-of-core reader, a summary
    # table): the cell table (reporter.intake.cells.CellStats) and the row access
    # (reporter.intake.rows.RowAccess). None means "build them from y and levels".
    cells: CellStats | None = None
    row_access: RowAccess | None = None
    # Set when the input is a table of cell summaries (reporter.intake.summary.SummaryInput):
    # how it was read (spread, conversion, rounding); there are no rows then.
    summary: Any = None
    # Which reader read the rows: "in-memory" or "out-of-core" (DuckDB, see reporter.intake.duck).
    reader: str = "in-memory"
    # The plan's covariates, read like the outcome (None when the plan has none).
    covariates: "CovariateColumns | None" = None

    @property
    def n(self) -> int:
        """Observations analysed (from the cell table when a reader provides one)."""
        return self.cells.n_total if self.cells is not None else int(self.y.shape[0])

    def outcome_values(self) -> np.ndarray:
        """The outcome on its original scale (float64)."""
        return self.y + self.pivot


@dataclass(frozen=True)
class CovariateColumns:
    """The covariates of the analysed rows, each read like the outcome.

    ``x`` (N, p) holds each covariate minus its ``pivot`` (float64), row for row with
    :attr:`Dataset.y`; ``pivot_text`` is each pivot as the file wrote it and ``exact`` says
    whether the offsets were taken in exact decimal arithmetic (text input). The out-of-core
    reader, which keeps no rows in memory, gives an empty ``x`` (0, p).
    """

    names: tuple[str, ...]
    x: np.ndarray
    pivot: tuple[float, ...]
    pivot_text: tuple[str, ...]
    exact: bool

    @property
    def pivot_exact(self) -> tuple[Fraction, ...]:
        """Each pivot as an exact fraction (the decimal written, on text intake)."""
        if self.exact:
            return tuple(Fraction(t) for t in self.pivot_text)
        return tuple(Fraction(float(v)) for v in self.pivot)


# ---------------------------------------------------------------------------------------------
# Public entry points


def require_file(path: Path, fix: str | None = None) -> Path:
    """The data path, after checking that it names a regular file that can be opened for reading
    (a folder, a FIFO, a device or a socket is refused; see :mod:`reporter.intake.files`).
    ``fix`` replaces the advice of the message when the path came from elsewhere than the plan."""
    _open_data(path, fix).close()
    return path


def load_data(plan: Plan) -> Dataset:
    """Read the data file named by the plan and match it to the plan's factors."""
    from reporter.intake.duck.files import use_out_of_core

    if use_out_of_core(plan):
        from reporter.intake.duck.reader import load_out_of_core

        return load_out_of_core(plan)
    path = require_file(plan.data.path)
    suffix = path.suffix.lower()
    if suffix == ".parquet":
        return _from_parquet(plan, path)
    delimiter = plan.data.delimiter or ("\t" if suffix == ".tsv" else ",")
    raw, sha = _read_text_file(path)
    header, rows, lines = _parse_text(raw, str(path), delimiter)
    return _build(plan, str(path), sha, suffix.lstrip("."), header, rows, lines, text=True)


_DATA_FIX = "Check [data] path in the plan (it is relative to the plan file); it must name a data file."


def _open_data(path: Path, fix: str | None = None):
    """The data file opened for reading, if it is a regular file (see :mod:`reporter.intake.files`)."""
    return open_regular(path, "the data file", DataError, fix or _DATA_FIX)


def _read_text_file(path: Path) -> tuple[bytes, str]:
    """The bytes of a text data file and their SHA-256, read in blocks up to the size limit."""
    limit = D.MAX_TEXT_DATA_BYTES
    h = hashlib.sha256()
    blocks: list[bytes] = []
    size = 0
    with _open_data(path) as fh:
        try:
            for block in iter(lambda: fh.read(1 << 22), b""):
                size += len(block)
                if size > limit:
                    raise DataError(
                        f"{describe_path(path)}: is larger than {limit >> 20} MiB, the limit for a text data "
                        "file read into memory. Check that [data] path names the intended file."
                    )
                h.update(block)
                blocks.append(block)
        except OSError as exc:
            raise DataError(f"{describe_path(path)}: cannot be read ({exc.strerror or exc}).") from None
    return b"".join(blocks), h.hexdigest()


def hash_file(path: Path) -> str:
    """The SHA-256 of a data file, read in blocks (the file need not fit in memory)."""
    h = hashlib.sha256()
    with _open_data(path) as fh:
        try:
            for block in iter(lambda: fh.read(1 << 20), b""):
                h.update(block)
        except OSError as exc:
            raise DataError(f"{describe_path(path)}: cannot be read ({exc.strerror or exc}).") from None
    return h.hexdigest()


def data_from_frame(plan: Plan, frame: Any, name: str = "DataFrame") -> Dataset:
    """Match a pandas DataFrame (or any mapping of column name to sequence) to the plan."""
    columns = [str(c) for c in frame.columns] if hasattr(frame, "columns") else list(frame)
    needed = _needed_columns(plan, columns, name)
    lengths: dict[str, int] = {}
    for c in needed:  # a mapping of columns may hold a scalar or columns of unequal length
        try:
            lengths[c] = len(frame[c])
        except TypeError:
            raise DataError(f"{name}: column '{c}' must be a sequence of values, one per row "
                            f"(got {type(frame[c]).__name__}).") from None
    if len(set(lengths.values())) > 1:
        shown = ", ".join(f"'{c}' {k}" for c, k in lengths.items())
        raise DataError(f"{name}: the columns have different lengths ({shown}); every column needs one value per row. "
                        "Give columns of equal length (a DataFrame has them).")
    n = lengths[needed[0]] if needed else 0
    col_values: dict[str, Sequence[Any]] = {}
    for c in needed:
        col = frame[c]
        col_values[c] = col.to_numpy() if hasattr(col, "to_numpy") else np.asarray(col)
    return _build_columns(plan, name, None, "dataframe", col_values, n, row_numbers=np.arange(1, n + 1, dtype=np.int64))


# ---------------------------------------------------------------------------------------------
# Text files


def _parse_text(raw: bytes, source: str, delimiter: str):
    if not raw.strip():
        raise DataError(f"{source}: the file is empty. It needs a header row and data rows.")
    text = decode_utf8(raw, source, DataError)
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    try:
        header = next(reader)
    except StopIteration:
        raise DataError(f"{source}: the file is empty.") from None
    except csv.Error as exc:
        raise DataError(f"{source}, line 1: cannot be read as delimited text ({exc}).") from None
    header = [h.strip() for h in header]
    rows: list[list[str]] = []
    lines: list[int] = []
    try:
        for rec in reader:
            if not rec or (len(rec) == 1 and not rec[0].strip()):
                continue
            rows.append(rec)
            lines.append(reader.line_num)
    except csv.Error as exc:
        raise DataError(f"{source}, line {reader.line_num}: cannot be read ({exc}).") from None
    if not rows:
        raise DataError(f"{source}: has a header but no data rows.")
    return header, rows, lines


def _build(plan, source, sha, fmt, header, rows, lines, *, text):
    needed = _needed_columns(plan, header, source)
    idx = {name: header.index(name) for name in needed}
    check_widths(source, header, rows, lines)
    cols = {name: [rec[i] for rec in rows] for name, i in idx.items()}
    line_arr = np.asarray(lines, dtype=np.int64)
    return _build_columns(plan, source, sha, fmt, cols, len(rows), row_numbers=line_arr)


def check_widths(source: str, header, rows, lines) -> None:
    """Every data row has as many fields as the header."""
    width = len(header)
    for rec, line in zip(rows, lines):
        if len(rec) != width:
            raise DataError(
                f"{source}, line {line}: has {len(rec)} fields but the header has {width}. "
                "Check for a stray separator or an unquoted text with the separator in it."
            )


def _role(plan: Plan, name: str) -> str:
    """What the plan reads from a data column: "outcome", "factor" or "covariate"."""
    if name == plan.data.outcome:
        return "outcome"
    return "covariate" if name in {c.name for c in plan.covariates} else "factor"


def _needed_columns(plan: Plan, columns: Sequence[str], source: str) -> list[str]:
    needed = [plan.data.outcome] + [f.data_column for f in plan.factors] + [c.name for c in plan.covariates]
    for name in needed:
        where = [i for i, c in enumerate(columns, start=1) if c == name]
        if len(where) > 1:
            role = _role(plan, name)
            shown = ", ".join(str(i) for i in where)
            raise DataError(
                f"{source}: the header names the column '{name}' (the {role} named in the plan) "
                f"{len(where)} times (columns {shown}); each column needs its own name. Rename or remove "
                "the duplicate."
            )
        if name not in columns:
            role = _role(plan, name)
            hint = difflib.get_close_matches(name, list(columns), n=1, cutoff=0.6)
            fix = f" Did you mean '{hint[0]}'?" if hint else ""
            shown = ", ".join(f"'{c}'" if len(c) <= 40 else f"'{c[:24]}…'" for c in columns[:20])
            raise DataError(
                f"{source}: has no column '{name}' (the {role} named in the plan). "
                f"Its columns are {shown}.{fix}"
            )
    return needed


# ---------------------------------------------------------------------------------------------
# Columns -> Dataset


def _build_columns(plan: Plan, source, sha, fmt, cols, n, *, row_numbers) -> Dataset:
    word = "line" if fmt in ("csv", "tsv", "txt") else "row"

    def line_of(i: int) -> str:
        return f"{word} {int(row_numbers[i])}"

    keep = np.ones(n, dtype=bool)
    reasons: list[tuple[str, np.ndarray, str]] = []
    level_idx = np.empty((n, len(plan.factors)), dtype=np.int64)
    excluded_level = np.zeros(n, dtype=bool)
    for j, f in enumerate(plan.factors):
        codes, missing, excluded = _match_levels(plan, f, cols[f.data_column], source, line_of)
        level_idx[:, j] = codes
        if missing.any():
            reasons.append((f"missing value of factor '{f.name}'", missing & keep, ""))
            keep &= ~missing
        if excluded.any():
            listed = ", ".join(f'"{e}"' for e in f.exclude)
            reasons.append(
                (f"level of '{f.name}' excluded by the plan", excluded & keep, f"excluded: {listed}")
            )
            keep &= ~excluded
            excluded_level |= excluded

    raw_outcome = cols[plan.data.outcome]
    y, status, pivot, pivot_text, exact = _read_outcome(raw_outcome, plan, keep, source, line_of)
    missing_y = (status == 1) & keep
    bad_y = (status == 2) & keep
    if missing_y.any():
        reasons.append((f"missing outcome '{plan.data.outcome}'", missing_y, ""))
    if bad_y.any():
        first = np.flatnonzero(bad_y)[:5]
        shown = "; ".join(f'{line_of(int(i))}: {_shown(str(raw_outcome[i]).strip())}' for i in first)
        reasons.append((f"non-numeric outcome '{plan.data.outcome}'", bad_y, shown))
    dropped_outcome = missing_y | bad_y
    keep &= ~dropped_outcome
    covariates = None
    if plan.covariates:
        covariates, keep = _read_covariates(plan, cols, keep, reasons, source, line_of)

    exclusions = tuple(
        Exclusion(
            reason=r,
            count=int(mask.sum()),
            rows=tuple(int(row_numbers[i]) for i in np.flatnonzero(mask)[:20]),
            detail=d,
        )
        for r, mask, d in reasons
        if mask.any()
    )
    dropped_levels = level_idx[dropped_outcome].copy()
    kept_rows = np.flatnonzero(keep)
    rows = np.ascontiguousarray(row_numbers[kept_rows])
    y_kept = np.ascontiguousarray(y[keep])
    levels_kept = np.ascontiguousarray(level_idx[keep])
    for arr in (y_kept, levels_kept, rows, dropped_levels):
        arr.setflags(write=False)
    if covariates is not None:
        x_kept = np.ascontiguousarray(covariates.x[keep])
        x_kept.setflags(write=False)
        covariates = replace(covariates, x=x_kept)
    return Dataset(
        source=source,
        sha256=sha,
        format=fmt,
        outcome=plan.data.outcome,
        factor_names=tuple(f.name for f in plan.factors),
        y=y_kept,
        pivot=pivot,
        pivot_text=pivot_text,
        exact_decimal=exact,
        levels=levels_kept,
        rows=rows,
        n_read=n,
        exclusions=exclusions,
        dropped_outcome_levels=dropped_levels,
        covariates=covariates,
    )


def _read_covariates(plan: Plan, cols, keep: np.ndarray, reasons: list, source: str, line_of):
    """Each covariate read by the outcome's rules (exact decimals from text, float64 as it is),
    in plan order. In the rows still analysed, a missing value leaves the row out under its own
    reason and a value that is not a number is refused; a covariate with no value at all in
    those rows is refused. Returns the columns (offsets for every row) and the rows kept."""
    keep = keep.copy()
    candidates = keep.copy()  # the rows analysed before any covariate is read
    xs, pivots, texts, exact_all = [], [], [], True
    for cov in plan.covariates:
        label = (f"the covariate '{cov.name}'", "the covariate")
        raw = cols[cov.name]
        x, status, pivot, pivot_text, exact = _read_outcome(raw, plan, candidates, source, line_of, label=label)
        bad = (status == 2) & candidates
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise covariate_not_a_number(cov.name, raw[i], source, line_of(i))
        missing = (status == 1) & keep
        if not ((status == 0) & candidates).any() and candidates.any():
            raise DataError(
                f"{source}: the covariate '{cov.name}' (column '{cov.name}') has no value in any of the "
                f"{int(candidates.sum())} rows otherwise analysed (every one is missing). Check [[covariates]] name "
                "in the plan, or fill in the column."
            )
        if missing.any():
            reasons.append((f"missing covariate '{cov.name}'", missing, ""))
            keep &= ~missing
        xs.append(x)
        pivots.append(float(pivot))
        texts.append(pivot_text)
        exact_all = exact_all and exact
    x = np.column_stack(xs) if xs else np.empty((keep.shape[0], 0))
    columns = CovariateColumns(names=tuple(c.name for c in plan.covariates), x=x, pivot=tuple(pivots),
                               pivot_text=tuple(texts), exact=exact_all)
    return columns, keep


def covariate_not_a_number(name: str, raw, source: str, where: str) -> DataError:
    """The message for a covariate value that is no number at all (a number-like text that breaks
    the plain-decimal rule meets the outcome's messages, with the covariate named, first)."""
    return DataError(
        f"{source}, {where}: the covariate '{name}' (column '{name}') is {_shown(str(raw).strip())}, which is not "
        "a number. A covariate needs a plain decimal number in every analysed row: correct the value, or write a "
        "missing-value text ([data] missing) to leave the row out."
    )


def check_covariates(plan: Plan, stats, n: np.ndarray, cell_labels: Sequence[str], source: str) -> None:
    """Refuse covariates whose slopes cannot be estimated from the analysed rows, before the fit:
    a covariate that does not vary within any cell (a constant one among them), with
    ``slopes = "per-cell"`` one that does not vary within some observed cell, and covariates
    that are linear combinations of one another within cells (the correlation matrix of the
    pooled within-cell cross-products has an eigenvalue under 1e-10: common practice, no source),
    and slopes that leave no residual degree of freedom (rows − cells with rows − slopes < 1).
    ``stats`` is the :class:`~reporter.intake.cells.CovariateStats` of the analysed rows."""
    observed = np.asarray(n) > 0
    pooled = stats.pooled_sxx(observed)
    for j, cov in enumerate(plan.covariates):
        where = f"{source}: the covariate '{cov.name}' ({cov.key_path} in the plan)"
        if not pooled[j, j] > 0:
            lo, hi = np.nanmin(stats.mean[observed, j]), np.nanmax(stats.mean[observed, j])
            shown = (f"has the same value, {float(lo)!r}, in every analysed row" if lo == hi else
                     "does not vary within any cell (each cell's rows share one value)")
            raise DataError(f"{where} {shown}, so its slope cannot be estimated: a covariate must vary within "
                            "cells. Remove the [[covariates]] table, or name a covariate that varies.")
        if cov.slopes == "per-cell":
            flat = np.flatnonzero(observed & ~(stats.sxx[:, j, j] > 0))
            if flat.size:
                listed = ", ".join(str(cell_labels[c]) + (" has one row" if n[c] == 1 else "") for c in flat[:5]) + (
                    " …" if flat.size > 5 else "")
                raise DataError(f"{where} does not vary within {flat.size} {'cell' if flat.size == 1 else 'cells'} "
                                f"({listed}), so a separate slope cannot be estimated there. Use slopes = \"common\", "
                                "or leave those cells out.")
    if len(plan.covariates) > 1:
        d = np.sqrt(np.diag(pooled))
        corr = pooled / np.outer(d, d)
        values, vectors = np.linalg.eigh(corr)
        if values[0] < 1e-10:
            involved = np.flatnonzero(np.abs(vectors[:, 0]) > 1e-6)
            names = " and ".join(f"'{plan.covariates[j].name}'" for j in involved)
            raise DataError(f"{source}: the covariates {names} are linear combinations of one another within cells "
                            "(their pooled within-cell correlations are singular), so their slopes cannot be told "
                            "apart. Keep one of them.")
    rows, cells = int(np.asarray(n).sum()), int(observed.sum())
    slopes = sum(1 if c.slopes == "common" else cells for c in plan.covariates)
    if rows - cells - slopes < 1:
        raise DataError(f"{source}: {rows} analysed rows in {cells} cells with data leave no residual degree of freedom "
                        f"once the covariates' {slopes} {'slope is' if slopes == 1 else 'slopes are'} estimated ({rows} − "
                        f"{cells} − {slopes} = {rows - cells - slopes}), so there is no error variance to test against. "
                        'Collect more rows, use slopes = "common", or adjust for fewer covariates.')



def _as_texts(values) -> tuple[np.ndarray, np.ndarray]:
    """Unique values of a column and the inverse index, without a per-row Python loop
    where numpy can do it."""
    arr = np.asarray(values)
    if arr.dtype.kind in "fiub":
        uniq, inv = np.unique(arr, return_inverse=True)
        return uniq, inv.reshape(-1)
    obj = np.asarray([("" if v is None else str(v)) for v in arr.tolist()], dtype=object) if arr.dtype.kind == "O" else arr.astype(str)
    uniq, inv = np.unique(obj.astype(str), return_inverse=True)
    return uniq, inv.reshape(-1)


def _value_text(v) -> str | None:
    if v is None:
        return None
    if isinstance(v, (float, np.floating)):
        if math.isnan(v):
            return None
        return repr(float(v))
    if isinstance(v, (np.integer,)):
        return str(int(v))
    return str(v).strip()


@dataclass(frozen=True)
class _Encoded:
    """A column already split into its distinct values and each row's index into them."""

    uniq: np.ndarray
    inv: np.ndarray

    def __len__(self) -> int:
        return int(self.inv.shape[0])


def _match_levels(plan, factor, values, source, line_of, counts=None):
    if isinstance(values, _Encoded):
        uniq, inv = values.uniq, values.inv
    else:
        uniq, inv = _as_texts(values)
    plan_keys = {level_key(lv): i for i, lv in enumerate(factor.levels)}
    excl_keys = {level_key(e) for e in factor.exclude}
    code_of_uniq = np.empty(len(uniq), dtype=np.int64)
    missing_u = np.zeros(len(uniq), dtype=bool)
    excluded_u = np.zeros(len(uniq), dtype=bool)
    unknown: list[int] = []
    for u, v in enumerate(uniq.tolist()):
        t = _value_text(v)
        k = level_key(t) if t else None
        # A level the plan lists (to analyse or to exclude) wins over a missing-value token:
        # "NA" may be North America.
        if k in plan_keys:
            code_of_uniq[u] = plan_keys[k]
        elif k in excl_keys:
            excluded_u[u] = True
            code_of_uniq[u] = -1
        elif t is None or t == "" or t in plan.data.missing:
            missing_u[u] = True
            code_of_uniq[u] = -1
        else:
            unknown.append(u)
            code_of_uniq[u] = -1
    if unknown:
        parts = []
        for u in unknown[:10]:
            where = np.flatnonzero(inv == u)
            size = where.size if counts is None else int(counts[u])
            parts.append(f'{_shown(str(_value_text(uniq[u])))} ({size} {"row" if size == 1 else "rows"}, first at {line_of(int(where[0]))})')
        more = f" and {len(unknown) - 10} more" if len(unknown) > 10 else ""
        listed = ", ".join(f'"{lv}"' for lv in factor.levels[:20]) + (" …" if len(factor.levels) > 20 else "")
        raise DataError(
            f"{source}: column '{factor.data_column}' holds levels that the plan does not list for "
            f"factor '{factor.name}': {', '.join(parts)}{more}. The plan lists {listed}. Add them to "
            f"levels, or leave them out on purpose with exclude = [...] in that [[factors]] table."
        )
    return code_of_uniq[inv], missing_u[inv], excluded_u[inv]


def _read_outcome(values, plan, keep, source: str = "data", line_of=None, label: tuple[str, str] | None = None):
    """Return (y - pivot, status, pivot, pivot_text, exact) with status 0 ok, 1 missing, 2 non-numeric.

    A value that float64 cannot hold, an infinite value, or a number written in a form other than
    plain decimal notation is an error naming its line (see :mod:`reporter.intake.numtext`); so
    is an outcome whose spread would overflow the sums of squares. ``label`` names the column in
    messages, as (its name with the column, its kind): by default the outcome; a covariate is
    read by the same rules.
    """
    label = label or (f"the outcome '{plan.data.outcome}'", "the outcome")
    if line_of is None:
        def line_of(i: int) -> str:
            return f"row {i + 1}"
    arr = np.asarray(values)
    n = arr.shape[0]
    status = np.zeros(n, dtype=np.int8)
    if arr.dtype.kind in "fiub":
        y = arr.astype(np.float64)
        status[np.isnan(y)] = 1
        inf = np.isinf(y) & keep
        if inf.any():
            i = int(np.flatnonzero(inf)[0])
            raise DataError(
                f"{source}, {line_of(i)}: {label[0]} is {float(y[i])!r}; only "
                "finite values can be analysed. Remove the row or make the value missing."
            )
        ok = (status == 0) & keep
        first = int(np.flatnonzero(ok)[0]) if ok.any() else -1
        pivot = float(y[first]) if first >= 0 else 0.0
        with np.errstate(over="ignore", invalid="ignore"):
            y = np.where(status == 0, y - pivot, np.nan)
        _check_spread(y, ok, first, pivot, plan, source, line_of, label=label)
        return y, status, pivot, repr(pivot), False
    return _exact_from_text(arr, plan, keep, status, source, line_of, label=label)


def _shown(text: str) -> str:
    return f'"{text}"' if len(text) <= 40 else f'"{text[:24]}…" ({len(text)} characters)'


def _exact_from_text(arr, plan, keep, status, source: str = "data", line_of=None, label: tuple[str, str] | None = None):
    """Subtract a decimal pivot exactly before conversion to float64."""
    comma = plan.data.decimal == ","
    missing = set(plan.data.missing)
    label = label or (f"the outcome '{plan.data.outcome}'", "the outcome")
    n = arr.shape[0]
    decs: list[decimal.Decimal | None] = [None] * n
    keep_list = keep.tolist()

    def fail(i: int, raw: str, why: str) -> DataError:
        return DataError(f"{source}, {line_of(i)}: {label[0]} is {_shown(raw)}, which {why}.")

    for i, v in enumerate(arr.tolist()):
        raw = "" if v is None else str(v).strip()
        if raw in missing or raw.lower() in ("nan", "+nan", "-nan"):
            status[i] = 1
            continue
        t = raw.replace(",", ".") if comma else raw
        t = t.replace("\u2212", "-")
        if not numtext.is_plain(t):
            status[i] = 2
            if keep_list[i] and numtext.looks_numeric(t):
                raise fail(i, raw, numtext.why_not_plain(t))
            continue
        if len(t) > D.MAX_NUMBER_CHARS:
            if keep_list[i]:
                raise fail(
                    i, raw,
                    f"has {len(t)} characters; the limit for one value is {D.MAX_NUMBER_CHARS} (float64 keeps "
                    "about 17 significant digits). Round it",
                )
            status[i] = 2
            continue
        d = decimal.Decimal(t)
        problem = numtext.range_problem(d)
        if problem is not None:
            if keep_list[i]:
                raise fail(i, raw, problem + f". Rescale {label[1]} (for example use larger or smaller units)")
            status[i] = 2
            continue
        decs[i] = d
    ok_mask = (status == 0) & keep
    ok = np.flatnonzero(ok_mask)
    if ok.size == 0:
        return np.full(n, np.nan), status, 0.0, "0", True
    first = int(ok[0])
    pivot = decs[first]
    y = np.fromiter(
        (float(_CTX.subtract(d, pivot)) if d is not None else math.nan for d in decs),
        dtype=np.float64,
        count=n,
    )
    _check_spread(y, ok_mask, first, float(pivot), plan, source, line_of, label=label)
    return y, status, float(pivot), str(pivot), True


def _check_spread(y, ok, first: int, pivot: float, plan, source: str, line_of, n_values: int | None = None,
                  label: tuple[str, str] | None = None) -> None:
    """Refuse offsets from the pivot that float64 cannot hold, and a spread of the outcome so wide
    or so narrow that the fit's sums would overflow or underflow float64.

    The limits are :func:`reporter.intake.numtext.spread_limits`.
    """
    if first < 0:
        return
    idx = np.flatnonzero(ok)
    vals = y[idx]
    bad = ~np.isfinite(vals)
    what, noun = label or (f"the outcome '{plan.data.outcome}'", "the outcome")
    if bad.any():
        i = int(idx[np.flatnonzero(bad)[0]])
        raise DataError(
            f"{source}, {line_of(i)}: {what} differs from the first value "
            f"({pivot!r}, {line_of(first)}) by more than float64 can hold (about 1.8e308). Rescale "
            f"{noun} (for example use larger units)."
        )
    lo, hi = int(idx[int(np.argmin(vals))]), int(idx[int(np.argmax(vals))])
    spread = float(y[hi]) - float(y[lo])
    count = idx.size if n_values is None else n_values  # the out-of-core reader passes min and max only
    lower, upper = numtext.spread_limits(count)
    shown = (f"{what} ranges from {float(y[lo]) + pivot!r} ({line_of(lo)}) to "
             f"{float(y[hi]) + pivot!r} ({line_of(hi)})")
    if not (spread <= upper):
        raise DataError(
            f"{source}: {shown}; with {count} values a spread over {upper:.3g} makes the fit's sums "
            f"of squares overflow float64 (about 1.8e308). Rescale {noun} (for example use larger units)."
        )
    if 0 < spread < lower:
        raise DataError(
            f"{source}: {shown}; a spread under {lower:g} makes the fit's sums of squares "
            f"underflow float64. Rescale {noun} (for example use smaller units)."
        )


# ---------------------------------------------------------------------------------------------
# Parquet


def rowless_dataset(plan: Plan, *, dropped_outcome_levels=None, **fields) -> Dataset:
    """A Dataset whose rows are not held in memory (out-of-core or cell summaries): empty,
    read-only row arrays; the cell table and any row access come in ``fields``."""
    nf = len(plan.factors)
    y = np.empty(0, dtype=np.float64)
    levels = np.empty((0, nf), dtype=np.int64)
    rows = np.empty(0, dtype=np.int64)
    dropped = levels if dropped_outcome_levels is None else dropped_outcome_levels
    for arr in (y, levels, rows, dropped):
        arr.setflags(write=False)
    return Dataset(outcome=plan.data.outcome, factor_names=tuple(f.name for f in plan.factors), y=y,
                   levels=levels, rows=rows, dropped_outcome_levels=dropped, **fields)


def open_parquet(path: Path):
    """The Parquet file at ``path`` (pyarrow) and the SHA-256 of its bytes."""
    import pyarrow.parquet as pq

    sha = hash_file(path)
    try:
        return pq.ParquetFile(path), sha
    except Exception as exc:  # pyarrow raises several types for a damaged file
        raise DataError(f"{path}: is not a readable Parquet file ({exc}).") from None


def _arrow_to_numpy(arr, null=None) -> np.ndarray:
    """A pyarrow array of a fixed-width type as a numpy array of its own, nulls replaced by
    ``null``, through DLPack: pyarrow's ``to_numpy`` and its scalars from Python values import
    pandas (a third of a second), so the nulls are replaced only when there are any."""
    if arr.null_count:
        arr = arr.fill_null(null)
    return np.array(np.from_dlpack(arr), copy=True)


def _from_parquet(plan: Plan, path: Path) -> Dataset:
    import pyarrow as pa
    import pyarrow.compute as pc

    pf, sha = open_parquet(path)
    columns = pf.schema_arrow.names
    needed = _needed_columns(plan, columns, str(path))
    for name in dict.fromkeys(needed):
        kind = pf.schema_arrow.field(name).type
        if pa.types.is_dictionary(kind):
            kind = kind.value_type
        if pa.types.is_nested(kind) or pa.types.is_binary(kind) or pa.types.is_large_binary(kind) or pa.types.is_null(kind):
            role = _role(plan, name)
            need = "a text or a number" if role == "factor" else "a number"
            raise DataError(
                f"{path}: column '{name}' (the {role} named in the plan) has the Parquet type {kind}; "
                f"the {role} needs {need} in every row. Write that column as plain values."
            )
    table = pf.read(columns=list(dict.fromkeys(needed)))
    n = table.num_rows
    if n == 0:
        raise DataError(f"{path}: has no data rows.")
    cols: dict[str, Any] = {}
    for f in plan.factors:
        col = table.column(f.data_column)
        if pa.types.is_dictionary(col.type):
            col = col.cast(col.type.value_type)
        enc = pc.dictionary_encode(col).combine_chunks()
        uniq = np.asarray(enc.dictionary.to_pylist(), dtype=object)
        idx = _arrow_to_numpy(enc.indices, 0)
        if enc.null_count:
            idx = np.where(_arrow_to_numpy(enc.is_null().cast(pa.uint8())).astype(bool), len(uniq), idx)
            uniq = np.append(uniq, None)
        cols[f.data_column] = _Encoded(uniq, idx.astype(np.int64))
    for name in dict.fromkeys([plan.data.outcome, *(c.name for c in plan.covariates)]):
        out = table.column(name)
        if pa.types.is_dictionary(out.type):
            out = out.cast(out.type.value_type)
        if pa.types.is_integer(out.type) or pa.types.is_floating(out.type) or pa.types.is_decimal(out.type):
            cols[name] = _arrow_to_numpy(out.cast(pa.float64()).combine_chunks(), float("nan"))
        else:
            cols[name] = np.asarray(out.cast(pa.string()).to_pylist(), dtype=object)
    return _build_columns(plan, str(path), sha, "parquet", cols, n, row_numbers=np.arange(1, n + 1, dtype=np.int64))
