"""A table of cell summaries: one row per cell with its factor levels, n, mean and a spread.

This is the route for data that outgrow one machine: the rows stay where they live (a Spark
cluster, a SQL warehouse, DuckDB), one ``GROUP BY`` over the factor columns computes each cell's
count, mean and standard deviation there, and that small table is the input here (plan:
``[data] layout = "cell-summaries"``). Every classical test of the full model is a function of
(n_c, mean_c, S_c) alone, with S_c the centred sum of squares of cell c, so those tests are the
same as from the rows; the steps that need rows cannot run and the report says so.

Conversions to S_c (all exact for text input, rounded once to float64):

* standard deviation s (n − 1 denominator): S = (n − 1)·s²;
* variance v (n − 1 denominator): S = (n − 1)·v;
* standard error of the mean e = s/√n: s² = n·e², so S = (n − 1)·n·e².

Means read from text keep the exact-decimal route of the row path: the first cell's mean (as
written) is the pivot and each mean enters as its exact decimal offset from it, rounded once.

Rounding. A summary written with d decimals stands for any value within half a unit of the last
place, 0.5·10^−d. For text (and Parquet DECIMAL columns) d is read per column, as the most
decimals any value of the column shows (a writer may drop trailing zeros, so fewer places on one
value do not mean coarser rounding); ``mean_decimals``/``spread_decimals`` in the plan override it.
Parquet floating-point columns carry no such information: they are taken as unrounded unless the
plan states the decimals. :mod:`reporter.fitting.rounding` turns these intervals into bounds on F
and p.

Bad tables get one message each naming the file, line (text; the row for Parquet), column,
value, the rule and the fix: a non-numeric n, mean or spread; n not a whole number or below 1;
a negative spread; a spread given with n = 1 (a single value has none: the field must be empty,
as ``stddev_samp`` leaves it); a spread missing with n ≥ 2; an empty factor value; a level the
plan does not list; a cell given twice; a cell of the plan with no row.
"""

from __future__ import annotations

import decimal
import difflib
import math
from dataclasses import dataclass
from fractions import Fraction
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from reporter.errors import DataError
from reporter.intake.cells import CellStats
from reporter.intake import defaults as D
from reporter.intake import numtext
from reporter.intake.data import (Dataset, Exclusion, _match_levels, _parse_text, _read_text_file, check_widths, open_parquet,
                                  require_file, rowless_dataset)
from reporter.intake.numtext import spread_limits
from reporter.intake.plan import Plan

_CTX = decimal.Context(prec=80, traps=[decimal.InvalidOperation])
_NAN_WORDS = ("na", "nan", "null", "none")
SPREAD_WORDS = {"sd": "standard deviation", "variance": "variance", "se": "standard error of the mean"}
_SHORT = {"sd": "SD", "variance": "variance", "se": "SE"}


@dataclass(frozen=True)
class ColumnRounding:
    """How finely one column's values were written.

    ``half_unit`` is half a unit in the last place (0.0 when the values are taken as unrounded);
    ``decimals`` the places after the decimal point (negative for rounding to tens, hundreds...);
    ``source`` is "text" (read off the values), "plan" (stated in [data]), "decimal type" (the
    scale of a Parquet DECIMAL column) or "binary" (Parquet floating point, taken as unrounded).
    """

    column: str
    decimals: int | None
    half_unit: float
    source: str

    @property
    def rounded(self) -> bool:
        return self.half_unit > 0.0


@dataclass(frozen=True)
class SummaryInput:
    """What a cell-summary table gave, per design cell (row-major over the plan's levels).

    ``spread_values`` are the spreads as written (NaN where n = 1); ``conversion`` says in words
    how the spread became the centred sum of squares; ``rows`` are the line (text) or row
    (Parquet) of each cell in the file.
    """

    spread: str
    n_column: str
    mean_column: str
    spread_column: str
    spread_values: np.ndarray
    mean_rounding: ColumnRounding
    spread_rounding: ColumnRounding
    conversion: str
    rows: np.ndarray

    @property
    def rounded(self) -> bool:
        return self.mean_rounding.rounded or self.spread_rounding.rounded


