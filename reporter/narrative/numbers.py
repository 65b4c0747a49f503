"""How every number in the report is written: the report's one set of number-style rules.

The rules follow APA number style, Publication Manual of the American Psychological
Association, 7th edition (2020):

* section 6.36 (decimal fractions): a zero before the decimal point only when the quantity
  can exceed 1 (``M = 0.52``), none when it cannot (``p = .016``, ``r = .71``, ``η² = .12``);
  round most statistics to two decimals; p to three decimals, and p values below .001 as
  ``p < .001``;
* commas between groups of three digits in figures of 1,000 or more, but none in degrees of
  freedom (section 6.38; the section number is from memory);
* the statistics sections of chapter 6 (section numbers 6.43-6.44 from memory): degrees of
  freedom in parentheses, ``F(2, 27) = 4.85``; confidence limits in brackets with the level
  stated, ``95% CI [0.17, 1.56]``; Latin letters used as statistical symbols in italics
  (F, t, p, M, SD, SE, n, N, d, g, f, R², df), Greek letters upright (η², ω², β, α);
  a negative value has a space before its minus sign and none after it.

Decisions the manual leaves open, taken here and kept everywhere (common practice, no source):

* Rounding is half away from zero at the displayed digit, done in decimal arithmetic on the
  shortest text that reproduces the float (``repr``): 2.675 prints 2.68, as a person rounding
  the printed number would get, where binary rounding of the float gives 2.67. A value that
  rounds to zero prints without sign: -0.004 prints 0.00, never -0.00.
* p: a p below .001 prints ``p < .001`` (this covers every p that would round to .000, and
  also .0005 to .000999..., which would round up to .001); .001 itself prints ``p = .001``; a
  p that would round to 1.000 (p >= .9995) prints ``p > .999``. The printed p is for reading:
  decisions are made on the unrounded p, so ``p = .050`` can sit beside "significant at
  α = .05" when the p was .04999.
* Degrees of freedom print as whole numbers when they are whole (``t(27)``) and with two
  decimals otherwise (Welch: ``F(2, 17.13)``), even when those decimals are zeros
  (26.999 prints 27.00: the df is still fractional).
* Negative numbers carry the true minus sign U+2212 (−), not the hyphen-minus. Markdown keeps
  U+2212 too: the Markdown is UTF-8 text meant to be pasted into a manuscript, and a line
  that begins with a hyphen-minus would turn into a list item. Whoever needs ASCII passes
  ``minus=HYPHEN_MINUS`` (every string function and :meth:`Stat.plain` accept it). JSON holds
  numbers, not these texts, so the choice never reaches it.
* A missing value (None, NaN, ±infinity) prints as an em dash (—), in tables and in prose,
  never "nan"; the label around it stays (``F(2, 27) = —``) so the reader sees what is
  missing. Every function takes ``missing=`` for another marker (e.g. "not available").
* A confidence interval open on one side (one-sided test) shows the open side as ``∞`` or
  ``−∞``: ``95% CI [0.17, ∞]``, ``95% CI [−∞, 1.56]``.
* Confidence levels print as percentages without trailing zeros: 0.95 -> 95%, 0.995 -> 99.5%.

Two kinds of result. Functions named ``format_*`` return a plain ``str`` (a number, a df, a
table cell). Functions named ``stat_*`` return a :class:`Stat`: a run of text segments, each
marked italic or upright, so that a renderer can italicize the Latin symbols and nothing else;
:meth:`Stat.plain` gives the same text without styling. Nothing here emits markup.
"""

from __future__ import annotations

import math
import numbers
import re
from dataclasses import dataclass
from decimal import ROUND_HALF_UP, Decimal, localcontext
from typing import Iterable, NamedTuple

__all__ = [
    "HYPHEN_MINUS",
    "INFINITY",
    "MINUS",
    "MISSING",
    "UPRIGHT_ABBREVIATIONS",
    "Run",
    "Stat",
    "format_bounded",
    "format_confidence_level",
    "format_count",
    "format_df",
    "format_number",
    "format_p_cell",
    "join_stats",
    "p_comparison",
    "round_half_away",
    "stat_ci",
    "stat_count",
    "stat_f",
    "stat_p",
    "stat_t",
    "stat_value",
    "symbol",
    "text",
]

