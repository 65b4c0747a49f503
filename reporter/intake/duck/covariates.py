"""Covariates out-of-core: each ``[[covariates]]`` column read in the same scan as the outcome, by
the outcome's rules, and its per-cell statistics in SQL.

* **Reading.** Each covariate is one more column of the compact table: its status (0 valid,
  1 missing, 2 not a number, by the SQL of :func:`.outcome._status_sql`) and its offset from its
  own pivot, taken in exact DECIMAL arithmetic from text (:func:`.outcome._offset_sql`) or in
  DOUBLE from numeric Parquet columns. The pivot is the covariate's value in the first row near
  the top of the file whose factors and outcome are analysed (the in-memory reader's rule: the
  first such row with a valid value).
* **Rules.** As in the in-memory reader (:func:`reporter.intake.data._read_covariates`): in rows
  whose factors and outcome are analysed, a value that is not a number is refused (a number-like
  text with the outcome's messages), a missing value leaves the row out under its own reason
  ("missing covariate 'name'"), a covariate with no value at all is refused, and one whose spread
  float64 cannot square is refused.
* **Cell statistics.** Per cell, the means of the covariates and the within-cell cross-products
  Σ(x_j − x̄_j)(x_l − x̄_l) and Σ(x_j − x̄_j)(y − ȳ) by the corrected two-pass algorithm (Chan,
  Golub & LeVeque 1983, The American Statistician 37(3), 242-247, eq. 1.7, extended to
  cross-products), with each cell's first-pass means subtracted inside the query: two scans of
  the compact table in all, whatever the number of covariates.
* **Rows.** :func:`adjusted_rows` gives the row access whose outcome is
  z = y − Σ_j b[c, j]·x_j, the terms subtracted in covariate order as
  :func:`reporter.intake.memory_rows.adjust` does (the same doubles, rounded alike), and
  :func:`row_batches` streams (cells, y, x) in file order in bounded memory (Arrow record batches).
"""

from __future__ import annotations

import decimal
import math
from dataclasses import dataclass, field
from typing import Any, Iterator, Sequence

import numpy as np

from reporter.errors import DataError
from reporter.intake import numtext
from reporter.intake.cells import CovariateStats
from reporter.intake.duck.connection import _doubles, _lit
from reporter.intake.duck.outcome import _clean_number, _is_numeric_type, _offset_sql, _status_sql


@dataclass
class Covariate:
    """One covariate column as SQL: its layers' expressions and, once chosen, its pivot."""

    j: int
    name: str
    column: str  # the scan's column
    text: bool  # read as text (the exact-decimal route)
    pivot: float = 0.0
    pivot_text: str = "0"
    exact: bool = True
    offset: str = "NULL::DOUBLE"
    head: list[str] = field(default_factory=list)  # valid texts of the first rows (for the DECIMAL scale)
    plan: Any = field(default=None, repr=False, compare=False)

    @property
    def sql(self) -> tuple[str, str, str, str]:
        """(fast, trimmed, status, value) over the raw column ``xr{j}``."""
        if self.text:
            return _status_sql(f"xr{self.j}", self.plan, f"fx{self.j}", f"tx{self.j}")
        x = f"xr{self.j}"
        return (f"isfinite({x})", "CAST(NULL AS VARCHAR)",
                f"(CASE WHEN {x} IS NULL OR isnan({x}) THEN 1 WHEN NOT isfinite({x}) THEN 2 ELSE 0 END)", x)


def covariates_of(plan, col_of: dict[str, str], types: dict[str, str | None], text: bool) -> list[Covariate]:
    """The plan's covariates as SQL columns of the scan (``col_of``: plan column -> scan column)."""
    return [Covariate(j, cov.name, col_of[cov.name], text or not _is_numeric_type(types.get(cov.name) or ""), plan=plan)
            for j, cov in enumerate(plan.covariates)]