# The steps a table of cell summaries cannot feed, each with the reason (what it needs of the rows).
ROW_LEVEL_STEPS: tuple[tuple[str, str], ...] = (
    ("residual diagnostics", "the residual plot and the studentized residuals need each observation's residual"),
    ("Q–Q plot", "its points are the ordered residuals of the observations"),
    ("Shapiro–Wilk", "the normality test orders the observations' residuals"),
    ("Levene and Brown–Forsythe", "these variance tests need each observation's distance from its cell's mean "
                                  "or median"),
    ("rank tests", "the Kruskal–Wallis test ranks all observations together"),
    ("permutation F", "it reshuffles the observations among the cells"),
    ("outliers", "the outlier screen and its sensitivity rerun look at single observations"),
)


def conversion_text(spread: str) -> str:
    """The conversion of a spread to the centred sum of squares S, in words and symbols."""
    if spread == "sd":
        return "each cell's sum of squared deviations is S = (n − 1)·SD²"
    if spread == "variance":
        return "each cell's sum of squared deviations is S = (n − 1)·variance"
    return "each cell's SD is SE·√n, so its sum of squared deviations is S = (n − 1)·n·SE²"


def read_summary(plan: Plan) -> Dataset:
    """Read the cell-summary table named by the plan and check it against the plan's cells."""
    spec = plan.data.summary
    if spec is None:
        raise ValueError("read_summary needs a plan with [data] layout = \"cell-summaries\"")
    _refuse_covariates(plan, str(plan.data.path))
    path = require_file(plan.data.path)
    suffix = path.suffix.lower()
    if suffix == ".parquet":
        sha, columns, n, word, kinds = _parquet_columns(plan, path)
    else:
        delimiter = plan.data.delimiter or ("\t" if suffix == ".tsv" else ",")
        raw, sha = _read_text_file(path)
        header, recs, lines = _parse_text(raw, str(path), delimiter)
        _require_columns(plan, header, str(path))
        check_widths(str(path), header, recs, lines)
        wanted = _wanted(plan)
        columns = {c: [rec[header.index(c)] for rec in recs] for c in wanted}
        columns["__row__"] = lines
        n = len(recs)
        word = "line"
        kinds = {c: "text" for c in wanted}
    return _build(plan, str(path), sha, suffix.lstrip("."), columns, n, word, kinds)


def summary_from_frame(plan: Plan, frame: Any, name: str = "DataFrame") -> Dataset:
    """A table of cell summaries given as a pandas DataFrame (or a mapping of column to sequence).

    Numeric columns count as binary floating point (unrounded unless the plan states decimals);
    text columns are read as exact decimals, like a text file. Rows are numbered from 1.
    """
    _refuse_covariates(plan, name)
    columns = [str(c) for c in frame.columns] if hasattr(frame, "columns") else list(frame)
    _require_columns(plan, columns, name)
    cols: dict[str, Any] = {}
    kinds: dict[str, str] = {}
    for c in _wanted(plan):
        arr = np.asarray(frame[c].to_numpy() if hasattr(frame[c], "to_numpy") else frame[c])
        kinds[c] = "binary" if arr.dtype.kind in "fiu" else "text"
        cols[c] = arr.tolist()
    n = len(cols[_wanted(plan)[0]])
    if n == 0:
        raise DataError(f"{name}: has no data rows.")
    cols["__row__"] = list(range(1, n + 1))
    return _build(plan, name, None, "dataframe", cols, n, "row", kinds)


def _refuse_covariates(plan: Plan, source: str) -> None:
    """Cell summaries cannot carry covariates (the plan reader refuses the pair; a plan put
    together in Python is refused here with the same reason)."""
    if plan.covariates:
        names = ", ".join(f"'{c.name}'" for c in plan.covariates)
        raise DataError(f"{source}: a table of cell summaries cannot be adjusted for covariates ({names}): it gives each "
                        "cell's n, mean and spread of the outcome, but not the within-cell covariances of the covariates "
                        "with the outcome that the adjustment needs. Give the data as rows (layout = \"rows\"), or "
                        "remove the covariates.")