MINUS = "\u2212"
"""The true minus sign (−), used for negative numbers and −∞."""

HYPHEN_MINUS = "-"
"""The ASCII hyphen-minus, for output that must stay ASCII."""

MISSING = "\u2014"
"""The em dash (—) that stands for a value that is not available."""

INFINITY = "\u221e"
"""The infinity sign (∞) for the open side of a one-sided confidence interval."""

UPRIGHT_ABBREVIATIONS = frozenset({"CI", "CIs", "log", "ln", "exp"})
"""Letter groups that are abbreviations, not variables, and so stay upright (APA 7, ch. 6)."""

_P_FLOOR = Decimal("0.001")
_P_SLACK = 1e-9  # floating-point overshoot of a p above 1 that is still read as 1


class Run(NamedTuple):
    """One segment of a :class:`Stat`: its text and whether it is set in italics. ``code``
    marks a literal to be copied exactly (a hash, a path, a command line): set in a fixed-width
    font, never hyphenated."""

    text: str
    italic: bool = False
    code: bool = False


@dataclass(frozen=True)
class Stat:
    """A short piece of statistical text as styled segments, e.g. ``F(2, 27) = 4.85``.

    ``runs`` is a tuple of :class:`Run` (``(text, italic)`` pairs). On construction adjacent
    runs of the same style are merged and empty ones dropped, so two Stats that read and
    look the same compare equal. Negative signs are stored as U+2212.
    """

    runs: tuple[Run, ...]

    def __post_init__(self) -> None:
        merged: list[Run] = []
        for item in self.runs:
            run = Run(str(item[0]), bool(item[1]))
            if not run.text:
                continue
            if merged and merged[-1].italic == run.italic:
                merged[-1] = Run(merged[-1].text + run.text, run.italic)
            else:
                merged.append(run)
        object.__setattr__(self, "runs", tuple(merged))

    def plain(self, minus: str = MINUS) -> str:
        """The text without styling, for Markdown tables, JSON strings and logs.

        ``minus`` replaces U+2212 (pass :data:`HYPHEN_MINUS` for ASCII output).
        """
        joined = "".join(run.text for run in self.runs)
        return joined if minus == MINUS else joined.replace(MINUS, minus)

    def with_minus(self, minus: str) -> Stat:
        """The same Stat with every U+2212 replaced by ``minus``, styling kept."""
        return Stat(tuple(Run(run.text.replace(MINUS, minus), run.italic) for run in self.runs))

    def __add__(self, other: Stat) -> Stat:
        if not isinstance(other, Stat):
            return NotImplemented
        return Stat(self.runs + other.runs)


def text(words: str) -> Stat:
    """Upright text as a Stat, for words around symbols (``text("Cohen's ") + symbol("d")``)."""
    return Stat((Run(words, False),))


def symbol(name: str) -> Stat:
    """A statistical symbol, styled by APA 7 rules (ch. 6, statistical symbols).

    Groups of Latin letters are italic (``F``, ``SD``, ``df``, the ``R`` of ``R²``); all else is
    upright: Greek letters (``η²``, ``ω²``, ``β``), digits, super- and subscript characters,
    punctuation, and the abbreviations in :data:`UPRIGHT_ABBREVIATIONS` (``CI``). Pass the
    symbol alone: a name around it (``Cohen's``) is upright text, added with :func:`text`.
    """
    if not isinstance(name, str) or not name.strip():
        raise ValueError(f"a statistical symbol must be a non-empty string (got {name!r}).")
    runs = []
    for token in re.findall(r"[A-Za-z]+|[^A-Za-z]+", name):
        italic = token.isascii() and token.isalpha() and token not in UPRIGHT_ABBREVIATIONS
        runs.append(Run(token, italic))
    return Stat(tuple(runs))