def layers(covs: Sequence[Covariate]) -> tuple[list[str], list[str], list[str], list[str], list[str]]:
    """The columns each covariate adds to the reader's four query layers and to its final table:
    raw value; cheap test; trimmed text; status and value; then status and offset."""
    l0, l1, l2, l3, final = [], [], [], [], []
    for c in covs:
        j = c.j
        fast, t, st, v = c.sql
        cast = "VARCHAR" if c.text else "DOUBLE"
        l0.append(f"CAST({c.column} AS {cast}) AS xr{j}")
        l1 += [f"xr{j}", f"{fast} AS fx{j}"]
        l2 += [f"xr{j}", f"fx{j}", f"{t} AS tx{j}"]
        l3 += [f"xr{j}", f"tx{j}", f"{st} AS sx{j}", f"{v} AS xv{j}"]
        final += [f"CAST(sx{j} AS TINYINT) AS sx{j}", f"CASE WHEN sx{j} = 0 THEN {c.offset} END AS x{j}"]
    return l0, l1, l2, l3, final


def bad_texts(covs: Sequence[Covariate]) -> list[str]:
    """Columns of the reader's table of odd rows: each covariate's text where it is no number."""
    return [f"CASE WHEN sx{c.j} = 2 THEN {f'tx{c.j}' if c.text else f'CAST(xr{c.j} AS VARCHAR)'} END AS badx{c.j}"
            for c in covs]


def clean(c: Covariate, raw: Any, plan) -> str | float | None:
    """A covariate value of the first rows as the pivot would take it (None when not valid)."""
    if c.text:
        return _clean_number(raw, plan)
    return raw if raw is not None and math.isfinite(raw) else None


def choose_pivots(con, covs: Sequence[Covariate], plan, head: Sequence[tuple[bool, bool, Sequence[Any]]],
                  scan: str) -> None:
    """Each covariate's pivot and offset SQL. ``head`` holds, for the first rows, (factors
    analysed, outcome valid, raw covariate values)."""
    for c in covs:
        pivot_raw = None
        for factors_ok, outcome_ok, xs in head:
            v = clean(c, xs[c.j], plan)
            if v is None:
                continue
            if c.text:
                c.head.append(v)
            if pivot_raw is None and factors_ok and outcome_ok:
                pivot_raw = v
        if pivot_raw is None:  # no analysed row near the top: any valid value serves as pivot
            fast, t, st, v = c.sql
            cast = "VARCHAR" if c.text else "DOUBLE"
            got = con.execute(
                f"SELECT {v} FROM (SELECT *, {t} AS tx{c.j} FROM (SELECT *, {fast} AS fx{c.j} FROM "
                f"(SELECT CAST({c.column} AS {cast}) AS xr{c.j} FROM {scan}))) WHERE {st} = 0 LIMIT 1"
            ).fetchall()
            pivot_raw = got[0][0] if got else None
        if pivot_raw is None:
            c.pivot, c.pivot_text, c.offset, c.exact = 0.0, "0", "NULL::DOUBLE", c.text
        elif c.text:
            pv = decimal.Decimal(pivot_raw)
            c.pivot, c.pivot_text = float(pv), str(pv)
            c.offset, c.exact = _offset_sql(pv, c.head, f"xv{c.j}")
        else:
            c.pivot, c.pivot_text, c.exact = float(pivot_raw), repr(float(pivot_raw)), False
            c.offset = f"(xv{c.j} - CAST({_lit(repr(c.pivot))} AS DOUBLE))"


def check_values(con, covs: Sequence[Covariate], plan, analysed: str, source: str, where_of) -> None:
    """The in-memory reader's refusals, in its order: per covariate, a number-like text that
    breaks the plain-decimal rule or float64's range, then any other text that is no number (in
    rows whose factors and outcome are analysed: ``analysed`` is that SQL condition), then a
    covariate with no value in any such row. ``where_of(r)`` names row ``r`` of the table."""
    from reporter.intake.data import _read_outcome, covariate_not_a_number

    if not covs:
        return
    counts = con.execute(
        f"SELECT count(*), {', '.join(f'count(*) FILTER (WHERE sx{c.j} = 0)' for c in covs)}, "
        f"{', '.join(f'count(*) FILTER (WHERE sx{c.j} = 2)' for c in covs)} FROM obs WHERE {analysed}"
    ).fetchall()[0]
    total, valid, bad = counts[0], counts[1 : 1 + len(covs)], counts[1 + len(covs):]
    for c, ok, n_bad in zip(covs, valid, bad):
        label = (f"the covariate '{c.name}'", "the covariate")
        if n_bad:
            odd = con.execute(
                f"SELECT e.badx{c.j}, min(e.r) AS first FROM extra e JOIN (SELECT rowid + 1 AS r FROM obs WHERE "
                f"sx{c.j} = 2 AND {analysed}) k USING (r) GROUP BY e.badx{c.j} ORDER BY first"
            ).fetchall()
            keep = np.ones(1, dtype=bool)
            for value, first in odd:
                here = where_of(first)
                values = np.array([value], dtype=object) if c.text else np.array([float(value)])
                _read_outcome(values, plan, keep, source, lambda i, _w=here: _w, label=label)
            value, first = odd[0]
            raise covariate_not_a_number(c.name, value, source, where_of(first))
        if total and not ok:
            raise DataError(
                f"{source}: the covariate '{c.name}' (column '{c.name}') has no value in any of the {int(total)} "
                "rows otherwise analysed (every one is missing). Check [[covariates]] name in the plan, or fill "
                "in the column."
            )


