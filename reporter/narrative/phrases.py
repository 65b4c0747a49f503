"""Shared helpers of the narrative: the names of corrections, codings and sums of squares, and the
small phrases (counts with their noun, lists in words, intervals, literals) every section uses."""

from __future__ import annotations

from fractions import Fraction
from typing import Sequence

from reporter.intake.defaults import CODINGS
from reporter.narrative import numbers as N
from reporter.narrative.document import runs_of


CORRECTION_NAMES = {
    "holm": "Holm's (1979) step-down procedure",
    "hochberg": "Hochberg's (1988) step-up procedure",
    "bonferroni": "the Bonferroni correction",
    "benjamini-hochberg": "the Benjamini–Hochberg (1995) false-discovery-rate procedure",
    "none": "no correction",
}
CORRECTION_SHORT = {
    "holm": "Holm-adjusted",
    "hochberg": "Hochberg-adjusted",
    "bonferroni": "Bonferroni-adjusted",
    "benjamini-hochberg": "Benjamini–Hochberg-adjusted",
    "none": "unadjusted",
}
#: The plan key that chooses between the classical and the robust tests, as the report names it.
POLICY_KEY = "unequal_variances"
#: The plan's name of each coding (the key ``coding``), by its internal value.
CODING_NAMES = {internal: name for name, internal in CODINGS.items()}
PARAM_WORDS = {
    "cell-means": "cell-means coding (one coefficient per cell, each the mean of its cell)",
    "effects": "sum-to-zero coding (the last listed level of each factor is coded −1, "
    "so each coefficient is a deviation from an average of cell means)",
    "reference": "reference-level coding (the first listed level of each factor is the reference, "
    "so each coefficient is a difference from the reference cell)",
}
SS_WHY = {
    "III": "Type III sums of squares (unweighted means): each effect is a hypothesis about the "
    "unweighted marginal means, so it does not depend on how many observations each cell happens to have",
    "II": "Type II sums of squares (each effect adjusted for the other main effects): appropriate "
    "when interactions are assumed absent",
    "I": "Type I sums of squares (sequential, in the order the factors are listed in the plan): "
    "each effect is adjusted only for the effects listed before it",
}


def _fr(x: Fraction) -> str:
    if x == 0:
        return "0"
    s = str(abs(x.numerator)) if x.denominator == 1 else f"{abs(x.numerator)}/{x.denominator}"
    return (N.MINUS if x < 0 else "") + s


def _unquote(statement: str) -> str:
    """A statement for display: the backticks that quote names in the plan are dropped."""
    return statement.replace("`", "")


def _lead(head: str, body: str) -> tuple:
    """A paragraph that starts with an italic run-in heading (APA style for minor headings)."""
    return runs_of(N.Run(head + ".", True), " " + body)


def _num(x, d=2) -> str:
    return N.format_number(x, d)


def _interval(ci, bounded: bool = False) -> str:
    """A table cell for an interval: [low, high], or — when there is none."""
    if ci is None:
        return N.MISSING
    fmt = (lambda v: N.format_bounded(v, 2)) if bounded else _num
    return f"[{fmt(ci[0])}, {fmt(ci[1])}]"


def _words_list(items: Sequence[str]) -> str:
    items = list(items)
    if len(items) <= 1:
        return "".join(items)
    if len(items) == 2:
        return f"{items[0]} and {items[1]}"
    return ", ".join(items[:-1]) + f", and {items[-1]}"


def _count_noun(n: int, noun: str) -> str:
    """A count in figures with its noun in the right number: "1 row", "1,204 rows"."""
    return f"{N.format_count(n)} {noun if n == 1 else noun + 's'}"


def _rows_phrase(rows) -> str:
    """Data-file rows named with the right noun: "row 68", "rows 68 and 70", "rows 3, 9, and 12"."""
    rows = [str(r) for r in rows]
    return f"{'row' if len(rows) == 1 else 'rows'} {_words_list(rows)}"


_NUMBER_WORDS = ["no", "one", "two", "three", "four", "five", "six", "seven", "eight", "nine", "ten"]


def _count_words(n: int, noun: str, plural: str | None = None) -> str:
    word = _NUMBER_WORDS[n] if 0 <= n < len(_NUMBER_WORDS) else str(n)
    return f"{word} {noun if n == 1 else (plural or noun + 's')}"


def _literal(text: str) -> N.Run:
    """A hash, path or command line, set so that it can be copied exactly (fixed width, no hyphens)."""
    return N.Run(text, False, True)