def join_stats(parts: Iterable[Stat], separator: str = ", ") -> Stat:
    """Several Stats in one, separated by upright ``separator``: ``F(2, 27) = 4.85, p = .016``."""
    runs: list[Run] = []
    for index, part in enumerate(parts):
        if index:
            runs.append(Run(separator, False))
        runs.extend(part.runs)
    return Stat(tuple(runs))


def _to_decimal(value: object) -> Decimal | None:
    """The exact decimal of the shortest repr of ``value``; None when missing or not finite."""
    if value is None:
        return None
    if isinstance(value, bool):
        raise TypeError(f"a number to format must be a real number or None (got the bool {value!r}).")
    if isinstance(value, Decimal):
        return value if value.is_finite() else None
    if isinstance(value, numbers.Integral):
        return Decimal(int(value))
    if isinstance(value, numbers.Real):
        as_float = float(value)
        return Decimal(repr(as_float)) if math.isfinite(as_float) else None
    raise TypeError(
        f"a number to format must be a real number or None (got {type(value).__name__} {value!r})."
    )


def _infinite_sign(value: object) -> int:
    """+1 or -1 for a positive or negative infinity, 0 for anything else."""
    if isinstance(value, Decimal):
        return (1 if value > 0 else -1) if value.is_infinite() else 0
    if isinstance(value, numbers.Real) and not isinstance(value, bool):
        as_float = float(value)
        return (1 if as_float > 0 else -1) if math.isinf(as_float) else 0
    return 0


def _check_decimals(decimals: int) -> None:
    if isinstance(decimals, bool) or not isinstance(decimals, int) or decimals < 0:
        raise ValueError(f"'decimals' must be a whole number 0 or more (got {decimals!r}).")


def _quantize(exact: Decimal, decimals: int) -> Decimal:
    """Round half away from zero to ``decimals`` places; a zero result loses its sign."""
    with localcontext() as context:
        context.prec = max(28, exact.adjusted() + decimals + 3)
        rounded = exact.quantize(Decimal(1).scaleb(-decimals), rounding=ROUND_HALF_UP)
    return rounded.copy_abs() if rounded == 0 else rounded


def _write(rounded: Decimal, *, leading_zero: bool, grouping: bool, minus: str) -> str:
    body = format(rounded.copy_abs(), ",f" if grouping else "f")
    if not leading_zero and body.startswith("0."):
        body = body[1:]
    return minus + body if rounded < 0 else body


def round_half_away(value: float | int | Decimal, decimals: int) -> Decimal:
    """``value`` rounded half away from zero to ``decimals`` places, as an exact Decimal.

    The float is read through its shortest repr (``repr(2.675) == '2.675'``), so the result
    is what a person rounding the printed number gets: 2.675 -> 2.68, -2.675 -> -2.68,
    0.125 -> 0.13 (common practice, no source; binary rounding would give 2.67 and 0.12).
    A result of zero is unsigned.
    """
    _check_decimals(decimals)
    exact = _to_decimal(value)
    if exact is None:
        raise ValueError(f"only a finite number can be rounded (got {value!r}).")
    return _quantize(exact, decimals)


def format_number(
    value: float | int | Decimal | None,
    decimals: int = 2,
    *,
    leading_zero: bool = True,
    grouping: bool = True,
    minus: str = MINUS,
    missing: str = MISSING,
) -> str:
    """A number for prose or a table: ``0.52``, ``−2.10``, ``1,234.57``.

    Two decimals by default (APA 7, section 6.36); commas between groups of three digits
    (section 6.38) unless ``grouping=False``; the leading zero kept unless
    ``leading_zero=False`` (use :func:`format_bounded` for quantities that cannot exceed 1).
    Missing or non-finite values give ``missing``.
    """
    _check_decimals(decimals)
    exact = _to_decimal(value)
    if exact is None:
        return missing
    return _write(_quantize(exact, decimals), leading_zero=leading_zero, grouping=grouping, minus=minus)