def reasons(covs: Sequence[Covariate], first_code: int) -> tuple[str, list[tuple[int, str, str]]]:
    """The CASE arms giving each missing covariate its exclusion reason (after the outcome's),
    and those reasons as (code, text, detail)."""
    arms = " ".join(f"WHEN sx{c.j} = 1 THEN {first_code + c.j}" for c in covs)
    return arms, [(first_code + c.j, f"missing covariate '{c.name}'", "") for c in covs]


def stats(con, covs: Sequence[Covariate], k: int, plan, source: str, where_of) -> CovariateStats:
    """Per-cell covariate means and within-cell cross-products over the analysed rows (view
    ``kept``: cell, outcome offset d, covariate offsets x0 ..), in two scans; then the spread
    check of each covariate, as in the in-memory reader."""
    from reporter.intake.data import _check_spread

    p = len(covs)
    xs = [f"x{c.j}" for c in covs]
    first = con.execute(
        "SELECT cell, count(*), fsum(d) / count(*), "
        + ", ".join(f"fsum({x}) / count(*), min({x}), max({x})" for x in xs)
        + " FROM kept GROUP BY cell"
    ).fetchall()
    n = np.zeros(k, dtype=np.int64)
    m0 = np.zeros((k, p + 1))
    lo, hi = np.full((k, p), np.nan), np.full((k, p), np.nan)
    for row in first:
        c = row[0]
        n[c] = row[1]
        m0[c, 0] = row[2]
        for j in range(p):
            m0[c, j + 1], lo[c, j], hi[c, j] = row[3 + 3 * j : 6 + 3 * j]
    for cov in covs:  # refuse a spread float64 cannot square before squaring it
        _spread(con, cov, plan, source, where_of, lo[:, cov.j], hi[:, cov.j], int(n.sum()), _check_spread)
    vals = ["d", *xs]
    es = ", ".join(f"({v} - {_doubles(m0[:, i])}[cell + 1]) AS e{i}" for i, v in enumerate(vals))
    sums = ["fsum(e0)"] + [f"fsum(e{i + 1})" for i in range(p)]
    pairs = [(i, l) for i in range(1, p + 1) for l in range(i + 1)]  # (x_i, x_l) and (x_i, y) for l = 0
    sums += [f"fsum(e{i} * e{l})" for i, l in pairs]
    second = con.execute(f"SELECT cell, {', '.join(sums)} FROM (SELECT cell, {es} FROM kept) GROUP BY cell").fetchall()
    mean = np.full((k, p), np.nan)
    sxx = np.zeros((k, p, p))
    sxy = np.zeros((k, p))
    for row in second:
        c, s = row[0], row[1 : 2 + p]
        prods = dict(zip(pairs, row[2 + p :]))
        mean[c] = m0[c, 1:] + np.asarray(s[1:]) / n[c]
        for (i, l), v in prods.items():
            v -= s[i] * s[l] / n[c]
            if l == 0:
                sxy[c, i - 1] = v
            else:
                v = max(v, 0.0) if i == l else v
                sxx[c, i - 1, l - 1] = sxx[c, l - 1, i - 1] = v
    for arr in (mean, sxx, sxy):
        arr.setflags(write=False)
    return CovariateStats(names=tuple(c.name for c in covs), offset_mean=mean,
                          pivot=np.array([c.pivot for c in covs]),
                          pivot_exact=tuple(_exact(c) for c in covs), sxx=sxx, sxy=sxy)


