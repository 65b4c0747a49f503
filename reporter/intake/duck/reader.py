"""The two scans that read the data file(s) into one compact DuckDB table.

1. **Levels and outcome shape.** One ``GROUP BY`` over the factor columns gives every
   combination of raw factor values with its row count, its first row, its first valid outcome
   and the digit counts of its valid outcomes. The distinct values are matched to the plan's
   levels in Python by the same rules as the in-memory reader (:mod:`.levels`).
2. **One compact table.** Each row is written once, in file order (its row number is its
   ``rowid`` + 1), to a table of a DuckDB database that spills to a temporary folder beyond its
   memory limit: its factor codes (the first one together with the outcome's status, see
   :class:`_CodeStatus`), its outcome as an offset from the pivot (:mod:`.outcome`) and its
   covariates' statuses and offsets. The view ``kept`` gives the analysed rows with their
   design cell (row-major over the plan's level order, as ``numpy.ravel_multi_index``), the view
   ``rowinfo`` the rows left out with the reason.
"""

from __future__ import annotations

import codecs
import csv
import decimal
import io
import math
import tempfile
import threading
from dataclasses import replace
from fractions import Fraction
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from reporter.errors import DataError
from reporter.intake.duck.cell_table import cell_stats
from reporter.intake.duck import covariates as cov_sql
from reporter.intake.duck.connection import _close, _connect, _ident, _lit, _Progress, _quiet, _run, _short_error
from reporter.intake.duck.files import _file_digest, _glob_digest, _read_header, _RowNumbers, matched_files
from reporter.intake.duck.levels import _LEVEL_CAP, _factor_text_sql, _known_case, _level_codes
from reporter.intake.duck.outcome import _check_spread, _clean_number, _is_numeric_type, _offset_sql, _quick_sql, _refuse, _status_sql
from reporter.intake.duck.rows import DuckRows


class _CodeStatus:
    """The first factor's code ``c0`` (a level's index, -1 missing, -2 excluded, -9 not yet
    matched) and the outcome's status ``st`` (0 valid, 1 missing, 2 not a number) stored in one
    SMALLINT column of the compact table, ``cs = c0 + B·st``: one column fewer to write for every
    row, and ``cs`` is the cell itself in an analysed row of a one-factor design. ``B`` = 1000
    leaves room for every code (a factor has at most ``MAX_LEVELS`` = 256 levels), so each
    question about ``c0`` or ``st`` is a range of ``cs``, which DuckDB answers from the table's
    statistics when no row is in it."""

    def __init__(self, levels: int):
        self.levels = levels
        self.base = 1000  # > MAX_LEVELS + 9: the codes of one status never reach the next's

    def store(self, c0: str, st: str) -> str:
        return f"CAST({c0} + {self.base} * {st} AS SMALLINT) AS cs"

    def code(self, value: int) -> str:
        """SQL: ``c0 = value``, whatever the status."""
        b = self.base
        return f"cs IN ({value}, {value + b}, {value + 2 * b})"

    def status(self, st: int) -> str:
        """SQL: ``st = st``, whatever the code."""
        return f"cs BETWEEN {st * self.base - 9} AND {(st + 1) * self.base - 10}"

    def analysed(self, st: int) -> str:
        """SQL: ``c0 >= 0 AND st = st``."""
        return f"cs BETWEEN {st * self.base} AND {st * self.base + self.levels - 1}"

    def decoded(self) -> tuple[str, str]:
        """SQL giving ``c0`` and ``st`` back."""
        b = self.base
        st = f"(CASE WHEN cs >= {2 * b - 9} THEN 2 WHEN cs >= {b - 9} THEN 1 ELSE 0 END)"
        return f"(cs - {b} * {st})", st