def format_bounded(
    value: float | int | Decimal | None,
    decimals: int = 2,
    *,
    minus: str = MINUS,
    missing: str = MISSING,
) -> str:
    """A quantity that cannot exceed 1 in absolute value, without leading zero: ``.12``, ``−.30``.

    For proportions, correlations, R², η², ω² (APA 7, section 6.36). A value whose rounded
    magnitude exceeds 1 is not such a quantity and raises ValueError (a caller's mistake).
    """
    _check_decimals(decimals)
    exact = _to_decimal(value)
    if exact is None:
        return missing
    rounded = _quantize(exact, decimals)
    if rounded.copy_abs() > 1:
        raise ValueError(
            f"format_bounded is for quantities between -1 and 1 (got {value!r}); "
            "use format_number for quantities that can exceed 1."
        )
    return _write(rounded, leading_zero=False, grouping=False, minus=minus)


def format_df(df: float | int | Decimal | None, *, missing: str = MISSING) -> str:
    """Degrees of freedom: ``27`` when whole, ``17.13`` when fractional (Welch), no commas.

    Whole means exactly whole; a fractional df keeps two decimals even when they round to
    zeros (26.999 -> ``27.00``). Negative df raise ValueError.
    """
    exact = _to_decimal(df)
    if exact is None:
        return missing
    if exact < 0:
        raise ValueError(f"degrees of freedom cannot be negative (got {df!r}).")
    if exact == exact.to_integral_value():
        return format(exact.to_integral_value(), "f")
    return _write(_quantize(exact, 2), leading_zero=True, grouping=False, minus=MINUS)


def format_count(n: int | float | Decimal | None, *, missing: str = MISSING) -> str:
    """A count such as a sample size: ``28``, ``1,250`` (commas per APA 7, section 6.38).

    Raises ValueError for a negative or fractional count.
    """
    exact = _to_decimal(n)
    if exact is None:
        return missing
    if exact < 0 or exact != exact.to_integral_value():
        raise ValueError(f"a count must be a whole number 0 or more (got {n!r}).")
    return format(exact.to_integral_value(), ",f")


def format_confidence_level(level: float | Decimal) -> str:
    """A confidence level given as a proportion, as a percentage: 0.95 -> ``95%``, 0.995 -> ``99.5%``.

    No trailing zeros. The level must lie strictly between 0 and 1; 95 is an error, not 95%.
    """
    exact = _to_decimal(level)
    if exact is None or not 0 < exact < 1:
        raise ValueError(
            f"a confidence level must be a proportion strictly between 0 and 1, e.g. 0.95 (got {level!r})."
        )
    return format((exact * 100).normalize(), "f") + "%"


def p_comparison(p: float | Decimal | None, *, missing: str = MISSING) -> tuple[str, str]:
    """The relation and number that report ``p``: ``("=", ".016")``, ``("<", ".001")``, ``(">", ".999")``.

    Three decimals, no leading zero, p below .001 as ``< .001`` (APA 7, section 6.36); a p that
    would round to 1.000 as ``> .999`` (common practice, no source). See the module docstring
    for the boundaries. A missing p gives ``("=", missing)``. A p outside [0, 1] raises
    ValueError; an overshoot above 1 of at most 1e-9 (floating-point noise) counts as 1.
    """
    exact = _to_decimal(p)
    if exact is None:
        return ("=", missing)
    if exact < 0 or exact > 1 + Decimal(repr(_P_SLACK)):
        raise ValueError(f"a p value must lie between 0 and 1 (got {p!r}).")
    if exact < _P_FLOOR:
        return ("<", ".001")
    rounded = _quantize(exact, 3)
    if rounded >= 1:
        return (">", ".999")
    return ("=", _write(rounded, leading_zero=False, grouping=False, minus=MINUS))


def format_p_cell(p: float | Decimal | None, *, missing: str = MISSING) -> str:
    """A p for a table column: ``.016``, ``< .001``, ``> .999`` (or ``missing``)."""
    relation, number = p_comparison(p, missing=missing)
    return number if relation == "=" else f"{relation} {number}"