# ---------------------------------------------------------------------------------------------
# Columns


def _wanted(plan: Plan) -> list[str]:
    s = plan.data.summary
    return list(dict.fromkeys([f.data_column for f in plan.factors] + [s.n_column, s.mean_column, s.spread_column]))


def _require_columns(plan: Plan, columns: Sequence[str], source: str) -> None:
    s = plan.data.summary
    roles = {f.data_column: f"factor '{f.name}'" for f in plan.factors}
    roles.update({s.n_column: "n (data.n_column)", s.mean_column: "mean (data.mean_column)",
                  s.spread_column: f"{SPREAD_WORDS[s.spread]} (data.spread_column)"})
    for name in _wanted(plan):
        if name not in columns:
            hint = difflib.get_close_matches(name, list(columns), n=1, cutoff=0.6)
            fix = f" Did you mean '{hint[0]}'? Name it in [data] or rename the column." if hint else ""
            shown = ", ".join(f"'{c}'" for c in list(columns)[:20])
            raise DataError(
                f"{source}: has no column '{name}', the {roles[name]} of a table of cell summaries "
                f"(layout = \"cell-summaries\": one row per cell with its factor levels, n, mean and "
                f"{_SHORT[s.spread]}). Its columns are {shown}.{fix}"
            )


def _parquet_columns(plan: Plan, path: Path):
    import pyarrow as pa

    pf, sha = open_parquet(path)
    _require_columns(plan, pf.schema_arrow.names, str(path))
    wanted = _wanted(plan)
    table = pf.read(columns=wanted)
    columns: dict[str, Any] = {}
    kinds: dict[str, str] = {}
    for c in wanted:
        col = table.column(c)
        if pa.types.is_dictionary(col.type):
            col = col.cast(col.type.value_type)
        t = col.type
        if pa.types.is_decimal(t):
            kinds[c] = f"decimal:{t.scale}"
        elif pa.types.is_floating(t) or pa.types.is_integer(t):
            kinds[c] = "binary"
        else:
            kinds[c] = "text"
        values = col.to_pylist()
        columns[c] = [None if v is None else (str(v) if kinds[c] != "binary" else v) for v in values]
    columns["__row__"] = list(range(1, table.num_rows + 1))
    if table.num_rows == 0:
        raise DataError(f"{path}: has no data rows.")
    return sha, columns, table.num_rows, "row", kinds


# ---------------------------------------------------------------------------------------------
# Checking and building


class _Cell:
    """One table row's numbers as read (exact decimals for text, floats for binary columns)."""

    __slots__ = ("n", "mean", "spread")

    def __init__(self, n, mean, spread):
        self.n, self.mean, self.spread = n, mean, spread