def _exact(c: Covariate):
    from fractions import Fraction

    return Fraction(c.pivot_text) if c.exact else Fraction(c.pivot)


def _spread(con, c: Covariate, plan, source: str, where_of, lo, hi, n: int, check) -> None:
    """The in-memory spread check on the smallest and largest offsets (rows looked up only for
    a message)."""
    if not n:
        return
    ends = [float(np.nanmin(lo)), float(np.nanmax(hi))]
    lower, upper = numtext.spread_limits(n)
    if all(map(math.isfinite, ends)) and ends[1] - ends[0] <= upper and not 0 < ends[1] - ends[0] < lower:
        return

    def where(i: int) -> str:
        r = con.execute(f"SELECT min(r) FROM kept WHERE x{c.j} = CAST('{ends[i]!r}' AS DOUBLE)").fetchall()[0][0]
        return where_of(r)

    check(np.array(ends), np.ones(2, dtype=bool), 0, c.pivot, plan, source, where, n_values=n,
          label=(f"the covariate '{c.name}'", "the covariate"))


# ---------------------------------------------------------------------------------------------
# Rows


def _chain_sql(chain: Sequence[np.ndarray]) -> str:
    """z = y − Σ_j b[c, j]·x_j for each slope matrix of ``chain`` in turn, term by term."""
    z = "d"
    for b in chain:
        for j in range(b.shape[1]):
            z = f"({z} - {_doubles(b[:, j])}[cell + 1] * x{j})"
    return z


def adjusted_rows(rows, b):
    """Row access over z = y − Σ_j b[c, j]·x_j (see the module docstring). A connection of its
    own holds a temporary view named ``kept`` over the analysed rows with z as their value, so
    every question of :class:`~reporter.intake.duck.rows.DuckRows` concerns z unchanged."""
    from reporter.intake.duck.rows import DuckRows
    from reporter.intake.memory_rows import slope_matrix

    p = rows.covariates
    b = np.array(slope_matrix(b, rows.k, np.empty((0, p))), dtype=np.float64)
    root = getattr(rows, "_root", rows)
    chain = (*getattr(rows, "_chain", ()), b)
    xs = "".join(f", x{j}" for j in range(p))
    cur = root._con.cursor()
    try:
        cur.execute(f"CREATE TEMP VIEW kept AS SELECT r, id, cell, {_chain_sql(chain)} AS d{xs} "
                    f"FROM {_database(cur)}.main.kept")
        lo, hi = np.full(rows.k, np.nan), np.full(rows.k, np.nan)
        for c, a, z in cur.execute("SELECT cell, min(d), max(d) FROM kept GROUP BY cell").fetchall():
            lo[c], hi[c] = a, z
        out = DuckRows(cur, root._folder, rows.k, root._rownum, root.files, root._counts, lo, hi,
                       covariates=p, owner=False)
    except BaseException:
        cur.close()
        raise
    out._root, out._chain = root, chain
    return out


def _database(con) -> str:
    return con.execute("SELECT current_database()").fetchall()[0][0]


def row_batches(rows, size: int) -> Iterator[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """(cells, y offsets, x offsets) of at most ``size`` rows at a time, in file order, streamed
    from a connection of its own as Arrow record batches (bounded memory)."""
    size = max(int(size), 1)
    root = getattr(rows, "_root", rows)
    p = rows.covariates
    xs = "".join(f", x{j}" for j in range(p))
    cur = root._con.cursor()
    try:
        # the table's insertion order is the file's (DuckDB keeps it for a scan without ORDER BY)
        rel = cur.sql(f"SELECT cell, {_chain_sql(getattr(rows, '_chain', ()))} AS d{xs} FROM {_database(cur)}.main.kept")
        reader = rel.to_arrow_reader(size) if hasattr(rel, "to_arrow_reader") else rel.fetch_record_batch(size)
        for batch in reader:
            cols = [batch.column(i).to_numpy(zero_copy_only=False) for i in range(batch.num_columns)]
            cell = np.asarray(cols[0], dtype=np.int64)
            d = np.asarray(cols[1], dtype=np.float64)
            x = np.column_stack([np.asarray(c, dtype=np.float64) for c in cols[2:]]) if p else np.empty((len(d), 0))
            for start in range(0, len(d), size):
                yield cell[start : start + size], d[start : start + size], x[start : start + size]
    finally:
        cur.close()