def stat_p(p: float | Decimal | None, name: str = "p", *, missing: str = MISSING) -> Stat:
    """``p = .016``, ``p < .001``, ``p > .999`` with italic p (see :func:`p_comparison`)."""
    relation, number = p_comparison(p, missing=missing)
    return symbol(name) + text(f" {relation} {number}")


def stat_value(
    name: str,
    value: float | int | Decimal | None,
    decimals: int = 2,
    *,
    leading_zero: bool = True,
    missing: str = MISSING,
) -> Stat:
    """``name = value``: ``M = 0.52``, ``SD = 1.30``, ``d = −0.41``, ``η² = .12``.

    Pass ``leading_zero=False`` for quantities that cannot exceed 1 (η², ω², R², r,
    proportions); they are then checked as in :func:`format_bounded`.
    """
    if leading_zero:
        number = format_number(value, decimals, missing=missing)
    else:
        number = format_bounded(value, decimals, missing=missing)
    return symbol(name) + text(f" = {number}")


def stat_count(n: int | float | Decimal | None, name: str = "n", *, missing: str = MISSING) -> Stat:
    """``n = 28`` or ``N = 114`` with the symbol in italics."""
    return symbol(name) + text(f" = {format_count(n, missing=missing)}")


def stat_t(
    value: float | Decimal | None,
    df: float | int | Decimal | None,
    decimals: int = 2,
    *,
    missing: str = MISSING,
) -> Stat:
    """``t(27) = 2.10``, ``t(15.62) = −2.10`` (df in parentheses, APA 7 ch. 6)."""
    return symbol("t") + text(
        f"({format_df(df, missing=missing)}) = {format_number(value, decimals, missing=missing)}"
    )


def stat_f(
    value: float | Decimal | None,
    df1: float | int | Decimal | None,
    df2: float | int | Decimal | None,
    decimals: int = 2,
    *,
    missing: str = MISSING,
) -> Stat:
    """``F(2, 27) = 4.85``; a fractional Welch df keeps two decimals: ``F(2, 17.13) = 5.18``."""
    dfs = f"{format_df(df1, missing=missing)}, {format_df(df2, missing=missing)}"
    return symbol("F") + text(f"({dfs}) = {format_number(value, decimals, missing=missing)}")


def _bound(value: object, side: int, decimals: int, leading_zero: bool, missing: str) -> str:
    """One confidence limit; ``side`` is -1 for the lower limit, +1 for the upper."""
    sign = _infinite_sign(value)
    if sign == side:
        return INFINITY if side > 0 else MINUS + INFINITY
    if sign:
        which = "lower" if side < 0 else "upper"
        raise ValueError(
            f"the {which} confidence limit cannot be {value!r}; an open side is "
            f"{'-inf for the lower' if side < 0 else '+inf for the upper'} limit."
        )
    if leading_zero:
        return format_number(value, decimals, missing=missing)
    return format_bounded(value, decimals, missing=missing)


def stat_ci(
    low: float | Decimal | None,
    high: float | Decimal | None,
    level: float | Decimal = 0.95,
    decimals: int = 2,
    *,
    leading_zero: bool = True,
    missing: str = MISSING,
) -> Stat:
    """``95% CI [0.17, 1.56]``: the level stated, the limits in brackets (APA 7 ch. 6).

    A one-sided interval has ``low = -inf`` or ``high = +inf`` and prints ``[−∞, 1.56]`` or
    ``[0.17, ∞]``. ``leading_zero=False`` for intervals of quantities that cannot exceed 1
    (``90% CI [.05, .41]`` for η²). A missing limit prints ``missing``. A lower limit above
    the upper one, or an infinity on the wrong side, raises ValueError.
    """
    low_exact, high_exact = _to_decimal(low), _to_decimal(high)
    if low_exact is not None and high_exact is not None and low_exact > high_exact:
        raise ValueError(f"a confidence interval needs low <= high (got low={low!r}, high={high!r}).")
    limits = (
        f"{_bound(low, -1, decimals, leading_zero, missing)}, "
        f"{_bound(high, 1, decimals, leading_zero, missing)}"
    )
    return text(f"{format_confidence_level(level)} ") + symbol("CI") + text(f" [{limits}]")
