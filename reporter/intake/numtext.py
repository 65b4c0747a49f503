"""Numbers written as text: the one rule for data files, plan levels and hypothesis statements.

A number is read only when it is written in plain decimal notation with ASCII digits: an
optional sign, digits with an optional decimal point, and an optional exponent of at most
:data:`~reporter.intake.defaults.MAX_EXPONENT_DIGITS` digits (``-12.5``, ``3``, ``1e-3``,
``.5``). Python's own readers accept much more (``1_000``, full-width or other non-ASCII digits,
``inf``, ``nan``, ``Infinity``); a file that relies on those is more likely wrong than meant, so
such text is never silently taken for a number. A plain number must also fit in float64: its
magnitude at most about 1.8e308 and, unless it is zero, at least the smallest normal float64
(about 2.2e-308).
"""

from __future__ import annotations

import decimal
import re
import sys

from reporter.intake import defaults as D

PLAIN_NUMBER = re.compile(
    r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]{1,%d})?" % D.MAX_EXPONENT_DIGITS,
    re.ASCII,
)
_HEX_LIKE = re.compile(r"[+-]?0[xXoObB][0-9a-fA-F_]+", re.ASCII)

FLOAT_MAX = decimal.Decimal(sys.float_info.max)
FLOAT_MIN_NORMAL = decimal.Decimal(sys.float_info.min)


def is_plain(text: str) -> bool:
    """True when ``text`` (already trimmed) is a plain decimal number."""
    return PLAIN_NUMBER.fullmatch(text) is not None


def looks_numeric(text: str) -> bool:
    """True when ``text`` is not plain but some reader would take it for a number:
    ``1_000``, non-ASCII digits, ``inf``, ``0x10``, ``1e400000`` and the like."""
    if _HEX_LIKE.fullmatch(text):
        return True
    try:
        decimal.Decimal(text)
    except (decimal.InvalidOperation, ValueError):
        pass
    else:
        return True
    try:
        float(text)
    except ValueError:
        return False
    return True


def why_not_plain(text: str) -> str:
    """The reason a number-like text is refused, in words, with the fix."""
    low = text.lower().lstrip("+-")
    if low in ("inf", "infinity"):
        return "is infinite; only finite values can be analysed. Remove the row or mark the value as missing"
    if "_" in text:
        return "uses '_' between digits; write the digits without separators (1000, not 1_000)"
    if any(ch.isdigit() and not ch.isascii() for ch in text):
        return "uses digits outside ASCII 0-9 (for example full-width digits); write it with 0-9"
    if _HEX_LIKE.fullmatch(text):
        return "is written in base 16, 8 or 2; write it in plain decimal digits"
    if re.fullmatch(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)[eE][+-]?[0-9]+", text):
        return (
            f"has an exponent of more than {D.MAX_EXPONENT_DIGITS} digits, far outside what float64 can hold"
        )
    return "is not a plain decimal number such as -12.5, 3 or 1e-3"


def range_problem(value: decimal.Decimal) -> str | None:
    """Why a plain decimal cannot be held by float64 (None when it can)."""
    mag = abs(value)
    if mag > FLOAT_MAX:
        return "is larger in magnitude than float64 can hold (about 1.8e308)"
    if mag and mag < FLOAT_MIN_NORMAL:
        return "is smaller in magnitude than the smallest normal float64 (about 2.2e-308) and would be read as 0"
    return None


def spread_limits(n: int) -> tuple[float, float]:
    """The narrowest and widest spread of n outcome values that the fit can square in float64.

    The fit squares deviations (sums of squares) and squares variances (Welch's degrees of
    freedom), so fourth powers of the spread must stay within float64: 64·n²·spread⁴ ≤ 1.8e308
    (about spread ≤ 1e76/√n); below 1e-70 they underflow (common practice, no source).
    """
    upper = (sys.float_info.max / (64.0 * float(max(n, 1)) ** 2)) ** 0.25
    return 1e-70, upper