def _build(plan: Plan, source: str, sha, fmt: str, cols, n_rows: int, word: str, kinds) -> Dataset:
    spec = plan.data.summary
    rows = np.asarray(cols["__row__"], dtype=np.int64)

    def where(i: int, column: str) -> str:
        return f"{source}, {word} {int(rows[i])}, column '{column}'"

    def line_of(i: int) -> str:
        return f"{word} {int(rows[i])}"

    shape = tuple(len(f.levels) for f in plan.factors)
    codes = np.empty((n_rows, len(plan.factors)), dtype=np.int64)
    excluded = np.zeros(n_rows, dtype=bool)
    for j, f in enumerate(plan.factors):
        values = np.asarray(["" if v is None else str(v) for v in cols[f.data_column]], dtype=object)
        c, missing, excl = _match_levels(plan, f, values, source, line_of)
        if missing.any():
            i = int(np.flatnonzero(missing)[0])
            raise DataError(
                f"{where(i, f.data_column)}: the level of factor '{f.name}' is empty (got "
                f"\"{values[i]}\"). Each row of a table of cell summaries names its cell: fill in the "
                "level, or remove the row (a GROUP BY over a column with missing values writes such a "
                "row; add WHERE ... IS NOT NULL for the factor columns)."
            )
        codes[:, j] = c
        excluded |= excl
    keep = np.flatnonzero(~excluded)
    comma = plan.data.decimal == ","
    missing_words = set(plan.data.missing)

    def number(i: int, column: str, what: str):
        """The value as an exact Decimal (text, decimal type) or a float (binary), or None if empty."""
        v = cols[column][i]
        if kinds[column] == "binary":
            if v is None or (isinstance(v, float) and math.isnan(v)):
                return None
            x = float(v)
            if not math.isfinite(x):
                raise DataError(f"{where(i, column)}: the {what} is {v!r}; it must be a finite number.")
            return x
        raw = "" if v is None else str(v).strip()
        if raw in missing_words or raw.lower() in _NAN_WORDS:
            return None
        t = (raw.replace(",", ".") if comma else raw).replace("\u2212", "-")
        shown = f"the {what} is \"{raw if len(raw) <= 40 else raw[:40] + '…'}\""
        if not numtext.is_plain(t):
            if numtext.looks_numeric(t):
                raise DataError(f"{where(i, column)}: {shown}, which {numtext.why_not_plain(t)}.")
            fix = ' Write numbers with a "." decimal point, or set decimal = "," in [data].' if "," in t and not comma else ""
            raise DataError(f"{where(i, column)}: {shown}, which is not a number.{fix}")
        if len(t) > D.MAX_NUMBER_CHARS:
            raise DataError(f"{where(i, column)}: {shown}, which has {len(t)} characters; the limit for one value is "
                            f"{D.MAX_NUMBER_CHARS}. Round it.")
        d = decimal.Decimal(t)
        problem = numtext.range_problem(d)
        if problem is not None:
            raise DataError(f"{where(i, column)}: {shown}, which {problem}. Rescale the outcome.")
        return d

    spread_name = _SHORT[spec.spread]
    table: dict[int, tuple[int, _Cell]] = {}
    for i in keep.tolist():
        n_val = number(i, spec.n_column, "n")
        if n_val is None:
            raise DataError(f"{where(i, spec.n_column)}: n is empty. Give each cell's number of observations "
                            "(count(*) in the GROUP BY).")
        if n_val != int(n_val):
            raise DataError(f"{where(i, spec.n_column)}: n is {_show_number(cols[spec.n_column][i])}, which is not a "
                            "whole number. n is the number of observations in the cell (count(*)).")
        n_int = int(n_val)
        if n_int < 1:
            raise DataError(
                f"{where(i, spec.n_column)}: n is {n_int}; every cell needs at least one observation. A cell "
                "without data cannot be analysed from summaries: leave its level out with exclude = [...] in "
                "that [[factors]] table, or correct n."
            )
        mean = number(i, spec.mean_column, "mean")
        if mean is None:
            raise DataError(f"{where(i, spec.mean_column)}: the mean is empty. Give each cell's mean (avg(...)).")
        spread = number(i, spec.spread_column, spread_name)
        if n_int == 1 and spread is not None:
            raise DataError(
                f"{where(i, spec.spread_column)}: the {spread_name} is {_show_number(cols[spec.spread_column][i])} "
                f"but n is 1; a single observation has no {spread_name}. Leave the field empty (stddev_samp "
                "writes NULL for such a cell)."
            )
        if n_int > 1 and spread is None:
            raise DataError(
                f"{where(i, spec.spread_column)}: the {spread_name} is empty but n is {n_int}; a cell with two "
                f"or more observations needs its {spread_name} ({_sql_word(spec.spread)} in the GROUP BY)."
            )
        if spread is not None and spread < 0:
            raise DataError(
                f"{where(i, spec.spread_column)}: the {spread_name} is {_show_number(cols[spec.spread_column][i])}; "
                f"a {SPREAD_WORDS[spec.spread]} cannot be negative. Check the column (data.spread_column) and "
                "the query that wrote it."
            )
        cell = int(np.ravel_multi_index(tuple(codes[i]), shape))
        if cell in table:
            first = table[cell][0]
            raise DataError(
                f"{source}, {word}s {int(rows[first])} and {int(rows[i])}: both give the cell "
                f"{_cell_label(plan, codes[i])}; each cell must appear once. Check that the GROUP BY lists "
                "every factor column, and that no level is written two ways."
            )
        table[cell] = (i, _Cell(n_int, mean, spread))
    k = int(np.prod(shape))
    absent = [c for c in range(k) if c not in table]
    if absent:
        labels = [_cell_label(plan, np.unravel_index(c, shape)) for c in absent]
        more = f" and {len(absent) - 6} more" if len(absent) > 6 else ""
        raise DataError(
            f"{source}: has no row for the cell{'s' if len(absent) > 1 else ''} {'; '.join(labels[:6])}{more} "
            f"({len(table)} of the plan's {k} cells are given). Every cell of the design needs a row with "
            "n ≥ 1: add the missing rows, or leave a level out with exclude = [...] in its [[factors]] table."
        )

    order = [table[c] for c in range(k)]
    first_row = min(i for i, _ in order)
    pivot_val = next(cell.mean for i, cell in order if i == first_row)
    exact = isinstance(pivot_val, decimal.Decimal)
    n_arr = np.array([cell.n for _, cell in order], dtype=np.int64)
    offset = np.empty(k)
    ss = np.empty(k)
    spread_values = np.full(k, np.nan)
    for c, (_, cell) in enumerate(order):
        if exact and isinstance(cell.mean, decimal.Decimal):
            offset[c] = float(_CTX.subtract(cell.mean, pivot_val))
        else:
            offset[c] = float(cell.mean) - float(pivot_val)
        if cell.spread is None:
            ss[c] = 0.0
            continue
        spread_values[c] = float(cell.spread)
        ss[c] = _centred_ss(cell.n, cell.spread, spec.spread)
    _check_range(source, word, [int(rows[i]) for i, _ in order], offset, ss, n_arr, spec, float(pivot_val),
                 spread_values)
    for arr in (n_arr, offset, ss, spread_values, rows):
        arr.setflags(write=False)
    pivot_text = str(pivot_val) if exact else repr(float(pivot_val))
    pivot_exact = Fraction(pivot_val) if exact else Fraction(float(pivot_val))
    cells = CellStats(n=n_arr, offset_mean=offset, ss=ss, pivot=float(pivot_val), pivot_exact=pivot_exact)
    cell_rows = np.array([int(rows[i]) for i, _ in order], dtype=np.int64)
    cell_rows.setflags(write=False)
    info = SummaryInput(
        spread=spec.spread,
        n_column=spec.n_column,
        mean_column=spec.mean_column,
        spread_column=spec.spread_column,
        spread_values=spread_values,
        mean_rounding=_rounding(spec.mean_column, spec.mean_decimals, kinds[spec.mean_column],
                                [cols[spec.mean_column][i] for i, _ in order], comma),
        spread_rounding=_rounding(spec.spread_column, spec.spread_decimals, kinds[spec.spread_column],
                                  [cols[spec.spread_column][i] for i, cell in order if cell.spread is not None], comma),
        conversion=conversion_text(spec.spread),
        rows=cell_rows,
    )
    exclusions = ()
    if excluded.any():
        idx = np.flatnonzero(excluded)
        listed = "; ".join(f'"{e}"' for f in plan.factors for e in f.exclude)
        exclusions = (Exclusion(reason="cell of a level excluded by the plan", count=int(idx.size),
                                rows=tuple(int(rows[i]) for i in idx[:20]), detail=f"excluded: {listed}"),)
    return rowless_dataset(
        plan,
        source=source,
        sha256=sha,
        format=fmt,
        pivot=float(pivot_val),
        pivot_text=pivot_text,
        exact_decimal=exact,
        n_read=n_rows,
        exclusions=exclusions,
        cells=cells,
        row_access=None,
        summary=info,
    )


