"""The outcome in SQL: which texts are numbers, and the exact-decimal offset from the pivot.

**The exact-decimal route for text.** The outcome is read as text; only plain decimal numbers
count (optional sign, digits with one optional point, optional exponent; no ``1_000``, no
non-ASCII digits, nothing beyond the float64 range), else the row is "non-numeric". The pivot
(the first valid analysed value, as in the in-memory reader) is subtracted in DECIMAL arithmetic
at a scale wide enough for every value, and only the difference becomes DOUBLE. When the values
need more than 37 significant decimal places (rare: wildly different magnitudes or exponents),
the difference is taken in DOUBLE and ``exact_decimal`` is False. Parquet and other float64
input is subtracted in DOUBLE, as in the in-memory reader.
"""

from __future__ import annotations

import decimal
import math
import sys
from typing import Any, Sequence

import numpy as np

from reporter.intake import defaults as D
from reporter.intake import numtext
from reporter.intake.cells import CellStats
from reporter.intake.duck.connection import _lit
from reporter.intake.duck.files import _RowNumbers

# What str.strip() removes: every character whose str.isspace() is true (a test checks the list).
_WS = "\t\n\x0b\x0c\r\x1c\x1d\x1e\x1f \x85\xa0\u1680\u2000\u2001\u2002\u2003\u2004\u2005\u2006\u2007\u2008\u2009\u200a\u2028\u2029\u202f\u205f\u3000"
_NA_WORDS = ("nan", "+nan", "-nan")  # missing whatever the plan lists, as in the in-memory reader


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


def _status_sql(y: str, plan, fast_name: str = "fast", t_name: str = "t") -> tuple[str, str, str, str]:
    """SQL over the raw outcome text ``y``: (fast, trimmed, status, value). ``fast_name`` and
    ``t_name`` are the names the later layers give the first two (another column read by the
    same rule, a covariate, uses its own).

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
    trimmed = f"(CASE WHEN {fast_name} THEN NULL ELSE trim(coalesce({y}, ''), {_lit(_WS)}) END)"
    clean = f"replace({t_name}, ',', '.')" if plan.data.decimal == "," else t_name
    clean = f"replace({clean}, '\u2212', '-')"
    x = f"TRY_CAST({clean} AS DOUBLE)"
    valid = (
        f"(regexp_full_match({clean}, {_lit(numtext.PLAIN_NUMBER.pattern)}) AND strlen({clean}) <= {D.MAX_NUMBER_CHARS} "
        f"AND isfinite({x}) AND (abs({x}) >= {sys.float_info.min!r} OR NOT regexp_matches(split_part(lower({clean}), 'e', 1), '[1-9]')))"
    )
    missing = ", ".join(_lit(m) for m in plan.data.missing) or "NULL"
    status = (
        f"(CASE WHEN {fast_name} THEN 0 WHEN {t_name} IN ({missing}) OR lower({t_name}) IN "
        f"({', '.join(map(_lit, _NA_WORDS))}) THEN 1 WHEN {valid} THEN 0 ELSE 2 END)"
    )
    value = f"(CASE WHEN {fast_name} THEN {fast_text} ELSE {clean} END)"
    return fast, trimmed, status, value


class _NoMissing:
    """A stand-in plan whose missing list is empty (to test whether a token is a number)."""

    def __init__(self, plan):
        self.data = type("D", (), {"missing": (), "decimal": plan.data.decimal})()


def _frac_digits(d: decimal.Decimal) -> int:
    return max(-d.as_tuple().exponent, 0) if d.is_finite() else 0


def _offset_sql(pv: decimal.Decimal, head: Sequence[str], yv: str = "yv") -> tuple[str, bool]:
    """SQL for the outcome text ``yv`` (a column name) minus the pivot ``pv``, exact before the
    conversion to DOUBLE; and whether the route is exact.

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
    as_double = f"(TRY_CAST({yv} AS DOUBLE) - CAST({_lit(repr(float(pv)))} AS DOUBLE))"
    if scale < 0 or _frac_digits(pv) > scale:
        return as_double, False
    dec = f"DECIMAL(37, {scale})"
    routes = [f"CAST(TRY_CAST({yv} AS {dec}) - CAST({_lit(pivot_text)} AS {dec}) AS DOUBLE)", as_double]
    s18 = _short_scale(pv, head)
    if s18 is not None:
        d18 = f"DECIMAL(18, {s18})"
        routes.insert(0, f"(CASE WHEN {_fits_sql(yv, s18)} THEN CAST(TRY_CAST({yv} AS {d18}) - CAST({_lit(pivot_text)} AS {d18}) AS DOUBLE) END)")
    return f"coalesce({', '.join(routes)})", True


