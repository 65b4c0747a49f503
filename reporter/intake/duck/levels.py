"""Factor values matched to the plan's levels, by the rules of the in-memory reader
(``level_key``: ``1`` matches ``1.0``, text trimmed, missing tokens, excluded levels; unknown
levels are listed with their counts and first row, in the same message)."""

from __future__ import annotations

from typing import Sequence

import numpy as np

from reporter.intake.duck.connection import _lit

_LEVEL_CAP = 100_000  # distinct factor-value combinations fetched into Python


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
    # The texts are distinct, so the order of the arms changes no code; the levels come first
    # because most rows hold one (each row is compared arm by arm until one matches), and a
    # NULL matches no arm.
    arms = " ".join(f"WHEN {_lit(v)} THEN {int(c)}" for v, c in sorted(zip(known, codes), key=lambda vc: vc[1] < 0))
    return f"(CASE {fv} {arms} ELSE (CASE WHEN {fv} IS NULL THEN -1 ELSE -9 END) END)"