def _check_range(source, word, lines, offset, ss, n, spec, pivot, given) -> None:
    """Refuse summaries whose fit would overflow or underflow float64, as the row path does for
    rows: the fit squares deviations of means and squares variances (Welch's df), so the spread of
    the means and every SD must stay within (1.8e308 / (64·N²))^¼, and above 1e-70 unless 0."""
    min_spread, upper = spread_limits(int(n.sum()))
    sd = np.sqrt(ss / np.maximum(n - 1, 1))
    fix = "Rescale the outcome (for example use other units) and compute the summaries again."
    if not np.all(np.isfinite(offset)):
        c = int(np.flatnonzero(~np.isfinite(offset))[0])
        raise DataError(f"{source}, {word} {lines[c]}, column '{spec.mean_column}': the mean differs from the first "
                        f"mean ({pivot!r}) by more than float64 can hold (about 1.8e308). {fix}")
    lo, hi = int(np.argmin(offset)), int(np.argmax(offset))
    spread = float(offset[hi] - offset[lo])
    if not spread <= upper or 0 < spread < min_spread:
        raise DataError(f"{source}: the means ({word}s {lines[lo]} and {lines[hi]}) differ by {spread:.3g}, "
                        f"outside what the fit's sums of squares can hold in float64 ({min_spread:g} to {upper:.3g} "
                        f"with N = {int(n.sum())}). {fix}")
    big = np.flatnonzero(~(sd <= upper) | ((sd > 0) & (sd < min_spread)))
    if big.size:
        c = int(big[0])
        raise DataError(f"{source}, {word} {lines[c]}, column '{spec.spread_column}': the {_SHORT[spec.spread]} "
                        f"{float(given[c]):.3g} gives an SD outside what the fit's sums of squares can hold in float64 ({min_spread:g} to "
                        f"{upper:.3g} with N = {int(n.sum())}). {fix}")