def _short_scale(pv: decimal.Decimal, head: Sequence[str]) -> int | None:
    """The scale s of route 1 of :func:`_offset_sql` (``DECIMAL(18, s)``), or None when the pivot
    and the first rows do not fit in 18 digits."""
    pivot_text = str(pv)
    top = max(pv.adjusted() + 1, 1) if pv != 0 else 1
    decs = [decimal.Decimal(t) for t in head if "e" not in t.lower()]
    s18 = max([_frac_digits(d) for d in decs] + [_frac_digits(pv)])
    if "e" not in pivot_text.lower() and top + 2 + s18 <= 18:
        return s18
    return None


def _fits_sql(y: str, s18: int, dot: str | None = None) -> str:
    """SQL: the text ``y`` has no exponent and at most ``s18`` decimals. ``dot``, when given, is
    a column already holding ``instr(y, '.')`` (so that it is computed once a row)."""
    dot = dot or f"instr({y}, '.')"
    return (
        f"(NOT contains({y}, 'e') AND NOT contains({y}, 'E') AND "
        f"(CASE WHEN {dot} > 0 THEN strlen({y}) - {dot} ELSE 0 END) <= {s18})"
    )


def _quick_sql(y: str, plan, pv: decimal.Decimal, head: Sequence[str]) -> tuple[str, str, str] | None:
    """SQL over the raw outcome text ``y`` for the common row, or None when route 1 of
    :func:`_offset_sql` does not exist: (``dot``, the place of the decimal point, a column of
    the query layer below ``q``; ``q``, the value as ``DECIMAL(18, s)`` or NULL; the offset of a
    row whose ``q`` is not NULL).

    ``q`` is tried first, before the tests of :func:`_status_sql`: a text of at most
    ``MAX_NUMBER_CHARS`` characters, without ``e``, ``E`` or ``_``, with at most ``s`` decimals
    and read by the ``DECIMAL(18, s)`` cast (which takes an optional sign, digits with one
    optional point and surrounding ASCII blanks, nothing else) is a valid plain number, and
    :func:`_status_sql` would give it status 0 and :func:`_offset_sql` route 1: the same value,
    from one cast instead of several string tests. Every other row goes through those tests as
    before."""
    s18 = _short_scale(pv, head)
    if s18 is None:
        return None
    text = f"replace({y}, ',', '.')" if plan.data.decimal == "," else y
    numeric_tokens = [m for m in plan.data.missing if _clean_number(m, _NoMissing(plan)) is not None]
    # replacing the decimal comma keeps the length and the letters: only the point and the cast need it
    pre = f"strlen({y}) <= {D.MAX_NUMBER_CHARS} AND NOT contains({y}, '_') AND {_fits_sql(y, s18, 'dot')}"
    if numeric_tokens:
        pre += f" AND trim({y}) NOT IN ({', '.join(map(_lit, numeric_tokens))})"
    d18 = f"DECIMAL(18, {s18})"
    q = f"(CASE WHEN {pre} THEN TRY_CAST({text} AS {d18}) END)"
    return f"instr({text}, '.')", q, f"CAST(q - CAST({_lit(str(pv))} AS {d18}) AS DOUBLE)"


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


def _is_numeric_type(type_name: str) -> bool:
    t = type_name.upper()
    return t.startswith(("TINYINT", "SMALLINT", "INTEGER", "BIGINT", "HUGEINT", "UTINYINT", "USMALLINT",
                         "UINTEGER", "UBIGINT", "UHUGEINT", "FLOAT", "DOUBLE", "DECIMAL", "REAL"))