def _head_rows(con, path: Path, scan_sql: str, text: bool, delimiter: str, idx: dict[str, int], fexprs, yname,
               xexprs: Sequence[str] = ()):
    """The first rows of the (first) file as (factor values, outcome, covariate values) for
    choosing the pivots."""
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
                            rec[idx["__y__"]] if idx["__y__"] < len(rec) else None,
                            [rec[i] if i < len(rec) else None for i in idx.get("__x__", [])]))
        except csv.Error:
            pass
        return out[:-1] if len(out) > 1 else out  # the last record may be cut by the chunk
    sel = ", ".join([*fexprs, yname, *xexprs])
    nf = len(fexprs)
    return [(list(r[:nf]), r[nf], list(r[nf + 1:])) for r in con.execute(f"SELECT {sel} FROM {scan_sql} LIMIT 1000").fetchall()]


def load_out_of_core(plan, quiet: bool | None = None):
    """Read the plan's data file(s) with DuckDB; see the module docstring."""
    from reporter.intake.data import CovariateColumns, Exclusion, _needed_columns, _role, require_file, rowless_dataset

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
            for name in dict.fromkeys([plan.data.outcome] + [f.data_column for f in plan.factors]
                                      + [c.name for c in plan.covariates]):
                kind = str(types.get(name, "")).upper()
                if kind.endswith("]") or kind.startswith(("STRUCT", "MAP", "UNION", "BLOB")) or kind.strip('"') == "NULL":
                    role = _role(plan, name)
                    need = "a text or a number" if role == "factor" else "a number"
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
        covs = cov_sql.covariates_of(plan, col_of, types, text)

        # The pivot: the first valid outcome of an analysed row near the top of the file.
        if text:
            hidx = {"__factors__": [header.index(f.data_column) for f in plan.factors],
                    "__y__": header.index(plan.data.outcome), "__width__": header,
                    "__x__": [header.index(c.name) for c in covs]}
        else:
            hidx = {}
        yread = f"CAST({ycol} AS VARCHAR)" if ytext else f"CAST({ycol} AS DOUBLE)"
        pivot_raw = None
        head_texts: list[str] = []
        head = _head_rows(con, files[0], scan, text, delimiter, hidx, fexprs, yread,
                          [f"CAST({c.column} AS {'VARCHAR' if c.text else 'DOUBLE'})" for c in covs])

        def factors_ok(fvals) -> bool:
            try:
                return all(_level_codes(plan, f, [v if v is not None else ""], source, lambda i: "")[0] >= 0
                           for f, v in zip(plan.factors, fvals))
            except DataError:
                return False

        for fvals, yv, _ in head:
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
            if factors_ok(fvals):
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
        quick = None
        if pivot_raw is None:
            pivot, pivot_text, value_sql = 0.0, "0", "NULL::DOUBLE"
        elif ytext:
            pv = decimal.Decimal(pivot_raw)
            pivot, pivot_text = float(pv), str(pv)
            value_sql, exact = _offset_sql(pv, head_texts)
            quick = _quick_sql("y", plan, pv, head_texts)
        else:
            pivot = float(pivot_raw)
            pivot_text = repr(pivot)
            value_sql = f"(yv - CAST({_lit(repr(pivot))} AS DOUBLE))"

        if covs:  # each covariate's pivot: its value in the first analysed row near the top
            yok = [(_clean_number(yv, plan) if ytext else (yv if yv is not None and math.isfinite(yv) else None)) is not None
                   for _, yv, _ in head]
            cov_sql.choose_pivots(con, covs, plan, [(factors_ok(fv) if ok else False, ok, xs)
                                                    for (fv, _, xs), ok in zip(head, yok)], scan)
        cl0, cl1, cl2, cl3, cfinal = cov_sql.layers(covs)

        # One scan: the compact table (factor codes, outcome status, offset from the pivot).
        keep = [f"c{j}" for j in range(nf)] + [f"v{j}" for j in range(nf)]
        bad_sql = "t" if ytext else "CAST(y AS VARCHAR)"
        codes = [f"{_known_case(plan, f, f'v{j}', source)} AS c{j}" for j, f in enumerate(plan.factors)]
        if quick is None:
            q_col, d_sql = [], f"CASE WHEN st = 0 THEN {value_sql} END"
            layers = [", ".join(codes + [f"v{j}" for j in range(nf)] + ["y", f"{fast_sql} AS fast"] + cl1)]
        else:  # the common row read by one DECIMAL cast first; the others tested as before
            dot_sql, q_sql, q_value = quick
            q_col, d_sql = ["q"], f"CASE WHEN q IS NOT NULL THEN {q_value} WHEN st = 0 THEN {value_sql} END"
            carried = [c.rsplit(" AS ", 1)[-1] for c in cl1]  # the covariates' columns, passed on
            layers = [", ".join([f"v{j}" for j in range(nf)] + ["y", f"{dot_sql} AS dot"] + [f"xr{c.j}" for c in covs]),
                      ", ".join(codes + [f"v{j}" for j in range(nf)] + ["y", f"{q_sql} AS q"] + cl1),
                      ", ".join(keep + ["y", "q", f"(CASE WHEN q IS NOT NULL THEN true ELSE {fast_sql} END) AS fast"]
                                + carried)]
        layers = [
            ", ".join([f"{fexprs[j]} AS v{j}" for j in range(nf)] + [layer0] + cl0),
            *layers,
            ", ".join(keep + ["y", *q_col, "fast", f"{t_sql} AS t"] + cl2),
            ", ".join(keep + ["y", *q_col, "t", f"{st_sql} AS st", f"{yv_sql} AS yv"] + cl3),
        ]
        query = f"SELECT {layers[0]} FROM {scan}"
        for layer in layers[1:]:
            query = f"SELECT {layer} FROM ({query})"
        cs = _CodeStatus(len(plan.factors[0].levels))
        final = ", ".join([cs.store("c0", "st")] + [f"CAST(c{j} AS SMALLINT) AS c{j}" for j in range(1, nf)]
                          + [f"{d_sql} AS d"] + cfinal)
        with _Progress(con, "Reading the data", quiet):
            _run(con, f"CREATE TABLE obs AS SELECT {final} FROM ({query})", source)
        hasher.join()
        for d in digests:
            if isinstance(d, DataError):
                raise d
        # Counted by filters DuckDB answers from the table's statistics when no row matches.
        unresolved = " OR ".join([cs.code(-9)] + [f"c{j} = -9" for j in range(1, nf)] + [f"sx{c.j} = 2" for c in covs])
        n_read, n_odd = con.execute(
            f"SELECT (SELECT count(*) FROM obs), (SELECT count(*) FROM obs WHERE {unresolved} OR {cs.status(2)})"
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
                          + [f"CASE WHEN st = 2 THEN {bad_sql} END AS bad"] + cov_sql.bad_texts(covs))
        odd_rows = " OR ".join([f"c{j} = -9" for j in range(nf)] + [f"sx{c.j} = 2" for c in covs] + ["st = 2"])
        con.execute(
            f"CREATE TEMP TABLE extra AS SELECT r, {extra} FROM (SELECT row_number() OVER () AS r, * FROM ({query})) "
            + (f"WHERE {odd_rows}" if n_odd else "WHERE false")
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
            new = "obs.cs + 9 + m.code" if j == 0 else "m.code"  # the first factor's -9 carries the status
            con.execute(
                f"UPDATE obs SET {'cs' if j == 0 else f'c{j}'} = {new} FROM (SELECT e.r, lv.code FROM extra e JOIN lv "
                f"ON e.u{j} = lv.u) m WHERE obs.rowid + 1 = m.r"
            )

        # Outcomes that read as numbers but break the plain-decimal rule or float64's range are
        # errors in analysed rows, as in the in-memory reader, whose check runs on each such text
        # (in the order of their first rows, so the first offending row is named).
        other_kept = [f"c{j} >= 0" for j in range(1, nf)]
        odd = con.execute(
            f"SELECT e.bad, min(e.r) AS first FROM extra e JOIN (SELECT rowid + 1 AS r FROM obs WHERE "
            f"{' AND '.join([cs.analysed(2)] + other_kept)}) k USING (r) GROUP BY e.bad ORDER BY first"
        ).fetchall() if n_odd else []
        for value, first in odd:
            _refuse(plan, value, ytext, source, f"{rownum.word} {rownum.number(first)}")
        cov_sql.check_values(con, covs, plan, " AND ".join([cs.analysed(0)] + other_kept), source,
                             lambda r: f"{rownum.word} {rownum.number(r)}")

        shape = tuple(len(f.levels) for f in plan.factors)
        strides = [int(np.prod(shape[j + 1 :])) for j in range(nf)]
        cell_sql = " + ".join(f"CAST({'cs' if j == 0 else f'c{j}'} AS INTEGER)" + (f" * {strides[j]}" if strides[j] != 1 else "")
                              for j in range(nf))
        cov_arms, cov_reasons = cov_sql.reasons(covs, 2 * nf + 3)
        reason_sql = "CASE " + " ".join(
            f"WHEN c{j} = -1 THEN {2 * j + 1} WHEN c{j} = -2 THEN {2 * j + 2}" for j in range(nf)
        ) + f" WHEN st = 1 THEN {2 * nf + 1} WHEN st = 2 THEN {2 * nf + 2} {cov_arms} ELSE 0 END"
        levels_sql = ", ".join(f"c{j}" for j in range(nf))
        all_kept = " AND ".join([cs.analysed(0)] + other_kept + [f"sx{c.j} = 0" for c in covs])
        c0_sql, st_sql_obs = cs.decoded()
        # The rows left out (reason > 0), with the first factor's code and the status apart again;
        # the filter first, so that DuckDB skips the table by its statistics when none is.
        con.execute(
            f"CREATE VIEW rowinfo AS SELECT r, {reason_sql} AS reason, {levels_sql} FROM (SELECT rowid + 1 AS r, "
            f"{c0_sql} AS c0, {st_sql_obs} AS st{''.join(f', c{j}' for j in range(1, nf))}"
            f"{''.join(f', sx{c.j}' for c in covs)} FROM obs WHERE NOT ({all_kept}))"
        )
        xs = "".join(f", x{c.j}" for c in covs)
        con.execute(f"CREATE VIEW kept AS SELECT rowid + 1 AS r, rowid AS id, {cell_sql} AS cell, d{xs} FROM obs WHERE {all_kept}")

        # Exclusions by reason, with the first row numbers.
        reasons = []
        for j, f in enumerate(plan.factors):
            reasons.append((2 * j + 1, f"missing value of factor '{f.name}'", ""))
            listed = ", ".join(f'"{e}"' for e in f.exclude)
            reasons.append((2 * j + 2, f"level of '{f.name}' excluded by the plan", f"excluded: {listed}"))
        reasons.append((2 * nf + 1, f"missing outcome '{plan.data.outcome}'", ""))
        reasons.append((2 * nf + 2, f"non-numeric outcome '{plan.data.outcome}'", None))
        reasons += cov_reasons
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
        covariates = None
        if covs:
            stats = cov_sql.stats(con, covs, k, plan, source, lambda r: f"{rownum.word} {rownum.number(r)}")
            cells = replace(cells, covariates=stats)
            covariates = CovariateColumns(names=stats.names, x=np.empty((0, len(covs))), pivot=tuple(stats.pivot.tolist()),
                                          pivot_text=tuple(c.pivot_text for c in covs), exact=all(c.exact for c in covs))
        rows = DuckRows(con, folder, k, rownum, files, cells.n, d_lo, d_hi, covariates=len(covs))
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
        covariates=covariates,
    )