def _centred_ss(n: int, spread, kind: str) -> float:
    """S = (n − 1)·SD², from the spread as given; exact in decimal arithmetic for decimals."""
    if isinstance(spread, decimal.Decimal):
        if kind == "sd":
            return float(_CTX.multiply(n - 1, _CTX.multiply(spread, spread)))
        if kind == "variance":
            return float(_CTX.multiply(n - 1, spread))
        return float(_CTX.multiply((n - 1) * n, _CTX.multiply(spread, spread)))
    s = float(spread)
    if kind == "sd":
        return (n - 1) * s * s
    if kind == "variance":
        return (n - 1) * s
    return (n - 1) * n * s * s


def _rounding(column: str, stated: int | None, kind: str, values: list, comma: bool) -> ColumnRounding:
    """Half a unit in the last place of a column, from the plan, the decimal type or the text."""
    if stated is not None:
        return ColumnRounding(column, stated, 0.5 * 10.0 ** -stated, "plan")
    if kind == "binary":
        return ColumnRounding(column, None, 0.0, "binary")
    if kind.startswith("decimal:"):
        scale = int(kind.split(":")[1])
        return ColumnRounding(column, scale, 0.5 * 10.0 ** -scale, "decimal type")
    exps = []
    for v in values:
        t = str(v).strip()
        t = (t.replace(",", ".") if comma else t).replace("\u2212", "-")
        exps.append(decimal.Decimal(t).as_tuple().exponent)
    if not exps:
        return ColumnRounding(column, None, 0.0, "text")
    places = -min(int(e) for e in exps)
    return ColumnRounding(column, places, 0.5 * 10.0 ** -places, "text")


def _cell_label(plan: Plan, codes) -> str:
    return ", ".join(f"{f.name}={f.levels[int(c)]}" for f, c in zip(plan.factors, codes))


def _show_number(v) -> str:
    return f"\"{str(v).strip()}\"" if isinstance(v, str) else repr(v)


def _sql_word(spread: str) -> str:
    return {"sd": "stddev_samp(...)", "variance": "var_samp(...)", "se": "stddev_samp(...) / sqrt(count(*))"}[spread]
